"""Ids are compared exactly; an "unknown" id that only looks like a known one says so.

"Zürich" can be written as one code point (U+00FC, NFC) or as "u" plus U+0308
COMBINING DIAERESIS (NFD); both print the same. The service keeps them apart (ids are
compared code point by code point), and its error shows the code points of a non-ASCII
id and names the known id that differs only in Unicode normalisation (unicodedata,
NFKC, from the standard library).
"""

from __future__ import annotations

import unicodedata

import pytest

from service.model.ids import lookalike, shown_id

NFC, NFD = "Z\u00fcrich", "Zu\u0308rich"


def test_the_two_spellings_differ_and_print_alike():
    assert NFC != NFD and unicodedata.normalize("NFC", NFD) == NFC


def test_shown_id_adds_escapes_only_beyond_printable_ascii():
    assert shown_id("hub-a") == "'hub-a'" and shown_id(7) == "7"
    assert shown_id(NFC) == "'Zürich' (\"Z\\u00fcrich\")"
    assert shown_id(NFD) == f"'{NFD}' (\"Zu\\u0308rich\", not in NFC form)"
    assert "\\t" in shown_id("hub\ta")  # not printable: escaped too


def test_lookalike_names_the_known_id_or_nothing():
    assert "differs from it only in Unicode normalisation" in lookalike(NFD, ["depot", NFC])
    assert NFC in lookalike(NFD, [NFC]) and lookalike(NFD, ["depot", "Zurich"]) == ""
    assert lookalike(NFC, [NFC]) == ""  # the same id is no look-alike
    assert "\"hub\\u00a0a\"" in lookalike("hub a", ["hub\u00a0a"])  # a no-break space (NFKC)
    assert lookalike("hub-b", ["hub-a"]) == "" and lookalike(3, [3]) == ""


def test_maxflow_unknown_sink_shows_the_code_points_and_the_lookalike(client):
    r = client.post("/v1/maxflow", json={"source": "depot", "sink": NFD,
                                         "arcs": [{"from": "depot", "to": NFC, "capacity": 5}]})
    assert r.status_code == 422
    (error,) = r.get_json()["errors"]
    assert error["pointer"] == "/sink"
    assert error["detail"] == (f"unknown node '{NFD}' (\"Zu\\u0308rich\", not in NFC form): it is neither in nodes "
                               f"nor on any arc; the known id '{NFC}' (\"Z\\u00fcrich\") differs from it only in "
                               f"Unicode normalisation (ids are compared exactly)")


def test_both_spellings_are_two_nodes(client):
    """Compared exactly: a lane to each spelling is a lane to a different node."""
    r = client.post("/v1/maxflow", json={"source": "depot", "sink": NFD, "arcs": [
        {"from": "depot", "to": NFC, "capacity": 5}, {"from": "depot", "to": NFD, "capacity": 2}]})
    assert r.status_code == 200 and r.get_json()["value"] == 2


def test_plain_unknown_ids_keep_the_short_message(client):
    r = client.post("/v1/maxflow", json={"source": "depot", "sink": "nowhere",
                                         "arcs": [{"from": "depot", "to": "store", "capacity": 5}]})
    assert r.get_json()["errors"][0]["detail"] == "unknown node 'nowhere': it is neither in nodes nor on any arc"


def test_stored_network_supplies_name_the_lookalike(client):
    assert client.put("/v1/networks/alps", json={"arcs": [{"from": "depot", "to": NFC, "capacity": 5, "cost": 1}]}) \
        .status_code == 201
    r = client.post("/v1/networks/alps/mincostflow",
                    json={"supplies": [{"id": "depot", "supply": 3}, {"id": NFD, "supply": -3}]})
    assert r.status_code == 422
    (error,) = r.get_json()["errors"]
    assert error["pointer"] == "/supplies/1/id" and "not in the stored network" in error["detail"]
    assert "(\"Zu\\u0308rich\", not in NFC form)" in error["detail"] and f"'{NFC}'" in error["detail"]


@pytest.mark.parametrize("spelling", [NFC, NFD])
def test_lp_unknown_variable_names_the_lookalike(client, spelling):
    other = NFD if spelling == NFC else NFC
    r = client.post("/v1/lp", json={"objective": {"sense": "min", "terms": {spelling: 1}},
                                    "variables": [{"id": other}]})
    assert r.status_code == 422
    detail = r.get_json()["errors"][0]["detail"]
    assert detail.startswith(f"unknown variable {shown_id(spelling)}: declare it in variables; the known id "
                             f"{shown_id(other)} differs")
