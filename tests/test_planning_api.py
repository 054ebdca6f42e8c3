"""POST /v1/expansion and POST /v1/resilience over HTTP (the Flask test client), with
batch and jobs through the generic paths.

References: networkx.network_simplex on the augmented network and scipy.optimize.milp
for expansion, networkx.maximum_flow_value re-solved without each arc for resilience
(tests/planning_reference.py); every plan is replayed against the request itself.
"""

from __future__ import annotations

import copy

import numpy as np
import pytest

from service.kinds import KINDS, Limits
from tests.conftest import scenario
from tests.http import finished_job, pointers
from tests.planning_reference import nx_augmented_cost, nx_values_without, scipy_fixed_charge_cost

EXPANSION = scenario("night-pallets-expansion")
RESILIENCE = scenario("night-pallets-resilience")


def linear(body: dict) -> dict:
    """The scenario without one-off charges."""
    out = copy.deepcopy(body)
    for arc in out["arcs"]:
        arc.pop("expand_fixed", None)
    return out


def columns(body: dict) -> dict:
    """The same request with its arcs in columnar form (absent fields as null / 0)."""
    arcs = body["arcs"]
    names = sorted({k for a in arcs for k in a}, key=["from", "to", "capacity", "key", "expand_cost", "expand_max",
                                                       "expand_fixed"].index)
    default = {"expand_fixed": 0}
    return {**body, "arcs": {k: [a.get(k, default.get(k)) for a in arcs] for k in names}}


def replay_request(body: dict, answer: dict) -> None:
    """The plan against the request as the client wrote it (plain loops)."""
    net: dict = {}
    cost = 0.0
    for arc, flow, add in zip(body["arcs"], answer["flows"], answer["additions"]):
        assert add >= 0 and flow >= 0
        if "expand_cost" not in arc or arc["expand_cost"] is None:
            assert add == 0
        elif arc.get("expand_max") is not None:
            assert add <= arc["expand_max"]
        if arc.get("capacity") is not None:
            assert flow <= arc["capacity"] + add + 1e-9
        if add > 0:
            cost += arc["expand_cost"] * add + arc.get("expand_fixed", 0)
        net[arc["from"]] = net.get(arc["from"], 0) + flow
        net[arc["to"]] = net.get(arc["to"], 0) - flow
    assert net.pop(body["source"]) == pytest.approx(body["target"])
    assert net.pop(body["sink"]) == pytest.approx(-body["target"])
    assert all(v == pytest.approx(0) for v in net.values())
    assert answer["cost"] == pytest.approx(cost)


def lanes_of(body: dict):
    problem = KINDS["expansion"].parse(body, Limits())
    return problem.lanes


# -- expansion -------------------------------------------------------------------------

def test_the_scenario_with_a_night_shift_charge(client):
    r = client.post("/v1/expansion", json=EXPANSION)
    answer = r.get_json()
    assert r.status_code == 200 and answer["status"] == "optimal", answer
    replay_request(EXPANSION, answer)
    assert answer["cost"] == pytest.approx(scipy_fixed_charge_cost(lanes_of(EXPANSION)))
    assert answer["bound"] == answer["cost"] and answer["gap"] == 0
    assert answer["certificate"]["checked"] and answer["engine"]["solver"] == "OR-Tools CP-SAT"
    # The one-off charge of 900 makes the night shift at Fenwick (arc 3) not worth it.
    assert 3 not in answer["widened"] and answer["value"] == 900
    assert r.headers["Cache-Status"] == "sluice; fwd=miss; stored"
    again = client.post("/v1/expansion", json=EXPANSION)
    assert again.headers["Cache-Status"] == "sluice; hit" and again.get_json()["cost"] == answer["cost"]


def test_per_unit_charges_only_equal_network_simplex_and_carry_potentials(client):
    body = linear(EXPANSION)
    answer = client.post("/v1/expansion", json=body).get_json()
    assert answer["status"] == "optimal" and answer["engine"]["solver"] == "OR-Tools SimpleMinCostFlow"
    replay_request(body, answer)
    assert answer["cost"] == nx_augmented_cost(lanes_of(body))
    assert answer["certificate"]["dual_bound"] == answer["cost"] and answer["certificate"]["gap"] == 0
    p = dict(zip(answer["node_ids"], answer["potentials"]))
    # One more pallet costs what the cheapest open widening costs: potential[sink] - potential[source].
    assert p["hub-calder"] - p["plant-ashgrove"] > 0
    assert "bound" not in answer


def test_both_arc_forms_give_the_same_answer_and_digest(client):
    for body in (EXPANSION, linear(EXPANSION)):
        a = client.post("/v1/expansion", json=body).get_json()
        b = client.post("/v1/expansion", json=columns(body)).get_json()
        for part in ("cost", "additions", "flows", "digest", "status"):
            assert a[part] == b[part], part


def test_out_of_reach_is_infeasible_with_the_cut_that_proves_it(client):
    body = {**EXPANSION, "target": 2000}
    answer = client.post("/v1/expansion", json=body).get_json()
    assert answer["status"] == "infeasible" and answer["cost"] is None
    cut = answer["cut"]
    assert cut["capacity"] < 2000 and cut["capacity"] == answer["value"] == answer["certificate"]["cut_capacity"]
    full = sum(a["capacity"] + (a.get("expand_max") or 0) for i, a in enumerate(body["arcs"]) if i in cut["arcs"])
    assert full == cut["capacity"]
    assert body["source"] in cut["source_side"] and body["sink"] not in cut["source_side"]


def test_decimals_are_answered_in_the_units_written(client):
    body = {"source": "a", "sink": "c", "target": 0.8, "arcs": [
        {"from": "a", "to": "b", "capacity": 0.5},
        {"from": "b", "to": "c", "capacity": 0.4, "expand_cost": 0.3, "expand_max": 1},
        {"from": "a", "to": "c", "capacity": 0.2, "expand_cost": 0.75}]}
    answer = client.post("/v1/expansion", json=body).get_json()
    assert answer["cost"] == pytest.approx(0.105) and answer["additions"] == pytest.approx([0, 0.1, 0.1])
    assert answer["certificate"]["decimal_scale"] == 10
    # With at most 1.0 more on the direct lane, full widening carries 0.5 + 1.2 = 1.7.
    body["arcs"][2]["expand_max"] = 1.0
    out_of_reach = client.post("/v1/expansion", json={**body, "target": 2.5}).get_json()
    assert out_of_reach["status"] == "infeasible" and out_of_reach["value"] == pytest.approx(1.7)
    assert out_of_reach["certificate"]["target"] == pytest.approx(2.5)
    assert out_of_reach["certificate"]["shortfall"] == pytest.approx(0.8)


def test_detail_trims_the_answer(client):
    body = {**linear(EXPANSION), "options": {"detail": ["additions"]}}
    answer = client.post("/v1/expansion", json=body).get_json()
    assert "additions" in answer and "flows" not in answer and "potentials" not in answer


@pytest.mark.parametrize("change, pointer", [
    (lambda b: b["arcs"][0].update(expand_cost=-1), "/arcs/0/expand_cost"),
    (lambda b: b.update(target=-5), "/target"),
    (lambda b: b.update(target="900"), "/target"),
    (lambda b: b.update(target=True), "/target"),
    (lambda b: b["arcs"][2].update(expand_max=10), "/arcs/2/expand_max"),
    (lambda b: b["arcs"][6].update(expand_fixed=50), "/arcs/6/expand_fixed"),
    (lambda b: b["arcs"][1].update(expand_max=-2), "/arcs/1/expand_max"),
    (lambda b: b["arcs"][1].update(expand_fixed=None), "/arcs/1/expand_fixed"),
    (lambda b: b["arcs"][1].update(cost=3), "/arcs/1/cost"),
    (lambda b: b["arcs"][1].update(lower=3), "/arcs/1/lower"),
    (lambda b: b["arcs"][1].update(widen_by=3), "/arcs/1/widen_by"),
    (lambda b: b.update(options={"engine": "lp"}), "/options/engine"),
    (lambda b: b.update(options={"gap": -0.1}), "/options/gap"),
    (lambda b: b.update(sink="nowhere"), "/sink"),
    (lambda b: b.pop("target"), "/target"),
])
def test_bad_input_names_its_field(client, change, pointer):
    body = copy.deepcopy(EXPANSION)
    change(body)
    r = client.post("/v1/expansion", json=body)
    assert r.status_code == 422 and r.content_type == "application/problem+json"
    assert pointer in pointers(r), r.get_json()


def test_bad_input_in_columns_points_into_the_column(client):
    body = columns(EXPANSION)
    body["arcs"]["expand_cost"][4] = -3
    r = client.post("/v1/expansion", json=body)
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/arcs/expand_cost/4"


def test_other_kinds_refuse_the_expansion_fields(client):
    body = {"source": "a", "sink": "b", "arcs": [{"from": "a", "to": "b", "capacity": 3, "expand_cost": 1}]}
    r = client.post("/v1/maxflow", json=body)
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/arcs/0/expand_cost"


# -- resilience ------------------------------------------------------------------------

def _arrays(body):
    ids = {}
    for arc in body["arcs"]:
        for end in (arc["from"], arc["to"]):
            ids.setdefault(end, len(ids))
    tail = np.array([ids[a["from"]] for a in body["arcs"]])
    head = np.array([ids[a["to"]] for a in body["arcs"]])
    cap = np.array([a["capacity"] for a in body["arcs"]])
    return len(ids), tail, head, cap, ids[body["source"]], ids[body["sink"]]


def test_the_scenario_matches_networkx_re_solved_without_each_lane(client):
    body = {k: v for k, v in RESILIENCE.items() if k != "top"}
    answer = client.post("/v1/resilience", json=body).get_json()
    n, tail, head, cap, s, t = _arrays(body)
    reference = nx_values_without(n, tail, head, cap, None, s, t)
    assert answer["value"] == 760
    listed = {f["arc"]: f["value_without"] for f in answer["failures"]}
    assert listed == {i: v for i, v in enumerate(reference.tolist()) if v < 760}
    assert answer["failures_total"] == len(listed)
    for f, cut in zip(answer["failures"], answer["certificate"]["cuts"]):
        assert f["key"] == body["arcs"][f["arc"]]["key"] and f["loss"] == 760 - f["value_without"]
        assert cut["arc"] == f["arc"] and f["arc"] not in cut["arcs"]
        assert sum(body["arcs"][i]["capacity"] for i in cut["arcs"]) == cut["capacity"] == f["value_without"]
    losses = [f["loss"] for f in answer["failures"]]
    assert losses == sorted(losses, reverse=True)


def test_top_lists_the_worst_and_counts_the_rest(client):
    answer = client.post("/v1/resilience", json=RESILIENCE).get_json()
    assert len(answer["failures"]) == 3 and answer["failures_total"] == 6
    assert [f["arc"] for f in answer["failures"]] == [0, 3, 5]  # ties by arc index
    assert len(answer["certificate"]["cuts"]) == 3


def test_resilience_in_columns_and_with_integer_ids(client):
    arcs = RESILIENCE["arcs"]
    names = {}
    for a in arcs:
        names.setdefault(a["from"], len(names))
        names.setdefault(a["to"], len(names))
    body = {"source": names[RESILIENCE["source"]], "sink": names[RESILIENCE["sink"]], "arcs": {
        "from": [names[a["from"]] for a in arcs], "to": [names[a["to"]] for a in arcs],
        "capacity": [a["capacity"] for a in arcs]}}
    answer = client.post("/v1/resilience", json=body).get_json()
    objects = client.post("/v1/resilience", json={k: v for k, v in RESILIENCE.items() if k != "top"}).get_json()
    assert [(f["arc"], f["loss"]) for f in answer["failures"]] == [(f["arc"], f["loss"]) for f in objects["failures"]]
    assert all(f["key"] is None for f in answer["failures"])


def test_an_unlimited_path_is_unbounded(client):
    body = {"source": "a", "sink": "c", "arcs": [{"from": "a", "to": "b"}, {"from": "b", "to": "c"},
                                                 {"from": "a", "to": "c", "capacity": 4}]}
    answer = client.post("/v1/resilience", json=body).get_json()
    assert answer["status"] == "unbounded" and answer["value"] is None
    assert answer["unbounded_path"]["nodes"] == ["a", "b", "c"] and "failures" not in answer


@pytest.mark.parametrize("change, pointer", [
    (lambda b: b.update(top=0), "/top"),
    (lambda b: b.update(top=2.5), "/top"),
    (lambda b: b.update(top=True), "/top"),
    (lambda b: b["arcs"][0].update(capacity=-1), "/arcs/0/capacity"),
    (lambda b: b["arcs"][0].update(lower=1), "/arcs/0/lower"),
    (lambda b: b["arcs"][0].update(expand_cost=1), "/arcs/0/expand_cost"),
    (lambda b: b.update(options={"detail": ["paths"]}), "/options/detail/0"),
    (lambda b: b.update(options={"engine": "graph"}), "/options/engine"),
    (lambda b: b.update(sink=b["source"]), "/sink"),
])
def test_resilience_bad_input_names_its_field(client, change, pointer):
    body = copy.deepcopy(RESILIENCE)
    change(body)
    r = client.post("/v1/resilience", json=body)
    assert r.status_code == 422
    assert pointer in pointers(r), r.get_json()


def test_too_many_decimals_are_a_422(client):
    body = {"source": "a", "sink": "b", "arcs": [{"from": "a", "to": "b", "capacity": 0.1234567891}]}
    r = client.post("/v1/resilience", json=body)
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/arcs"


# -- batch and jobs, through the generic paths -----------------------------------------

def test_batch_mixes_the_planning_kinds_and_a_bad_item_fails_alone(client):
    bad = {**EXPANSION, "target": -1}
    r = client.post("/v1/batch", json={"items": [{"kind": "expansion", "problem": EXPANSION},
                                                 {"kind": "resilience", "problem": RESILIENCE},
                                                 {"kind": "expansion", "problem": bad}]})
    results = r.get_json()["results"]
    assert r.status_code == 200 and len(results) == 3
    single = client.post("/v1/expansion", json=EXPANSION).get_json()
    assert results[0]["cost"] == single["cost"] and results[0]["digest"] == single["digest"]
    assert results[1]["failures"] == client.post("/v1/resilience", json=RESILIENCE).get_json()["failures"]
    assert results[2]["status"] == 422 and results[2]["errors"][0]["pointer"] == "/problem/target"  # relative to the item



@pytest.mark.parametrize("kind, body", [("expansion", EXPANSION), ("resilience", RESILIENCE)])
def test_jobs_answer_as_the_endpoint_does(client, kind, body):
    r = client.post("/v1/jobs", json={"kind": kind, "problem": body})
    assert r.status_code == 202
    doc = finished_job(client, r.headers["Location"])
    assert doc["state"] == "done", doc
    sync = client.post(f"/v1/{kind}", json=body).get_json()
    for part in ("status", "digest", "certificate"):
        assert doc["result"][part] == sync[part], part
    r = client.post(f"/v1/{kind}", json=body, headers={"Prefer": "respond-async"})
    assert r.status_code == 202 and finished_job(client, r.headers["Location"])["state"] == "done"


def test_a_bad_job_is_refused_at_submission(client):
    r = client.post("/v1/jobs", json={"kind": "resilience", "problem": {**RESILIENCE, "top": 0}})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/problem/top"
