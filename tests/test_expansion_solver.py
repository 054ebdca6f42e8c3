"""Capacity expansion against outside references (no Flask).

References: networkx.network_simplex on the network with a parallel added-capacity arc
per widenable lane (linear charges); scipy.optimize.milp (HiGHS) on the fixed-charge
model (one-off charges); networkx.maximum_flow_value on the fully widened network
(infeasibility). Every answer is replayed by hand: the widened network carries the
target, additions only where allowed and within expand_max.
"""

from __future__ import annotations

import doctest

import numpy as np
import pytest

import service.solvers.expansion as expansion
from service.deadline import Deadline
from service.errors import InputError, SelfCheckFailed
from service.solvers.expansion import Lanes, cheapest_expansion
from service.solvers.expansion_checks import check_plan, check_shortfall_cut
from tests.planning_reference import nx_augmented_cost, nx_fully_widened_value, replay, scipy_fixed_charge_cost


def random_lanes(rng, n, m, *, widen_share=0.6, unlimited_share=0.0, free_max_share=0.2, fixed=False, target=None):
    tail = rng.integers(0, n, m)
    head = rng.integers(0, n, m)
    capacity = rng.integers(0, 12, m)
    unlimited = rng.random(m) < unlimited_share
    capacity[unlimited] = 0
    widenable = rng.random(m) < widen_share
    expand_cost = np.where(widenable, rng.integers(0, 9, m), 0)
    expand_unlimited = widenable & (rng.random(m) < free_max_share)
    expand_max = np.where(widenable & ~expand_unlimited, rng.integers(0, 15, m), 0)
    expand_fixed = np.where(widenable, rng.integers(0, 30, m), 0) if fixed else None
    target = int(rng.integers(0, 40)) if target is None else target
    return Lanes(n, tail, head, capacity, unlimited if unlimited.any() else None, widenable, expand_cost, expand_max,
                 expand_unlimited, expand_fixed, 0, n - 1, target)


@pytest.mark.parametrize("seed", range(8))
def test_linear_charges_equal_network_simplex_on_the_augmented_network(seed):
    rng = np.random.default_rng(seed)
    for _ in range(15):
        n, m = int(rng.integers(2, 12)), int(rng.integers(1, 40))
        lanes = random_lanes(rng, n, m, unlimited_share=0.08 if seed % 2 else 0.0)
        solution, certificate = cheapest_expansion(lanes)
        reference = nx_augmented_cost(lanes)
        if reference is None:
            assert solution.status == "infeasible"
            assert solution.value == nx_fully_widened_value(lanes) < lanes.target
            assert certificate["cut_capacity"] == solution.value and certificate["shortfall"] > 0
            continue
        assert solution.status == "optimal"
        assert solution.cost == reference == certificate["dual_bound"]
        replay(lanes, solution)


@pytest.mark.parametrize("seed", range(6))
def test_one_off_charges_equal_scipy_milp(seed):
    rng = np.random.default_rng(50 + seed)
    checked = 0
    for _ in range(10):
        n, m = int(rng.integers(3, 10)), int(rng.integers(4, 30))
        lanes = random_lanes(rng, n, m, fixed=True, unlimited_share=0.05)
        solution, certificate = cheapest_expansion(lanes)
        reference = scipy_fixed_charge_cost(lanes)
        if reference is None:
            assert solution.status == "infeasible"
            continue
        assert solution.status == "optimal" and solution.gap == 0
        assert solution.cost == pytest.approx(reference, abs=1e-6)
        assert solution.bound == solution.cost and certificate["own_bound"] <= solution.cost
        replay(lanes, solution)
        checked += 1
    assert checked


def test_a_worked_example_by_hand():
    # Depot 0 -> hub 1 -> store 2 (5 then 4 today) and a direct lane 0 -> 2 (2 today).
    # 8 must move. Widening 1 -> 2 costs 3 a unit (up to 10 more), 0 -> 2 costs 7.
    # Cheapest: 5 through the hub (add 1 at 3) and 3 direct (add 1 at 7): 10.
    lanes = Lanes(3, np.array([0, 1, 0]), np.array([1, 2, 2]), np.array([5, 4, 2]), None,
                  np.array([False, True, True]), np.array([0, 3, 7]), np.array([0, 10, 10]), np.zeros(3, bool),
                  None, 0, 2, 8)
    solution, certificate = cheapest_expansion(lanes)
    assert (solution.status, solution.cost, solution.additions.tolist()) == ("optimal", 10, [0, 1, 1])
    # One more unit costs 7 (the direct lane), which the potentials say: p[sink] - p[source].
    assert solution.potentials[2] - solution.potentials[0] == 7
    # With a one-off charge of 100 on the hub lane it pays to widen only the direct one.
    charged = Lanes(**{**lanes.__dict__, "expand_fixed": np.array([0, 100, 1])})
    solution, certificate = cheapest_expansion(charged)
    assert (solution.status, solution.cost, solution.additions.tolist()) == ("optimal", 15, [0, 0, 2])


def test_a_target_already_within_reach_costs_nothing():
    lanes = Lanes(2, np.array([0]), np.array([1]), np.array([5]), None, np.array([True]), np.array([4]),
                  np.array([0]), np.array([True]), None, 0, 1, 5)
    solution, _ = cheapest_expansion(lanes)
    assert solution.cost == 0 and solution.additions.tolist() == [0] and solution.flows.tolist() == [5]


def test_infeasible_comes_with_the_cut_that_proves_it():
    lanes = Lanes(3, np.array([0, 1, 0]), np.array([1, 2, 2]), np.array([5, 4, 2]), None,
                  np.array([False, True, True]), np.array([0, 3, 7]), np.array([0, 10, 3]), np.zeros(3, bool),
                  None, 0, 2, 20)
    solution, certificate = cheapest_expansion(lanes)
    assert solution.status == "infeasible" and solution.cost is None
    assert solution.value == 10 == nx_fully_widened_value(lanes)
    assert solution.cut_arcs.tolist() == [0, 2] and certificate["shortfall"] == 10


def test_decimals_are_scaled_exactly():
    lanes = Lanes(3, np.array([0, 1, 0]), np.array([1, 2, 2]), np.array([0.5, 0.4, 0.2]), None,
                  np.array([False, True, True]), np.array([0.3, 0.3, 0.75]), np.array([0, 1.0, 1.0]),
                  np.zeros(3, bool), None, 0, 2, 0.8)
    solution, certificate = cheapest_expansion(lanes)
    # 0.5 via the hub (add 0.1 at 0.3) and 0.3 direct (add 0.1 at 0.75): 0.105.
    assert solution.cost == pytest.approx(0.105) and solution.additions.tolist() == pytest.approx([0, 0.1, 0.1])
    assert certificate["decimal_scale"] == 10 and certificate["cost_scale"] == 100


def test_too_many_decimals_are_refused():
    # Decimals of up to 9 places are scaled exactly (solvers/scaling.py); 10 are refused.
    lanes = Lanes(2, np.array([0]), np.array([1]), np.array([0.1234567891]), None, np.array([True]), np.array([1]),
                  np.array([1]), np.array([False]), None, 0, 1, 1)
    with pytest.raises(InputError) as info:
        cheapest_expansion(lanes)
    assert info.value.errors[0].pointer == "/arcs"


def test_when_the_search_finds_nothing_in_time_the_first_plan_is_feasible(monkeypatch):
    # A stand-in for a search stopped by its time limit before any solution: the plan
    # for per-unit charges alone is returned, with its own proved bound.
    monkeypatch.setattr(expansion, "_search", lambda *a: (None, None, "UNKNOWN"))
    lanes = Lanes(3, np.array([0, 1, 0]), np.array([1, 2, 2]), np.array([5, 4, 2]), None,
                  np.array([False, True, True]), np.array([0, 3, 7]), np.array([0, 10, 10]), np.zeros(3, bool),
                  np.array([0, 100, 1]), 0, 2, 8)
    solution, certificate = cheapest_expansion(lanes)
    assert solution.status == "feasible" and solution.cost == 111 and solution.bound == 10
    assert solution.gap == pytest.approx((111 - 10) / 111)
    replay(lanes, solution)


def test_a_real_time_limit_still_answers_with_a_checked_plan():
    rng = np.random.default_rng(3)
    lanes = random_lanes(rng, 150, 900, widen_share=1.0, fixed=True, target=400)
    lanes.tail[:40], lanes.head[40:80] = 0, 149
    solution, certificate = cheapest_expansion(lanes, deadline=Deadline.after(0.05))
    if solution.status != "infeasible":
        assert solution.status in ("optimal", "feasible") and solution.bound <= solution.cost
        replay(lanes, solution)


# The checks must be able to fail.

def _plan_args(flows, additions, target=8):
    return (3, np.array([0, 1, 0]), np.array([1, 2, 2]), np.array([5, 4, 2]), None, np.array([False, True, True]),
            np.array([0, 3, 7]), np.array([0, 10, 10]), np.zeros(3, bool), None, 0, 2, target,
            np.array(flows), np.array(additions))


def test_plan_check_accepts_the_optimum_and_rejects_broken_plans():
    assert check_plan(*_plan_args([5, 5, 3], [0, 1, 1]))["cost"] == 10
    with pytest.raises(SelfCheckFailed, match="may not be"):
        check_plan(*_plan_args([6, 5, 2], [1, 1, 0]))
    with pytest.raises(SelfCheckFailed, match="expand_max"):
        check_plan(*_plan_args([5, 5, 3], [0, 11, 1]))
    with pytest.raises(SelfCheckFailed, match="widened capacity"):
        check_plan(*_plan_args([5, 5, 3], [0, 1, 0]))
    with pytest.raises(SelfCheckFailed, match="target"):
        check_plan(*_plan_args([5, 5, 2], [0, 1, 0]))
    with pytest.raises(SelfCheckFailed, match="negative"):
        check_plan(*_plan_args([5, 5, 3], [0, 1, -1]))


def test_shortfall_check_rejects_a_cut_that_proves_nothing():
    tail, head, full = np.array([0, 1, 0]), np.array([1, 2, 2]), np.array([5, 14, 5])
    assert check_shortfall_cut(tail, head, full, None, 0, 2, np.array([True, False, False]), 20)["shortfall"] == 10
    with pytest.raises(SelfCheckFailed, match="not below"):
        check_shortfall_cut(tail, head, full, None, 0, 2, np.array([True, False, False]), 10)
    with pytest.raises(SelfCheckFailed, match="separate"):
        check_shortfall_cut(tail, head, full, None, 0, 2, np.array([True, False, True]), 20)


def test_module_examples():
    assert doctest.testmod(expansion).failed == 0
