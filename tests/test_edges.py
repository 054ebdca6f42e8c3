"""Input at the edges of what the decoders take: deep nesting, error pointers, a BOM.

Every body is decoded by each path that could take it: the compiled scanner
(``fastarcs``, bodies of 16 KB and more), the simdjson columnar path (``fastjson``,
numeric columnar bodies) and orjson. Whichever path takes a body, the client must get
the same verdict: an answer, or a 4xx naming the offending entries and only those.
"""

from __future__ import annotations

import json
import re
import sys

import orjson
import pytest

from service.model.fastarcs import decode_arcs_body
from service.model.fastjson import _count_lists, decode_columnar
from service.errors import InputError
from service.kinds import KINDS
from service.kinds.base import Limits
from service.model.schemas import flatten_messages
from tests.conftest import scenario
from tests.http import post

BOM = b"\xef\xbb\xbf"
PAD = 20_000  # bytes of white space: large enough for the compiled scanner


@pytest.fixture
def client(tmp_path):
    from service.api import create_app

    return create_app({"data_dir": str(tmp_path / "data"), "rate_limit": "off"}).test_client()


def padded(raw: bytes) -> bytes:
    """The same JSON document, grown past the compiled scanner's threshold."""
    return raw[:-1] + b" " * PAD + raw[-1:]


def decoded_by_each_path(raw: bytes) -> dict:
    """``path -> decoded body`` for every decoder that takes ``raw`` (orjson always)."""
    out = {"orjson": orjson.loads(raw)}
    for name, decoded in (("scanner", decode_arcs_body(padded(raw), min_bytes=0)), ("simdjson", decode_columnar(raw))):
        if decoded is not None:
            out[name] = decoded
    return out


def maxflow_errors(body) -> list[tuple[str, str]]:
    with pytest.raises(InputError) as caught:
        KINDS["maxflow"].parse(body, Limits())
    return [(e.pointer, e.detail) for e in caught.value.errors]


# --- deep nesting --------------------------------------------------------------------

def nest(depth: int) -> str:
    return "[" * depth + "]" * depth


def columnar_ints(n: int) -> dict:
    return {"source": 0, "sink": n, "arcs": {"from": list(range(n)), "to": list(range(1, n + 1)),
                                             "capacity": [3] * n}}


def objects_strings(n: int) -> dict:
    return {"source": "n0", "sink": f"n{n}",
            "arcs": [{"from": f"n{i}", "to": f"n{i + 1}", "capacity": 3} for i in range(n)]}


MARK = "@@deep@@"


def with_deep_value(doc: dict, path: tuple, depth: int) -> str:
    """``doc`` as JSON with the value at ``path`` (a new member when it is absent)
    replaced by ``depth`` nested empty arrays."""
    doc = json.loads(json.dumps(doc))
    holder = doc
    for key in path[:-1]:
        holder = holder.setdefault(key, {}) if isinstance(holder, dict) else holder[key]
    holder[path[-1]] = MARK
    return json.dumps(doc).replace(json.dumps(MARK), nest(depth))


DEEP_PLACES = [("source",), ("sink",), ("nodes",), ("options",), ("options", "detail"), ("extra",),
               ("arcs",), ("arcs", "from"), ("arcs", "capacity"), ("arcs", "key")]


def deep_bodies():
    # Integer columns take the simdjson path; 2,000 arcs take the scanner; objects with
    # string ids the scanner or orjson.
    for label, doc in (("columns, int ids", columnar_ints(3)), ("columns, int ids, large", columnar_ints(2000)),
                       ("objects, string ids, large", objects_strings(2000))):
        places = DEEP_PLACES if isinstance(doc["arcs"], dict) else \
            [p for p in DEEP_PLACES if p[0] != "arcs" or len(p) == 1] + [("arcs", 0), ("arcs", 1999)]
        for place in places:
            yield label, doc, place


@pytest.mark.parametrize("depth", [300, 600, 1000, 1030, 5000])
def test_deeply_nested_values_anywhere_are_a_4xx_on_every_endpoint(client, depth):
    # 500-1023 levels used to be a 500: simdjson takes up to 1,024 levels, and a
    # recursive count of its lists ran out of Python stack.
    seen = set()
    for label, doc, place in deep_bodies():
        body = with_deep_value(doc, place, depth)
        for url, wrapped in (("/v1/maxflow", body), ("/v1/jobs", '{"kind": "maxflow", "problem": %s}' % body),
                             ("/v1/batch", '{"items": [{"kind": "maxflow", "problem": %s}]}' % body)):
            r = post(client, url, body=wrapped)
            status = r.status_code
            if url == "/v1/batch" and status == 200:  # a batch answers for its items one by one
                [item] = r.get_json()["results"]
                status = item.get("status", 200)
            else:
                assert r.mimetype == "application/problem+json"
            assert 400 <= status < 500, (label, place, url, status, r.data[:200])
            seen.add(status)
        r = client.put("/v1/networks/deep", data=body, headers={"Content-Type": "application/json"})
        assert 400 <= r.status_code < 500, (label, place, "PUT", r.status_code)
    assert seen <= {400, 422}


def test_a_deep_value_is_named_by_pointer_when_the_json_is_within_the_depth_limit(client):
    body = with_deep_value(columnar_ints(3), ("arcs", "capacity", 1), 900)
    r = post(client, "/v1/maxflow", body)
    assert r.status_code == 422
    assert r.get_json()["errors"][0]["pointer"] == "/arcs/capacity/1"
    body = with_deep_value(columnar_ints(3), ("nodes",), 900)
    assert post(client, "/v1/maxflow", body).get_json()["errors"][0]["pointer"] == "/nodes/0"


def test_walks_of_decoded_values_keep_their_own_stack():
    deep = []
    for _ in range(3 * sys.getrecursionlimit()):
        deep = [deep, {"k": [1]}]
    assert _count_lists(deep) == 2 * 3 * sys.getrecursionlimit() + 1
    messages: dict = {"x": ["Y."]}
    for i in range(3 * sys.getrecursionlimit()):
        messages = {i % 3: messages}
    [error] = flatten_messages(messages)
    assert error.detail == "y" and error.pointer.count("/") == 3 * sys.getrecursionlimit() + 1


def test_error_messages_keep_their_order_and_pointers():
    messages = {"a": ["First.", "Second"], "_schema": ["Whole"], "b": {0: {"c": ["Unknown field."]}, 1: [{"d": ["Q"]}, "R"]}}
    assert [(e.pointer, e.detail) for e in flatten_messages(messages)] == [
        ("/a", "first"), ("/a", "second"), ("", "whole"), ("/b/0/c", "unknown field"), ("/b/1/d", "q"), ("/b/1", "r")]


# --- error pointers name the offending entries only ----------------------------------

ID_CASES = {
    # one stray entry among integer ids: (from column, the errors expected)
    "negative": ([0, 0, 0, -1], [("/arcs/from/3", "must be a non-negative integer")]),
    "a string": ([0, 0, 0, "x"], [("/arcs/from/3", "node ids in one payload must all be integers")]),
    "a fraction": ([0, 0, 0, 1.5], [("/arcs/from/3", "must be a node id: a string of 1-200 characters or a "
                                                     "non-negative integer")]),
    "written with a fraction": ([0, 0, 1.0, 0], [("/arcs/from/2", "must be a node id: a string of 1-200 "
                                                                  "characters or a non-negative integer")]),
    "2^63": ([0, 2**63, 0, 0], [("/arcs/from/1", "integer node ids must fit in 63 bits")]),
    "2^64 - 1": ([0, 0, 0, 2**64 - 1], [("/arcs/from/3", "integer node ids must fit in 63 bits")]),
    "beyond 64 bits": ([0, 0, 0, 2**70], [("/arcs/from/3", "must be a node id: a string of 1-200 characters or a "
                                                           "non-negative integer")]),
    "a boolean": ([0, 0, True, 0], [("/arcs/from/2", "must be a node id: a string of 1-200 characters or a "
                                                     "non-negative integer")]),
}


@pytest.mark.parametrize("case", ID_CASES)
def test_one_bad_integer_id_is_the_only_one_named_whichever_path_decodes_it(case):
    tails, expected = ID_CASES[case]
    for form in ("columns", "objects"):
        if form == "columns":
            doc = {"source": 0, "sink": 1, "arcs": {"from": tails, "to": [1] * 4, "capacity": [5] * 4}}
        else:
            doc = {"source": 0, "sink": 1, "arcs": [{"from": f, "to": 1, "capacity": 5} for f in tails]}
            expected = [(p.replace("/arcs/from/", "/arcs/") + "/from", d) for p, d in expected]
        raw = json.dumps(doc).encode()  # json, not orjson: ids beyond 64 bits
        for path, body in decoded_by_each_path(raw).items():
            assert maxflow_errors(body) == expected, (form, path)


def test_one_stray_string_among_integer_ids_is_the_one_named():
    doc = {"source": 0, "sink": 9, "arcs": {"from": [0, 1, 2, "dock", 4], "to": [1, 2, 3, 4, 9]}}
    for path, body in decoded_by_each_path(orjson.dumps(doc)).items():
        assert maxflow_errors(body) == [("/arcs/from/3", "node ids in one payload must all be integers")], path


def test_one_stray_integer_among_string_ids_is_the_one_named():
    doc = {"source": "a", "sink": "z", "arcs": [{"from": "a", "to": "b"}, {"from": "b", "to": 7},
                                                {"from": "b", "to": "z"}]}
    for path, body in decoded_by_each_path(orjson.dumps(doc)).items():
        assert maxflow_errors(body) == [("/arcs/1/to", "node ids in one payload must all be strings")], path


def test_declared_nodes_of_the_other_kind_are_named_not_the_arcs():
    doc = {"source": 0, "sink": 2, "nodes": ["depot"], "arcs": {"from": [0, 1], "to": [1, 2]}}
    for path, body in decoded_by_each_path(orjson.dumps(doc)).items():
        assert maxflow_errors(body) == [("/nodes/0", "node ids in one payload must all be integers")], path


def test_one_bad_number_is_the_only_one_named_whichever_path_decodes_it():
    for column, expected in (([5, 5, "5", 5], [("/arcs/capacity/2", "must be a number or null")]),
                             ([5, -1, 5, 5], [("/arcs/capacity/1", "must be >= 0")]),
                             ([5, 5, 5, 2**64 - 1], [("/arcs/capacity/3", f"must be at most {2**62} in magnitude")]),
                             ([5, 5, 5.5, 2**63], [("/arcs/capacity/3", f"must be at most {2**62} in magnitude")])):
        doc = {"source": 0, "sink": 1, "arcs": {"from": [0] * 4, "to": [1] * 4, "capacity": column}}
        for path, body in decoded_by_each_path(json.dumps(doc).encode()).items():
            assert maxflow_errors(body) == expected, (column, path)


def test_a_bad_id_is_named_over_http_in_a_large_columnar_body(client):
    doc = columnar_ints(3000)
    doc["arcs"]["from"][1234] = 2**64 - 1
    r = post(client, "/v1/maxflow", json.dumps(doc))
    assert r.status_code == 422
    assert r.get_json()["errors"] == [{"pointer": "/arcs/from/1234", "detail": "integer node ids must fit in 63 bits"}]


# --- one verdict on a byte-order mark ------------------------------------------------

def bom_bodies():
    yield "columns, int ids", orjson.dumps(columnar_ints(2))
    yield "columns, int ids, large", orjson.dumps(columnar_ints(2000))
    yield "objects, int ids", orjson.dumps({"source": 0, "sink": 1, "arcs": [{"from": 0, "to": 1, "capacity": 5}]})
    yield "objects, string ids, large", orjson.dumps(objects_strings(2000))


@pytest.mark.parametrize("label,raw", list(bom_bodies()), ids=[label for label, _ in bom_bodies()])
def test_a_byte_order_mark_is_refused_with_a_400_on_every_path(client, label, raw):
    # RFC 8259, section 8.1: senders must not add one; parsers may ignore it. Sluice
    # refuses it whatever the body's form (simdjson alone used to accept it).
    assert post(client, "/v1/maxflow", raw).status_code == 200
    for prefix in (BOM, BOM + b" "):
        r = post(client, "/v1/maxflow", prefix + raw)
        assert r.status_code == 400, label
        assert "byte order mark" in r.get_json()["detail"]
    assert decode_arcs_body(BOM + padded(raw), min_bytes=0) is None
    assert decode_columnar(BOM + raw) is None


def test_a_byte_order_mark_is_refused_in_jobs_and_stored_networks(client):
    raw = orjson.dumps(columnar_ints(3))
    assert post(client, "/v1/jobs", BOM + b'{"kind": "maxflow", "problem": %s}' % raw).status_code == 400
    r = client.put("/v1/networks/bom", data=BOM + raw, headers={"Content-Type": "application/json"})
    assert r.status_code == 400


def test_a_dimacs_file_with_a_byte_order_mark_is_refused_naming_line_1(client):
    text = b"p max 2 1\nn 1 s\nn 2 t\na 1 2 5\n"
    assert post(client, "/v1/maxflow", text, "text/x-dimacs").status_code == 200
    r = post(client, "/v1/maxflow", BOM + text, "text/x-dimacs")
    assert r.status_code == 422
    [error] = r.get_json()["errors"]
    assert (error["pointer"], error["detail"]) == ("/line/1", "starts with a byte-order mark (U+FEFF); send the file "
                                                              "without one")


# --- defaults normalised before digests ----------------------------------------------

#: Digests of problems that use no default explicitly, computed before defaults were
#: normalised (with the solver version pinned to "pinned"): cached results stay valid.
#: (depots-maxflow-columns.json: recomputed on the code before normalising, after its
#: lane-09 became capacity 25 like the object-form scenario.)
PINNED = {
    "depots-maxflow.json": "sha256:5f75cf7e2c87b28bd4476b6c2b0fb093281791b95a1ad20eaf9ee82578706df1",
    "depots-maxflow-columns.json": "sha256:ec7c42e14cee3a3cd31029b0fd144519b088e8404f7c2259e11972053124c683",
    "depots-mincostflow.json": "sha256:bbe7944f15c43ddde1dd4d0c0130230b8bbfabb569a10cc000856353df534ff0",
    "depots-multicommodity.json": "sha256:6e84f5672c89cbea3da2ff8c6ad0fd701ac6bd8d85a27f65199eaec8f75c877f",
    "depots-lp.json": "sha256:8a2e0fb9e2f5b6bb1fc0df50bdd3a93c662875bd5241a473f696b42610195bea",
    "depots-lp-matrix.json": "sha256:8a2e0fb9e2f5b6bb1fc0df50bdd3a93c662875bd5241a473f696b42610195bea",
    "vans-assignment.json": "sha256:fd9986f0d0c218c7bc8c51713dd42e4748ca30a5ea372d376802066514293cfa",
}
PINNED_KIND = {"depots-maxflow.json": "maxflow", "depots-maxflow-columns.json": "maxflow",
               "depots-mincostflow.json": "mincostflow", "depots-multicommodity.json": "multicommodity",
               "depots-lp.json": "lp", "depots-lp-matrix.json": "lp", "vans-assignment.json": "assignment"}


@pytest.fixture
def pinned_version(monkeypatch):
    """The solver version in digests pinned, so an OR-Tools upgrade does not move them."""
    import importlib

    for name in ("maxflow", "mincostflow", "multicommodity", "lp", "assignment"):
        monkeypatch.setattr(importlib.import_module(f"service.kinds.{name}"), "ORTOOLS_VERSION", "pinned")


def test_digests_of_problems_without_explicit_defaults_are_unchanged(pinned_version):
    for name, digest in PINNED.items():
        assert KINDS[PINNED_KIND[name]].parse(scenario(name), Limits()).digest == digest, name
    body = scenario("depots-mincostflow.json")
    body["options"] = {"detail": ["flows"]}
    assert KINDS["mincostflow"].parse(body, Limits()).digest == \
        "sha256:cec9a3fe957e020f14850a8839f25da318359892606a7575e8e5cb1cb864e3bd"
    big = columnar_ints(2000)
    big["arcs"]["cost"] = [i % 7 for i in range(2000)]
    big["nodes"] = [{"id": 0, "supply": 5}, {"id": 2000, "supply": -5}]
    del big["source"], big["sink"]
    assert KINDS["mincostflow"].parse(big, Limits()).digest == \
        "sha256:432a1e32661953fa6f19bc8c166faec6d0ed2c94576c00db2a6c8fa1dc9c7164"


def test_a_stored_networks_digest_without_explicit_defaults_is_unchanged():
    from service.model.arcs import read_network
    from service.store import network_digest

    body = scenario("depots-mincostflow.json")
    net, _ = read_network(body["arcs"], body["nodes"], max_arcs=100, max_nodes=100)
    assert network_digest(net) == "sha256:a7b5a321b07b7a1bf1d10204c52eaa0a51a1ef001d481a8f85f26c26e8040566"


def mincost_body(n: int, **fields) -> dict:
    """A chain of ``n`` arcs carrying 5 units; ``fields`` adds arc columns."""
    arcs = {"from": list(range(n)), "to": list(range(1, n + 1)), "capacity": [9] * n, **fields}
    return {"nodes": [{"id": 0, "supply": 5}, {"id": n, "supply": -5}], "arcs": arcs}


def as_objects(body: dict) -> dict:
    arcs = body["arcs"]
    names = list(arcs)
    return {**body, "arcs": [dict(zip(names, row)) for row in zip(*(arcs[k] for k in names))]}


def digests_over_http(client, kind: str, body: dict) -> set:
    """The digest answered for ``body`` in both arc forms, small and padded (so every
    decode path takes it)."""
    out = set()
    for doc in (body, as_objects(body)) if isinstance(body.get("arcs"), dict) else (body,):
        raw = orjson.dumps(doc)
        for sent in (raw, padded(raw)):
            r = post(client, f"/v1/{kind}", sent)
            assert r.status_code == 200, r.data[:300]
            out.add(r.get_json()["digest"])
    return out


@pytest.mark.parametrize("n", [4, 3000])
def test_explicit_default_arc_fields_digest_as_omitted_ones(client, n):
    plain = digests_over_http(client, "mincostflow", mincost_body(n))
    assert len(plain) == 1
    for extra in ({"cost": [0] * n}, {"cost": [0.0] * n}, {"lower": [0] * n}, {"key": [None] * n},
                  {"cost": [0] * n, "lower": [0.0] * n, "key": [None] * n}):
        assert digests_over_http(client, "mincostflow", mincost_body(n, **extra)) == plain, extra
    with_costs = digests_over_http(client, "mincostflow", mincost_body(n, cost=[1] * n))
    assert with_costs.isdisjoint(plain)


def test_explicit_default_supplies_and_options_digest_as_omitted_ones(client):
    body = mincost_body(4)
    plain = digests_over_http(client, "mincostflow", body)
    declared = {**body, "nodes": body["nodes"] + [{"id": 1, "supply": 0}]}
    assert digests_over_http(client, "mincostflow", {**body, "nodes": [{"id": 0, "supply": 5}, {"id": 4, "supply": -5}],
                                                     "options": {"detail": ["potentials", "flows"], "engine": "auto",
                                                                 "shortage": "reject"}}) == plain
    # Node 1 comes third either way (declared nodes first, then first seen on the arcs).
    assert digests_over_http(client, "mincostflow", declared) == plain
    reordered = {**body, "nodes": [{"id": 1, "supply": 0}] + body["nodes"]}
    assert digests_over_http(client, "mincostflow", reordered) != plain  # another node order: another answer
    maxflow = {"source": 0, "sink": 4, "arcs": body["arcs"]}
    plain = digests_over_http(client, "maxflow", maxflow)
    assert digests_over_http(client, "maxflow", {**maxflow, "options": {"detail": ["cut", "flows"]}}) == plain
    assert digests_over_http(client, "maxflow", {**maxflow, "options": {"detail": ["cut"]}}) != plain


def test_explicit_defaults_in_multicommodity_and_lp_digest_as_omitted_ones(client):
    body = scenario("depots-multicommodity.json")
    plain = digests_over_http(client, "multicommodity", {**body, "arcs": [
        {k: v for k, v in a.items() if k != "cost"} for a in body["arcs"]]})
    zero = digests_over_http(client, "multicommodity", {**body, "arcs": [{**a, "cost": 0} for a in body["arcs"]],
                                                        "options": {"detail": ["capacity_prices", "flows"]}})
    assert zero == plain
    lp = scenario("depots-lp.json")
    plain = digests_over_http(client, "lp", lp)
    explicit = json.loads(json.dumps(lp))
    explicit["variables"][1]["lower"] = 0
    explicit["variables"][0]["upper"] = 60.0
    explicit["constraints"][2]["terms"]["marrow-jam"] = 0
    explicit["options"] = {"detail": ["values", "duals", "reduced_costs"]}
    assert digests_over_http(client, "lp", explicit) == plain


def test_a_what_if_that_sets_every_cost_to_zero_digests_as_the_network_without_costs(client):
    body = mincost_body(4, cost=[3, 0, 2, 0])
    assert client.put("/v1/networks/zeros", json={"arcs": body["arcs"]}).status_code == 201
    assert client.put("/v1/networks/none", json={"arcs": mincost_body(4)["arcs"]}).status_code == 201
    supplies = {"supplies": body["nodes"]}
    zeroed = client.post("/v1/networks/zeros/mincostflow",
                         json={**supplies, "changes": [{"arc": 0, "cost": 0}, {"arc": 2, "cost": 0.0}]})
    plain = client.post("/v1/networks/none/mincostflow", json=supplies)
    assert zeroed.status_code == plain.status_code == 200
    assert zeroed.get_json()["digest"] == plain.get_json()["digest"]
    stored = client.put("/v1/networks/explicit", json={"arcs": mincost_body(4, cost=[0] * 4, key=[None] * 4)["arcs"]})
    assert stored.get_json()["digest"] == client.get("/v1/networks/none").get_json()["digest"]


# --- control characters in ids: never raw in SVG or logs -----------------------------

ODD_IDS = ["nul\x00depot", "bell\x07", "unit\x1fsep", "tab\there", "line\nbreak", "cr\rhere", "<&\"'>",
           "non-char\ufffe", "non-char\uffff", "del\x7f", "nel\x85", "ls\u2028"]


def odd_maxflow() -> dict:
    chain = ["src"] + ODD_IDS + ["snk"]
    return {"source": "src", "sink": "snk",
            "arcs": [{"from": a, "to": b, "capacity": 5, "key": f"key\x00{i}"} for i, (a, b) in
                     enumerate(zip(chain, chain[1:]))]}


def test_node_ids_with_control_characters_give_well_formed_svg(client):
    import xml.etree.ElementTree as ET

    problem = odd_maxflow()
    answer = post(client, "/v1/maxflow", json.dumps(problem))
    assert answer.status_code == 200 and answer.get_json()["value"] == 5  # ids are opaque strings: accepted
    for r in (client.post("/v1/diagram.svg", json={"kind": "maxflow", "problem": problem}),
              client.get(f"/v1/solutions/{answer.get_json()['digest']}/diagram.svg")):
        assert r.status_code == 200 and r.mimetype == "image/svg+xml"
        root = ET.fromstring(r.data)  # raises on anything XML 1.0 cannot hold
        nodes = {g.get("data-node") for g in root.iter("{http://www.w3.org/2000/svg}g") if g.get("data-node")}
        # data-node spells each id reversibly: backslash doubled, characters XML cannot
        # carry (and the other controls) as JSON-style \\uXXXX escapes.
        decoded = {re.sub(r"\\(\\|u([0-9a-f]{4}))",
                          lambda m: "\\" if m.group(1) == "\\" else chr(int(m.group(2), 16)), n) for n in nodes}
        assert set(ODD_IDS) <= decoded
        assert "nul\\u0000depot" in nodes and "non-char\\ufffe" in nodes and "unit\\u001fsep" in nodes
        # What is shown draws each control character as its control picture (U+0000 as U+2400).
        titles = " ".join(t.text or "" for t in root.iter("{http://www.w3.org/2000/svg}title"))
        assert "key\u24000" in titles


def test_log_lines_never_carry_raw_control_characters():
    import logging

    from service.logs import JsonFormatter, TextFormatter

    record = logging.LogRecord("sluice.api", logging.ERROR, __file__, 1, "request failed: %s",
                               ("/arcs/0/fr\x00om\nFAKE 200 line\u2028: unknown field",), None)
    text = TextFormatter(fmt="%(levelname)s %(name)s %(message)s").format(record)
    assert "\n" not in text and "\x00" not in text and "\u2028" not in text
    assert text.endswith(r"/arcs/0/fr\x00om\nFAKE 200 line\u2028: unknown field")
    line = JsonFormatter().format(record)
    assert "\n" not in line and "\x00" not in line
    assert json.loads(line)["msg"] == record.getMessage()


def test_the_text_log_format_uses_the_escaping_formatter():
    import logging.config

    from service.logs import TextFormatter, logging_config

    spec = logging_config("info", "text")["formatters"]["main"]
    built = logging.config.DictConfigurator({}).configure_formatter(dict(spec))  # as dictConfig builds it
    assert isinstance(built, TextFormatter)
    record = logging.LogRecord("sluice", logging.INFO, __file__, 1, "id %s", ("a\x00\nb",), None)
    assert built.format(record).endswith(r"id a\x00\nb")


# --- tenant names the store refuses are refused at start-up --------------------------

@pytest.mark.parametrize("tenant", ["ACME", "big corp", "-north", "depot/north", "x" * 65, "dépôt"])
def test_a_tenant_name_the_store_cannot_hold_is_refused_when_keys_are_loaded(tenant):
    from service.config import parse_api_keys

    with pytest.raises(ValueError) as err:
        parse_api_keys(f"north:north-key-001\n# a comment\nsouth:south-key-02, {tenant}:secret-key-003:read")
    message = str(err.value)
    assert "entry 4 (line 3)" in message and "tenant name" in message
    assert "secret-key-003" not in message and tenant not in message.replace("SLUICE_API_KEYS", "")


def test_tenant_names_the_store_holds_are_accepted():
    from service.config import parse_api_keys

    keys = parse_api_keys("acme:key-00001,big-corp_2:key-00002,0depot:key-00003")
    assert [k.tenant for k in keys] == ["acme", "big-corp_2", "0depot"]


def test_keys_given_to_the_app_directly_are_checked_too(tmp_path):
    from service.api import create_app
    from service.config import ApiKey

    with pytest.raises(ValueError, match="API key 2 has a tenant name"):
        create_app({"data_dir": str(tmp_path), "api_keys": (ApiKey("ok", "key-00001"), ApiKey("Big Corp", "k-0002"))})


@pytest.mark.server
@pytest.mark.parametrize("where", ["SLUICE_API_KEYS", "SLUICE_API_KEYS_FILE"])
def test_sluice_serve_refuses_to_start_with_a_bad_tenant_name(tmp_path, where):
    import os
    import subprocess

    from tests.conftest import ROOT, free_port

    env = {**os.environ, "SLUICE_DATA_DIR": str(tmp_path / "data")}
    env.pop("SLUICE_API_KEYS", None)
    env.pop("SLUICE_API_KEYS_FILE", None)
    entries = "north:north-key-001\nACME:secret-key-003"
    if where == "SLUICE_API_KEYS":
        env[where] = entries
    else:
        (tmp_path / "keys").write_text(entries + "\n")
        env[where] = str(tmp_path / "keys")
    done = subprocess.run([sys.executable, "-m", "service.cli", "serve", "--port", str(free_port())], cwd=ROOT,
                          env=env, capture_output=True, text=True, timeout=60)
    assert done.returncode == 2
    assert f"{where}: entry 2 (line 2) has a tenant name the store cannot hold" in done.stderr
    assert "secret-key-003" not in done.stderr + done.stdout
