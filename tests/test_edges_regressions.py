"""Issue 13's examples, one test each, and the checks fed wrong answers at those magnitudes.

Each example was a certified wrong answer or a 500 on the service the issue measured;
the expected values are worked by hand here (small enough to check on paper) or by
networkx on Python integers, as named beside them.
"""

from __future__ import annotations

import numpy as np
import pytest

from service.errors import SelfCheckFailed
from service.solvers import Graph, mincost_checks as checks
from service.solvers.certificates import check_max_flow
from service.solvers.maxflow_lp import LP_TOLERANCE
from service.solvers.multicommodity import Commodities, check_flows, min_cost_model
from tests.http import pointers

BIG = 2**62


def arcs(*triples, cost=None):
    out = [{"from": a, "to": b, "capacity": c} for a, b, c in triples]
    if cost is not None:
        for arc, k in zip(out, cost):
            arc["cost"] = k
    return out


def maxflow(client, *triples):
    r = client.post("/v1/maxflow", json={"source": "s", "sink": "t", "arcs": arcs(*triples)})
    assert r.status_code == 200, r.get_json()
    return r.get_json()


def assert_exact(doc):
    assert doc["certificate"]["checked"] and doc["certificate"]["tolerance"] == 0
    assert doc["engine"]["kind"] == "graph"


# ------------------------------------------------------------------------------ max-flow


def test_a_huge_arc_no_longer_hides_the_flow_around_it(client):
    # s->a 2**62, a->t 3, s->t 5: the cut {s, a} has 3 + 5 = 8, and 8 units flow. Was 5, "checked".
    doc = maxflow(client, ("s", "a", BIG), ("a", "t", 3), ("s", "t", 5))
    assert doc["value"] == 8 and doc["certificate"]["cut_capacity"] == 8 and doc["flows"] == [3, 3, 5]
    assert_exact(doc)


def test_capacities_summing_past_2_62_are_solved_exactly(client):
    # One unrelated huge arc pushes the sum past 2**62 (the LP route, before): still 8.
    doc = maxflow(client, ("s", "a", BIG), ("x", "y", BIG), ("a", "t", 3), ("s", "t", 5))
    assert doc["value"] == 8 and doc["engine"].get("phases", 1) >= 1
    assert_exact(doc)
    # A maximum flow past int64: 2**62 + 2**62 + 1 on parallel lanes (2**63 + 1, exact in the cut).
    doc = maxflow(client, ("s", "t", BIG), ("s", "t", BIG), ("s", "t", 1))
    assert doc["value"] == float(2**63 + 1) and doc["flows"] == [BIG, BIG, 1]
    assert_exact(doc)


def test_a_tiny_capacity_is_not_lost_beside_a_huge_one(client):
    # s->a 0.000001, a->t 1e12: the path carries 0.000001. Was 0.
    doc = maxflow(client, ("s", "a", 0.000001), ("a", "t", 1e12))
    assert doc["value"] == 0.000001 and doc["certificate"]["decimal_scale"] == 10**6
    assert_exact(doc)


@pytest.mark.parametrize("written", [99999999.99, 1000000000.5, 0.000000001, 123456.123456789])
def test_decimals_are_solved_as_written(client, written):
    # Was 100000000 for 99999999.99 and 1000000000 for 1000000000.5, under "tolerance 0".
    doc = maxflow(client, ("s", "a", written), ("a", "t", 1e12))
    assert doc["value"] == written
    assert_exact(doc)


# ------------------------------------------------------------------------- min-cost flow


def mincost(client, nodes, arc_list):
    r = client.post("/v1/mincostflow", json={"nodes": nodes, "arcs": arc_list})
    assert r.status_code == 200, r.get_json()
    return r.get_json()


def test_min_cost_with_decimal_costs_as_written(client):
    # 2 units at 1000000000.5 each cost 2000000001. Was 2000000000.
    doc = mincost(client, [{"id": "s", "supply": 2}, {"id": "t", "supply": -2}],
                  [{"from": "s", "to": "t", "cost": 1000000000.5}])
    assert doc["cost"] == 2000000001 and doc["certificate"]["gap"] == 0
    assert_exact(doc)


def test_an_infeasible_problem_with_a_huge_lane_gets_its_proof(client):
    # 5 units must leave s, whose only lane holds 3 (the lane after it holds 2**62).
    # Was a 500: "the infeasibility proof set has net supply 0.0".
    doc = mincost(client, [{"id": "s", "supply": 5}, {"id": "t", "supply": -5}],
                  arcs(("s", "a", 3), ("a", "t", BIG), cost=[1, 1]))
    assert doc["status"] == "infeasible"
    assert doc["infeasibility"]["net_supply"] == 5 and doc["infeasibility"]["outgoing_capacity"] == 3
    assert doc["infeasibility"]["nodes"] == ["s"]


def test_a_negative_cycle_beside_a_huge_lane_is_proved(client):
    # a <-> b without limits at -1 each: cost -2 per turn, unbounded. Was a 500: "-2.0 is not negative".
    doc = mincost(client, [{"id": "s", "supply": 1}, {"id": "t", "supply": -1}],
                  [{"from": "s", "to": "t", "capacity": BIG, "cost": 1},
                   {"from": "a", "to": "b", "cost": -1}, {"from": "b", "to": "a", "cost": -1}])
    assert doc["status"] == "unbounded" and doc["negative_cycle"]["cost"] == -2
    assert doc["certificate"]["cycle_cost"] == -2


def test_a_huge_lane_on_an_optimal_plan_is_exact(client):
    # 5 units s->t: 3 on the cheap path through a (cost 1 + 1), 2 direct at 5: 6 + 10 = 16.
    doc = mincost(client, [{"id": "s", "supply": 5}, {"id": "t", "supply": -5}],
                  arcs(("s", "a", 3), ("a", "t", BIG), ("s", "t", BIG), cost=[1, 1, 5]))
    assert doc["cost"] == 16 and doc["flows"] == [3, 3, 2]
    assert_exact(doc)


def test_integer_costs_out_of_range_are_a_422_naming_the_field(client):
    r = client.post("/v1/mincostflow", json={
        "nodes": [{"id": "s", "supply": 1}, {"id": "t", "supply": -1}],
        "arcs": [{"from": "s", "to": "t", "cost": BIG - 1}, {"from": "s", "to": "t", "cost": BIG - 3}]})
    assert r.status_code == 422
    error = r.get_json()["errors"][0]
    assert error["pointer"] == "/arcs" and "cost" in error["detail"] and "at most" in error["detail"]


# ------------------------------------------------------------------ LP, multi-commodity


def mc_example(v):
    """Two commodities sharing s->a (capacity v): 7 from s to t, v from s to a."""
    net = Graph(3, np.array([0, 1, 0], np.int32), np.array([1, 2, 2], np.int32), np.array([v, 3.0, 5.0]), None,
                  np.array([1.0, v, 2.0]))
    return net, Commodities(np.array([0, 0]), np.array([2, 1]), np.array([7.0, v]))


@pytest.mark.parametrize("v", [1e16, 1e17, 1e18])
def test_glop_abnormal_stops_are_a_422_naming_the_range_on_multicommodity(client, v):
    body = {"arcs": [{"from": "s", "to": "a", "capacity": v, "cost": 1}, {"from": "a", "to": "t", "capacity": 3,
                                                                          "cost": v},
                     {"from": "s", "to": "t", "capacity": 5, "cost": 2}],
            "commodities": [{"id": "k", "source": "s", "sink": "t", "demand": 7},
                            {"id": "j", "source": "s", "sink": "a", "demand": v}]}
    r = client.post("/v1/multicommodity", json=body)
    assert r.status_code in (200, 422), r.get_json()  # was a 500: "GLOP stopped with status ABNORMAL"
    if r.status_code == 422:
        error = r.get_json()["errors"][0]
        assert error["pointer"] == "/arcs" and "span" in error["detail"] and "1e+08" in error["detail"]
    else:
        assert r.get_json()["certificate"]["checked"]


@pytest.mark.parametrize("v", [1e16, 1e17, 1e18])
def test_glop_abnormal_stops_are_a_422_naming_the_range_on_lp(client, v):
    # The multi-commodity model above, written out as an LP.
    model = min_cost_model(*mc_example(v))
    a = model.matrix.tocoo()

    def finite(values):
        return [x if np.isfinite(x) else None for x in values.tolist()]
    body = {"objective": {"sense": "min", "coefficients": model.c.tolist()},
            "variables": {"name": [f"x{j}" for j in range(model.c.size)]},
            "constraints": {"name": [f"r{i}" for i in range(model.num_rows)], "lower": finite(model.row_lower),
                            "upper": finite(model.row_upper)},
            "matrix": {"row": a.row.tolist(), "column": a.col.tolist(), "value": a.data.tolist()}}
    r = client.post("/v1/lp", json=body)
    assert r.status_code in (200, 422), r.get_json()
    if r.status_code == 422:
        assert r.get_json()["errors"][0]["pointer"] == "/constraints"
    else:
        assert r.get_json()["certificate"]["checked"]


# --------------------------------------------- the checks fail on wrong answers, at scale


def issue_network():
    tail, head = np.array([0, 1, 0], np.int32), np.array([1, 2, 2], np.int32)  # s->a, a->t, s->t
    return tail, head, np.array([BIG, 3, 5], dtype=np.int64)


def test_max_flow_check_refuses_the_certified_wrong_answer_exactly():
    tail, head, cap = issue_network()
    flows = np.array([0, 0, 5])
    for side in ([True, False, False], [True, True, False]):  # cut {s}: 2**62 + 5; cut {s, a}: 8
        with pytest.raises(SelfCheckFailed, match="cut capacity"):
            check_max_flow(Graph(3, tail, head, cap), 0, 2, flows, 5, np.array(side))
    # Imbalance of 3 at a (the issue's max_imbalance 3.0): refused.
    with pytest.raises(SelfCheckFailed, match="conserved"):
        check_max_flow(Graph(3, tail, head, cap), 0, 2, np.array([3, 0, 5]), 8, np.array([True, True, False]))
    good = check_max_flow(Graph(3, tail, head, cap), 0, 2, np.array([3, 3, 5]), 8, np.array([True, True, False]))
    assert good["cut_capacity"] == 8 and good["tolerance"] == 0


def test_max_flow_check_in_lp_mode_measures_each_arc_against_itself():
    # The old tolerance, 1e-6 of the largest capacity (4.6e12), let value 5 pass for 8.
    tail, head, cap = issue_network()
    fcap = cap.astype(np.float64)
    with pytest.raises(SelfCheckFailed):
        check_max_flow(Graph(3, tail, head, fcap), 0, 2, np.array([0.0, 0.0, 5.0]), 5.0,
                       np.array([True, True, False]), LP_TOLERANCE)
    # A tiny capacity beside a huge one (1e-6 then 1e12): value 0 is refused, 1e-6 passes.
    tail2, head2 = np.array([0, 1], np.int32), np.array([1, 2], np.int32)
    cap2 = np.array([1e-6, 1e12])
    with pytest.raises(SelfCheckFailed):
        check_max_flow(Graph(3, tail2, head2, cap2), 0, 2, np.zeros(2), 0.0, np.array([True, False, False]),
                       LP_TOLERANCE)
    ok = check_max_flow(Graph(3, tail2, head2, cap2), 0, 2, np.array([1e-6, 1e-6]), 1e-6,
                        np.array([True, False, False]), LP_TOLERANCE)
    # The largest allowance is the big arc's own (1e-6 of 1e12); the tiny one is held to 1e-12.
    assert ok["relative_tolerance"] == LP_TOLERANCE and ok["tolerance"] == pytest.approx(1e6)
    # A flow 10% over the tiny arc: refused although 1e-7 is nothing beside 1e12.
    with pytest.raises(SelfCheckFailed, match="capacity"):
        check_max_flow(Graph(3, tail2, head2, cap2), 0, 2, np.array([1.1e-6, 1.1e-6]), 1.1e-6,
                       np.array([True, False, False]), LP_TOLERANCE)


def test_min_cost_checks_refuse_wrong_answers_beside_a_huge_lane():
    tail, head = np.array([0, 1, 0], np.int32), np.array([1, 2, 2], np.int32)
    cap = np.array([3, BIG, BIG])
    cost = np.array([1, 1, 5])
    sup = np.array([5, 0, -5])
    good_flows = np.array([3, 3, 2])
    p = np.array([0, 4, 5])  # rc = cost + p[tail] - p[head]: -3 (s->a, full), 0, 0 (inside their bounds)
    certificate = checks.check_min_cost_flow(Graph(3, tail, head, cap, None, cost), sup, good_flows, p)
    assert certificate["primal_cost"] == certificate["dual_bound"] == 16
    for flows in (np.array([3, 3, 1]),  # t receives 4 of its 5
                  np.array([3, 1, 4])):  # s ships 7 of its 5, a keeps 2
        with pytest.raises(SelfCheckFailed):
            checks.check_min_cost_flow(Graph(3, tail, head, cap, None, cost), sup, flows, p)
    # In LP mode, an imbalance of 2 units at a node moving 5 is refused, whatever 2**62 elsewhere.
    with pytest.raises(SelfCheckFailed, match="conserved"):
        checks.check_min_cost_flow(Graph(3, tail, head, cap.astype(float), None, cost.astype(float)),
                                   sup.astype(float), np.array([3.0, 1.0, 2.0]), p.astype(float), LP_TOLERANCE)


def test_proof_checks_are_exact_at_any_scale():
    tail, head = np.array([0, 1], np.int32), np.array([1, 2], np.int32)
    members = np.array([True, False, False])
    # 5 must leave {s}, 3 can: a proof. With 5 able to leave: none, even next to 2**62.
    assert checks.check_infeasible_set(tail, head, np.array([3, BIG]), None, None, np.array([5, 0, -5]),
                                       members)["net_supply"] == 5
    with pytest.raises(SelfCheckFailed, match="net supply"):
        checks.check_infeasible_set(tail, head, np.array([5, BIG]), None, None, np.array([5, 0, -5]), members)
    # Floats are compared by their exact binary values: the doubles 0.1 and 0.2 sum to
    # 0.3000000000000000166..., more than the double 0.3 (0.2999999999999999888...).
    assert checks._exceeds([np.array([0.1, 0.2])], [np.array([0.3])])
    assert not checks._exceeds([np.array([0.25, 0.5])], [np.array([0.75])])
    # A cycle of cost -2 among numbers of 2**62 is negative; one of cost 0 is not.
    unl = np.array([True, True])
    ring_t, ring_h = np.array([0, 1], np.int32), np.array([1, 0], np.int32)
    assert checks.check_negative_cycle(ring_t, ring_h, unl, np.array([BIG - 1, -BIG - 1]), np.array([0, 1])) == -2
    with pytest.raises(SelfCheckFailed, match="not negative"):
        checks.check_negative_cycle(ring_t, ring_h, unl, np.array([BIG, -BIG]), np.array([0, 1]))


def test_multicommodity_check_measures_each_arc_against_its_own_capacity():
    net = Graph(3, np.array([0, 1], np.int32), np.array([1, 2], np.int32), np.array([1e-6, 1e12]), None,
                  np.array([1.0, 1.0]))
    com = Commodities(np.array([0]), np.array([2]), np.array([1e-6]))
    lp = {"primal_residual": 0.0, "dual_residual": 0.0, "dual_objective": 2e-6, "gap": 0.0,
          "duals_unique": False, "degenerate": False, "tolerance": {"gap": 1e-12}}
    prices = np.zeros(2)
    good = check_flows(net, com, np.array([[1e-6, 1e-6]]), com.demands, prices, lp)
    assert good["relative_tolerance"] > 0 and good["tolerance"] == pytest.approx(1e6)  # the big arc's own
    # 10% over the tiny arc: the old tolerance (1e-6 of 1e12 = 1e6) let it pass.
    with pytest.raises(SelfCheckFailed, match="capacity"):
        check_flows(net, com, np.array([[1.1e-6, 1.1e-6]]), np.array([1.1e-6]), prices, lp)
    with pytest.raises(SelfCheckFailed, match="conserved"):
        check_flows(net, com, np.array([[1e-6, 0.5e-6]]), com.demands, prices, lp)


# ---------------------------------------------------------------------------- assignment


def test_assignment_with_costs_near_2_62_is_exact(client):
    # Worked by hand: a-x + b-y = 2B - 7 beats a-y + b-x = 2B - 4 (B = 2**62). Before,
    # these went to GLOP in doubles, where both totals are the same number.
    r = client.post("/v1/assignment", json={"agents": ["a", "b"], "tasks": ["x", "y"],
                                            "costs": [[BIG, BIG - 1], [BIG - 3, BIG - 7]]})
    doc = r.get_json()
    assert r.status_code == 200 and doc["total_cost"] == 2 * BIG - 7
    assert [(p["agent"], p["task"]) for p in doc["assignments"]] == [("a", "x"), ("b", "y")]
    assert doc["certificate"]["gap"] == 0 and doc["certificate"]["tolerance"] == 0
    # By pairs: y is b's only task, so a takes x: B + (B - 1).
    r = client.post("/v1/assignment", json={"agents": ["a", "b"], "tasks": ["x", "y"], "pairs": [
        {"agent": "a", "task": "x", "cost": BIG}, {"agent": "b", "task": "y", "cost": BIG - 1},
        {"agent": "a", "task": "y", "cost": BIG - 3}]})
    assert r.status_code == 200 and r.get_json()["total_cost"] == 2 * BIG - 1


def test_assignment_costs_beyond_the_exact_range_are_a_422_naming_the_costs(client):
    r = client.post("/v1/assignment", json={"agents": ["a", "b"], "tasks": ["x", "y"],
                                            "costs": [[1e-9, 1e12], [1e12, 0.5]]})
    assert r.status_code == 422
    error = r.get_json()["errors"][0]
    assert error["pointer"] == "/costs" and "pair 1" in error["detail"] and "at most" in error["detail"]


def test_lp_route_proofs_are_exact_beside_a_huge_lane(client):
    # Costs of 1/3 are not decimals: the LP engine solves, but its proofs come from an
    # exact max-flow and exact sums, so the huge lane cannot loosen them.
    doc = mincost(client, [{"id": "s", "supply": 5}, {"id": "t", "supply": -5}],
                  arcs(("s", "a", 3), ("a", "t", BIG), cost=[1 / 3, 1]))
    assert doc["status"] == "infeasible" and doc["engine"]["kind"] == "lp"
    assert doc["infeasibility"]["net_supply"] == 5 and doc["infeasibility"]["outgoing_capacity"] == 3
    doc = mincost(client, [{"id": "s", "supply": 1}, {"id": "t", "supply": -1}],
                  [{"from": "s", "to": "t", "capacity": BIG, "cost": 1 / 3},
                   {"from": "a", "to": "b", "cost": -1 / 3}, {"from": "b", "to": "a", "cost": -1 / 3}])
    assert doc["status"] == "unbounded" and doc["negative_cycle"]["cost"] == -2 / 3


@pytest.mark.parametrize("body,side", [
    # More agents than tasks, all agents required: was a 500 (the square solver was asked).
    ({"agents": ["a", "b", "c"], "tasks": ["x"], "costs": [[4], [4], [1]], "options": {"require": "agents"}},
     "agents"),
    # More tasks than agents, all tasks required: was a 500 ("the Hall-violating set is empty").
    ({"agents": ["a"], "tasks": ["x", "y"], "costs": [[3, 7]], "options": {"require": "tasks"}}, "tasks"),
])
def test_an_impossible_required_side_is_proved_not_a_500(client, body, side):
    r = client.post("/v1/assignment", json=body)
    doc = r.get_json()
    assert r.status_code == 200 and doc["status"] == "infeasible" and doc["infeasibility"]["side"] == side
    assert len(doc["infeasibility"]["allowed"]) < len(doc["infeasibility"]["members"])


def test_a_common_factor_past_int64_is_reported_not_a_500(client):
    # Costs 1e-9 and about 4.6e18 scale (by 10**9) past int64; reduced per agent and task,
    # one cost is left, divided out by itself (a factor past int64). Worked by hand:
    # a-x + b-y = 1e-9 + 0.1 beats a-y + b-x = 0 + 4.6e18.
    r = client.post("/v1/assignment", json={"agents": ["a", "b"], "tasks": ["x", "y"],
                                            "costs": [[1e-9, 0], [4.611686018427388e18, 0.1]]})
    doc = r.get_json()
    assert r.status_code == 200 and doc["total_cost"] == 0.100000001 and doc["certificate"]["gap"] == 0


def test_assignment_costs_spanning_past_exact_duals_are_a_422_not_a_500(client):
    # Found by the contract slice's hypothesis run: costs 1e-9 and 2**62 in one maximised
    # problem gave duals past 2**53 as doubles, and the self-check (rightly) failed: a 500.
    body = {"agents": ["a0", "a1", "a2"], "tasks": ["t0", "t1"],
            "costs": [[1e-09, 4.611686018427388e+18], [None, 1e-09], [None, None]],
            "options": {"maximize": True, "require": "tasks"}}
    r = client.post("/v1/assignment", json=body)
    assert r.status_code == 422 and pointers(r) == ["/costs"]
    body["options"]["maximize"] = False  # the same costs minimised stay within range: solved
    r = client.post("/v1/assignment", json=body)
    assert r.status_code == 200 and r.get_json()["total_cost"] == 2e-9
