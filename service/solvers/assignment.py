"""Assignment: each agent to at most one task and each task to at most one agent.

Minimise (or maximise) the total cost over the allowed pairs, with every member of
the required side assigned. The routes, all certified by LP duality
(:func:`service.solvers.mincost_checks.check_assignment`):

* Square, complete, integer matrix (the live dispatch path): OR-Tools'
  SimpleLinearSumAssignment for small matrices; for large dense ones SciPy's
  ``linear_sum_assignment`` (measured several times faster there; its float
  arithmetic is safe because the integer duality check below is exact, and the
  OR-Tools answer is used should that check ever fail). Duals come from shortest
  paths over the matched pairs in dense numpy: no min-cost flow, no LP.
* Anything else (rectangular, forbidden pairs, sparse pairs, fractions): a min-cost
  flow with a super source or sink for the side that may stay unassigned, which has
  exactly the optimum of the assignment, through :func:`service.solvers.mincost.
  min_cost_flow` (graph or LP engine, with its own certificate).
* When the required side cannot be fully assigned: a Hall-violating set from a
  minimum cut of the bipartite matching network.

Dual sign convention (minimisation): ``u[agent] + v[task] <= cost`` on every allowed
pair, with equality on assigned pairs; duals of a side that need not be fully
assigned are ``<= 0``; ``sum(u) + sum(v)`` equals the total cost. For ``maximize``
every inequality flips (``u + v >= cost``, optional-side duals ``>= 0``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from ortools.graph.python import linear_sum_assignment as ortools_lsa
from ortools.graph.python import max_flow as ortools_max_flow

from ..errors import FieldError, InputError, SelfCheckFailed, SolverFailure
from . import mincost_checks as checks
from .maxflow_graph import graph_engine
from .graph import Graph
from .mincost import min_cost_flow
from .scaling import MAX_DECIMALS, common_scale, rescale

#: From this size on a dense square matrix goes to SciPy's solver.
SCIPY_FROM = 64
#: Largest |cost| * n for which SciPy's float arithmetic is exact on integers.
SCIPY_EXACT = 2.0**50


@dataclass
class AssignmentSolution:
    """``agent``, ``task``, ``cost``: the assigned pairs (indices, caller's costs).

    ``hall`` (when infeasible): ``side`` (``agents`` or ``tasks``), ``members`` and
    ``allowed`` (indices), with ``allowed`` fewer than ``members``.
    """

    status: str
    engine: dict
    total: object = None
    agent: np.ndarray | None = None
    task: np.ndarray | None = None
    cost: np.ndarray | None = None
    u: np.ndarray | None = None
    v: np.ndarray | None = None
    hall: dict | None = None
    tolerance: float = 0.0


def required_sides(n_agents: int, n_tasks: int, require: str) -> tuple[bool, bool]:
    """Which sides must be fully assigned. A square problem that requires one side requires both."""
    if require == "min-side":
        return n_agents <= n_tasks, n_tasks <= n_agents
    if require == "agents":
        return True, n_tasks <= n_agents
    return n_agents <= n_tasks, True


def solve_assignment(n_agents: int, n_tasks: int, rows: np.ndarray, cols: np.ndarray, cost: np.ndarray, *,
                     dense: bool = False, maximize: bool = False, require: str = "min-side",
                     engine: str = "auto") -> tuple[AssignmentSolution, dict]:
    """Solve and certify an assignment problem.

    Parameters
    ----------
    n_agents, n_tasks : int
    rows, cols : ndarray of int32
        Agent and task index of each allowed pair.
    cost : ndarray of int64 or float64
        Cost of each pair.
    dense : bool
        The pairs are the complete matrix in row-major order (enables the fast path).
    maximize : bool
    require : {"agents", "tasks", "min-side"}
    engine : {"auto", "graph", "lp"}

    Returns
    -------
    (AssignmentSolution, certificate)
    """
    need_agents, need_tasks = required_sides(n_agents, n_tasks, require)
    c = -cost if maximize else cost
    scaled = common_scale(c) if engine != "lp" else None
    if scaled is None:
        if engine == "graph":
            raise InputError(FieldError("/costs", f"costs with more than {MAX_DECIMALS} decimal places cannot be "
                                                  "solved exactly by the graph engine (use options.engine 'lp' "
                                                  "or 'auto')"))
        return _by_flow(n_agents, n_tasks, rows, cols, cost, c, None, maximize, need_agents, need_tasks, engine)
    d, (ints,) = scaled
    exact = _Exact(ints, 10**d, *_side_offsets(n_agents, n_tasks, rows, cols, ints, need_agents, need_tasks))
    if dense and need_agents and need_tasks and n_agents == n_tasks:
        answer = _square(n_agents, exact.reduced.reshape(n_agents, n_tasks), rows, cols)
        if answer is not None:
            return _finish(answer, rows, cols, cost, exact, maximize)
    return _by_flow(n_agents, n_tasks, rows, cols, cost, exact.reduced, exact, maximize, need_agents, need_tasks,
                    engine)


@dataclass(frozen=True)
class _Exact:
    """Exact integer costs (``ints``, the caller's times ``factor``), and the same less a
    constant per required agent (``agent_offset``) and task (``task_offset``): an
    equivalent problem whose costs fit the solvers when the caller's are huge."""

    ints: np.ndarray
    factor: int
    reduced: np.ndarray
    agent_offset: np.ndarray | None
    task_offset: np.ndarray | None

    def duals(self, u: np.ndarray, v: np.ndarray):
        """The reduced problem's duals as the original problem's (offsets added back)."""
        if self.agent_offset is not None:
            u = u.astype(object) + self.agent_offset
        if self.task_offset is not None:
            v = v.astype(object) + self.task_offset
        return u, v


def _side_offsets(k, t, rows, cols, ints, need_agents, need_tasks):
    """Subtract each required agent's least cost, then each required task's, when the
    costs are too large for the solvers' 64-bit arithmetic: every member of a required
    side is assigned exactly once, so this shifts every assignment's cost by the same
    constant (and the side's duals by its offsets)."""
    if ints.dtype != object and (not ints.size or float(np.abs(ints).max()) * 4 * (max(k, t) + 2) ** 2 < 2.0**62):
        return ints, None, None
    reduced = ints
    agent_offset = task_offset = None
    if need_agents:
        agent_offset = _least_per(rows, reduced, k)
        reduced = reduced.astype(object) - agent_offset[rows]
    if need_tasks:
        task_offset = _least_per(cols, reduced, t)
        reduced = reduced.astype(object) - task_offset[cols]
    if reduced.dtype == object and max(abs(int(x)) for x in reduced.tolist()) < 2**62:
        reduced = reduced.astype(np.int64)
    return reduced, agent_offset, task_offset


def _least_per(index: np.ndarray, values: np.ndarray, size: int) -> np.ndarray:
    """Least value per index (0 where an index has none), as Python ints."""
    if values.dtype != object:
        least = np.full(size, np.iinfo(np.int64).max, dtype=np.int64)
        np.minimum.at(least, index, values)
        return np.where(least == np.iinfo(np.int64).max, 0, least).astype(object)
    found: list = [None] * size
    for i, v in zip(index.tolist(), values.tolist()):  # Python ints beyond int64: the rare exact path
        if found[i] is None or v < found[i]:
            found[i] = v
    return np.array([0 if v is None else v for v in found], dtype=object)


def _square(n: int, matrix: np.ndarray, left: np.ndarray, right: np.ndarray):
    """Perfect assignment of a complete square integer matrix, with duals; None if out of range."""
    top = float(np.abs(matrix).max()) if matrix.size else 0.0
    if top * 4 * (n + 1) ** 2 >= 2.0**62:
        return None
    if n >= SCIPY_FROM and top * n < SCIPY_EXACT:
        from scipy.optimize import linear_sum_assignment  # only large problems pay for the import

        _, mate = linear_sum_assignment(matrix)
        try:
            return mate, *_square_duals(matrix, mate), _scipy_engine()
        except SelfCheckFailed:
            pass  # fall through to OR-Tools
    solver = ortools_lsa.SimpleLinearSumAssignment()
    solver.add_arcs_with_cost(left, right, matrix.ravel().astype(np.int64, copy=False))
    status = solver.solve()
    if status == solver.POSSIBLE_OVERFLOW:
        return None
    if status != solver.OPTIMAL:
        raise SolverFailure(f"OR-Tools assignment returned status {status.name}")
    mate = np.fromiter(map(solver.right_mate, range(n)), dtype=np.int64, count=n)
    return mate, *_square_duals(matrix, mate), graph_engine("SimpleLinearSumAssignment")


def _scipy_engine() -> dict:
    import scipy

    return {"kind": "graph", "solver": "SciPy linear_sum_assignment", "version": scipy.__version__}


def _square_duals(matrix: np.ndarray, mate: np.ndarray):
    """Duals of a perfect assignment by shortest paths over its matched pairs.

    Contract each matched pair (agent i, task mate[i]) into one node; an unmatched
    pair (i, mate[j]) becomes an arc i -> j of length ``C[i, mate[j]] - C[j, mate[j]]``.
    Distances ``d`` from a virtual root give ``u = -d`` and ``v[mate] = d + C[i, mate[i]]``;
    they exist exactly when the assignment is optimal (no negative cycle).
    """
    n = mate.size
    matched = matrix[np.arange(n), mate]
    lengths = matrix[:, mate] - matched[None, :]
    dist = np.minimum(lengths.min(axis=0), 0)
    active = np.flatnonzero(dist < 0)  # only rows whose distance just fell can lower others
    for _ in range(n + 1):
        if not active.size:
            break
        nxt = (dist[active, None] + lengths[active]).min(axis=0)
        active = np.flatnonzero(nxt < dist)
        dist = np.minimum(dist, nxt)
    else:
        raise SelfCheckFailed("self-check failed: the assignment has an improving cycle (not optimal)")
    u = -dist
    v = np.empty(n, dtype=dist.dtype)
    v[mate] = dist + matched
    return u, v


def _finish(answer, rows, cols, cost, exact: _Exact, maximize):
    mate, u, v, engine = answer
    n = mate.size
    chosen = np.arange(n, dtype=np.int64) * n + mate  # row-major position of (i, mate[i])
    u, v = exact.duals(u, v)
    certificate = checks.check_assignment(n, n, rows, cols, exact.ints, chosen, u, v, True, True)
    return _solution(engine, rows, cols, cost, chosen, u, v, certificate, exact.factor, maximize, 0.0)


def _solution(engine, rows, cols, cost, chosen, u, v, certificate, factor, maximize, tolerance):
    sign = -1 if maximize else 1
    if u.dtype.kind != "f":  # exact integers: back in the caller's units, rounded once
        u, v = rescale(u, 1, factor), rescale(v, 1, factor)
        for name in ("primal_cost", "dual_bound", "gap"):
            certificate[name] = rescale(certificate[name], 1, factor)
    if factor != 1:
        certificate["decimal_scale"] = factor
        engine = dict(engine, decimal_scale=factor)
    total = sign * certificate["primal_cost"]
    if maximize:  # the certificate in the caller's terms
        for name in ("primal_cost", "dual_bound", "gap"):
            certificate[name] = -certificate[name]
    return AssignmentSolution("optimal", engine, total=total, agent=rows[chosen], task=cols[chosen],
                              cost=cost[chosen], u=sign * u, v=sign * v, tolerance=tolerance), certificate


def _by_flow(n_agents, n_tasks, rows, cols, cost, c, exact, maximize, need_agents, need_tasks, engine):
    """Any assignment as a min-cost flow; unassignable required sides give a Hall set.

    ``c`` is the (reduced) exact integer cost with ``exact`` describing it, or the
    caller's floats with ``exact`` None (the LP engine's).
    """
    short = _short_side(n_agents, n_tasks, rows, cols, need_agents, need_tasks)
    if short is not None:
        return _hall(n_agents, n_tasks, rows, cols, short == "agents")
    k, t, m = n_agents, n_tasks, rows.size
    tasks0 = k
    extra = k + t
    tail = [rows.astype(np.int32)]
    head = [(cols + tasks0).astype(np.int32)]
    supply = np.zeros(k + t + 1, dtype=np.int64)
    if need_agents and need_tasks:
        supply[:k], supply[tasks0:extra] = 1, -1
    elif need_agents:  # tasks may stay free: each task drains into a sink with capacity 1
        supply[:k], supply[extra] = 1, -k
        tail.append(np.arange(tasks0, extra, dtype=np.int32))
        head.append(np.full(t, extra, dtype=np.int32))
    else:  # agents may stay free: a source feeds each agent with capacity 1
        supply[extra], supply[tasks0:extra] = t, -1
        tail.append(np.full(k, extra, dtype=np.int32))
        head.append(np.arange(k, dtype=np.int32))
    tail, head = np.concatenate(tail), np.concatenate(head)
    side_arcs = tail.size - m
    capacity = np.concatenate([np.zeros(m, dtype=np.int64), np.ones(side_arcs, dtype=np.int64)])
    unlimited = np.concatenate([np.ones(m, dtype=bool), np.zeros(side_arcs, dtype=bool)])
    flow_cost = np.concatenate([c, np.zeros(side_arcs, dtype=c.dtype)])
    try:
        flow, _ = min_cost_flow(Graph(k + t + 1, tail, head, capacity, unlimited, flow_cost), supply, engine=engine)
    except InputError as exc:
        raise _refused(exc, m) from None
    if flow.status != "optimal":
        raise SolverFailure(f"the assignment's min-cost flow is {flow.status} although the side can be covered")
    p = flow.potentials
    pa, pt, px = p[:k], p[tasks0:extra], p[extra]
    if need_agents and need_tasks:
        u, v = -pa, pt
    elif need_agents:
        u, v = px - pa, np.minimum(pt - px, 0)
    else:
        u, v = np.minimum(px - pa, 0), pt - px
    chosen = np.flatnonzero(flow.flows[:m] > 0.5)
    tol = flow.tolerance * max(1, k + t)
    if exact is None:
        certificate = checks.check_assignment(k, t, rows, cols, c, chosen, u, v, need_agents, need_tasks, tol)
        return _solution(flow.engine, rows, cols, cost, chosen, u, v, certificate, 1, maximize, tol)
    # The flow's potentials are exact integers of the reduced costs: check on the caller's.
    u, v = exact.duals(_integers(u), _integers(v))
    certificate = checks.check_assignment(k, t, rows, cols, exact.ints, chosen, u, v, need_agents, need_tasks)
    engine = {name: value for name, value in flow.engine.items() if name not in ("decimal_scale", "cost_scale")}
    return _solution(engine, rows, cols, cost, chosen, u, v, certificate, exact.factor, maximize, 0.0)


def _integers(values: np.ndarray) -> np.ndarray:
    """Exact potentials as integers again (the min-cost front reports integral ones as int64).

    Raises
    ------
    InputError
        At ``/costs`` when the front could only report them as doubles past 2**53 (or
        not whole): the costs then span more than exact arithmetic can certify here.
    """
    if values.dtype.kind in "iO":
        return values
    if values.size and (float(np.abs(values).max()) >= 2.0**53 or not np.array_equal(values, np.round(values))):
        raise InputError(FieldError("/costs", "the costs span too many orders of magnitude to be solved exactly "
                                              "(scaled to whole numbers, their duals pass 2**53); round the "
                                              "smallest costs or lower the largest"))
    return values.astype(np.int64)


def _refused(exc: InputError, pairs: int) -> InputError:
    """A min-cost refusal in the assignment's terms: the costs, and which pair."""
    culprit = getattr(exc, "culprit", None)
    detail = exc.errors[0].detail
    if culprit is not None and culprit[0] == "cost" and culprit[1] is not None and culprit[1] < pairs:
        detail = detail.replace(f"arc {culprit[1]}'s cost", f"the cost of pair {culprit[1]}")
    error = InputError(FieldError("/costs", detail))
    error.culprit = culprit
    return error


def _short_side(k, t, rows, cols, need_agents, need_tasks) -> str | None:
    """The required side that cannot be fully assigned ("agents" or "tasks"), or None."""
    if need_agents and (k > t or np.unique(rows).size < k):
        return "agents"
    if need_tasks and (t > k or np.unique(cols).size < t):
        return "tasks"
    size = _matching_size(k, t, rows, cols, True)[0]
    if need_agents and size < k:
        return "agents"
    if need_tasks and size < t:
        return "tasks"
    return None


def _matching_size(k, t, rows, cols, by_agents):
    s, z = k + t, k + t + 1
    solver = ortools_max_flow.SimpleMaxFlow()
    solver.add_arc_with_capacity(z, z, 0)
    solver.add_arcs_with_capacity(np.full(k, s, np.int32), np.arange(k, dtype=np.int32), np.ones(k, np.int64))
    # Pair arcs never bind a minimum cut: their capacity exceeds any matching.
    solver.add_arcs_with_capacity(rows.astype(np.int32), (cols + k).astype(np.int32),
                                  np.full(rows.size, k + t + 1, np.int64))
    solver.add_arcs_with_capacity(np.arange(k, k + t, dtype=np.int32), np.full(t, z, np.int32),
                                  np.ones(t, np.int64))
    if solver.solve(s, z) != solver.OPTIMAL:
        raise SolverFailure("OR-Tools max-flow failed on the matching network")
    if by_agents:
        side = np.asarray(solver.get_source_side_min_cut(), dtype=np.int64)
    else:
        side = np.asarray(solver.get_sink_side_min_cut(), dtype=np.int64)
    return int(solver.optimal_flow()), side


def _hall(k, t, rows, cols, by_agents):
    """A Hall-violating set of the required side, from a minimum cut (Kőnig's theorem).

    With agents required: the agents on the source side of a minimum cut have all
    their allowed tasks on the source side too (pair arcs cannot be cut), and the cut
    capacity = (agents off the source side) + (tasks on it) < k, so those tasks are
    fewer than those agents. Mirrored (sink side) for tasks.
    """
    size, side = _matching_size(k, t, rows, cols, by_agents)
    if by_agents:
        members = side[side < k]
        allowed = side[(side >= k) & (side < k + t)] - k
    else:
        members = side[(side >= k) & (side < k + t)] - k
        allowed = side[side < k]
    members, allowed = np.sort(members), np.sort(allowed)
    checks.check_hall_violation(rows, cols, members, allowed, by_agents)
    certificate = {"checked": True, "members": int(members.size), "allowed": int(allowed.size),
                   "largest_assignment": size}
    hall = {"side": "agents" if by_agents else "tasks", "members": members, "allowed": allowed}
    return AssignmentSolution("infeasible", graph_engine("SimpleMaxFlow"), hall=hall), certificate
