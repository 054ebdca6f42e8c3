"""Min-cost flow on integer data with OR-Tools' SimpleMinCostFlow (cost scaling).

Plain functions over numpy arrays; no HTTP, no problem model. Every call uses the
vectorised entry points (``add_arcs_with_capacity_and_unit_cost``,
``set_nodes_supplies``, ``flows``); no per-arc Python loop.

OR-Tools pitfalls handled here:

* ``flows()`` must only be read after an ``OPTIMAL`` status (reading it after
  ``INFEASIBLE`` crashes the process), so statuses are checked first.
* Costs are multiplied by (number of nodes + 1) inside the solver and must stay
  below ``2**63 / (2 (n + 1))``; supply and capacity sums must fit int64.
  :func:`check_ranges` refuses data outside a conservative envelope before any
  solver is called, and a range status from the solver is turned into
  :class:`GraphRangeError` so the front can route to the LP engine.
"""

from __future__ import annotations

import numpy as np
from ortools.graph.python import max_flow as ortools_max_flow
from ortools.graph.python import min_cost_flow as ortools_min_cost_flow

from ..errors import SolverFailure
from .maxflow_graph import graph_engine

#: Every intermediate sum we form (costs x flows, potentials, dual bounds) stays
#: below this in magnitude, leaving a factor of two of head-room in int64.
SAFE = 2**62


class GraphRangeError(ValueError):
    """The data do not fit the graph solver's 64-bit arithmetic."""


def mincost_engine(**extra) -> dict:
    return graph_engine("SimpleMinCostFlow", **extra)


def check_ranges(num_nodes: int, capacity: np.ndarray, unlimited: np.ndarray | None, cost: np.ndarray,
                 supply: np.ndarray) -> int:
    """Check the int64 envelope and return the stand-in capacity for unlimited arcs.

    The stand-in is ``sum(positive supply) + sum(finite capacity) + 1``: an optimal
    flow decomposes into paths (at most the total supply) and negative cycles, each
    through at least one finite arc when no negative cycle is made of unlimited arcs
    only, so no arc of some optimal flow carries that much.

    Raises
    ------
    GraphRangeError
        When costs scaled by the node count, or the supply and capacity sums, or the
        cost of the largest possible flow could overflow 64-bit arithmetic.
    """
    n = num_nodes + 3  # the solver adds a source and a sink of its own
    max_cost = float(np.abs(cost).max()) if cost.size else 0.0
    if max_cost * 2 * (n + 1) >= 2.0**63 or max_cost * 4 * n >= SAFE:
        raise GraphRangeError(f"costs up to {max_cost:g} are too large for {num_nodes} nodes "
                              "once the solver scales them by the node count")
    finite = capacity if unlimited is None else np.where(unlimited, 0, capacity)
    total_cap = float(finite.astype(np.float64).sum())
    total_supply = float(np.abs(supply).astype(np.float64).sum())
    big = total_cap + total_supply / 2 + 1
    n_unlimited = 0 if unlimited is None else int(unlimited.sum())
    if total_cap + n_unlimited * big + total_supply >= SAFE:
        raise GraphRangeError("the capacities and supplies sum to more than 2**62")
    # Cost of any flow within the bounds: sum |cost| * bound.
    bound = finite.astype(np.float64)
    if n_unlimited:
        bound = np.where(unlimited, big, bound)
    if float(np.abs(cost).astype(np.float64) @ bound) >= SAFE:
        raise GraphRangeError("costs times capacities could sum to more than 2**62")
    return int(finite.sum()) + int(supply[supply > 0].sum()) + 1


def _capped(capacity, unlimited, big):
    if unlimited is None or not unlimited.any():
        return capacity.astype(np.int64, copy=False)
    return np.where(unlimited, big, capacity).astype(np.int64)


def solve_balanced(num_nodes: int, tail: np.ndarray, head: np.ndarray, capacity: np.ndarray,
                   unlimited: np.ndarray | None, cost: np.ndarray, supply: np.ndarray, big: int):
    """Min-cost flow with balanced integer supplies and zero lower bounds.

    Parameters
    ----------
    num_nodes : int
    tail, head : ndarray of int32
    capacity : ndarray of int64
        Ignored where ``unlimited``.
    unlimited : ndarray of bool or None
    cost : ndarray of int64
    supply : ndarray of int64
        Outflow minus inflow required at each node; sums to 0.
    big : int
        Stand-in capacity for unlimited arcs (from :func:`check_ranges`).

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
    ...                np.array([4, 2, 5]), None, np.array([1, 5, 1]), np.array([3, 0, -3]), 100).tolist()
    [3, 0, 3]
    """
    solver = ortools_min_cost_flow.SimpleMinCostFlow()
    cap = _capped(capacity, unlimited, big)
    arcs = solver.add_arcs_with_capacity_and_unit_cost(
        np.ascontiguousarray(tail, dtype=np.int32), np.ascontiguousarray(head, dtype=np.int32),
        cap, np.ascontiguousarray(cost, dtype=np.int64))
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


def auxiliary_max_flow(num_nodes: int, tail: np.ndarray, head: np.ndarray, capacity: np.ndarray,
                       unlimited: np.ndarray | None, supply: np.ndarray, big: int):
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
    all_cap = np.concatenate([_capped(capacity, unlimited, big), supply[sources], -supply[sinks]])
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
