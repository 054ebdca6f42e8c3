"""Stored networks asked the planning and over-time questions (expansion, resilience,
flowovertime), with what-if changes: each answer equals the same problem posted whole,
the stored network is not modified, and bad changes name their field."""

from __future__ import annotations

import copy

import pytest

from service.model.digest import problem_digest
from service.model.stored import body_of
from service.store.codec import decode_network, encode_network, network_digest
from service.api.networks import read_network
from service.kinds import Limits
from tests.conftest import scenario
from tests.http import pointers, send

EXPANSION = scenario("night-pallets-expansion")
RESILIENCE = scenario("night-pallets-resilience")
OVERTIME = scenario("xdock-night-flowovertime")
NETWORK_KEYS = ("nodes", "arcs")


def answer(response) -> dict:
    assert response.status_code == 200, response.get_json()
    doc = response.get_json()
    doc.pop("timing_ms", None)
    doc.pop("network", None)
    return doc


def store(client, name: str, body: dict) -> dict:
    r = send(client, "PUT", f"/v1/networks/{name}", {k: body[k] for k in NETWORK_KEYS if k in body})
    assert r.status_code == 201, r.get_json()
    return send(client, "GET", f"/v1/networks/{name}?include=arcs").get_json()


def query(body: dict) -> dict:
    return {k: v for k, v in body.items() if k not in NETWORK_KEYS}


def by_key(body: dict, key: str) -> dict:
    return next(a for a in body["arcs"] if a["key"] == key)


def test_expansion_what_if_equals_the_request_posted_whole(store_client):
    before = store(store_client, "pallets", EXPANSION)
    assert before["arcs"]["expand_fixed"][3] == 900 and before["arcs"]["expand_cost"][2] is None
    asked = answer(send(store_client, "POST", "/v1/networks/pallets/expansion", query(EXPANSION)))
    assert asked == answer(send(store_client, "POST", "/v1/expansion", EXPANSION))
    assert asked["status"] == "optimal" and asked["certificate"]["checked"]
    # What-if: the night shift has no one-off charge, and the rail lane may be widened.
    changes = [{"key": "dock-fenwick-night-shift", "expand_fixed": 0},
               {"key": "rail-ashgrove-tilbeck", "expand_cost": 1, "expand_max": 50}]
    changed = answer(send(store_client, "POST", "/v1/networks/pallets/expansion",
                          {**query(EXPANSION), "changes": changes}))
    whole = copy.deepcopy(EXPANSION)
    by_key(whole, "dock-fenwick-night-shift")["expand_fixed"] = 0
    by_key(whole, "rail-ashgrove-tilbeck").update(expand_cost=1, expand_max=50)
    assert changed == answer(send(store_client, "POST", "/v1/expansion", whole))
    assert changed["cost"] < asked["cost"]
    assert send(store_client, "GET", "/v1/networks/pallets?include=arcs").get_json() == before


def test_resilience_what_if_equals_the_request_posted_whole(store_client):
    before = store(store_client, "pallets", RESILIENCE)
    asked = answer(send(store_client, "POST", "/v1/networks/pallets/resilience", query(RESILIENCE)))
    assert asked == answer(send(store_client, "POST", "/v1/resilience", RESILIENCE))
    worst = asked["failures"][0]["arc"]
    changed = answer(send(store_client, "POST", "/v1/networks/pallets/resilience",
                          {**query(RESILIENCE), "changes": [{"arc": worst, "closed": True}]}))
    whole = copy.deepcopy(RESILIENCE)
    whole["arcs"][worst]["capacity"] = 0
    assert changed == answer(send(store_client, "POST", "/v1/resilience", whole))
    assert changed["value"] == asked["failures"][0]["value_without"]
    assert send(store_client, "GET", "/v1/networks/pallets?include=arcs").get_json() == before


def _overtime_stored_form() -> dict:
    """The scenario as a stored network carries it: one capacity per lane (the night
    closure comes as a per-period what-if)."""
    body = copy.deepcopy(OVERTIME)
    by_key(body, "van-ormsby-night-closure")["capacity"] = 35
    return body


@pytest.mark.parametrize("objective", ["max-by-horizon", "min-cost"])
def test_flowovertime_what_if_equals_the_request_posted_whole(store_client, objective):
    stored = _overtime_stored_form()
    before = store(store_client, "xdock", stored)
    assert before["nodes"]["holdover"] == [None, 40, 15, None] and before["arcs"]["transit"] == [2, 3, 2, 1, 1]
    q = query(OVERTIME)
    supplies = [{"id": "depot-brackwater", "supply": 60}, {"id": "store-fallowmere", "supply": -60}]
    if objective == "min-cost":
        q = {k: v for k, v in q.items() if k not in ("source", "sink")} | {"objective": "min-cost",
                                                                          "supplies": supplies}
    closure = OVERTIME["arcs"][3]["capacity"]
    changes = [{"key": "van-ormsby-night-closure", "capacity": closure},
               {"node": "xdock-ormsby", "holdover": 5}, {"key": "trunk-kelling", "transit": 3}]
    changed = answer(send(store_client, "POST", "/v1/networks/xdock/flowovertime", {**q, "changes": changes}))
    whole = copy.deepcopy(OVERTIME)
    whole["nodes"][2]["holdover"] = 5
    by_key(whole, "trunk-kelling")["transit"] = 3
    if objective == "min-cost":
        whole = {k: v for k, v in whole.items() if k not in ("source", "sink")} | {"objective": "min-cost"}
        whole["nodes"][0]["supply"], whole["nodes"][3]["supply"] = 60, -60
    assert changed == answer(send(store_client, "POST", "/v1/flowovertime", whole))
    assert changed["certificate"]["checked"]
    plain = answer(send(store_client, "POST", "/v1/networks/xdock/flowovertime", q))
    assert plain != changed  # the changes made a difference, and did not stay behind
    assert send(store_client, "GET", "/v1/networks/xdock?include=arcs").get_json() == before


def test_networks_without_the_optional_columns_keep_their_digest():
    body = {"arcs": [{"from": "a", "to": "b", "capacity": 3, "cost": 2, "key": "ab"},
                     {"from": "b", "to": "c", "capacity": None}]}
    net = read_network(body, Limits())
    assert net.extra is None
    # The formula the store used before optional columns existed.
    assert network_digest(net) == problem_digest("network", net.nodes.ids, net.tail, net.head, net.capacity,
                                                 net.unlimited, net.cost, net.lower, net.keys)
    widened = read_network({"arcs": [dict(body["arcs"][0], expand_cost=1), body["arcs"][1]]}, Limits())
    assert network_digest(widened) != network_digest(net)
    again = decode_network(encode_network(widened))
    assert again.extra == widened.extra == {"arcs": {"expand_cost": [1, None]}, "nodes": {}}
    assert body_of(again, ("expand_cost",))["arcs"]["expand_cost"] == [1, None]


@pytest.mark.parametrize("kind, change, pointer", [
    ("flowovertime", {"arc": 0, "transit": -1}, "/changes/0/transit"),
    ("flowovertime", {"arc": 0, "transit": 1.5}, "/changes/0/transit"),
    ("flowovertime", {"arc": 0, "capacity": [1, 2]}, "/changes/0/capacity"),
    ("flowovertime", {"arc": 0, "capacity": [1] * 11 + [-1]}, "/changes/0/capacity/11"),
    ("flowovertime", {"node": "nowhere", "holdover": 1}, "/changes/0/node"),
    ("flowovertime", {"node": "xdock-ormsby", "holdover": -2}, "/changes/0/holdover"),
    ("flowovertime", {"node": "xdock-ormsby", "cost": 2}, "/changes/0/cost"),
    ("flowovertime", {"node": "xdock-ormsby"}, "/changes/0"),
    ("maxflow", {"arc": 0, "capacity": [1] * 12}, "/changes/0/capacity"),
    ("expansion", {"arc": 0, "expand_cost": -1}, "/changes/0/expand_cost"),
])
def test_bad_changes_name_their_field(store_client, kind, change, pointer):
    store(store_client, "xdock", _overtime_stored_form())
    before = send(store_client, "GET", "/v1/networks/xdock?include=arcs").get_json()
    q = {"flowovertime": {"horizon": 12, "source": "depot-brackwater", "sink": "store-fallowmere"},
         "maxflow": {"source": "depot-brackwater", "sink": "store-fallowmere"},
         "expansion": {"source": "depot-brackwater", "sink": "store-fallowmere", "target": 10}}[kind]
    r = send(store_client, "POST", f"/v1/networks/xdock/{kind}", {**q, "changes": [change]})
    assert r.status_code == 422, r.get_json()
    assert pointer in pointers(r)
    assert send(store_client, "GET", "/v1/networks/xdock?include=arcs").get_json() == before


def test_bad_optional_columns_are_refused_when_stored(client):
    body = {"arcs": [{"from": "a", "to": "b", "capacity": 3, "transit": -1}]}
    r = send(client, "PUT", "/v1/networks/bad", body)
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/arcs/0/transit"
    r = send(client, "PUT", "/v1/networks/bad", {"nodes": [{"id": "a", "holdover": "x"}],
                                                 "arcs": [{"from": "a", "to": "b", "capacity": 3}]})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/nodes/0/holdover"
