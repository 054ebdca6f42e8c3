"""Single-arc closures (the resilience solver) against re-solving without each arc.

Reference: networkx.maximum_flow_value on the network without the arc, for every arc
(the naive way the solver avoids). Theorems used as checks: max-flow = min-cut (each
reported cut of the network without the arc has capacity value_without, and removing
its arcs disconnects the sink), and integrality (integer data, integer losses).
"""

from __future__ import annotations

import doctest

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

import service.solvers.closure_checks as closure_checks_module
import service.solvers.resilience as resilience
from service.errors import InputError, SelfCheckFailed
from service.solvers.closure_checks import ClosureChecks
from service.solvers.resilience import arc_closures
from tests.planning_reference import nx_values_without


def random_network(rng, n, m, max_cap=20, unlimited_share=0.0):
    tail = rng.integers(0, n, m).astype(np.int32)
    head = rng.integers(0, n, m).astype(np.int32)
    cap = rng.integers(0, max_cap + 1, m).astype(np.int64)
    unlimited = rng.random(m) < unlimited_share if unlimited_share else None
    if unlimited is not None:
        cap[unlimited] = 0
        unlimited = unlimited if unlimited.any() else None
    return tail, head, cap, unlimited


def values_without(solution, m) -> np.ndarray:
    full = np.full(m, solution.value)
    full[solution.failing] = solution.value_without
    return full


def assert_cuts_hold(n, tail, head, cap, s, t, solution) -> None:
    """Each failure's cut, checked by hand: its arcs' capacities sum to value_without,
    and without them (and the closed arc) nothing reaches the sink."""
    for arc, value_without, cut in zip(solution.failing, solution.value_without, solution.cuts):
        assert arc not in cut
        assert int(cap[cut].sum()) == value_without
        g = nx.DiGraph()
        g.add_nodes_from(range(n))
        g.add_edges_from((int(tail[a]), int(head[a])) for a in range(tail.size)
                         if a != arc and a not in set(cut.tolist()) and cap[a] > 0)
        assert not nx.has_path(g, s, t)


def check_against_reference(n, tail, head, cap, unlimited, s=0, t=None):
    t = n - 1 if t is None else t
    solution, certificate = arc_closures(n, tail, head, cap, unlimited, s, t)
    if solution.status == "unbounded":
        return solution
    assert np.array_equal(values_without(solution, tail.size), nx_values_without(n, tail, head, cap, unlimited, s, t))
    assert np.array_equal(solution.loss, solution.value - solution.value_without)
    assert (solution.loss > 0).all()
    order = np.lexsort((solution.failing, -solution.loss))
    assert np.array_equal(order, np.arange(solution.failing.size)), "worst first, ties by arc index"
    assert certificate["checked"] and certificate["closures_checked"] == tail.size
    assert certificate["cuts_checked"] == solution.failing.size
    assert_cuts_hold(n, tail, head, np.where(unlimited, 10**12, cap) if unlimited is not None else cap, s, t,
                     solution)
    return solution


@pytest.mark.parametrize("seed", range(6))
def test_every_value_without_equals_networkx_re_solved_without_the_arc(seed):
    rng = np.random.default_rng(seed)
    for _ in range(25):
        n, m = int(rng.integers(2, 16)), int(rng.integers(1, 60))
        check_against_reference(n, *random_network(rng, n, m, unlimited_share=0.08 if seed % 2 else 0.0))


@pytest.mark.parametrize("seed", range(3))
def test_the_group_tests_alone_agree_with_networkx(monkeypatch, seed):
    # Without the min-cost rounds every arc inside a residual component goes through
    # the group tests (and single-arc reroutes when a group fails).
    monkeypatch.setattr(resilience, "_reroute_rounds", lambda *a: (a[8], a[9]))
    rng = np.random.default_rng(100 + seed)
    tests = 0
    for _ in range(20):
        n, m = int(rng.integers(4, 20)), int(rng.integers(10, 70))
        solution = check_against_reference(n, *random_network(rng, n, m, unlimited_share=0.05))
        tests += solution.stats.get("group_tests", 0)
    assert tests > 0


def test_single_arc_tests_agree_with_networkx(monkeypatch):
    monkeypatch.setattr(resilience, "_reroute_rounds", lambda *a: (a[8], a[9]))
    monkeypatch.setattr(resilience, "GROUP_START", 1)
    rng = np.random.default_rng(7)
    for _ in range(20):
        n, m = int(rng.integers(4, 14)), int(rng.integers(10, 50))
        check_against_reference(n, *random_network(rng, n, m))


def test_a_larger_random_network_with_many_parallel_arcs():
    rng = np.random.default_rng(11)
    n, m = 40, 260
    tail, head, cap, _ = random_network(rng, n, m, max_cap=30)
    tail[:30], head[30:60] = 0, n - 1  # a busy source and sink, as in the benchmark
    solution = check_against_reference(n, tail, head, cap, None)
    assert solution.stats["carrying"] > 0


# Introduction to Algorithms (Cormen, Leiserson, Rivest, Stein), 3rd ed., Figure 26.1,
# maximum flow 23 (capacities recalled from memory). The losses are checked against
# networkx above; here the figures a planner would read off.
CLRS_26_1 = [(0, 1, 16), (0, 2, 13), (1, 3, 12), (2, 1, 4), (2, 4, 14), (3, 2, 9), (3, 5, 20), (4, 3, 7), (4, 5, 4)]


def test_textbook_network():
    tail, head, cap = (np.array(x) for x in zip(*CLRS_26_1))
    solution = check_against_reference(6, tail.astype(np.int32), head.astype(np.int32), cap.astype(np.int64), None)
    assert solution.value == 23
    # Worst: v3 -> t (20), leaving only v4 -> t (4); then v1 -> v3 (12): 23 -> 11.
    assert solution.failing[:2].tolist() == [6, 2] and solution.value_without[:2].tolist() == [4, 11]


def test_a_lane_with_no_alternative_loses_all_its_flow_and_a_parallel_lane_shares_it():
    # s -> a twice (parallel, 4 and 6), a -> t (8): closing one parallel lane loses only
    # what the other cannot take over.
    tail, head = np.array([0, 0, 1], np.int32), np.array([1, 1, 2], np.int32)
    solution, _ = arc_closures(3, tail, head, np.array([4, 6, 8]), None, 0, 2)
    assert solution.value == 8
    assert dict(zip(solution.failing.tolist(), solution.loss.tolist())) == {2: 8, 1: 4, 0: 2}


def test_decimals_are_solved_exactly_and_reported_in_the_caller_units():
    tail, head = np.array([0, 0, 1], np.int32), np.array([1, 1, 2], np.int32)
    solution, certificate = arc_closures(3, tail, head, np.array([0.4, 0.6, 0.8]), None, 0, 2)
    assert solution.value == pytest.approx(0.8)
    assert solution.loss.tolist() == pytest.approx([0.8, 0.4, 0.2])
    assert certificate["decimal_scale"] == 10


def test_too_many_decimals_are_refused_naming_the_arcs():
    with pytest.raises(InputError) as info:
        arc_closures(2, np.array([0], np.int32), np.array([1], np.int32), np.array([0.1234567891]), None, 0, 1)
    assert info.value.errors[0].pointer == "/arcs"


def test_an_unlimited_path_is_unbounded_and_lists_no_closures():
    tail, head = np.array([0, 1, 0], np.int32), np.array([1, 2, 2], np.int32)
    solution, certificate = arc_closures(3, tail, head, np.array([0, 0, 5]), np.array([True, True, False]), 0, 2)
    assert solution.status == "unbounded" and solution.value is None
    assert solution.unbounded_path.tolist() == [0, 1] and solution.failing.size == 0
    assert certificate["checked"]


def test_self_loops_and_zero_capacities_never_matter():
    tail, head = np.array([0, 1, 1, 0], np.int32), np.array([1, 1, 2, 2], np.int32)
    solution = check_against_reference(3, tail, head, np.array([5, 9, 5, 0]), None)
    assert 1 not in solution.failing.tolist() and 3 not in solution.failing.tolist()


@settings(max_examples=60, deadline=None)
@given(st.integers(2, 7).flatmap(lambda n: st.tuples(
    st.just(n),
    st.lists(st.tuples(st.integers(0, n - 1), st.integers(0, n - 1), st.integers(0, 6)), min_size=1, max_size=18))))
def test_property_losses_match_networkx(case):
    n, arcs = case
    tail, head, cap = (np.array(x) for x in zip(*arcs))
    check_against_reference(n, tail.astype(np.int32), head.astype(np.int32), cap.astype(np.int64), None)


# The checker must be able to fail: feed it wrong witnesses and cuts.

def _checks():
    # s=0 -> 1 -> t=2 (5 each) and s -> t (3): value 8.
    tail, head, cap = np.array([0, 1, 0]), np.array([1, 2, 2]), np.array([5, 5, 3], np.int64)
    return ClosureChecks(3, tail, head, cap, None, 0, 2, 8), np.array([5, 5, 3], np.int64)


def test_checker_rejects_a_flow_that_is_not_maximum():
    checks, _ = _checks()
    with pytest.raises(SelfCheckFailed, match="value"):
        checks.witness(np.array([4, 4, 3], np.int64))


def test_checker_rejects_a_flow_over_capacity_or_not_conserved():
    checks, _ = _checks()
    with pytest.raises(SelfCheckFailed, match="capacity"):
        checks.witness(np.array([6, 6, 2], np.int64))
    with pytest.raises(SelfCheckFailed, match="conserved|value"):
        checks.witness(np.array([5, 4, 3], np.int64))


def test_checker_rejects_a_cut_of_the_wrong_capacity_or_side():
    checks, flows = _checks()
    checks.witness(flows)
    side = np.array([True, False, False])  # {s}: arcs 0 and 2 leave it
    assert checks.cut(0, side, 3).tolist() == [2]
    with pytest.raises(SelfCheckFailed, match="capacity"):
        checks.cut(0, side, 4)
    with pytest.raises(SelfCheckFailed, match="separate"):
        checks.cut(0, np.array([True, False, True]), 3)


def test_checker_rejects_a_loss_no_witness_supports_and_an_unlisted_arc():
    checks, flows = _checks()
    checks.witness(flows)
    side = np.array([True, False, False])
    checks.cut(0, side, 3)
    checks.cut(1, np.array([True, True, False]), 3)
    checks.cut(2, side, 5)
    # Claiming arc 0 loses 4 (the only witness carries 5 on it).
    with pytest.raises(SelfCheckFailed, match="least flow"):
        checks.finish(np.array([0, 1, 2]), np.array([4, 5, 3]))
    # Leaving arc 2 out although every checked flow uses it.
    with pytest.raises(SelfCheckFailed, match="not listed"):
        checks.finish(np.array([0, 1]), np.array([5, 5]))
    # Claiming a loss whose cut was not checked.
    fresh, _ = _checks()
    fresh.witness(flows)
    with pytest.raises(SelfCheckFailed, match="no checked cut"):
        fresh.finish(np.array([0, 1, 2]), np.array([5, 5, 3]))
    assert checks.finish(np.array([0, 1, 2]), np.array([5, 5, 3]))["cuts_checked"] == 3


def test_a_wrong_loss_from_the_solver_is_caught(monkeypatch):
    # Break the solver: report every rerouted arc's loss as one unit higher.
    real = resilience._group_tests

    def broken(solver, left, psi, value, loss, cuts, checks, deadline):
        tests = real(solver, left, psi, value, loss, cuts, checks, deadline)
        loss[left] += 1
        return tests

    monkeypatch.setattr(resilience, "_reroute_rounds", lambda *a: (a[8], a[9]))
    monkeypatch.setattr(resilience, "_group_tests", broken)
    tail, head = np.array([0, 0, 1, 2, 1], np.int32), np.array([1, 2, 3, 3, 2], np.int32)
    with pytest.raises(SelfCheckFailed):
        arc_closures(4, tail, head, np.array([5, 3, 4, 4, 2]), None, 0, 3)


def test_module_examples():
    for module in (resilience, closure_checks_module):
        assert doctest.testmod(module).failed == 0
