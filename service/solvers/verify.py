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

Sizes: the breadth-first search is one vectorised pass per layer, fine for millions of
arcs. The Bellman-Ford search runs at most ``n`` rounds of one vectorised pass over
the residual arcs each (``O(n m)`` in the worst case; plans close to optimal settle in
a few dozen rounds): it is meant for networks up to about 10^4 nodes and 10^5 arcs,
and it stops with :class:`~service.errors.SolveTimeout` at its deadline.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np

from ..errors import SelfCheckFailed, SolveTimeout

FORWARD, BACKWARD = 1, -1
#: Most violations listed in a verdict; ``violation_count`` always has the total.
MAX_LISTED_VIOLATIONS = 10_000
#: Relative slack for plans or data with fractions (exact 0 for integers).
RELATIVE_TOLERANCE = 1e-9


@dataclass
class Residual:
    """The residual network of a plan: one entry per residual arc.

    ``arc`` is the index of the original arc, ``direction`` +1 (forward: more flow
    can go along the arc) or -1 (backward: flow on the arc can be taken back),
    ``src``/``dst`` the residual arc's end nodes, ``room`` how much can be pushed
    (``inf`` for a forward arc without a limit).
    """

    arc: np.ndarray
    direction: np.ndarray
    src: np.ndarray
    dst: np.ndarray
    room: np.ndarray

    @property
    def size(self) -> int:
        return int(self.arc.size)


@dataclass
class Verdict:
    """The outcome of checking one plan (node and arc numbers are indices)."""

    feasible: bool
    objective: float | int  # value (max-flow) or cost (min-cost flow)
    tolerance: float
    violation_count: int = 0
    arc_violations: list = field(default_factory=list)  # (arc, kind, excess)
    node_violations: list = field(default_factory=list)  # (node, imbalance)
    optimal: bool = False
    steps: list | None = None  # [(arc, direction)] of the improving path or cycle
    amount: float | int | None = None  # flow to push along it; None: no limit
    unit_cost: float | int | None = None  # min-cost: cost per unit pushed round the cycle
    gain: float | int | None = None  # value gained or cost saved; None: unbounded
    source_side: np.ndarray | None = None  # max-flow proof of optimality
    cut_arcs: np.ndarray | None = None
    cut_capacity: float | int | None = None
    potentials: np.ndarray | None = None  # min-cost proof of optimality


def _number(x):
    return x.item() if hasattr(x, "item") else x


def _fail(what: str) -> None:
    raise SelfCheckFailed(f"self-check of a plan verdict failed: {what}")


#: Integer sums and products stay exact in int64 below this bound.
EXACT_BOUND = 2.0**62


def _abs_sum(a) -> float:
    return 0.0 if a is None or not np.size(a) else float(np.abs(np.asarray(a, dtype=np.float64)).sum())


def common_dtype(*arrays, weights=None) -> np.dtype:
    """int64 when every array is integral and every sum fits, else float64.

    Node balances add up flows and capacities, and a cost is a sum of ``weights``
    times flows: when those could leave int64 the check runs in float64 (with a
    tolerance) instead of wrapping round.
    """
    integral = all(a is None or np.asarray(a).dtype.kind in "iub" for a in arrays + (weights,))
    total = sum(_abs_sum(a) for a in arrays)
    if weights is not None and np.size(weights):
        total += float(np.abs(np.asarray(weights, dtype=np.float64)).max()) * total
    return np.dtype(np.int64) if integral and total < EXACT_BOUND else np.dtype(np.float64)


def tolerance_for(dtype: np.dtype, *arrays) -> float:
    """0 for integers; otherwise a slack relative to the largest magnitude involved."""
    if dtype.kind == "i":
        return 0.0
    scale = 1.0
    for a in arrays:
        if a is not None and np.size(a):
            finite = np.asarray(a, dtype=np.float64)
            finite = finite[np.isfinite(finite)]
            if finite.size:
                scale = max(scale, float(np.abs(finite).max()))
    return RELATIVE_TOLERANCE * scale


def node_balance(num_nodes: int, tail, head, flows) -> np.ndarray:
    """Inflow minus outflow at every node."""
    balance = np.zeros(num_nodes, dtype=flows.dtype)
    np.add.at(balance, head, flows)
    np.subtract.at(balance, tail, flows)
    return balance


def find_violations(num_nodes, tail, head, capacity, unlimited, lower, flows, supply, free=None, tol=0.0):
    """Every bound and conservation violation of a plan.

    Parameters
    ----------
    capacity, unlimited, lower : ndarray
        Arc bounds (``unlimited`` marks arcs without an upper bound; ``lower`` may be
        None for all zero).
    flows : ndarray
        The plan, aligned with the arcs.
    supply : ndarray
        Required net outflow per node (0 for inner nodes of a max-flow problem).
    free : ndarray of int, optional
        Nodes exempt from conservation (the source and sink of a max-flow problem).
    tol : float
        Slack allowed before a difference counts as a violation.

    Returns
    -------
    (arc_violations, node_violations, count)
        ``arc_violations``: ``(arc, kind, excess)`` with kind ``"capacity"`` (flow above
        capacity by ``excess``) or ``"lower"`` (flow below the lower bound, 0 by default,
        by ``excess``); ``node_violations``: ``(node, imbalance)`` with ``imbalance`` =
        supply + inflow - outflow (positive: flow is left over at the node; negative:
        more leaves than arrives). Lists are cut at ``MAX_LISTED_VIOLATIONS``;
        ``count`` is the full total.
    """
    above = flows - capacity
    if unlimited is not None:
        above = np.where(unlimited, 0, above)
    below = (0 if lower is None else lower) - flows
    over = np.flatnonzero(above > tol)
    under = np.flatnonzero(below > tol)
    imbalance = supply + node_balance(num_nodes, tail, head, flows)
    if free is not None:
        imbalance[free] = 0
    bad_nodes = np.flatnonzero(np.abs(imbalance) > tol * max(1, _max_degree(num_nodes, tail, head)))
    count = int(over.size + under.size + bad_nodes.size)
    arcs = sorted([(int(i), "capacity", _number(above[i])) for i in over[:MAX_LISTED_VIOLATIONS]]
                  + [(int(i), "lower", _number(below[i])) for i in under[:MAX_LISTED_VIOLATIONS]])
    arcs = arcs[:MAX_LISTED_VIOLATIONS]
    nodes = [(int(v), _number(imbalance[v])) for v in bad_nodes[:max(0, MAX_LISTED_VIOLATIONS - len(arcs))]]
    return arcs, nodes, count


def _max_degree(num_nodes, tail, head) -> int:
    if tail.size == 0:
        return 0
    return int(np.bincount(np.concatenate([tail, head]), minlength=num_nodes).max())


def residual_network(tail, head, capacity, unlimited, lower, flows, tol=0.0, cost=None):
    """The residual arcs of a feasible plan, forward arcs first.

    Returns
    -------
    (Residual, weight)
        ``weight`` is the per-residual-arc cost (``cost`` forward, ``-cost`` backward)
        or None when ``cost`` is None.
    """
    room = capacity - flows
    if unlimited is not None:
        room = np.where(unlimited, np.inf, room.astype(np.float64)) if unlimited.any() else room
    back = flows - (0 if lower is None else lower)
    fwd = np.flatnonzero(room > tol)
    bwd = np.flatnonzero(back > tol)
    dtype = np.float64 if room.dtype.kind == "f" else flows.dtype
    res = Residual(
        arc=np.concatenate([fwd, bwd]),
        direction=np.concatenate([np.full(fwd.size, FORWARD, np.int8), np.full(bwd.size, BACKWARD, np.int8)]),
        src=np.concatenate([tail[fwd], head[bwd]]).astype(np.int64),
        dst=np.concatenate([head[fwd], tail[bwd]]).astype(np.int64),
        room=np.concatenate([room[fwd].astype(dtype), back[bwd].astype(dtype)]),
    )
    weight = None if cost is None else np.concatenate([cost[fwd], -cost[bwd]])
    return res, weight


# --- max-flow --------------------------------------------------------------------


def bfs_tree(num_nodes: int, src: np.ndarray, dst: np.ndarray, start: int, target: int | None = None):
    """Breadth-first search over arcs ``src -> dst``, one vectorised step per layer.

    Returns
    -------
    (parent, reached)
        ``parent[v]`` is the index (into ``src``/``dst``) of the arc by which ``v`` was
        first reached, -1 for the start and unreached nodes; ``reached`` is a mask.
    """
    order = np.argsort(src, kind="stable")
    src_sorted, dst_sorted = src[order], dst[order]
    starts = np.searchsorted(src_sorted, np.arange(num_nodes + 1))
    parent = np.full(num_nodes, -1, dtype=np.int64)
    reached = np.zeros(num_nodes, dtype=bool)
    reached[start] = True
    frontier = np.array([start], dtype=np.int64)
    while frontier.size and not (target is not None and reached[target]):
        lo, hi = starts[frontier], starts[frontier + 1]
        counts = hi - lo
        total = int(counts.sum())
        if total == 0:
            break
        # Ragged gather of every arc leaving the frontier.
        offsets = np.repeat(lo - np.concatenate([[0], np.cumsum(counts)[:-1]]), counts)
        idx = offsets + np.arange(total)
        heads = dst_sorted[idx]
        fresh = ~reached[heads]
        idx, heads = idx[fresh], heads[fresh]
        nodes, first = np.unique(heads, return_index=True)
        parent[nodes] = order[idx[first]]
        reached[nodes] = True
        frontier = nodes
    return parent, reached


def _path_to(parent: np.ndarray, src: np.ndarray, start: int, end: int) -> np.ndarray:
    path = []
    v = end
    while v != start:
        k = int(parent[v])
        path.append(k)
        v = int(src[k])
    return np.array(path[::-1], dtype=np.int64)


def verify_max_flow(num_nodes, tail, head, capacity, unlimited, source, sink, flows) -> Verdict:
    """Check a client's max-flow plan.

    Parameters
    ----------
    num_nodes : int
    tail, head : ndarray of int
    capacity : ndarray
        0 where ``unlimited``.
    unlimited : ndarray of bool or None
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
    >>> v = verify_max_flow(3, np.array([0, 1]), np.array([1, 2]), np.array([5, 3]), None, 0, 2,
    ...                     np.array([2, 2]))
    >>> v.feasible, v.optimal, v.objective, v.steps, v.gain
    (True, False, 2, [(0, 1), (1, 1)], 1)
    """
    dtype = common_dtype(capacity, flows)
    capacity, flows = capacity.astype(dtype, copy=False), flows.astype(dtype, copy=False)
    tol = tolerance_for(dtype, capacity, flows)
    supply = np.zeros(num_nodes, dtype=dtype)
    arcs, nodes, count = find_violations(num_nodes, tail, head, capacity, unlimited, None, flows, supply,
                                         free=np.array([source, sink]), tol=tol)
    value = _number(-node_balance(num_nodes, tail, head, flows)[source])
    verdict = Verdict(count == 0, value, tol, count, arcs, nodes)
    if not verdict.feasible:
        return verdict
    res, _ = residual_network(tail, head, capacity, unlimited, None, flows, tol)
    # A path of arcs without limits first: it shows the problem itself is unbounded.
    path = _unlimited_first(res, lambda r, _sub: _bfs_path(num_nodes, r, source, sink))
    if path is not None:
        verdict.steps = [(int(res.arc[k]), int(res.direction[k])) for k in path]
        verdict.gain = verdict.amount = _finite(res.room[path].min(), dtype)
        check_augmenting_path(num_nodes, tail, head, capacity, unlimited, source, sink, flows,
                              verdict.steps, verdict.gain, tol)
    else:
        _, reached = bfs_tree(num_nodes, res.src, res.dst, source, sink)
        crossing = np.flatnonzero(reached[tail] & ~reached[head])
        verdict.optimal = True
        verdict.source_side = reached
        verdict.cut_arcs = crossing
        verdict.cut_capacity = _number(capacity[crossing].sum())
        check_cut_proof(tail, head, capacity, unlimited, source, sink, flows, value, reached, tol)
    return verdict


def _finite(x, dtype):
    """None for an unlimited amount; an int for integer data."""
    if math.isinf(x):
        return None
    return int(x) if dtype.kind == "i" else _number(x)


def _unlimited_first(res: Residual, search):
    """Run ``search`` on the residual arcs without limits, then on all of them.

    ``search(residual)`` returns residual arc indices or None; indices found in the
    subset are mapped back to ``res``.
    """
    endless = np.flatnonzero(np.isinf(res.room)) if res.room.dtype.kind == "f" else np.empty(0, np.int64)
    if endless.size:
        sub = Residual(res.arc[endless], res.direction[endless], res.src[endless], res.dst[endless],
                       res.room[endless])
        found = search(sub, endless)
        if found is not None:
            return endless[np.asarray(found, dtype=np.int64)]
    return search(res, None)


def _bfs_path(num_nodes, res: Residual, source, sink):
    parent, reached = bfs_tree(num_nodes, res.src, res.dst, source, sink)
    return _path_to(parent, res.src, source, sink) if reached[sink] else None


def check_cut_proof(tail, head, capacity, unlimited, source, sink, flows, value, source_side, tol=0.0) -> None:
    """Check that ``source_side`` proves a feasible plan of ``value`` maximum.

    Weak duality: no s-t flow exceeds the capacity of any s-t cut, so a flow whose
    value equals a cut's capacity is maximum.

    Raises
    ------
    SelfCheckFailed
        The cut does not separate source from sink, contains an arc without a limit,
        or its capacity differs from the value.
    """
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


def _walk(steps, tail, head):
    """(from, to) of each step of a residual path or cycle."""
    out = []
    for arc, direction in steps:
        a, b = int(tail[arc]), int(head[arc])
        out.append((a, b) if direction == FORWARD else (b, a))
    return out


def _apply(flows, steps, amount):
    arcs = np.array([a for a, _ in steps], dtype=np.int64)
    signs = np.array([d for _, d in steps], dtype=flows.dtype)
    moved = flows.copy()
    np.add.at(moved, arcs, signs * amount)
    return moved


def check_augmenting_path(num_nodes, tail, head, capacity, unlimited, source, sink, flows, steps, gain, tol=0.0):
    """Check that ``steps`` is a source-to-sink residual path that gains ``gain``.

    The path must be connected, run from the source to the sink through residual arcs
    with room for ``gain`` (> 0; None means every step is a forward arc without a
    limit), and pushing ``gain`` along it must keep the plan feasible and raise its
    value by exactly ``gain``.

    Raises
    ------
    SelfCheckFailed
    """
    if not steps:
        _fail("the improving path is empty")
    walk = _walk(steps, tail, head)
    if walk[0][0] != source or walk[-1][1] != sink:
        _fail("the improving path does not run from the source to the sink")
    if any(walk[i][1] != walk[i + 1][0] for i in range(len(walk) - 1)):
        _fail("the improving path is not connected")
    if gain is None:
        if not all(d == FORWARD and unlimited is not None and unlimited[a] for a, d in steps):
            _fail("an improving path without limit uses an arc with a limit")
        return
    if not gain > tol:
        _fail(f"the improving path gains {gain}, not more than 0")
    moved = _apply(flows, steps, gain)
    supply = np.zeros(num_nodes, dtype=moved.dtype)
    _, _, count = find_violations(num_nodes, tail, head, capacity, unlimited, None, moved, supply,
                                  free=np.array([source, sink]), tol=tol)
    if count:
        _fail("pushing the gain along the improving path breaks a bound or conservation")
    before = -node_balance(num_nodes, tail, head, flows)[source]
    after = -node_balance(num_nodes, tail, head, moved)[source]
    if abs(after - before - gain) > tol * len(steps):
        _fail(f"the improving path raises the value by {after - before}, not by {gain}")


# --- min-cost flow ---------------------------------------------------------------


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


def negative_cycle(num_nodes, res: Residual, weight: np.ndarray, tol=0.0, deadline: float | None = None):
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
        When ``deadline`` (a ``time.monotonic()`` value) passes.
    """
    dist = np.zeros(num_nodes, dtype=weight.dtype)
    parent = np.full(num_nodes, -1, dtype=np.int64)
    edge_ids = np.arange(res.size)
    for _ in range(num_nodes + 1):
        if deadline is not None and time.monotonic() > deadline:
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


def verify_min_cost_flow(num_nodes, tail, head, capacity, unlimited, cost, lower, supply, flows,
                         *, deadline: float | None = None) -> Verdict:
    """Check a client's min-cost flow plan.

    Parameters
    ----------
    capacity : ndarray
        0 where ``unlimited``.
    cost, lower : ndarray or None
        Per-unit arc costs and lower bounds (None: all zero).
    supply : ndarray
        Net outflow required at each node (positive: supply, negative: demand).
    flows : ndarray
        The client's flow per arc.
    deadline : float, optional
        ``time.monotonic()`` value at which the cycle search gives up.

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
    >>> v = verify_min_cost_flow(2, np.array([0, 0]), np.array([1, 1]), np.array([2, 2]), None,
    ...                          np.array([5, 1]), None, np.array([2, -2]), np.array([2, 0]))
    >>> v.objective, v.optimal, v.steps, v.amount, v.unit_cost, v.gain
    (10, False, [(1, 1), (0, -1)], 2, -4, 8)
    """
    if cost is None:
        cost = np.zeros(tail.size, dtype=np.int64)
    dtype = common_dtype(capacity, flows, lower, supply, weights=cost)
    capacity, flows, cost, supply = (a.astype(dtype, copy=False) for a in (capacity, flows, cost, supply))
    lower = None if lower is None else lower.astype(dtype, copy=False)
    tol = tolerance_for(dtype, capacity, flows, cost, lower, supply)
    arcs, nodes, count = find_violations(num_nodes, tail, head, capacity, unlimited, lower, flows, supply, tol=tol)
    total = _number((cost * flows).sum())
    verdict = Verdict(count == 0, total, tol, count, arcs, nodes)
    if not verdict.feasible:
        return verdict
    res, weight = residual_network(tail, head, capacity, unlimited, lower, flows, tol, cost)
    if weight.dtype.kind == "i" and res.size and int(np.abs(weight).max()) * (num_nodes + 1) > 2**62:
        weight = weight.astype(np.float64)  # distances could overflow int64
    found = {}

    def search(r: Residual, subset):
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
        check_potentials(tail, head, capacity, unlimited, cost, lower, flows, verdict.potentials,
                         tol * 8 * num_nodes)
        return verdict
    cycle = np.asarray(cycle, dtype=np.int64)
    verdict.steps = [(int(res.arc[k]), int(res.direction[k])) for k in cycle]
    verdict.unit_cost = _number(weight[cycle].sum())
    verdict.amount = _finite(res.room[cycle].min(), dtype)
    verdict.gain = None if verdict.amount is None else _number(-verdict.unit_cost * verdict.amount)
    check_negative_cycle(num_nodes, tail, head, capacity, unlimited, cost, lower, supply, flows,
                         verdict.steps, verdict.amount, verdict.gain, tol)
    return verdict


def check_potentials(tail, head, capacity, unlimited, cost, lower, flows, potentials, tol=0.0) -> None:
    """Check the reduced-cost optimality conditions of a feasible min-cost plan.

    With reduced cost ``r = cost + p[tail] - p[head]``: an arc with room left (flow
    below capacity) needs ``r >= 0``, an arc carrying more than its lower bound needs
    ``r <= 0``. Then no residual cycle has negative cost, so the plan is of least cost.

    Raises
    ------
    SelfCheckFailed
    """
    reduced = cost + potentials[tail] - potentials[head]
    room = capacity - flows > tol
    if unlimited is not None:
        room |= unlimited
    above_lower = flows - (0 if lower is None else lower) > tol
    if (reduced[room] < -tol).any() or (reduced[above_lower] > tol).any():
        _fail("a residual arc has a negative reduced cost under the potentials")


def check_negative_cycle(num_nodes, tail, head, capacity, unlimited, cost, lower, supply, flows,
                         steps, amount, gain, tol=0.0) -> None:
    """Check that ``steps`` is a residual cycle that saves ``gain`` when ``amount`` goes round.

    The cycle must close, have negative cost per unit, and pushing ``amount`` round it
    must keep the plan feasible and lower its cost by exactly ``gain``. ``amount`` None
    means every step is a forward arc without a limit (the problem is unbounded).

    Raises
    ------
    SelfCheckFailed
    """
    if not steps:
        _fail("the improving cycle is empty")
    walk = _walk(steps, tail, head)
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
    _, _, count = find_violations(num_nodes, tail, head, capacity, unlimited, lower, moved, supply, tol=tol)
    if count:
        _fail("pushing the amount round the improving cycle breaks a bound or conservation")
    saved = (cost * flows).sum() - (cost * moved).sum()
    if abs(saved - gain) > max(tol, RELATIVE_TOLERANCE) * max(1.0, abs(float(gain))) * len(steps):
        _fail(f"the improving cycle saves {saved}, not {gain}")
