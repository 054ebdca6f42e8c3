"""Check a client's min-cost flow plan: feasibility, cost, and optimality by a search
for a negative-cost residual cycle (see :mod:`service.solvers.verify`)."""

from __future__ import annotations

import math

import numpy as np

from ..deadline import Deadline, expired
from ..errors import SelfCheckFailed, SolveTimeout
from .graph import Graph
from .plan_checks import (
    FORWARD, RELATIVE_TOLERANCE, Residual, Verdict, _apply, _fail, _finite, _number, _unlimited_first, _walk,
    common_dtype, find_violations, residual_network, tolerance_for,
)


def parent_cycle(parent_node: np.ndarray) -> list | None:
    """A cycle in a parent-pointer graph (``-1`` = no parent), as a node list, or None.

    Pointer doubling: after ``ceil(log2(n)) + 1`` squarings of the parent map, every
    node's far ancestor is either on a cycle or the sentinel for "no parent".
    """
    n = parent_node.size
    if n == 0:
        return None
    step = np.append(np.where(parent_node < 0, n, parent_node), n)
    far = step
    for _ in range(int(math.ceil(math.log2(n + 1))) + 1):
        far = far[far]
    on_cycle = np.flatnonzero(far[:n] != n)
    if on_cycle.size == 0:
        return None
    start = int(far[on_cycle[0]])
    cycle = [start]
    v = int(step[start])
    while v != start:
        cycle.append(v)
        v = int(step[v])
    return cycle[::-1]


def negative_cycle(num_nodes, res: Residual, weight: np.ndarray, tol=0.0, deadline: Deadline | None = None):
    """Bellman-Ford search for a negative-cost cycle in a residual network.

    Every node starts at distance 0 (as if joined by free arcs to a virtual root), so
    a cycle is found wherever it lies. Rounds relax all residual arcs at once from the
    previous round's distances; a node's parent is the arc of its last improvement.
    Any cycle of parent arcs has negative cost (each parent arc satisfies
    ``d[v] >= d[u] + w``, with strict inequality on the one that closed the cycle);
    if round ``n`` still improves a node, that node's parent chain holds such a cycle.

    Returns
    -------
    (cycle, potentials)
        ``cycle``: residual arc indices of a negative cycle in walking order, or None;
        ``potentials``: the final distances (a proof of optimality when no cycle).

    Raises
    ------
    SolveTimeout
        When ``deadline`` passes.
    """
    dist = np.zeros(num_nodes, dtype=weight.dtype)
    parent = np.full(num_nodes, -1, dtype=np.int64)
    edge_ids = np.arange(res.size)
    for _ in range(num_nodes + 1):
        if expired(deadline):
            raise SolveTimeout("the search for a negative-cost cycle exceeded the time limit")
        candidate = dist[res.src] + weight
        better = np.flatnonzero(candidate < dist[res.dst] - tol)
        if better.size == 0:
            return None, dist
        new = dist.copy()
        np.minimum.at(new, res.dst[better], candidate[better])
        winners = better[candidate[better] == new[res.dst[better]]]
        parent[res.dst[winners]] = edge_ids[winners]
        dist = new
        nodes = parent_cycle(np.where(parent >= 0, res.src[np.maximum(parent, 0)], -1))
        if nodes is not None:
            return [int(parent[v]) for v in nodes], dist
    raise SelfCheckFailed("Bellman-Ford still improved after n rounds without a cycle of parent arcs")


def verify_min_cost_flow(graph: Graph, supply: np.ndarray, flows: np.ndarray,
                         *, deadline: Deadline | None = None) -> Verdict:
    """Check a client's min-cost flow plan.

    Parameters
    ----------
    graph : Graph
        ``capacity`` (0 where ``unlimited``), ``unlimited``, and the per-unit arc
        ``cost`` and ``lower`` bounds (None: all zero).
    supply : ndarray
        Net outflow required at each node (positive: supply, negative: demand).
    flows : ndarray
        The client's flow per arc.
    deadline : Deadline, optional
        When the cycle search gives up (:class:`~service.errors.SolveTimeout`).

    Returns
    -------
    Verdict
        ``objective`` is the plan's cost. For a feasible plan: either ``optimal`` with
        ``potentials`` p such that ``cost + p[from] - p[to] >= 0`` on every residual
        arc, or ``steps`` of a negative-cost residual cycle with the ``amount`` that can
        be pushed round it, its ``unit_cost`` (< 0) and the ``gain`` (cost saved; None
        when the cycle has no limit: the problem is unbounded).

    Examples
    --------
    >>> import numpy as np
    >>> # Two parallel arcs 0 -> 1 costing 5 and 1; the plan ships 2 units on the dear one.
    >>> g = Graph(2, np.array([0, 0]), np.array([1, 1]), np.array([2, 2]), cost=np.array([5, 1]))
    >>> v = verify_min_cost_flow(g, np.array([2, -2]), np.array([2, 0]))
    >>> v.objective, v.optimal, v.steps, v.amount, v.unit_cost, v.gain
    (10, False, [(1, 1), (0, -1)], 2, -4, 8)
    """
    num_nodes, tail, head, unlimited = graph.num_nodes, graph.tail, graph.head, graph.unlimited
    cost = np.zeros(tail.size, dtype=np.int64) if graph.cost is None else graph.cost
    dtype = common_dtype(graph.capacity, flows, graph.lower, supply, weights=cost)
    capacity, flows, cost, supply = (a.astype(dtype, copy=False) for a in (graph.capacity, flows, cost, supply))
    lower = None if graph.lower is None else graph.lower.astype(dtype, copy=False)
    # The checks below compare like with like: every figure in the plan's dtype.
    graph = graph.replace(capacity=capacity, cost=cost, lower=lower)
    tol = tolerance_for(dtype, capacity, flows, cost, lower, supply)
    arcs, nodes, count = find_violations(graph, flows, supply, tol=tol)
    total = _number((cost * flows).sum())
    verdict = Verdict(count == 0, total, tol, count, arcs, nodes)
    if not verdict.feasible:
        return verdict
    res, weight = residual_network(tail, head, capacity, unlimited, lower, flows, tol, cost)
    if weight.dtype.kind == "i" and res.size and int(np.abs(weight).max()) * (num_nodes + 1) > 2**62:
        weight = weight.astype(np.float64)  # distances could overflow int64
    found = {}

    def search(r: Residual, subset):
        """Look for a negative cycle among residual arcs ``r`` (a subset, or all of them).

        The potentials of the search over all residual arcs are kept, since only they
        prove optimality.
        """
        w = weight if subset is None else weight[subset]
        cycle, potentials = negative_cycle(num_nodes, r, w, tol * 4, deadline)
        if subset is None:
            found["potentials"] = potentials
        return cycle

    # A cycle of arcs without limits first: it shows the problem itself is unbounded.
    cycle = _unlimited_first(res, search)
    if cycle is None:
        verdict.optimal = True
        verdict.potentials = found["potentials"]
        check_potentials(graph, flows, verdict.potentials, tol * 8 * num_nodes)
        return verdict
    cycle = np.asarray(cycle, dtype=np.int64)
    verdict.steps = [(int(res.arc[k]), int(res.direction[k])) for k in cycle]
    verdict.unit_cost = _number(weight[cycle].sum())
    verdict.amount = _finite(res.room[cycle].min(), dtype)
    verdict.gain = None if verdict.amount is None else _number(-verdict.unit_cost * verdict.amount)
    check_negative_cycle(graph, supply, flows, verdict.steps, verdict.amount, verdict.gain, tol)
    return verdict


def check_potentials(graph: Graph, flows, potentials, tol=0.0) -> None:
    """Check the reduced-cost optimality conditions of a feasible min-cost plan.

    With reduced cost ``r = cost + p[tail] - p[head]``: an arc with room left (flow
    below capacity) needs ``r >= 0``, an arc carrying more than its lower bound needs
    ``r <= 0``. Then no residual cycle has negative cost, so the plan is of least cost.

    Parameters
    ----------
    graph : Graph
        With ``capacity``, ``unlimited``, ``cost`` (not None) and ``lower``.
    flows : ndarray
        The plan.
    potentials : ndarray
        One per node.
    tol : float
        Slack allowed in each comparison.

    Raises
    ------
    SelfCheckFailed
    """
    reduced = graph.cost + potentials[graph.tail] - potentials[graph.head]
    room = graph.capacity - flows > tol
    if graph.unlimited is not None:
        room |= graph.unlimited
    above_lower = flows - (0 if graph.lower is None else graph.lower) > tol
    if (reduced[room] < -tol).any() or (reduced[above_lower] > tol).any():
        _fail("a residual arc has a negative reduced cost under the potentials")


def check_negative_cycle(graph: Graph, supply, flows, steps, amount, gain, tol=0.0) -> None:
    """Check that ``steps`` is a residual cycle that saves ``gain`` when ``amount`` goes round.

    The cycle must close, have negative cost per unit, and pushing ``amount`` round it
    must keep the plan feasible and lower its cost by exactly ``gain``. ``amount`` None
    means every step is a forward arc without a limit (the problem is unbounded).

    Parameters
    ----------
    graph : Graph
        With ``capacity``, ``unlimited``, ``cost`` (not None) and ``lower``.
    supply : ndarray
        Net outflow required at each node.
    flows : ndarray
        The plan.
    steps : list of (arc, direction)
        The cycle, ``direction`` +1 forward or -1 backward.
    amount : number or None
        What goes round the cycle (None: no limit).
    gain : number or None
        The cost it saves.
    tol : float
        Slack allowed in each comparison.

    Raises
    ------
    SelfCheckFailed
    """
    if not steps:
        _fail("the improving cycle is empty")
    cost, unlimited = graph.cost, graph.unlimited
    walk = _walk(steps, graph.tail, graph.head)
    if any(walk[i][1] != walk[(i + 1) % len(walk)][0] for i in range(len(walk))):
        _fail("the improving cycle does not close")
    unit = sum(float(cost[a]) * d for a, d in steps)
    if not unit < 0:
        _fail(f"the improving cycle costs {unit} per unit, not less than 0")
    if amount is None:
        if not all(d == FORWARD and unlimited is not None and unlimited[a] for a, d in steps):
            _fail("an improving cycle without limit uses an arc with a limit")
        return
    if not amount > tol:
        _fail(f"the improving cycle moves {amount}, not more than 0")
    moved = _apply(flows, steps, amount)
    _, _, count = find_violations(graph, moved, supply, tol=tol)
    if count:
        _fail("pushing the amount round the improving cycle breaks a bound or conservation")
    saved = (cost * flows).sum() - (cost * moved).sum()
    if abs(saved - gain) > max(tol, RELATIVE_TOLERANCE) * max(1.0, abs(float(gain))) * len(steps):
        _fail(f"the improving cycle saves {saved}, not {gain}")