"""Max-flow solvers against outside references and the theorems (no Flask).

References: networkx.maximum_flow, scipy.sparse.csgraph.maximum_flow, a textbook
worked example, and the max-flow min-cut and integrality theorems as checks.
"""

from fractions import Fraction

import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import given, settings, strategies as st
from scipy.sparse.csgraph import maximum_flow as scipy_maximum_flow

from service.errors import SelfCheckFailed
from service.solvers import Graph, maximum_flow
from service.solvers.certificates import check_max_flow
from tests.checkers import assert_cut, assert_exact_max_flow, assert_integral, assert_max_flow
from tests.references import max_flow_value

ENGINES = ["graph", "lp"]


def arrays(arcs):
    tail = np.array([a[0] for a in arcs], dtype=np.int32)
    head = np.array([a[1] for a in arcs], dtype=np.int32)
    cap = [a[2] for a in arcs]
    unlimited = np.array([c is None for c in cap])
    values = np.array([0 if c is None else c for c in cap])
    return tail, head, values, (unlimited if unlimited.any() else None)


def solve(n, arcs, s, t, engine="auto"):
    tail, head, cap, unlimited = arrays(arcs)
    return maximum_flow(Graph(n, tail, head, cap, unlimited), s, t, engine=engine)


def check_against_theorems(n, arcs, s, t, solution, tol=0.0):
    tails, heads, caps = [a[0] for a in arcs], [a[1] for a in arcs], [a[2] for a in arcs]
    assert_max_flow(n, tails, heads, caps, s, t, solution.flows, solution.value, tol=tol)
    side = set(np.flatnonzero(solution.source_side).tolist())
    assert_cut(tails, heads, caps, side, s, t, solution.value, tol=tol * len(arcs))


# Introduction to Algorithms (Cormen, Leiserson, Rivest, Stein), 3rd ed., Figure 26.1:
# the flow network with s, v1..v4, t whose maximum flow is 23 (Figure 26.6).
# Capacities and the value are recalled from memory.
CLRS_26_1 = [(0, 1, 16), (0, 2, 13), (1, 3, 12), (2, 1, 4), (2, 4, 14), (3, 2, 9), (3, 5, 20), (4, 3, 7), (4, 5, 4)]


@pytest.mark.parametrize("engine", ENGINES)
def test_textbook_example_value_23(engine):
    solution, certificate = solve(6, CLRS_26_1, 0, 5, engine)
    assert solution.value == pytest.approx(23)
    assert certificate["checked"] and certificate["cut_capacity"] == pytest.approx(23)
    check_against_theorems(6, CLRS_26_1, 0, 5, solution, tol=1e-6)
    # The minimum cut of that figure: {s, v1, v2, v4} | {v3, t}, capacity 12 + 7 + 4 = 23.
    assert set(np.flatnonzero(solution.source_side).tolist()) == {0, 1, 2, 4}


def random_arcs(rng, n, m, max_cap=20, unlimited_share=0.0):
    arcs = []
    for _ in range(m):
        u, v = (int(x) for x in rng.integers(0, n, 2))
        cap = None if rng.random() < unlimited_share else int(rng.integers(0, max_cap + 1))
        arcs.append((u, v, cap))
    return arcs


@pytest.mark.parametrize("seed", range(12))
def test_random_graphs_match_networkx_and_scipy(seed):
    rng = np.random.default_rng(seed)
    n, m = int(rng.integers(3, 40)), int(rng.integers(1, 200))
    arcs = random_arcs(rng, n, m)
    solution, _ = solve(n, arcs, 0, n - 1)
    assert solution.value == max_flow_value(arcs, 0, n - 1, range(n))  # networkx.maximum_flow_value
    tail, head, cap, _ = arrays(arcs)
    keep = tail != head
    graph = sp.csr_matrix((cap[keep].astype(np.int32), (tail[keep], head[keep])), shape=(n, n))
    graph.sum_duplicates()
    assert solution.value == scipy_maximum_flow(graph, 0, n - 1).flow_value  # scipy csgraph
    check_against_theorems(n, arcs, 0, n - 1, solution)
    assert_integral(solution.flows)  # integrality theorem for integer capacities


@pytest.mark.parametrize("seed", range(6))
def test_lp_engine_agrees_with_graph_engine(seed):
    rng = np.random.default_rng(100 + seed)
    n = int(rng.integers(3, 30))
    arcs = random_arcs(rng, n, int(rng.integers(1, 120)))
    graph, _ = solve(n, arcs, 0, n - 1, "graph")
    lp, cert = solve(n, arcs, 0, n - 1, "lp")
    assert lp.value == pytest.approx(graph.value, abs=1e-6)
    assert cert["tolerance"] > 0
    check_against_theorems(n, arcs, 0, n - 1, lp, tol=1e-6)


@settings(max_examples=60, deadline=None)
@given(st.data())
def test_property_value_equals_networkx_with_unlimited_arcs(data):
    n = data.draw(st.integers(2, 12))
    arcs = data.draw(st.lists(
        st.tuples(st.integers(0, n - 1), st.integers(0, n - 1), st.one_of(st.none(), st.integers(0, 50))),
        max_size=40))
    solution, certificate = solve(n, arcs, 0, n - 1)
    expected = max_flow_value(arcs, 0, n - 1, range(n))
    if expected == float("inf"):
        assert solution.status == "unbounded"
        path = solution.unbounded_path.tolist()
        assert arcs[path[0]][0] == 0 and arcs[path[-1]][1] == n - 1
        assert all(arcs[i][2] is None for i in path)
    else:
        assert solution.status == "optimal" and solution.value == expected
        check_against_theorems(n, arcs, 0, n - 1, solution)


def test_decimals_are_solved_exactly_by_scaling():
    arcs = [(0, 1, 1.25), (1, 2, 0.5), (0, 2, 2.125)]
    solution, certificate = solve(3, arcs, 0, 2)
    assert solution.value == 2.625 and certificate["decimal_scale"] == 1000
    assert solution.engine["kind"] == "graph"
    check_against_theorems(3, arcs, 0, 2, solution)


def exact_value(arcs, n, s, t, denominator=1):
    """The reference value on Python integers (capacities times ``denominator``, exactly), as a Fraction."""
    units = [(a, b, Fraction(c) * denominator) for a, b, c in arcs]
    assert all(u.denominator == 1 for _, _, u in units)
    return Fraction(max_flow_value([(a, b, int(u)) for a, b, u in units], s, t, range(n)), denominator)


def test_fractions_beyond_nine_places_are_solved_exactly_by_their_binary_value():
    arcs = [(0, 1, 1 / 3), (1, 2, 2 / 3), (0, 2, 0.1 / 3)]
    solution, certificate = solve(3, arcs, 0, 2)
    assert solution.engine["kind"] == "graph" and certificate["tolerance"] == 0
    e = certificate["binary_exponent"]
    assert solution.value == float(exact_value(arcs, 3, 0, 2, 2**e))  # the exact sum, rounded once
    check_against_theorems(3, arcs, 0, 2, solution, tol=1e-15)
    lp, lp_certificate = solve(3, arcs, 0, 2, "lp")
    assert lp.engine["kind"] == "lp" and lp_certificate["relative_tolerance"] > 0


def test_overflowing_sums_are_solved_exactly_in_wide_integers():
    big = 2**62
    arcs = [(0, 1, big), (0, 1, big), (1, 2, big), (1, 2, big)]
    for engine in ("auto", "graph"):
        solution, certificate = solve(3, arcs, 0, 2, engine)
        # 2**63 does not fit a JSON integer of int64: reported as the (exact) double.
        assert solution.engine["kind"] == "graph" and solution.value == 2.0**63
        assert certificate["tolerance"] == 0 and solution.flows.tolist() == [big] * 4


def test_huge_integer_capacities_agree_exactly_with_networkx():
    # Capacities near 10**18 whose sums overflow int64 went to GLOP, and were first a
    # 500 (ABNORMAL), then answers within 1e-6 of the largest capacity. networkx
    # computes with Python integers, exactly.
    rng = np.random.default_rng(11)
    arcs = [(int(a), int(b), int(c)) for a, b, c in
            zip(rng.integers(0, 30, 400), rng.integers(0, 30, 400), rng.integers(1, 10**18, 400)) if a != b]
    solution, certificate = solve(30, arcs, 0, 29)
    exact = exact_value(arcs, 30, 0, 29)
    assert solution.engine["kind"] == "graph" and certificate["checked"] and certificate["tolerance"] == 0
    assert solution.value == (int(exact) if exact < 2**63 else float(exact))
    side = set(np.flatnonzero(solution.source_side).tolist())
    assert_exact_max_flow(30, *zip(*arcs), 0, 29, solution.flows.tolist(), exact, side)


@pytest.mark.parametrize("seed", [3, 5, 12, 24, 25, 29, 34, 50])  # each failed before (49 of seeds 0-299 did)
def test_fractional_capacities_spanning_many_decades_agree_exactly_with_networkx(seed):
    # Capacities from 0.25 to ~10**18 + 0.25 once went to GLOP scaled by the largest,
    # and it stopped ABNORMAL (a 500) or answered a flow its own cut contradicted. Now
    # they are decimals (two places), scaled by 100 past int64 and solved exactly;
    # networkx checks on the same capacities times 4, as Python integers.
    rng = np.random.default_rng(seed)
    n, m = 40, 50
    magnitude = 10.0 ** rng.integers(0, 19, m)
    arcs = [(int(a), int(b), float(c)) for a, b, c in
            zip(rng.integers(0, n, m), rng.integers(0, n, m), np.floor(rng.random(m) * magnitude) + 0.25) if a != b]
    solution, certificate = solve(n, arcs, 0, n - 1)
    assert solution.engine["kind"] == "graph" and certificate["checked"] and certificate["tolerance"] == 0
    assert solution.value == float(exact_value(arcs, n, 0, n - 1, 4))


def test_unlimited_arcs_off_every_path_give_a_finite_answer():
    arcs = [(0, 1, None), (1, 2, 5), (0, 2, 1), (2, 0, None)]
    solution, certificate = solve(3, arcs, 0, 2)
    assert solution.status == "optimal" and solution.value == 6
    assert certificate["cut_capacity"] == 6


@pytest.mark.parametrize("engine", ENGINES)
def test_unlimited_path_is_unbounded_with_a_checked_path(engine):
    arcs = [(0, 1, None), (1, 3, 2), (1, 2, None), (2, 3, None)]
    solution, certificate = solve(4, arcs, 0, 3, engine)
    assert solution.status == "unbounded" and solution.value is None
    assert solution.unbounded_path.tolist() == [0, 2, 3]


def test_self_loops_and_isolated_nodes_carry_nothing():
    arcs = [(0, 0, 10), (0, 1, 3), (1, 1, 7), (1, 2, 4)]
    solution, _ = solve(4, arcs, 0, 2)
    assert solution.value == 3 and solution.flows[0] == 0 and solution.flows[2] == 0


def test_no_path_gives_zero_with_source_only_cut():
    solution, certificate = solve(3, [(1, 2, 5)], 0, 2)
    assert solution.value == 0 and solution.source_side.tolist() == [True, False, False]


# The certificate must fail on wrong answers, not only pass on right ones.
def _good():
    tail, head, cap, _ = arrays(CLRS_26_1)
    solution, _ = maximum_flow(Graph(6, tail, head, cap), 0, 5)
    return tail, head, cap, solution


def test_certificate_rejects_an_overfull_arc():
    tail, head, cap, s = _good()
    flows = s.flows.copy()
    flows[0] = cap[0] + 1
    with pytest.raises(SelfCheckFailed, match="capacity"):
        check_max_flow(Graph(6, tail, head, cap), 0, 5, flows, s.value, s.source_side)


def test_certificate_rejects_broken_conservation():
    tail, head, cap, s = _good()
    flows = s.flows.copy()
    flows[2] -= 1  # v1 -> v3 loses a unit: v1 now holds flow
    with pytest.raises(SelfCheckFailed, match="conserved"):
        check_max_flow(Graph(6, tail, head, cap), 0, 5, flows, s.value, s.source_side)


def test_certificate_rejects_a_cut_that_is_not_minimum():
    tail, head, cap, s = _good()
    side = np.zeros(6, dtype=bool)
    side[0] = True  # {s}: capacity 29, not 23
    with pytest.raises(SelfCheckFailed, match="cut capacity"):
        check_max_flow(Graph(6, tail, head, cap), 0, 5, s.flows, s.value, side)


def test_certificate_rejects_a_wrong_value():
    tail, head, cap, s = _good()
    with pytest.raises(SelfCheckFailed, match="value"):
        check_max_flow(Graph(6, tail, head, cap), 0, 5, s.flows, s.value + 1, s.source_side)


def test_certificate_rejects_a_cut_through_an_unlimited_arc():
    tail, head = np.array([0, 1], np.int32), np.array([1, 2], np.int32)
    cap, unlimited = np.array([0, 5]), np.array([True, False])
    side = np.array([True, False, False])
    with pytest.raises(SelfCheckFailed, match="without a capacity limit"):
        check_max_flow(Graph(3, tail, head, cap, unlimited), 0, 2, np.array([5, 5]), 5, side)
