"""Min-cost flow on integer data with OR-Tools' SimpleMinCostFlow (cost scaling).

Plain functions over numpy arrays; no HTTP, no problem model. Every call uses the
vectorised entry points (``add_arcs_with_capacity_and_unit_cost``,
``set_nodes_supplies``, ``flows``); no per-arc Python loop.

OR-Tools pitfalls handled here:

* ``flows()`` must only be read after an ``OPTIMAL`` status (reading it after
  ``INFEASIBLE`` crashes the process), so statuses are checked first.
* Costs are multiplied by (number of nodes + 1) inside the solver and must stay
  below ``2**63 / (2 (n + 1))``; each node's capacities in or out plus its supply
  must fit int64 (measured on OR-Tools 9.15: BAD_CAPACITY_RANGE otherwise; a total
  cost past int64 only saturates ``optimal_cost``, which we never read: the
  certificate recomputes the cost in Python integers). :func:`solver_bounds` refuses
  data outside that envelope before any solver is called, after capping capacities
  too large to matter (see there), and a range status from the solver is turned into
  :class:`GraphRangeError`: the front answers a 422 naming the field and the limit.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from ortools.graph.python import max_flow as ortools_max_flow
from ortools.graph.python import min_cost_flow as ortools_min_cost_flow

from ..errors import SolverFailure
from .graph import max_degree
from .maxflow_graph import graph_engine
from .scaling import is_object

#: Every intermediate sum we form (costs x flows, potentials, dual bounds) stays
#: below this in magnitude, leaving a factor of two of head-room in int64.
SAFE = 2**62
#: Stand-in capacities times a node's degree stay below this.
_STAND_IN_ROOM = 2**60


class GraphRangeError(ValueError):
    """The data do not fit the graph solver's 64-bit arithmetic.

    ``field`` (``cost``, ``capacity`` or ``supply``), ``index`` (the arc or node, when
    one is to blame) and ``limit`` (in the solver's integers) let the front name the
    field and the limit in the caller's units.
    """

    def __init__(self, message: str, field: str = "capacity", index: int | None = None, limit=None):
        super().__init__(message)
        self.field, self.index, self.limit = field, index, limit


@dataclass(frozen=True)
class SolverBounds:
    """Capacities as OR-Tools gets them: int64, with ``big`` on every arc without a
    limit and at most ``big`` on the ``huge`` finite arcs (``None`` when none is).

    ``stand_in`` marks the arcs whose solver capacity is below their real one (no
    limit, or a huge one cut to ``big``): flow can always be added to them, which is
    what residual networks and potentials must see.
    """

    caps: np.ndarray
    big: int
    huge: np.ndarray | None
    stand_in: np.ndarray | None


def mincost_engine(**extra) -> dict:
    """The ``engine`` document of an answer from OR-Tools ``SimpleMinCostFlow``.

    See :func:`~service.solvers.maxflow_graph.graph_engine`.
    """
    return graph_engine("SimpleMinCostFlow", **extra)


def solver_bounds(num_nodes: int, tail: np.ndarray, head: np.ndarray, capacity: np.ndarray,
                  unlimited: np.ndarray | None, cost: np.ndarray, supply: np.ndarray) -> SolverBounds:
    """Check the int64 envelope and give the capacities OR-Tools solves with.

    The stand-in ``big`` is ``sum(positive supply) + sum(the other finite capacities)
    + 1``: an optimal flow decomposes into paths (at most the total supply) and
    negative cycles, each through at least one of those finite arcs when no negative
    cycle runs through the stand-in arcs only, so no arc of some optimal flow carries
    that much. Arcs without a limit get it; so do finite arcs whose capacities would
    break a node's 64-bit sums (the largest, as few as needed: ``huge``). The caller
    must then rule out negative cycles through ``huge`` and unlimited arcs only (their
    optimum is huge too), and check the answer against the real capacities.

    Raises
    ------
    GraphRangeError
        When costs scaled by the node count, or the supplies, could overflow 64-bit
        arithmetic.
    """
    n = num_nodes + 3  # the solver adds a source and a sink of its own
    _check_costs(cost, n)
    limited = np.ones(capacity.size, bool) if unlimited is None else ~unlimited
    if is_object(supply) or float(np.abs(supply).astype(np.float64).sum()) >= 2.0**61:
        raise GraphRangeError("the supplies sum to more than 2**61 in magnitude", "supply", limit=2**61)
    positive = int(supply[supply > 0].sum())
    finite = np.where(limited, capacity, 0)
    if not is_object(finite):
        if unlimited is None:
            # No stand-in on any arc; only a max-flow's return arc may take one, and
            # no flow exceeds the supplies.
            caps = finite.astype(np.int64, copy=False)
            if _node_sums_fit(num_nodes, tail, head, caps, supply):
                return SolverBounds(caps, positive + 1, None, None)
        elif float(finite.astype(np.float64).sum()) + positive < _STAND_IN_ROOM / 2:  # no int64 wrap below
            big = int(finite.sum()) + positive + 1
            caps = np.where(limited, finite, big).astype(np.int64)
            if _node_sums_fit(num_nodes, tail, head, caps, supply):
                return SolverBounds(caps, big, None, unlimited)
    return _capped_bounds(num_nodes, tail, head, finite, limited, positive)


def _check_costs(cost: np.ndarray, n: int) -> None:
    if not cost.size:
        return
    magnitude = np.abs(cost)
    i = int(np.argmax(magnitude))
    top = float(magnitude[i])
    limit = min(2**63 // (2 * (n + 1)), SAFE // (4 * n)) - 1
    if is_object(cost) or top > limit:
        raise GraphRangeError(f"costs up to {top:g} are too large for {n - 3} nodes once the solver scales them "
                              "by the node count", "cost", i, limit)


def _node_sums_fit(num_nodes, tail, head, caps, supply) -> bool:
    """Each node's capacities out, and in, plus its supply, below 2**62 (float bound, with room)."""
    c = caps.astype(np.float64)
    room = np.abs(supply.astype(np.float64))
    out = np.bincount(tail, c, num_nodes) + room
    into = np.bincount(head, c, num_nodes) + room
    return bool(max(out.max(initial=0.0), into.max(initial=0.0)) < 2.0**61)


def _capped_bounds(num_nodes, tail, head, finite, limited, positive) -> SolverBounds:
    """Cap the largest finite capacities (and the unlimited arcs) at the stand-in."""
    ceiling = _STAND_IN_ROOM // (max_degree(num_nodes, tail, head) + 2)
    arcs = np.flatnonzero(limited)
    values = finite[arcs].astype(np.float64)
    order = np.argsort(values, kind="stable")
    stand_in = positive + 1 + np.concatenate([[0.0], np.cumsum(values[order])])
    keep = int(np.searchsorted(stand_in, ceiling * 0.5, side="right")) - 1  # float sums: a factor 2 of room
    if keep < 0:
        raise GraphRangeError("the supplies are too large for the exact range", "supply", limit=ceiling)
    small = arcs[order[:keep]]
    big = int(finite[small].sum()) + positive + 1
    huge = np.zeros(finite.size, bool)
    huge[arcs[order[keep:]]] = True
    caps = np.full(finite.size, big, dtype=np.int64)  # unlimited arcs keep the stand-in
    caps[small] = finite[small].astype(np.int64)
    caps[huge] = np.minimum(finite[huge], big).astype(np.int64)
    stand_in = ~limited | (huge & (finite > big))
    return SolverBounds(caps, big, huge if huge.any() else None, stand_in if stand_in.any() else None)


def solve_balanced(num_nodes: int, tail: np.ndarray, head: np.ndarray, caps: np.ndarray, cost: np.ndarray,
                   supply: np.ndarray):
    """Min-cost flow with balanced integer supplies and zero lower bounds.

    Parameters
    ----------
    num_nodes : int
    tail, head : ndarray of int32
    caps : ndarray of int64
        Capacities with their stand-ins (:attr:`SolverBounds.caps`).
    cost : ndarray of int64
    supply : ndarray of int64
        Outflow minus inflow required at each node; sums to 0.

    Returns
    -------
    ndarray of int64 or None
        The optimal flows, or ``None`` when the supplies cannot be moved.

    Raises
    ------
    GraphRangeError
        When the solver reports a cost or capacity range problem.
    SolverFailure
        For any other non-optimal status.

    Examples
    --------
    >>> import numpy as np
    >>> solve_balanced(3, np.array([0, 0, 1], np.int32), np.array([1, 2, 2], np.int32),
    ...                np.array([4, 2, 5]), np.array([1, 5, 1]), np.array([3, 0, -3])).tolist()
    [3, 0, 3]
    """
    solver = ortools_min_cost_flow.SimpleMinCostFlow()
    arcs = solver.add_arcs_with_capacity_and_unit_cost(
        np.ascontiguousarray(tail, dtype=np.int32), np.ascontiguousarray(head, dtype=np.int32),
        np.ascontiguousarray(caps, dtype=np.int64), np.ascontiguousarray(cost, dtype=np.int64))
    if num_nodes:
        solver.set_nodes_supplies(np.arange(num_nodes, dtype=np.int32), np.ascontiguousarray(supply, dtype=np.int64))
    status = solver.solve()
    if status == solver.INFEASIBLE:
        return None
    if status in (solver.BAD_COST_RANGE, solver.BAD_CAPACITY_RANGE):
        raise GraphRangeError(f"OR-Tools min-cost flow reported {status.name}")
    if status != solver.OPTIMAL:
        raise SolverFailure(f"OR-Tools min-cost flow returned status {status.name}")
    if not tail.size:
        return np.zeros(0, dtype=np.int64)
    return np.asarray(solver.flows(arcs), dtype=np.int64)


def auxiliary_max_flow(num_nodes: int, tail: np.ndarray, head: np.ndarray, caps: np.ndarray,
                       supply: np.ndarray):
    """How much of the supply the network can move, with a minimum cut.

    The auxiliary network adds a super source feeding every supply node (capacity =
    its supply) and a super sink fed by every demand node. Its maximum flow equals
    the total supply exactly when the supplies can be moved.

    Returns
    -------
    (value, flows, source_side)
        ``flows`` on the given arcs; ``source_side`` a boolean mask over the given
        nodes: the source side of a minimum cut, without the super source.
    """
    s, t = num_nodes, num_nodes + 1
    sources = np.flatnonzero(supply > 0).astype(np.int32)
    sinks = np.flatnonzero(supply < 0).astype(np.int32)
    all_tail = np.concatenate([tail.astype(np.int32), np.full(sources.size, s, np.int32), sinks])
    all_head = np.concatenate([head.astype(np.int32), sources, np.full(sinks.size, t, np.int32)])
    all_cap = np.concatenate([caps, supply[sources], -supply[sinks]])
    solver = ortools_max_flow.SimpleMaxFlow()
    solver.add_arc_with_capacity(t, t, 0)  # make sure both extra nodes exist
    arcs = solver.add_arcs_with_capacity(all_tail, all_head, all_cap.astype(np.int64))
    status = solver.solve(s, t)
    if status != solver.OPTIMAL:
        raise SolverFailure(f"OR-Tools max-flow returned status {status}")
    flows = np.asarray(solver.flows(arcs), dtype=np.int64)[: tail.size]
    side = np.zeros(num_nodes + 2, dtype=bool)
    side[np.asarray(solver.get_source_side_min_cut(), dtype=np.int64)] = True
    return int(solver.optimal_flow()), flows, side[:num_nodes]


def negative_unlimited_cycle(num_nodes: int, tail: np.ndarray, head: np.ndarray, cost: np.ndarray,
                             unlimited: np.ndarray | None) -> np.ndarray | None:
    """A negative-cost cycle made only of arcs without a capacity limit, or ``None``.

    One unit of capacity on every unlimited arc and no supplies: the minimum-cost
    circulation is negative exactly when such a cycle exists, and it decomposes into
    cycles of which at least one is negative.

    Returns
    -------
    ndarray of int64 or None
        Arc indices of the cycle, in order.
    """
    if unlimited is None or not (unlimited & (cost < 0)).any():
        return None
    arcs = np.flatnonzero(unlimited)
    solver = ortools_min_cost_flow.SimpleMinCostFlow()
    handles = solver.add_arcs_with_capacity_and_unit_cost(
        tail[arcs].astype(np.int32), head[arcs].astype(np.int32), np.ones(arcs.size, np.int64),
        cost[arcs].astype(np.int64))
    status = solver.solve()
    if status in (solver.BAD_COST_RANGE, solver.BAD_CAPACITY_RANGE):
        raise GraphRangeError(f"OR-Tools min-cost flow reported {status.name}")
    if status != solver.OPTIMAL:
        raise SolverFailure(f"OR-Tools min-cost circulation returned status {status.name}")
    used = arcs[np.asarray(solver.flows(handles)) > 0]
    if not used.size or int(cost[used].sum()) >= 0:
        return None
    return _negative_cycle_in_circulation(tail, head, cost, used)


def _negative_cycle_in_circulation(tail, head, cost, used: np.ndarray) -> np.ndarray:
    """Split a 0/1 circulation into cycles and return one of negative cost.

    A plain walk: it runs only when the answer is "unbounded", over the arcs of the
    circulation.
    """
    out: dict[int, list[int]] = {}
    for a in used.tolist():
        out.setdefault(int(tail[a]), []).append(a)
    while out:
        start = next(iter(out))
        path, seen, node = [], {}, start
        while node not in seen:
            seen[node] = len(path)
            a = out[node].pop()
            if not out[node]:
                del out[node]
            path.append(a)
            node = int(head[a])
        cycle = np.array(path[seen[node]:], dtype=np.int64)
        # Arcs before the cycle's start go back to the pool.
        for a in path[: seen[node]]:
            out.setdefault(int(tail[a]), []).append(a)
        if int(cost[cycle].sum()) < 0:
            return cycle
    raise SolverFailure("a negative circulation contained no negative cycle")
