"""Earliest-arrival flows in a time-expanded network, by nested minimum cuts.

For one source and one sink, a maximum flow over time whose units arrive as early
as possible exists: for every period ``q`` the units arrived by ``q`` are the most
that can arrive by ``q`` (Gale, 1959), and such a flow is exactly a minimum-cost
maximum flow when each arrival costs its period (Jarvis and Ratliff, 1982: maximum,
earliest-arrival and minimum-total-time flows coincide).

OR-Tools' cost-scaling min-cost flow solves that program directly, but on a
time-expanded network it is slow (measured: about 70 times one max-flow at 1.2M
expanded arcs, horizon 100). This module computes the same optimum with max-flows
only, in two steps:

1. **Nested cuts.** Let ``N(q)`` be the expanded network whose sink copies for
   periods ``<= q`` feed the super sink. The largest source sides ``Y_q`` of minimum
   cuts of ``N(q)`` shrink as ``q`` grows (sink capacities grow with ``q``: the
   parametric setting of Gallo, Grigoriadis and Tarjan, 1989). Divide and conquer
   over ``q`` finds them all: solve the middle period, then contract its source side
   into the source for the earlier periods and its sink side into the sink for the
   later ones. The subproblems of one level split the nodes, so a level costs about
   one max-flow; nodes that cannot reach a sink copy by the period solved (later
   ones, and those whose least transit to the sink is too long) sit out the solve.
   The result is one label per expanded node, ``g = #{q : node in Y_q}``.
2. **The flow.** ``H - g`` are optimal potentials of the min-cost program (the dual
   objective equals minus the sum of the cut capacities, the primal optimum of an
   earliest-arrival flow), so by complementary slackness a flow is optimal exactly
   when it fills every arc from a higher label to a lower one, leaves empty every arc
   from a lower label to a higher one, and uses only sink copies with ``g = q``. The
   filled arcs fix supplies at their ends; one more max-flow routes them over the
   arcs between equal labels.

Nothing here is trusted: :mod:`service.solvers.overtime_checks` checks the schedule
and the cut of every period in the original network before an answer leaves.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from ortools.graph.python import max_flow as ortools_max_flow

from ..errors import SolverFailure
from .graph import node_balance

#: A split that leaves fewer than 1/LATE_SPLIT of the solved nodes on one side
#: changes which period the next subproblems solve first (see :func:`_next_periods`).
LATE_SPLIT = 10


@dataclass
class FlowNetwork:
    """An expanded network with a super source and a super sink.

    ``ready`` of a node is the first period whose sink copy it could reach at all
    (its period plus the least transit to the sink; ``horizon`` or more when never):
    in ``N(q)`` for an earlier ``q`` no flow passes it and nothing it reaches leads
    to the sink, so it lies on the largest source side and sits out the solve. The
    super source and sink have ``ready = -1`` (they are never part of a subproblem).
    ``era`` of an arc is the ``ready`` of its head, and for an arc into the sink the
    period of the sink copy it leaves: ``N(q)`` needs only the arcs with ``era <= q``.
    """

    num_nodes: int
    tail: np.ndarray
    head: np.ndarray
    capacity: np.ndarray  # int64, stand-ins for no limit already in place
    era: np.ndarray
    ready: np.ndarray
    source: int
    sink: int
    horizon: int


def max_flow(num_nodes: int, tail: np.ndarray, head: np.ndarray, capacity: np.ndarray, source: int, sink: int):
    """One OR-Tools max-flow solve.

    Returns
    -------
    (solver, arcs)
        The solved ``SimpleMaxFlow`` and the handles of the given arcs.
    """
    solver = ortools_max_flow.SimpleMaxFlow()
    top = max(num_nodes - 1, source, sink)
    solver.add_arc_with_capacity(top, top, 0)  # every node exists, even without arcs
    arcs = solver.add_arcs_with_capacity(tail.astype(np.int32, copy=False), head.astype(np.int32, copy=False),
                                         capacity.astype(np.int64, copy=False))
    status = solver.solve(source, sink)
    if status != solver.OPTIMAL:
        raise SolverFailure(f"OR-Tools max-flow returned status {status}")
    return solver, arcs


def nested_labels(net: FlowNetwork) -> np.ndarray:
    """For every node, in how many of the largest minimum-cut source sides ``Y_0 ⊇ ... ⊇ Y_{H-1}`` it lies.

    Returns
    -------
    ndarray of int64
        ``g`` with ``Y_q = {x : g[x] > q}``; ``g[source] = H`` and ``g[sink] = 0``.
    """
    horizon = net.horizon
    labels = np.full(net.num_nodes, horizon, dtype=np.int64)
    labels[net.sink] = 0
    owner = np.zeros(net.num_nodes, dtype=np.int64)  # subproblem that holds each node
    owner[[net.source, net.sink]] = -1
    local = np.zeros(net.num_nodes, dtype=np.int64)
    first = np.flatnonzero(owner == 0)
    stack = [(0, 0, horizon - 1, np.arange(net.tail.size), first, "middle")]
    next_id = 1
    while stack:
        pid, lo, hi, arcs, nodes, where = stack.pop()
        mid = {"early": lo, "middle": (lo + hi) // 2, "late": hi}[where]
        below, solved = _sink_side(net, pid, mid, arcs, nodes, owner, local)
        low_id, up_id = next_id, next_id + 1
        next_id += 2
        owner[nodes] = up_id
        owner[below] = low_id
        at, ah = owner[net.tail[arcs]], owner[net.head[arcs]]
        # Which subproblem an arc still matters to: an arc from the upper part (kept
        # with the source side of period mid) into the lower part matters to both; one
        # from the lower part into the upper part to neither (it points from a sink
        # side to a source side in every later cut).
        to_up = ((ah == up_id) & (at != low_id)) | (at == up_id)
        to_low = ((at == low_id) & (ah != up_id)) | (ah == low_id)
        upper = nodes[owner[nodes] == up_id]
        upper_hint, lower_hint = _next_periods(below.size, solved)
        for part, part_id, part_lo, part_hi, mask, hint in ((upper, up_id, mid + 1, hi, to_up, upper_hint),
                                                            (below, low_id, lo, mid - 1, to_low, lower_hint)):
            if not part.size:
                continue
            if part_lo > part_hi:
                labels[part] = part_lo
            else:
                stack.append((part_id, part_lo, part_hi, arcs[mask], part, hint))
    return labels


def _next_periods(sink_side: int, solved: int) -> tuple[str, str]:
    """Which period the two subproblems of a split solve first.

    Halving the range of periods bounds the depth, but the later periods'
    subproblem keeps every node later than the period solved, so halving costs a
    chain of large solves when one side of the cuts is nearly empty. A split that
    left almost nothing on one side predicts the next cuts alike:

    * almost nothing on the sink side (a bottleneck at the sink): the later periods'
      cut likely holds almost everything too, so solve its last period first, and
      its sink side is a small subproblem;
    * almost nothing on the source side (a bottleneck at the source): every cut is
      small, so step forward one period at a time; each solve then holds one period
      of nodes and the small source side of the period before.

    A wrong guess costs one solve out of place; the next split corrects it.
    """
    if sink_side * LATE_SPLIT < solved:
        return "late", "middle"
    if (solved - sink_side) * LATE_SPLIT < solved:
        return "early", "early"
    return "middle", "middle"


def _sink_side(net: FlowNetwork, pid: int, mid: int, arcs: np.ndarray, nodes: np.ndarray, owner: np.ndarray,
               local: np.ndarray) -> tuple[np.ndarray, int]:
    """The nodes of a subproblem that can still reach the sink after a max-flow of ``N(mid)``,
    and how many nodes took part in the solve.

    Nodes outside the subproblem stand contracted into the source (arc tails) or the
    sink (arc heads); nodes not ready by ``mid`` cannot reach the sink and are left out.
    """
    active = arcs[net.era[arcs] <= mid]
    inside = nodes[net.ready[nodes] <= mid]
    if not active.size:
        return nodes[:0], inside.size
    local[inside] = np.arange(inside.size)
    src, snk = inside.size, inside.size + 1
    at, ah = net.tail[active], net.head[active]
    lt = np.where(owner[at] == pid, local[at], src)
    lh = np.where(owner[ah] == pid, local[ah], snk)
    if not (lh == snk).any():
        return nodes[:0], inside.size
    solver, _ = max_flow(inside.size + 2, lt, lh, net.capacity[active], src, snk)
    reach = np.asarray(solver.get_sink_side_min_cut(), dtype=np.int64)
    return inside[reach[reach < inside.size]], inside.size


def earliest_arrival_flow(net: FlowNetwork, labels: np.ndarray, big: int) -> np.ndarray:
    """A flow satisfying complementary slackness with the potentials ``H - labels``.

    Parameters
    ----------
    big : int
        Capacity of the closing arc sink -> source (at least any flow value).

    Returns
    -------
    ndarray of int64
        Flow per arc of ``net``: an earliest-arrival maximum flow.

    Raises
    ------
    SolverFailure
        When the labels admit no such flow (they were not nested minimum cuts).
    """
    tail, head, cap = net.tail, net.head, net.capacity
    gt, gh = labels[tail], labels[head]
    into_sink = head == net.sink
    out_of_source = tail == net.source
    core = ~(into_sink | out_of_source)
    full = core & (gt > gh)
    free = (core & (gt == gh)) | out_of_source
    q = net.era
    free |= into_sink & (gt == q)
    if (into_sink & (gt > q)).any() or (out_of_source & (gh != net.horizon)).any():
        raise SolverFailure("the nested cuts put a sink copy on a source side, or a source copy on a sink side")
    flows = np.zeros(tail.size, dtype=np.int64)
    flows[full] = cap[full]
    n = net.num_nodes
    supply = node_balance(n, tail[full], head[full], flows[full])  # exact int64 sums (bincount's weights are floats)
    excess = np.flatnonzero(supply > 0)
    deficit = np.flatnonzero(supply < 0)
    hub, drain = n, n + 1
    free_arcs = np.flatnonzero(free)
    ft = np.concatenate([tail[free_arcs], [net.sink], np.full(excess.size, hub), deficit])
    fh = np.concatenate([head[free_arcs], [net.source], excess, np.full(deficit.size, drain)])
    fc = np.concatenate([cap[free_arcs], [big], supply[excess], -supply[deficit]])
    solver, handles = max_flow(n + 2, ft, fh, fc, hub, drain)
    if solver.optimal_flow() != int(supply[excess].sum()):
        raise SolverFailure("the nested cuts admit no flow that fills them")
    flows[free_arcs] = np.asarray(solver.flows(handles), dtype=np.int64)[: free_arcs.size]
    return flows
