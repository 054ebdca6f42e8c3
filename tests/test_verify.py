"""Checking a client's plan: POST /v1/verify/{maxflow,mincostflow} and service.solvers.verify.

References: networkx.maximum_flow and networkx.network_simplex (optimal values and
flows), scipy.optimize.linprog with HiGHS (min-cost optimum with lower bounds and
parallel arcs), and the theorems: a flow is maximum iff its residual network has no
augmenting path (max-flow min-cut), and a feasible flow is of least cost iff its
residual network has no negative-cost cycle (negative-cycle optimality condition).
"""

from __future__ import annotations


import numpy as np
import pytest
from scipy.optimize import linprog

from service.errors import SelfCheckFailed
from service.kinds import KINDS
from service.solvers import Graph
from service.solvers.verify import (
    BACKWARD, FORWARD, check_augmenting_path, check_cut_proof, check_negative_cycle, check_potentials,
    verify_max_flow, verify_min_cost_flow,
)
from tests.checkers import assert_capacities, assert_conservation, assert_max_flow
from tests.conftest import scenario
from tests.references import max_flow, min_cost_flow

DEPOTS = scenario("depots-maxflow")
PLAN = scenario("verify-depots-maxflow")
MC_PLAN = scenario("verify-depots-mincostflow")


def networkx_max_flow(n, tail, head, cap):
    """tests.references.max_flow from node 0 to n - 1 of index arrays; the flows as an array."""
    value, flows = max_flow(zip(tail.tolist(), head.tolist(), cap.tolist()), 0, n - 1, range(n))
    return value, np.array(flows, dtype=np.int64)


def random_digraph(rng, n: int, m: int, max_cap: int = 20):
    """A random simple digraph (no parallel arcs, no self-loops) as arrays."""
    pairs = {(int(a), int(b)) for a, b in rng.integers(0, n, (m * 2, 2)) if a != b}
    pairs = sorted(pairs)[:m]
    rng.shuffle(pairs)
    tail = np.array([p[0] for p in pairs], dtype=np.int64)
    head = np.array([p[1] for p in pairs], dtype=np.int64)
    return tail, head, rng.integers(0, max_cap, tail.size).astype(np.int64)


# --- max-flow against networkx ---------------------------------------------------


@pytest.mark.parametrize("seed", range(12))
def test_networkx_maximum_is_reported_optimal_with_a_cut_of_equal_capacity(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(5, 25))
    tail, head, cap = random_digraph(rng, n, int(rng.integers(n, 4 * n)))
    value, flows = networkx_max_flow(n, tail, head, cap)
    verdict = verify_max_flow(Graph(n, tail, head, cap), 0, n - 1, flows)
    assert verdict.feasible and verdict.optimal and verdict.violation_count == 0
    assert verdict.objective == value and verdict.cut_capacity == value  # max-flow min-cut
    assert verdict.steps is None
    side = verdict.source_side
    assert side[0] and not side[n - 1]
    assert cap[side[tail] & ~side[head]].sum() == value


@pytest.mark.parametrize("seed", range(12))
def test_sub_optimal_plans_get_paths_whose_gains_reach_the_networkx_value(seed):
    rng = np.random.default_rng(100 + seed)
    n = int(rng.integers(5, 25))
    tail, head, cap = random_digraph(rng, n, int(rng.integers(n, 4 * n)))
    best, _ = networkx_max_flow(n, tail, head, cap)
    flows = np.zeros_like(cap)  # the empty plan: feasible, value 0
    value = 0
    for _ in range(4 * tail.size + 2):
        verdict = verify_max_flow(Graph(n, tail, head, cap), 0, n - 1, flows)
        assert verdict.feasible and verdict.objective == value
        if verdict.optimal:
            break
        assert verdict.gain > 0
        # The path is a real source-sink path in the residual network.
        nodes = [(int(tail[a]), int(head[a])) if d == FORWARD else (int(head[a]), int(tail[a]))
                 for a, d in verdict.steps]
        assert nodes[0][0] == 0 and nodes[-1][1] == n - 1
        assert all(nodes[i][1] == nodes[i + 1][0] for i in range(len(nodes) - 1))
        for a, d in verdict.steps:
            flows[a] += d * verdict.gain
        value += verdict.gain
        assert_max_flow(n, tail, head, cap.tolist(), 0, n - 1, flows, value)  # tests/checkers.py
    assert verdict.optimal and value == best


def test_a_maximum_flow_of_half_capacities_is_completed_by_paths():
    # Doubling every capacity doubles the maximum flow (scaling); a maximum flow of the
    # original network is feasible in the doubled one and needs augmenting to reach it.
    rng = np.random.default_rng(5)
    n = 12
    tail, head, cap = random_digraph(rng, n, 40)
    half, flows = networkx_max_flow(n, tail, head, cap)
    cap = cap * 2
    assert half > 0 and networkx_max_flow(n, tail, head, cap)[0] == 2 * half
    total, rounds = half, 0
    while not (v := verify_max_flow(Graph(n, tail, head, cap), 0, n - 1, flows)).optimal:
        assert v.feasible and v.objective == total
        for a, d in v.steps:
            flows[a] += d * v.gain
        total += v.gain
        rounds += 1
    assert rounds >= 1 and total == v.objective == 2 * half


def test_augmenting_path_can_run_backward_along_an_arc():
    # Classic trap: the plan sends its unit s->a->b->t, blocking s->b and a->t.
    tail, head = np.array([0, 0, 1, 1, 2]), np.array([1, 2, 2, 3, 3])
    cap = np.array([1, 1, 1, 1, 1])
    flows = np.array([1, 0, 1, 0, 1])
    v = verify_max_flow(Graph(4, tail, head, cap), 0, 3, flows)
    assert v.feasible and not v.optimal and v.gain == 1
    assert v.steps == [(1, FORWARD), (2, BACKWARD), (3, FORWARD)]


def test_violations_are_reported_exactly():
    # s=0, a=1, b=2, t=3. Arc 0 over capacity by 3, arc 2 negative by 2, node a gets 7
    # and sends 3 (+4 left over), node b gets -2 and sends 1 (-3).
    tail, head = np.array([0, 1, 0, 2]), np.array([1, 3, 2, 3])
    cap = np.array([4, 5, 6, 1])
    flows = np.array([7, 3, -2, 1])
    v = verify_max_flow(Graph(4, tail, head, cap), 0, 3, flows)
    assert not v.feasible and not v.optimal and v.steps is None
    assert v.arc_violations == [(0, "capacity", 3), (2, "lower", 2)]
    assert v.node_violations == [(1, 4), (2, -3)]
    assert v.violation_count == 4 and v.objective == 5


def test_fractional_plans_are_checked_with_a_stated_tolerance():
    tail, head = np.array([0, 1, 0]), np.array([1, 2, 2])
    cap = np.array([0.75, 0.5, 1.1])
    v = verify_max_flow(Graph(3, tail, head, cap), 0, 2, np.array([0.5, 0.5, 1.1]))
    assert v.feasible and v.optimal and v.objective == pytest.approx(1.6) and v.tolerance > 0
    v = verify_max_flow(Graph(3, tail, head, cap), 0, 2, np.array([0.25, 0.25, 1.1]))
    assert not v.optimal and v.gain == pytest.approx(0.25)


def test_unlimited_path_means_unbounded():
    unlimited = np.array([True, True, False])
    v = verify_max_flow(Graph(3, np.array([0, 1, 0]), np.array([1, 2, 2]), np.array([0, 0, 5]), unlimited), 0, 2,
                        np.array([3, 3, 5]))
    assert v.feasible and not v.optimal and v.gain is None and v.steps == [(0, FORWARD), (1, FORWARD)]


# --- the verdict's own checks fail on wrong inputs ------------------------------


def _depots_arrays():
    ids = list(dict.fromkeys(x for a in DEPOTS["arcs"] for x in (a["from"], a["to"])))
    pos = {v: i for i, v in enumerate(ids)}
    tail = np.array([pos[a["from"]] for a in DEPOTS["arcs"]])
    head = np.array([pos[a["to"]] for a in DEPOTS["arcs"]])
    cap = np.array([a["capacity"] for a in DEPOTS["arcs"]])
    return len(ids), tail, head, cap, pos[DEPOTS["source"]], pos[DEPOTS["sink"]]


def test_cut_proof_check_fails_on_wrong_cuts():
    n, tail, head, cap, s, t = _depots_arrays()
    graph = Graph(n, tail, head, cap)
    flows = np.array([100, 60, 30, 70, 30, 60, 100, 60, 0])
    good = np.array([True, True, True, True, True, False])
    check_cut_proof(graph, s, t, flows, 160, good)  # holds
    with pytest.raises(SelfCheckFailed, match="separate"):
        check_cut_proof(graph, s, t, flows, 160, np.ones(n, dtype=bool))
    with pytest.raises(SelfCheckFailed, match="differs"):
        check_cut_proof(graph, s, t, flows, 150, good)
    with pytest.raises(SelfCheckFailed):
        check_cut_proof(graph, s, t, flows, 160, np.array([True] + [False] * 5))


def test_augmenting_path_check_fails_on_wrong_paths():
    n, tail, head, cap, s, t = _depots_arrays()
    graph = Graph(n, tail, head, cap)
    flows = np.array(PLAN["flows"])
    good = [(1, FORWARD), (5, FORWARD), (7, FORWARD)]
    check_augmenting_path(graph, s, t, flows, good, 10)  # holds
    with pytest.raises(SelfCheckFailed, match="breaks"):
        check_augmenting_path(graph, s, t, flows, good, 11)
    with pytest.raises(SelfCheckFailed, match="not connected"):
        check_augmenting_path(graph, s, t, flows, [(1, FORWARD), (3, FORWARD), (7, FORWARD)], 1)
    with pytest.raises(SelfCheckFailed, match="source to the sink"):
        check_augmenting_path(graph, s, t, flows, [(1, FORWARD), (5, FORWARD)], 1)
    with pytest.raises(SelfCheckFailed, match="not more than 0"):
        check_augmenting_path(graph, s, t, flows, good, 0)
    with pytest.raises(SelfCheckFailed, match="without limit"):
        check_augmenting_path(graph, s, t, flows, good, None)


def _mc_arrays():
    problem = MC_PLAN["problem"]
    ids = [v["id"] for v in problem["nodes"]]
    pos = {v: i for i, v in enumerate(ids)}
    tail = np.array([pos[a["from"]] for a in problem["arcs"]])
    head = np.array([pos[a["to"]] for a in problem["arcs"]])
    cap = np.array([a["capacity"] for a in problem["arcs"]])
    cost = np.array([a["cost"] for a in problem["arcs"]])
    supply = np.array([v["supply"] for v in problem["nodes"]])
    return len(ids), tail, head, cap, cost, supply


def test_negative_cycle_check_fails_on_wrong_cycles():
    n, tail, head, cap, cost, supply = _mc_arrays()
    graph = Graph(n, tail, head, cap, None, cost)
    flows = np.array(MC_PLAN["flows"])
    good = [(1, BACKWARD), (0, FORWARD), (3, FORWARD)]
    check_negative_cycle(graph, supply, flows, good, 40, 80)  # holds
    with pytest.raises(SelfCheckFailed, match="saves"):
        check_negative_cycle(graph, supply, flows, good, 40, 90)
    with pytest.raises(SelfCheckFailed, match="breaks"):
        check_negative_cycle(graph, supply, flows, good, 41, 82)
    with pytest.raises(SelfCheckFailed, match="not less than 0"):
        reverse = [(1, FORWARD), (3, BACKWARD), (0, BACKWARD)]
        check_negative_cycle(graph, supply, flows, reverse, 1, -2)
    with pytest.raises(SelfCheckFailed, match="does not close"):
        check_negative_cycle(graph, supply, flows, good[:2], 1, 1)


def test_potentials_check_fails_on_wrong_potentials():
    n, tail, head, cap, cost, supply = _mc_arrays()
    graph = Graph(n, tail, head, cap, None, cost)
    plan = verify_min_cost_flow(graph, supply, np.array(MC_PLAN["flows"]))
    flows = np.array(MC_PLAN["flows"])
    for a, d in plan.steps:
        flows[a] += d * plan.amount
    best = verify_min_cost_flow(graph, supply, flows)
    assert best.optimal
    check_potentials(graph, flows, best.potentials)  # holds
    with pytest.raises(SelfCheckFailed, match="reduced cost"):
        check_potentials(graph, flows, np.zeros(n, dtype=np.int64))
    with pytest.raises(SelfCheckFailed, match="reduced cost"):  # the sub-optimal plan has no such potentials
        check_potentials(graph, np.array(MC_PLAN["flows"]), best.potentials)


# --- min-cost flow against networkx and scipy ------------------------------------


def _lp_min_cost(n, tail, head, cap, cost, lower, supply, c=None):
    a = np.zeros((n, tail.size))
    a[tail, np.arange(tail.size)] += 1
    a[head, np.arange(tail.size)] -= 1
    res = linprog(cost if c is None else c, A_eq=a, b_eq=supply, bounds=list(zip(lower, cap)), method="highs")
    return res


def _random_min_cost(rng, n, m, with_lower=False):
    """A random feasible min-cost instance: supplies from a random feasible flow."""
    tail = rng.integers(0, n, m)
    head = rng.integers(0, n, m)
    cap = rng.integers(1, 15, m)
    lower = rng.integers(0, 3, m) * (rng.random(m) < 0.3) if with_lower else np.zeros(m, dtype=np.int64)
    lower = np.minimum(lower, cap)
    cost = rng.integers(-4, 12, m)
    seed_flow = np.array([rng.integers(lo, hi + 1) for lo, hi in zip(lower, cap)])
    supply = np.zeros(n, dtype=np.int64)
    np.add.at(supply, tail, seed_flow)
    np.subtract.at(supply, head, seed_flow)
    return tail, head, cap, cost, lower, supply


@pytest.mark.parametrize("seed", range(10))
def test_cycle_cancelling_from_a_dear_plan_reaches_the_highs_optimum(seed):
    rng = np.random.default_rng(200 + seed)
    n, m = int(rng.integers(4, 12)), int(rng.integers(8, 40))
    tail, head, cap, cost, lower, supply = _random_min_cost(rng, n, m, with_lower=seed % 2 == 1)
    best = _lp_min_cost(n, tail, head, cap, cost, lower, supply)
    assert best.status == 0
    # A feasible but (usually) dear plan: the cheapest plan for reversed costs (a vertex: integral).
    dear = _lp_min_cost(n, tail, head, cap, cost, lower, supply, c=-cost)
    flows = np.rint(dear.x).astype(np.int64)
    lo = None if not lower.any() else lower
    start = (cost * flows).sum()
    for _ in range(10 * m):
        v = verify_min_cost_flow(Graph(n, tail, head, cap, None, cost, lo), supply, flows)
        assert v.feasible and v.violation_count == 0
        if v.optimal:
            break
        assert v.unit_cost < 0 and v.amount > 0 and v.gain == -v.unit_cost * v.amount
        for a, d in v.steps:
            flows[a] += d * v.amount
        assert (cost * flows).sum() == v.objective - v.gain
    assert v.optimal and v.objective == pytest.approx(best.fun, abs=1e-6)
    assert start > v.objective, "the reversed-cost plan should have been dearer than the optimum"
    assert_capacities(flows, cap.tolist(), lower)
    assert_conservation(n, tail, head, flows, supply)
    # Reduced-cost optimality recomputed here from the returned potentials.
    p = v.potentials
    reduced = cost + p[tail] - p[head]
    assert (reduced[flows < cap] >= 0).all() and (reduced[flows > lower] <= 0).all()


@pytest.mark.parametrize("seed", range(6))
def test_networkx_simplex_optimum_is_reported_optimal(seed):
    rng = np.random.default_rng(300 + seed)
    n = 10
    tail, head, cap = random_digraph(rng, n, 30, max_cap=12)
    cost = rng.integers(0, 9, tail.size)
    seed_flow = rng.integers(0, cap + 1)
    supply = np.zeros(n, dtype=np.int64)
    np.add.at(supply, tail, seed_flow)
    np.subtract.at(supply, head, seed_flow)
    best_cost, flow = min_cost_flow(zip(tail.tolist(), head.tolist(), cap.tolist(), cost.tolist()),
                                    dict(enumerate(supply.tolist())), range(n))
    flows = np.array(flow)
    v = verify_min_cost_flow(Graph(n, tail, head, cap, None, cost), supply, flows)
    assert v.feasible and v.optimal and v.objective == best_cost


def test_min_cost_violations_with_lower_bounds_and_supplies():
    # 0 supplies 5, 2 demands 5. Arc 0 (0->1) [lower 2, cap 4] carries 1: below by 1.
    # Arc 1 (1->2) cap 3 carries 4: over by 1. Node 0 sends 1 of its 5: +4 left over;
    # node 1 gets 1 and sends 4: -3; node 2 gets 4 of 5: -1... as supply + in - out.
    tail, head = np.array([0, 1]), np.array([1, 2])
    v = verify_min_cost_flow(Graph(3, tail, head, np.array([4, 3]), None, np.array([1, 1]), np.array([2, 0])),
                             np.array([5, 0, -5]), np.array([1, 4]))
    assert not v.feasible
    assert v.arc_violations == [(0, "lower", 1), (1, "capacity", 1)]
    assert v.node_violations == [(0, 4), (1, -3), (2, -1)]
    assert v.objective == 5


def test_unlimited_negative_cycle_means_unbounded():
    # A two-arc cycle without limits whose round trip costs -1.
    unlimited = np.array([True, True, False])
    v = verify_min_cost_flow(Graph(3, np.array([0, 1, 0]), np.array([1, 0, 2]), np.array([0, 0, 5]), unlimited,
                                   np.array([-3, 2, 1])), np.array([5, 0, -5]), np.array([0, 0, 5]))
    assert v.feasible and not v.optimal and v.gain is None and v.amount is None and v.unit_cost == -1


def test_self_loop_with_negative_cost_is_an_improving_cycle():
    v = verify_min_cost_flow(Graph(2, np.array([0, 1]), np.array([1, 1]), np.array([3, 2]), None, np.array([1, -5])),
                             np.array([3, -3]), np.array([3, 0]))
    assert v.steps == [(1, FORWARD)] and v.amount == 2 and v.gain == 10


# --- over HTTP --------------------------------------------------------------------


def test_http_maxflow_plan_gets_its_improving_path(client):
    r = client.post("/v1/verify/maxflow", json=PLAN)
    assert r.status_code == 200
    doc = r.get_json()
    assert doc["feasible"] is True and doc["optimal"] is False and doc["value"] == 150
    assert doc["gain"] == 10 and doc["violations"] == []
    assert [s["arc"] for s in doc["improving_path"]] == [1, 5, 7]
    assert doc["improving_path"][0] == {"arc": 1, "direction": "forward", "from": "dc-brackenford",
                                        "to": "xdock-pellow"}
    assert doc["certificate"] == {"checked": True, "proof": "augmenting-path", "tolerance": 0.0}


def test_http_solver_answer_is_reported_optimal(client):
    solved = client.post("/v1/maxflow", json=DEPOTS).get_json()
    doc = client.post("/v1/verify/maxflow", json={"problem": DEPOTS, "flows": solved["flows"]}).get_json()
    assert doc["optimal"] is True and doc["value"] == solved["value"] == 160
    assert doc["cut"]["capacity"] == 160 and "improving_path" not in doc


def test_http_violations_name_arcs_keys_and_node_ids(client):
    flows = [130, 60, 20, 70, 30, 50, 100, 50, -1]
    doc = client.post("/v1/verify/maxflow", json={"problem": DEPOTS, "flows": flows}).get_json()
    assert doc["feasible"] is False and doc["optimal"] is False
    assert doc["violations"] == [
        {"arc": 0, "kind": "capacity", "excess": 10, "key": "lane-01"},
        {"arc": 8, "kind": "lower", "excess": 1, "key": "lane-09"},
        {"node": "xdock-larchgate", "kind": "conservation", "imbalance": 40},
        {"node": "hub-ostwick", "kind": "conservation", "imbalance": -1},
        {"node": "hub-saltern", "kind": "conservation", "imbalance": 1},
    ]
    assert doc["violation_count"] == 5


@pytest.mark.parametrize("body, status, pointer", [
    ({"problem": DEPOTS, "flows": [1, 2]}, 422, "/flows"),
    ({"problem": DEPOTS, "flows": "none"}, 422, "/flows"),
    ({"problem": DEPOTS, "flows": [0, 0, "3", 0, 0, 0, 0, 0, 0]}, 422, "/flows/2"),
    ({"problem": DEPOTS, "flows": [0, 0, None, 0, 0, 0, 0, 0, 0]}, 422, "/flows/2"),
    ({"problem": {**DEPOTS, "sink": "nowhere"}, "flows": [0] * 9}, 422, "/problem/sink"),
    ({"problem": DEPOTS}, 422, "/flows"),
    ({"flows": []}, 422, "/problem"),
    ({"problem": DEPOTS, "flows": [0] * 9, "extra": 1}, 422, "/extra"),
])
def test_http_bad_requests_point_at_the_field(client, body, status, pointer):
    r = client.post("/v1/verify/maxflow", json=body)
    assert r.status_code == status and r.mimetype == "application/problem+json"
    assert r.get_json()["errors"][0]["pointer"] == pointer


def test_http_unknown_kind_is_404(client):
    r = client.post("/v1/verify/assignment", json={"problem": {}, "flows": []})
    assert r.status_code == 404 and r.mimetype == "application/problem+json"


def test_http_mincostflow_plan_gets_its_negative_cycle(client):
    r = client.post("/v1/verify/mincostflow", json=MC_PLAN)
    assert r.status_code == 200
    doc = r.get_json()
    # By hand: lane-12 costs 9 while lane-11 + lane-14 cost 4 + 3; 40 units can move.
    assert doc["feasible"] and not doc["optimal"] and doc["cost"] == 1160
    assert [(s["arc"], s["direction"]) for s in doc["improving_cycle"]] == [
        (1, "backward"), (0, "forward"), (3, "forward")]
    assert doc["amount"] == 40 and doc["unit_cost"] == -2 and doc["gain"] == 80
    # The same instance through scipy's HiGHS: the optimum is 1160 - 80 = 1080.
    n, tail, head, cap, cost, supply = _mc_arrays()
    assert _lp_min_cost(n, tail, head, cap, cost, np.zeros(tail.size), supply).fun == pytest.approx(1080)
    improved = list(MC_PLAN["flows"])
    for step in doc["improving_cycle"]:
        improved[step["arc"]] += 40 if step["direction"] == "forward" else -40
    best = client.post("/v1/verify/mincostflow", json={**MC_PLAN, "flows": improved}).get_json()
    assert best["optimal"] and best["cost"] == 1080 and best["certificate"]["proof"] == "potentials"
    assert best["node_ids"] == [v["id"] for v in MC_PLAN["problem"]["nodes"]] and len(best["potentials"]) == 5


def test_http_mincostflow_bad_input(client):
    problem = MC_PLAN["problem"]
    r = client.post("/v1/verify/mincostflow", json={"problem": problem, "flows": [1, 2, 3]})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/flows"
    bad = {**problem, "nodes": [{**problem["nodes"][0], "supply": "lots"}, *problem["nodes"][1:]]}
    r = client.post("/v1/verify/mincostflow", json={"problem": bad, "flows": MC_PLAN["flows"]})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/problem/nodes/0/supply"
    short = {**problem, "options": {"shortage": "max-flow"}}
    r = client.post("/v1/verify/mincostflow", json={"problem": short, "flows": MC_PLAN["flows"]})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/problem/options/shortage"


needs_mincostflow = pytest.mark.skipif("mincostflow" not in KINDS,
                                       reason="the mincostflow kind (issue 3) is not registered on this branch")


@needs_mincostflow
def test_http_mincostflow_solver_answer_is_reported_optimal(client):
    problem = MC_PLAN["problem"]
    solved = client.post("/v1/mincostflow", json=problem).get_json()
    doc = client.post("/v1/verify/mincostflow", json={"problem": problem, "flows": solved["flows"]}).get_json()
    assert doc["optimal"] is True and doc["cost"] == solved["cost"] == 1080


def test_a_wrong_verdict_is_a_500_never_a_200(client, monkeypatch):
    # Fault injection to show the guard fires: the search hands back a path one arc short.
    import service.solvers.verify as verify

    real = verify._path_to
    monkeypatch.setattr(verify, "_path_to", lambda *args: real(*args)[:-1])
    r = client.post("/v1/verify/maxflow", json=PLAN)
    assert r.status_code == 500 and r.get_json()["type"].endswith("self-check-failed")
    monkeypatch.setattr(verify, "_path_to", real)
    assert client.post("/v1/verify/maxflow", json=PLAN).status_code == 200


def test_huge_integers_are_checked_without_wrapping_round():
    # Three arcs of 2**62 into one node: its imbalance (3 * 2**62) does not fit int64.
    big = 2**62
    tail, head = np.array([0, 0, 0, 1]), np.array([1, 1, 1, 2])
    v = verify_max_flow(Graph(3, tail, head, np.array([big] * 4)), 0, 2, np.array([big, big, big, 0]))
    assert not v.feasible and v.node_violations == [(1, pytest.approx(3.0 * big))]
    # A cost of 2**40 on a flow of 2**40 is 2**80: reported as that, not wrapped.
    v = verify_min_cost_flow(Graph(2, np.array([0]), np.array([1]), np.array([2**40]), None, np.array([2**40])),
                             np.array([2**40, -(2**40)]), np.array([2**40]))
    assert v.feasible and v.optimal and v.objective == pytest.approx(2.0**80)
