"""POST /v1/assignment through the Flask test client and a real server."""

from __future__ import annotations

import copy

import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment

from tests.conftest import scenario
from tests.http import pointers, post

SCENARIO = scenario("vans-assignment")


def scipy_total(costs):
    matrix = np.array([[np.inf if c is None else c for c in row] for row in costs], dtype=float)
    r, c = linear_sum_assignment(matrix)
    return matrix[r, c].sum()


def test_scenario_matches_scipy_and_is_certified(client):
    out = post(client, "/v1/assignment", SCENARIO).get_json()
    assert out["status"] == "optimal" and out["certificate"]["gap"] == 0
    assert out["total_cost"] == scipy_total(SCENARIO["costs"])
    assert {a["agent"] for a in out["assignments"]} == set(SCENARIO["agents"])
    for a in out["assignments"]:
        i, j = SCENARIO["agents"].index(a["agent"]), SCENARIO["tasks"].index(a["task"])
        assert SCENARIO["costs"][i][j] == a["cost"]
    assert len(out["duals"]["agents"]) == 4 and len(out["duals"]["tasks"]) == 4
    assert out["unassigned_agents"] == [] and out["unassigned_tasks"] == []


def test_pairs_form_gives_the_same_answer(client):
    pairs = [{"agent": a, "task": t, "cost": c} for a, row in zip(SCENARIO["agents"], SCENARIO["costs"])
             for t, c in zip(SCENARIO["tasks"], row) if c is not None]
    body = {"agents": SCENARIO["agents"], "tasks": SCENARIO["tasks"], "pairs": pairs}
    a, b = post(client, "/v1/assignment", SCENARIO).get_json(), post(client, "/v1/assignment", body).get_json()
    assert a["total_cost"] == b["total_cost"] and a["digest"] == b["digest"]


def test_dense_square_live_path_uses_no_flow_solver(client):
    body = {"agents": list(range(10)), "tasks": [f"drop-{i}" for i in range(10)],
            "costs": np.random.default_rng(3).integers(1, 60, (10, 10)).tolist()}
    out = post(client, "/v1/assignment", body).get_json()
    assert out["engine"]["solver"] == "OR-Tools SimpleLinearSumAssignment"
    assert out["total_cost"] == scipy_total(body["costs"])


def test_rectangular_leaves_the_larger_side_partly_unassigned(client):
    body = {"agents": ["van-a", "van-b"], "tasks": ["d1", "d2", "d3"], "costs": [[5, 1, 9], [2, 8, None]]}
    out = post(client, "/v1/assignment", body).get_json()
    assert out["total_cost"] == 3 and out["unassigned_tasks"] == ["d3"]
    body["options"] = {"maximize": True}
    out = post(client, "/v1/assignment", body).get_json()
    assert out["total_cost"] == 17 and out["certificate"]["primal_cost"] == 17


def test_infeasible_required_side_returns_a_hall_set(client):
    body = {"agents": ["van-a", "van-b", "van-c"], "tasks": ["d1", "d2", "d3"],
            "costs": [[1, None, None], [2, None, None], [3, 4, 5]]}
    out = post(client, "/v1/assignment", body).get_json()
    assert out["status"] == "infeasible"
    assert out["infeasibility"] == {"side": "agents", "members": ["van-a", "van-b"], "allowed": ["d1"]}


@pytest.mark.parametrize("mutate, pointer", [
    (lambda b: b["costs"][1].pop(), "/costs/1"),
    (lambda b: b["costs"].pop(), "/costs"),
    (lambda b: b["costs"][0].__setitem__(1, "9"), "/costs/0/1"),
    (lambda b: b["costs"][2].__setitem__(0, True), "/costs/2/0"),
    (lambda b: b["costs"][2].__setitem__(3, 1e300), "/costs/2/3"),
    (lambda b: b["costs"].__setitem__(3, 7), "/costs/3"),
    (lambda b: b["agents"].__setitem__(1, "van-amber"), "/agents/1"),
    (lambda b: b["tasks"].__setitem__(0, ""), "/tasks/0"),
    (lambda b: b.update(pairs=[]), "/pairs"),
    (lambda b: b.pop("costs"), "/costs"),
    (lambda b: b.update(options={"maximize": "yes"}), "/options/maximize"),
    (lambda b: b.update(options={"require": "everyone"}), "/options/require"),
    (lambda b: b.update(agents=[]), "/agents"),
])
def test_bad_matrix_input_is_a_422_with_the_pointer(client, mutate, pointer):
    body = copy.deepcopy(SCENARIO)
    mutate(body)
    r = post(client, "/v1/assignment", body)
    assert r.status_code == 422, r.get_json()
    assert pointer in pointers(r)


@pytest.mark.parametrize("pairs, pointer", [
    ([{"agent": "van-x", "task": "drop-millbank", "cost": 1}], "/pairs/0/agent"),
    ([{"agent": "van-amber", "task": "drop-nowhere", "cost": 1}], "/pairs/0/task"),
    ([{"agent": "van-amber", "task": "drop-millbank"}], "/pairs/0/cost"),
    ([{"agent": "van-amber", "task": "drop-millbank", "cost": "1"}], "/pairs/0/cost"),
    ([{"agent": "van-amber", "task": "drop-millbank", "cost": 1, "rush": 1}], "/pairs/0/rush"),
    ([{"agent": "van-amber", "task": "drop-millbank", "cost": 1}] * 2, "/pairs/1"),
    ([5], "/pairs/0"),
])
def test_bad_pairs_are_a_422_with_the_pointer(client, pairs, pointer):
    body = {"agents": SCENARIO["agents"], "tasks": SCENARIO["tasks"], "pairs": pairs}
    r = post(client, "/v1/assignment", body)
    assert r.status_code == 422 and pointer in pointers(r)


def test_graph_engine_refuses_long_fractions(client):
    body = copy.deepcopy(SCENARIO)
    body["costs"] = [[1 / 3, 1, 2, 3], [1, 2, 3, 4], [2, 3, 4, 5], [3, 4, 5, 6]]
    body["options"] = {"engine": "graph"}
    r = post(client, "/v1/assignment", body)
    assert r.status_code == 422 and pointers(r) == ["/costs"]


@pytest.mark.server
def test_end_to_end_against_a_real_server(server):
    r = server.post("/v1/assignment", json=SCENARIO, timeout=30)
    assert r.status_code == 200 and r.json()["total_cost"] == scipy_total(SCENARIO["costs"])
    bad = copy.deepcopy(SCENARIO)
    bad["costs"][2] = [1, 2]
    r = server.post("/v1/assignment", json=bad, timeout=30)
    assert r.status_code == 422 and r.json()["errors"][0]["pointer"] == "/costs/2"
