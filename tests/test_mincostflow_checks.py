"""The service's own min-cost checks must FAIL on wrong answers, not only pass on right ones."""

from __future__ import annotations

import numpy as np
import pytest

from service.errors import SelfCheckFailed
from service.solvers import Graph, mincost_checks as checks
from service.solvers.mincost import min_cost_flow
from service.solvers.potentials import node_potentials

# A small transshipment problem: 0 -> {1, 2} -> 3, plus a shortcut 0 -> 3.
TAIL = np.array([0, 0, 1, 2, 0], np.int32)
HEAD = np.array([1, 2, 3, 3, 3], np.int32)
CAP = np.array([4, 4, 3, 4, 2])
COST = np.array([1, 2, 1, 1, 5])
SUP = np.array([6, 0, 0, -6])


@pytest.fixture
def solved():
    sol, cert = min_cost_flow(Graph(4, TAIL, HEAD, CAP, None, COST), SUP)
    assert sol.status == "optimal" and cert["gap"] == 0
    return sol


def check(flows, potentials, lower=None):
    return checks.check_min_cost_flow(Graph(4, TAIL, HEAD, CAP, None, COST, lower), SUP, flows, potentials)


def test_right_answer_passes(solved):
    cert = check(solved.flows, solved.potentials)
    assert cert["primal_cost"] == cert["dual_bound"] == solved.cost


def test_broken_conservation_fails(solved):
    flows = solved.flows.copy()
    flows[0] -= 1
    with pytest.raises(SelfCheckFailed, match="conserved"):
        check(flows, solved.potentials)


def test_capacity_violation_fails(solved):
    flows = solved.flows.copy()
    flows[2] += 1  # 1 -> 3 over its capacity, rebalanced through 0 -> 1 and away from 0 -> 2 -> 3
    flows[0] += 1
    flows[1] -= 1
    flows[3] -= 1
    with pytest.raises(SelfCheckFailed, match="outside"):
        check(flows, solved.potentials)


def test_feasible_but_costlier_flow_fails(solved):
    flows = solved.flows.copy()
    # Move one unit from the cheap path 0 -> 1 -> 3 onto the expensive shortcut 0 -> 3.
    assert flows[0] > 0 and flows[4] < CAP[4]
    flows[0] -= 1
    flows[2] -= 1
    flows[4] += 1
    with pytest.raises(SelfCheckFailed):
        check(flows, solved.potentials)


def test_perturbed_potential_fails(solved):
    for node in range(4):
        p = solved.potentials.copy()
        p[node] += 1
        with pytest.raises(SelfCheckFailed):
            check(solved.flows, p)


def test_lower_bound_violation_fails(solved):
    lower = np.array([0, 0, 0, 0, 1])
    with pytest.raises(SelfCheckFailed, match="outside"):
        check(solved.flows, solved.potentials, lower)


def test_potentials_refuse_a_non_optimal_flow():
    # Flow on the expensive shortcut while a cheaper path has room: the residual network
    # has a negative cycle, so no potentials exist.
    flows = np.array([2, 2, 2, 2, 2])
    with pytest.raises(SelfCheckFailed, match="negative cycle"):
        node_potentials(Graph(4, TAIL, HEAD, CAP, None, COST), flows)


def test_infeasible_set_check_rejects_a_set_that_proves_nothing():
    members = np.array([True, False, False, False])
    with pytest.raises(SelfCheckFailed):
        checks.check_infeasible_set(TAIL, HEAD, CAP, None, None, SUP, members)  # 6 <= 4 + 4 + 2
    small = np.array([5, 5, 3, 4, 0])
    proof = checks.check_infeasible_set(TAIL, HEAD, small, None, None, np.array([12, 0, 0, -12]), members)
    assert proof["net_supply"] == 12 and proof["outgoing_capacity"] == 10


def test_infeasible_set_with_an_unlimited_arc_leaving_fails():
    members = np.array([True, False, False, False])
    unl = np.array([False, False, False, False, True])
    with pytest.raises(SelfCheckFailed, match="without a capacity limit"):
        checks.check_infeasible_set(TAIL, HEAD, CAP, unl, None, np.array([99, 0, 0, -99]), members)


def test_negative_cycle_check_fails_on_bad_cycles():
    tail = np.array([0, 1, 1], np.int32)
    head = np.array([1, 0, 2], np.int32)
    unl = np.array([True, True, True])
    cost = np.array([-2, 1, 0])
    assert checks.check_negative_cycle(tail, head, unl, cost, np.array([0, 1])) == -1
    with pytest.raises(SelfCheckFailed, match="closed"):
        checks.check_negative_cycle(tail, head, unl, cost, np.array([0, 2]))
    with pytest.raises(SelfCheckFailed, match="not negative"):
        checks.check_negative_cycle(tail, head, unl, np.array([-1, 1, 0]), np.array([0, 1]))
    with pytest.raises(SelfCheckFailed, match="capacity limit"):
        checks.check_negative_cycle(tail, head, np.array([True, False, True]), cost, np.array([0, 1]))


def test_shipped_cut_check_fails_when_amount_is_not_the_cut():
    members = np.array([True, False, False, False])
    assert checks.check_shipped_cut(TAIL, HEAD, CAP, None, None, members, 0, 3, 10) == 10
    with pytest.raises(SelfCheckFailed, match="differs"):
        checks.check_shipped_cut(TAIL, HEAD, CAP, None, None, members, 0, 3, 9)
    with pytest.raises(SelfCheckFailed, match="separate"):
        checks.check_shipped_cut(TAIL, HEAD, CAP, None, None, ~members, 0, 3, 10)


def test_exact_dot_switches_to_python_integers_before_overflow():
    a = np.array([2**61, 2**61, 2**61], dtype=np.int64)
    b = np.array([3, 3, -1], dtype=np.int64)
    assert checks.exact_dot(a, b) == 5 * 2**61  # int64 would overflow on the way


@pytest.mark.parametrize("shape", [(40, 40), (200, 5)])
def test_potentials_on_grids_prove_optimality(shape):
    """Grid-like networks (long flow paths): the potentials satisfy reduced-cost optimality
    on every arc and close the duality gap (LP strong duality)."""
    rows, cols = shape
    rng = np.random.default_rng(rows)
    idx = np.arange(rows * cols).reshape(rows, cols)
    pairs = [(idx[:, :-1], idx[:, 1:]), (idx[:, 1:], idx[:, :-1]), (idx[:-1], idx[1:]), (idx[1:], idx[:-1])]
    tail = np.concatenate([a.ravel() for a, _ in pairs]).astype(np.int32)
    head = np.concatenate([b.ravel() for _, b in pairs]).astype(np.int32)
    cap = rng.integers(5, 30, tail.size)
    cost = rng.integers(-2, 20, tail.size)
    sup = np.zeros(rows * cols, np.int64)
    amount = rng.integers(1, 6, rows)
    sup[idx[:, 0]] = amount
    sup[idx[:, -1]] = -amount
    sol, cert = min_cost_flow(Graph(rows * cols, tail, head, cap, None, cost), sup)
    assert sol.status == "optimal" and cert["gap"] == 0 and cert["slackness_violations"] == 0
    rc = cost + sol.potentials[tail] - sol.potentials[head]
    assert np.all(rc[sol.flows < cap] >= 0) and np.all(rc[sol.flows > 0] <= 0)
