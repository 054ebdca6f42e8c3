"""Assignment against scipy.optimize.linear_sum_assignment, networkx matchings, a textbook example,
and LP duality (the duals are re-checked here independently of the service's checker)."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment

from service.errors import SelfCheckFailed
from service.solvers import mincost_checks as checks
from service.solvers.assignment import _square_duals, solve_assignment


def pairs_of(matrix: np.ndarray):
    """Allowed pairs of a matrix with NaN for forbidden entries (row-major)."""
    allowed = ~np.isnan(matrix)
    rows, cols = np.nonzero(allowed)
    values = matrix[allowed]
    cost = values.astype(np.int64) if np.all(values == np.round(values)) else values
    return rows.astype(np.int32), cols.astype(np.int32), cost, bool(allowed.all())


def solve(matrix, **kw):
    k, t = matrix.shape
    rows, cols, cost, dense = pairs_of(matrix)
    return solve_assignment(k, t, rows, cols, cost, dense=dense, **kw)


def scipy_reference(matrix, maximize=False):
    """scipy.optimize.linear_sum_assignment; forbidden entries as +inf (or -inf when maximising)."""
    filled = np.where(np.isnan(matrix), -np.inf if maximize else np.inf, matrix)
    r, c = linear_sum_assignment(filled, maximize=maximize)
    return float(filled[r, c].sum())


def assert_duals(matrix, sol, maximize=False, need_agents=True, need_tasks=True):
    """LP duality recomputed with plain loops."""
    k, t = matrix.shape
    sign = -1 if maximize else 1
    for i in range(k):
        for j in range(t):
            if not np.isnan(matrix[i, j]):
                assert sign * (sol.u[i] + sol.v[j]) <= sign * matrix[i, j] + 1e-9
    if not need_agents:
        assert all(sign * x <= 1e-9 for x in sol.u)
    if not need_tasks:
        assert all(sign * x <= 1e-9 for x in sol.v)
    assert float(np.sum(sol.u) + np.sum(sol.v)) == pytest.approx(float(sol.total), abs=1e-9)
    for a, tk, c in zip(sol.agent, sol.task, sol.cost):
        assert matrix[a, tk] == c and sol.u[a] + sol.v[tk] == pytest.approx(c, abs=1e-9)


@pytest.mark.parametrize("n", [1, 3, 10, 80])  # 80 takes the SciPy route, the others OR-Tools
@pytest.mark.parametrize("maximize", [False, True])
def test_square_complete_matrices_match_scipy(n, maximize):
    rng = np.random.default_rng(n)
    for _ in range(6 if n < 80 else 2):
        matrix = rng.integers(-30, 100, (n, n)).astype(float)
        sol, cert = solve(matrix, maximize=maximize)
        assert sol.status == "optimal" and cert["gap"] == 0
        assert sol.total == scipy_reference(matrix, maximize)
        assert_duals(matrix, sol, maximize)
        assert sorted(sol.agent.tolist()) == list(range(n))


@pytest.mark.parametrize("shape", [(4, 9), (9, 4), (6, 6)])
@pytest.mark.parametrize("maximize", [False, True])
def test_rectangular_matrices_with_forbidden_pairs_match_scipy(shape, maximize):
    rng = np.random.default_rng(sum(shape))
    done = 0
    for _ in range(40):
        matrix = rng.integers(-10, 50, shape).astype(float)
        matrix[rng.random(shape) < 0.3] = np.nan
        try:
            expected = scipy_reference(matrix, maximize)
        except ValueError:  # scipy: no complete assignment of the smaller side
            sol, _ = solve(matrix, maximize=maximize)
            assert sol.status == "infeasible"
            continue
        sol, cert = solve(matrix, maximize=maximize)
        assert sol.status == "optimal" and cert["checked"]
        assert sol.total == expected
        k, t = shape
        assert_duals(matrix, sol, maximize, need_agents=k <= t, need_tasks=t <= k)
        assert len(sol.agent) == min(shape)
        done += 1
    assert done >= 10


def test_fractional_costs_are_exact_with_scaling_and_lp_beyond():
    rng = np.random.default_rng(7)
    matrix = np.round(rng.random((5, 7)) * 10, 2)
    sol, cert = solve(matrix)
    assert sol.total == pytest.approx(scipy_reference(matrix), abs=1e-9)
    thirds = rng.integers(1, 30, (5, 5)) / 3
    sol, cert = solve(thirds)
    assert sol.engine["kind"] == "lp" and sol.total == pytest.approx(scipy_reference(thirds), abs=1e-6)


@pytest.mark.parametrize("require", ["agents", "tasks"])
def test_require_a_side_that_cannot_be_covered_gives_a_hall_set(require):
    # 4 agents, 5 tasks; agents 0, 1, 2 may only take tasks 0 and 1.
    matrix = np.full((4, 5), np.nan)
    matrix[:3, :2] = [[1, 2], [2, 1], [3, 3]]
    matrix[3, :] = [5, 5, 5, 5, 5]
    sol, cert = solve(matrix, require=require)
    assert sol.status == "infeasible"
    hall = sol.hall
    members, allowed = set(hall["members"].tolist()), set(hall["allowed"].tolist())
    assert len(allowed) < len(members)
    # Recomputed here: every allowed partner of the members is among `allowed`.
    graph = nx.Graph()
    for i, j in zip(*np.nonzero(~np.isnan(matrix))):
        graph.add_edge(("a", i), ("t", j))
    own = "a" if hall["side"] == "agents" else "t"
    other = "t" if own == "a" else "a"
    neighbours = {w for v in members for _, w in graph.edges((own, v))}
    assert neighbours <= {(other, j) for j in allowed}
    # networkx's maximum matching is smaller than the required side.
    matching = nx.bipartite.hopcroft_karp_matching(graph, top_nodes=[("a", i) for i in range(4)])
    required = 4 if require == "agents" else 5
    assert len(matching) // 2 < required


def test_min_side_is_fully_assigned_and_larger_side_left_over():
    matrix = np.array([[4.0, 1, 3], [2, 0, 5], [3, 2, 2], [9, 9, 1]])
    sol, cert = solve(matrix)
    assert sol.total == scipy_reference(matrix) and len(sol.task) == 3


def test_assignment_textbook_example_with_a_dummy_free_rectangle():
    """Hillier & Lieberman, Introduction to Operations Research, the Job Shop Company example of the
    assignment problem (3 new machines, 4 locations, machine 2 not allowed at location 2; the book adds
    a dummy machine). Costs and the optimum 29 (machine 1 -> location 4, 2 -> 3, 3 -> 1) recalled
    from memory; scipy confirms. Here no dummy is needed: require='agents' on the 3 x 4 matrix."""
    matrix = np.array([[13, 16, 12, 11], [15, np.nan, 13, 20], [5, 7, 10, 6]])
    sol, cert = solve(matrix, require="agents")
    assert sol.total == 29 == scipy_reference(matrix)
    assert sorted(zip(sol.agent.tolist(), sol.task.tolist())) == [(0, 3), (1, 2), (2, 0)]
    assert_duals(matrix, sol, need_agents=True, need_tasks=False)


def test_assignment_checker_fails_on_wrong_answers():
    matrix = np.array([[4, 1, 3], [2, 0, 5], [3, 2, 2]])
    rows, cols, cost, _ = pairs_of(matrix.astype(float))
    sol, _ = solve(matrix.astype(float))
    chosen = sol.agent * 3 + sol.task
    args = (3, 3, rows, cols, cost)
    checks.check_assignment(*args, chosen, sol.u, sol.v, True, True)
    worse = np.array([0, 4, 8])  # the diagonal: a valid assignment, not optimal
    with pytest.raises(SelfCheckFailed):
        checks.check_assignment(*args, worse, sol.u, sol.v, True, True)
    u = sol.u.copy()
    u[0] += 1
    with pytest.raises(SelfCheckFailed):
        checks.check_assignment(*args, chosen, u, sol.v, True, True)
    with pytest.raises(SelfCheckFailed, match="twice"):
        checks.check_assignment(*args, np.array([0, 3, 6]), sol.u, sol.v, True, True)
    with pytest.raises(SelfCheckFailed, match="not every"):
        checks.check_assignment(*args, chosen[:2], sol.u, sol.v, True, True)
    # The dense dual recovery itself refuses a matching that is not optimal.
    with pytest.raises(SelfCheckFailed, match="improving cycle"):
        _square_duals(matrix, np.array([0, 1, 2]))


def test_hall_checker_fails_on_a_set_that_is_no_violation():
    rows = np.array([0, 0, 1], np.int32)
    cols = np.array([0, 1, 1], np.int32)
    with pytest.raises(SelfCheckFailed):
        checks.check_hall_violation(rows, cols, np.array([0, 1]), np.array([0, 1]), True)
    with pytest.raises(SelfCheckFailed, match="outside"):
        checks.check_hall_violation(rows, cols, np.array([0, 1]), np.array([1]), True)
