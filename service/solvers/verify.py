"""Check a client's own flow plan: feasibility, its value or cost, and optimality.

Plain functions over numpy arrays (no Flask, no problem model). A plan is checked in
three steps:

1. *Feasibility*: every arc's flow within ``[lower, capacity]`` and flow conserved at
   every node (max-flow: at every node but the source and sink; min-cost flow: net
   outflow equal to the node's supply). Every violation is reported by arc index or
   node index.
2. *Objective*: the plan's value (net flow out of the source) or cost.
3. *Optimality*, for a feasible plan, on the residual network of the plan (an arc
   with room left gives a forward residual arc; an arc carrying more than its lower
   bound gives a backward one):

   - max-flow: a breadth-first search from the source. Reaching the sink gives an
     augmenting path (fewest arcs) whose gain is its smallest residual capacity; not
     reaching it gives a minimum cut whose capacity equals the plan's value, the
     proof that the plan is maximum (max-flow min-cut theorem).
   - min-cost flow: a Bellman-Ford search for a negative-cost cycle (the plan is of
     least cost iff its residual network has none). A cycle comes with the amount
     that can be pushed round it and the cost it saves; none comes with node
     potentials under which every residual arc has a non-negative reduced cost, the
     proof of optimality.

Every verdict is checked again before it is returned (:func:`check_cut_proof`,
:func:`check_augmenting_path`, :func:`check_potentials`, :func:`check_negative_cycle`);
a failed check raises :class:`~service.errors.SelfCheckFailed`.

The max-flow checks live here, the min-cost flow checks in
:mod:`service.solvers.verify_mincost` and what both share in
:mod:`service.solvers.plan_checks`; the residual network and the searches over it are
the solvers' one graph type (:mod:`service.solvers.graph`).

Sizes: the breadth-first search is one vectorised pass per layer, fine for millions of
arcs. The Bellman-Ford search runs at most ``n`` rounds of one vectorised pass over
the residual arcs each (``O(n m)`` in the worst case; plans close to optimal settle in
a few dozen rounds): it is meant for networks up to about 10^4 nodes and 10^5 arcs,
and it stops with :class:`~service.errors.SolveTimeout` at its deadline.
"""

from __future__ import annotations

import numpy as np

from .graph import Graph, bfs_tree, reach
from .plan_checks import (
    BACKWARD, FORWARD, MAX_LISTED_VIOLATIONS, RELATIVE_TOLERANCE, Residual, Verdict, _apply, _fail, _finite,
    _number, _unlimited_first, _walk, common_dtype, find_violations, node_balance, residual_network, tolerance_for,
)
from .verify_mincost import (
    check_negative_cycle, check_potentials, negative_cycle, parent_cycle, verify_min_cost_flow,
)

#: The public names of plan checks, max-flow and min-cost flow alike.
__all__ = [
    "BACKWARD", "FORWARD", "MAX_LISTED_VIOLATIONS", "RELATIVE_TOLERANCE", "Residual", "Verdict",
    "check_augmenting_path", "check_cut_proof", "check_negative_cycle", "check_potentials", "common_dtype",
    "find_violations", "negative_cycle", "node_balance", "parent_cycle", "residual_network", "tolerance_for",
    "verify_max_flow", "verify_min_cost_flow",
]

# --- max-flow --------------------------------------------------------------------


def _path_to(parent: np.ndarray, src: np.ndarray, start: int, end: int) -> np.ndarray:
    path = []
    v = end
    while v != start:
        k = int(parent[v])
        path.append(k)
        v = int(src[k])
    return np.array(path[::-1], dtype=np.int64)


def verify_max_flow(graph: Graph, source: int, sink: int, flows: np.ndarray) -> Verdict:
    """Check a client's max-flow plan.

    Parameters
    ----------
    graph : Graph
        ``capacity`` (0 where ``unlimited``) and ``unlimited`` are read; ``cost`` and
        ``lower`` are ignored.
    source, sink : int
    flows : ndarray
        The client's flow per arc.

    Returns
    -------
    Verdict
        ``objective`` is the plan's value (net flow out of the source). For a feasible
        plan: either ``optimal`` with a minimum cut (``source_side``, ``cut_arcs``,
        ``cut_capacity`` = value), or ``steps`` of a shortest augmenting path with its
        ``gain`` (None when the path has no limit: the problem is unbounded).

    Examples
    --------
    >>> import numpy as np
    >>> g = Graph(3, np.array([0, 1]), np.array([1, 2]), np.array([5, 3]))
    >>> v = verify_max_flow(g, 0, 2, np.array([2, 2]))
    >>> v.feasible, v.optimal, v.objective, v.steps, v.gain
    (True, False, 2, [(0, 1), (1, 1)], 1)
    """
    dtype = common_dtype(graph.capacity, flows)
    # The checks compare like with like: capacities in the plan's dtype; no lower bounds in max-flow.
    graph = graph.replace(capacity=graph.capacity.astype(dtype, copy=False), lower=None)
    flows = flows.astype(dtype, copy=False)
    num_nodes, tail, head, capacity = graph.num_nodes, graph.tail, graph.head, graph.capacity
    tol = tolerance_for(dtype, capacity, flows)
    supply = np.zeros(num_nodes, dtype=dtype)
    arcs, nodes, count = find_violations(graph, flows, supply, free=np.array([source, sink]), tol=tol)
    value = _number(-graph.balance(flows)[source])
    verdict = Verdict(count == 0, value, tol, count, arcs, nodes)
    if not verdict.feasible:
        return verdict
    res = graph.residual(flows, tol)
    # A path of arcs without limits first: it shows the problem itself is unbounded.
    path = _unlimited_first(res, lambda r, _sub: _bfs_path(num_nodes, r, source, sink))
    if path is not None:
        verdict.steps = [(int(res.arc[k]), int(res.direction[k])) for k in path]
        verdict.gain = verdict.amount = _finite(res.room[path].min(), dtype)
        check_augmenting_path(graph, source, sink, flows, verdict.steps, verdict.gain, tol)
    else:
        reached = reach(num_nodes, res.src, res.dst, source)
        crossing = np.flatnonzero(reached[tail] & ~reached[head])
        verdict.optimal = True
        verdict.source_side = reached
        verdict.cut_arcs = crossing
        verdict.cut_capacity = _number(capacity[crossing].sum())
        check_cut_proof(graph, source, sink, flows, value, reached, tol)
    return verdict




def _bfs_path(num_nodes, res: Residual, source, sink):
    parent, reached = bfs_tree(num_nodes, res.src, res.dst, source, sink)
    return _path_to(parent, res.src, source, sink) if reached[sink] else None


def check_cut_proof(graph: Graph, source, sink, flows, value, source_side, tol=0.0) -> None:
    """Check that ``source_side`` proves a feasible plan of ``value`` maximum.

    Weak duality: no s-t flow exceeds the capacity of any s-t cut, so a flow whose
    value equals a cut's capacity is maximum.

    Parameters
    ----------
    graph : Graph
        With ``capacity`` and ``unlimited``.
    source, sink : int
    flows : ndarray
        The plan.
    value : number
        The plan's value.
    source_side : ndarray of bool
        The cut's source side.
    tol : float
        Slack allowed in each comparison.

    Raises
    ------
    SelfCheckFailed
        The cut does not separate source from sink, contains an arc without a limit,
        or its capacity differs from the value.
    """
    tail, head, capacity, unlimited = graph.tail, graph.head, graph.capacity, graph.unlimited
    if not source_side[source] or source_side[sink]:
        _fail("the cut does not separate the source from the sink")
    crossing = source_side[tail] & ~source_side[head]
    if unlimited is not None and (crossing & unlimited).any():
        _fail("the cut contains an arc without a capacity limit")
    cut = capacity[crossing].sum()
    if abs(cut - value) > tol * max(1, int(crossing.sum())):
        _fail(f"the cut's capacity {cut} differs from the plan's value {value}")
    inward = ~source_side[tail] & source_side[head]
    if (flows[inward] > tol).any() or (np.abs(flows[crossing] - capacity[crossing]) > tol).any():
        _fail("the cut's arcs are not saturated outward and empty inward")


def check_augmenting_path(graph: Graph, source, sink, flows, steps, gain, tol=0.0):
    """Check that ``steps`` is a source-to-sink residual path that gains ``gain``.

    The path must be connected, run from the source to the sink through residual arcs
    with room for ``gain`` (> 0; None means every step is a forward arc without a
    limit), and pushing ``gain`` along it must keep the plan feasible and raise its
    value by exactly ``gain``.

    Parameters
    ----------
    graph : Graph
        With ``capacity`` and ``unlimited`` (lower bounds ignored: max-flow has none).
    source, sink : int
    flows : ndarray
        The plan.
    steps : list of (arc, direction)
        The path, ``direction`` +1 forward or -1 backward.
    gain : number or None
        What the path adds to the value (None: no limit).
    tol : float
        Slack allowed in each comparison.

    Raises
    ------
    SelfCheckFailed
    """
    if not steps:
        _fail("the improving path is empty")
    graph = graph.replace(lower=None)
    walk = _walk(steps, graph.tail, graph.head)
    if walk[0][0] != source or walk[-1][1] != sink:
        _fail("the improving path does not run from the source to the sink")
    if any(walk[i][1] != walk[i + 1][0] for i in range(len(walk) - 1)):
        _fail("the improving path is not connected")
    if gain is None:
        if not all(d == FORWARD and graph.unlimited is not None and graph.unlimited[a] for a, d in steps):
            _fail("an improving path without limit uses an arc with a limit")
        return
    if not gain > tol:
        _fail(f"the improving path gains {gain}, not more than 0")
    moved = _apply(flows, steps, gain)
    supply = np.zeros(graph.num_nodes, dtype=moved.dtype)
    _, _, count = find_violations(graph, moved, supply, free=np.array([source, sink]), tol=tol)
    if count:
        _fail("pushing the gain along the improving path breaks a bound or conservation")
    before = -graph.balance(flows)[source]
    after = -graph.balance(moved)[source]
    if abs(after - before - gain) > tol * len(steps):
        _fail(f"the improving path raises the value by {after - before}, not by {gain}")


