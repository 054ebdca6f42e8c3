"""POST /v1/mincostflow through the Flask test client and a real server; from_network."""

from __future__ import annotations

import copy
import json

import numpy as np
import pytest

from service.deadline import Deadline
from service.kinds import KINDS, Limits
from service.model.arcs import build_network, read_arcs
from service.model.nodes import read_nodes
from tests.checkers import assert_capacities, assert_conservation
from tests.conftest import scenario
from tests.http import pointers, post

SCENARIO = scenario("depots-mincostflow")


def test_scenario_is_solved_and_certified(client):
    r = post(client, "/v1/mincostflow", SCENARIO)
    assert r.status_code == 200
    out = r.get_json()
    assert out["status"] == "optimal" and out["certificate"]["checked"] and out["certificate"]["gap"] == 0
    assert out["cost"] == out["certificate"]["primal_cost"] == out["certificate"]["dual_bound"]
    ids = out["node_ids"]
    supply = [next((n.get("supply", 0) for n in SCENARIO["nodes"] if n["id"] == i), 0) for i in ids]
    tails = [ids.index(a["from"]) for a in SCENARIO["arcs"]]
    heads = [ids.index(a["to"]) for a in SCENARIO["arcs"]]
    assert_conservation(len(ids), tails, heads, out["flows"], supply)
    assert_capacities(out["flows"], [a["capacity"] for a in SCENARIO["arcs"]], [a.get("lower", 0) for a in
                                                                               SCENARIO["arcs"]])
    # The lower bound of the direct van is honoured in the caller's terms.
    assert out["flows"][3] >= 10
    assert len(out["reduced_costs"]) == len(SCENARIO["arcs"]) and len(out["potentials"]) == len(ids)
    assert out["digest"].startswith("sha256:") and out["engine"]["kind"] == "graph"


def test_columnar_form_gives_the_same_answer_and_digest(client):
    cols = {k: [a.get(k, {"cost": 0, "lower": 0}.get(k)) for a in SCENARIO["arcs"]]
            for k in ("from", "to", "capacity", "cost", "lower", "key")}
    nodes = {"id": [n["id"] for n in SCENARIO["nodes"]], "supply": [n.get("supply", 0) for n in SCENARIO["nodes"]]}
    body = {"nodes": nodes, "arcs": cols, "options": SCENARIO["options"]}
    a, b = post(client, "/v1/mincostflow", SCENARIO).get_json(), post(client, "/v1/mincostflow", body).get_json()
    assert a["flows"] == b["flows"] and a["cost"] == b["cost"] and a["digest"] == b["digest"]


def test_reduced_costs_only_when_asked(client):
    body = copy.deepcopy(SCENARIO)
    del body["options"]
    out = post(client, "/v1/mincostflow", body).get_json()
    assert "reduced_costs" not in out and "potentials" in out and "flows" in out


def test_unbalanced_supplies_are_a_422_saying_by_how_much(client):
    body = copy.deepcopy(SCENARIO)
    body["nodes"][0]["supply"] = 150
    r = post(client, "/v1/mincostflow", body)
    assert r.status_code == 422 and pointers(r) == ["/nodes"]
    assert "by 10" in r.get_json()["errors"][0]["detail"]


def test_max_flow_mode_reports_shipped_and_unmet(client):
    body = copy.deepcopy(SCENARIO)
    body["nodes"][0]["supply"] = 500
    body["options"]["shortage"] = "max-flow"
    out = post(client, "/v1/mincostflow", body).get_json()
    assert out["status"] == "optimal"
    assert out["shipped"] == 230 and out["certificate"]["shipped_bound"] == 230
    # 590 supplied, 230 demanded: 360 stays at the depots, no demand is left unmet.
    assert out["unmet"][0] + out["unmet"][1] == 360 and all(u == 0 for u in out["unmet"][2:])
    assert out["unmet"][0] >= 0 and out["unmet"][1] >= 0


def test_infeasible_answer_carries_a_proof(client):
    body = copy.deepcopy(SCENARIO)
    body["arcs"][0]["capacity"] = 10  # depot-corrow can no longer send out 140
    body["arcs"][1]["capacity"] = 10
    out = post(client, "/v1/mincostflow", body).get_json()
    assert out["status"] == "infeasible" and out["cost"] is None
    proof = out["infeasibility"]
    assert proof["net_supply"] > proof["outgoing_capacity"]
    leaving = [SCENARIO["arcs"][i]["to"] for i in proof["arcs"]]
    assert all(n not in proof["nodes"] for n in leaving)


def test_unbounded_answer_names_the_cycle(client):
    body = {"nodes": [{"id": "a", "supply": 1}, {"id": "b", "supply": -1}],
            "arcs": [{"from": "a", "to": "b", "capacity": 1, "cost": 1},
                     {"from": "b", "to": "c", "cost": -5}, {"from": "c", "to": "b", "cost": 2}]}
    out = post(client, "/v1/mincostflow", body).get_json()
    assert out["status"] == "unbounded"
    assert out["negative_cycle"]["cost"] == -3 and sorted(out["negative_cycle"]["arcs"]) == [1, 2]


@pytest.mark.parametrize("mutate, pointer", [
    (lambda b: b["arcs"][3].update(lower=31), "/arcs/3/lower"),
    (lambda b: b["arcs"][0].update(cost="4"), "/arcs/0/cost"),
    (lambda b: b["arcs"][0].update(cost=True), "/arcs/0/cost"),
    (lambda b: b["arcs"][2].update(cost=1e300), "/arcs/2/cost"),
    (lambda b: b["arcs"][1].update(capacity=-1), "/arcs/1/capacity"),
    (lambda b: b["nodes"][1].update(supply="90"), "/nodes/1/supply"),
    (lambda b: b["nodes"][1].update(supply=None), "/nodes/1/supply"),
    (lambda b: b["nodes"][1].update(stock=3), "/nodes/1/stock"),
    (lambda b: b["arcs"][0].pop("to"), "/arcs/0/to"),
    (lambda b: b.update(options={"shortage": "some"}), "/options/shortage"),
    (lambda b: b.update(options={"detail": ["cut"]}), "/options/detail/0"),
    (lambda b: b.update(source="x"), "/source"),
])
def test_bad_input_is_a_422_with_the_pointer(client, mutate, pointer):
    body = copy.deepcopy(SCENARIO)
    mutate(body)
    r = post(client, "/v1/mincostflow", body)
    assert r.status_code == 422, r.get_json()
    assert pointer in pointers(r)


def test_non_finite_numbers_are_a_400(client):
    raw = json.dumps(SCENARIO).replace('"cost": 4', '"cost": NaN', 1)
    r = client.post("/v1/mincostflow", data=raw, content_type="application/json")
    assert r.status_code == 400 and r.headers["Content-Type"].startswith("application/problem+json")


def test_graph_engine_refuses_data_it_cannot_solve_exactly(client):
    body = copy.deepcopy(SCENARIO)
    body["arcs"][0]["cost"] = 1 / 3
    body["options"]["engine"] = "graph"
    r = post(client, "/v1/mincostflow", body)
    assert r.status_code == 422 and pointers(r) == ["/arcs"]
    body["options"]["engine"] = "auto"
    out = post(client, "/v1/mincostflow", body).get_json()
    assert out["engine"]["kind"] == "lp" and out["certificate"]["tolerance"] > 0


def test_out_of_range_costs_go_to_lp_or_422_never_a_wrong_answer(client):
    body = copy.deepcopy(SCENARIO)
    body["arcs"][0]["cost"] = 2**61
    body["options"]["engine"] = "graph"
    r = post(client, "/v1/mincostflow", body)
    assert r.status_code == 422 and pointers(r) == ["/arcs"]
    assert "node count" in r.get_json()["errors"][0]["detail"]
    # auto: the LP engine takes it when it can, else a 422 (GLOP gives up on 2**61 here).
    body["options"]["engine"] = "auto"
    r = post(client, "/v1/mincostflow", body)
    assert r.status_code in (200, 422)
    if r.status_code == 200:
        assert r.get_json()["engine"]["kind"] == "lp" and r.get_json()["certificate"]["checked"]
    else:
        assert pointers(r) == ["/arcs"]
    body["arcs"][0]["cost"] = 2**40  # fits the LP engine's doubles
    out = post(client, "/v1/mincostflow", body).get_json()
    assert out["status"] == "optimal" and out["certificate"]["checked"]


def _stored(body):
    raw = read_arcs(body["arcs"])
    return build_network(raw, read_nodes(body.get("nodes"), extra_fields=("supply",)).ids)


def test_from_network_matches_a_full_request(client):
    network = _stored(SCENARIO)
    supplies = [{"id": n["id"], "supply": n["supply"]} for n in SCENARIO["nodes"] if "supply" in n]
    kind = KINDS["mincostflow"]
    problem = kind.from_network(network, {"supplies": supplies, "options": {"detail": ["flows"]}}, Limits())
    out = kind.solve(problem, Deadline.after(60))
    direct = post(client, "/v1/mincostflow", {**SCENARIO, "options": {"detail": ["flows"]}}).get_json()
    assert out["flows"].tolist() == direct["flows"] and out["cost"] == direct["cost"]
    assert problem.digest == direct["digest"]


def test_from_network_rejects_unknown_and_repeated_nodes():
    from service.errors import InputError

    network = _stored(SCENARIO)
    kind = KINDS["mincostflow"]
    with pytest.raises(InputError) as info:
        kind.from_network(network, {"supplies": [{"id": "depot-nowhere", "supply": 1}]}, Limits())
    assert info.value.errors[0].pointer == "/supplies/0/id"
    with pytest.raises(InputError) as info:
        kind.from_network(network, {"supplies": [{"id": "depot-corrow", "supply": 1},
                                                 {"id": "depot-corrow", "supply": -1}]}, Limits())
    assert info.value.errors[0].pointer == "/supplies/1/id"
    with pytest.raises(InputError) as info:
        kind.from_network(network, {"supplies": [{"id": "depot-corrow", "supply": 5}]}, Limits())
    assert info.value.errors[0].pointer == "/nodes"


@pytest.mark.server
def test_end_to_end_against_a_real_server(server):
    r = server.post("/v1/mincostflow", json=SCENARIO, timeout=30)
    assert r.status_code == 200
    out = r.json()
    assert out["status"] == "optimal" and out["certificate"]["gap"] == 0
    bad = copy.deepcopy(SCENARIO)
    bad["arcs"][3]["lower"] = 99
    r = server.post("/v1/mincostflow", json=bad, timeout=30)
    assert r.status_code == 422 and r.headers["Content-Type"].startswith("application/problem+json")
    assert r.json()["errors"][0]["pointer"] == "/arcs/3/lower"


@pytest.mark.server
def test_end_to_end_columnar_network_of_a_few_thousand_arcs(server):
    rng = np.random.default_rng(5)
    n, m = 500, 4000
    tail = rng.integers(0, n, m)
    head = rng.integers(0, n, m)
    ring = np.arange(n)
    body = {
        "nodes": {"id": [0, 1], "supply": [40, -40]},
        "arcs": {"from": tail.tolist() + ring.tolist(), "to": head.tolist() + np.roll(ring, -1).tolist(),
                 "capacity": rng.integers(1, 20, m).tolist() + [None] * n,
                 "cost": rng.integers(0, 50, m).tolist() + [60] * n},
    }
    r = server.post("/v1/mincostflow", json=body, timeout=60)
    out = r.json()
    assert r.status_code == 200 and out["status"] == "optimal" and out["certificate"]["gap"] == 0
    assert_conservation(len(out["node_ids"]), [out["node_ids"].index(v) for v in body["arcs"]["from"]],
                        [out["node_ids"].index(v) for v in body["arcs"]["to"]], out["flows"],
                        [40, -40] + [0] * (len(out["node_ids"]) - 2))
