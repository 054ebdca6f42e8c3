"""Flows over time: the most by a horizon, the quickest for an amount, the cheapest schedule.

Front functions over a :class:`~service.solvers.timeexpanded.TimedNetwork`; each
expands the network once (:func:`~service.solvers.timeexpanded.expand`), solves
with OR-Tools and certifies the answer in the original network
(:mod:`service.solvers.overtime_checks`) before returning it.

* :func:`max_by_horizon`: the most units from ``source`` reaching ``sink`` by the
  last period, with an earliest-arrival schedule (:mod:`service.solvers.earliest`).
* :func:`quickest`: the fewest periods ``h <= H`` that move ``amount``. The value
  by horizon ``h`` never falls as ``h`` grows, and the network for ``h`` is the
  expanded arcs with ``era < h``, so a search over ``h`` reuses one expansion: a
  max-flow per probed horizon, with the source capped at ``amount``. A probe that
  falls short returns a cut proving it (and every shorter horizon) short; one that
  succeeds tightens the upper end to the period its last unit arrived.
* :func:`min_cost`: supplies (positive) and demands (negative) that balance. Each
  supply node's own stock may leave in any period (it waits at no cost and outside
  the holdover limit); each demand takes arrivals in any period. Minimises lane
  cost per unit plus holdover cost per unit and period, with OR-Tools' min-cost
  flow; infeasible demand is proved by a node-period set.

Decimals with at most six places are solved exactly as integers: quantities
(capacities, holdover, supplies, the amount) by one power of ten, costs by another.
"""

from __future__ import annotations

import numpy as np
from scipy import sparse
from scipy.sparse import csgraph

from . import overtime_checks as checks
from .earliest import FlowNetwork, earliest_arrival_flow, max_flow, nested_labels
from .graph import bfs_predecessors
from .maxflow_graph import graph_engine
from .overtime_common import OverTimeSolution, _finite_total, release_late, to_integers
from .overtime_mincost import min_cost
from .timeexpanded import Expansion, Schedule, TimedNetwork, expand

__all__ = ["OverTimeSolution", "least_transit_to", "max_by_horizon", "min_cost", "quickest", "through_network",
           "unlimited_path"]


# --- max by horizon -------------------------------------------------------------------


def through_network(x: Expansion, source: int, sink: int, big: int, horizon: int | None = None,
                    cap: int | None = None, x_net: TimedNetwork | None = None) -> FlowNetwork:
    """The expanded network with a super source feeding every source copy and every
    sink copy feeding a super sink, cut off after ``horizon`` periods.

    With ``cap``, a first node feeds the super source by one arc of that capacity
    (the amount of a quickest probe); the super source is then the node after it.
    With ``x_net`` (the network expanded), nodes get their ``ready`` periods from the
    least transit to the sink (for :func:`~service.solvers.earliest.nested_labels`).
    """
    n, h = x.num_nodes, x.horizon if horizon is None else horizon
    keep = slice(0, int(np.searchsorted(x.era, h)))  # arcs are sorted by era: a prefix, no copy
    tail, head = x.tail[keep], x.head[keep]
    capacity = x.capped(big)[keep]
    era = x.era[keep]
    nodes = n * x.horizon
    S, T = nodes, nodes + 1
    periods = np.arange(h, dtype=np.int64)
    tails = [tail, np.full(h, S, np.int32), (periods * n + sink).astype(np.int32)]
    heads = [head, (periods * n + source).astype(np.int32), np.full(h, T, np.int32)]
    caps = [capacity, np.full(h, big, np.int64), np.full(h, big, np.int64)]
    eras = [era, periods, periods]
    count = nodes + 2
    least_transit = least_transit_to(x_net, sink) if x_net is not None else np.zeros(n, np.int64)
    if cap is not None:
        tails.append(np.array([count], np.int32))
        heads.append(np.array([S], np.int32))
        caps.append(np.array([cap], np.int64))
        eras.append(np.zeros(1, np.int64))
        count += 1
    ready = np.concatenate([np.arange(nodes, dtype=np.int64) // max(n, 1) + np.tile(least_transit, x.horizon),
                            [-1, -1] + ([-1] if cap is not None else [])])
    tail, head = np.concatenate(tails), np.concatenate(heads)
    era = np.where(head == T, np.concatenate(eras), ready[head])
    return FlowNetwork(count, tail, head, np.concatenate(caps), era, ready, S if cap is None else count - 1, T, h)


def least_transit_to(net: TimedNetwork, sink: int) -> np.ndarray:
    """Per node, the least total transit of a lane path to ``sink`` (``horizon`` when there is none
    within it), over the lanes open in some period: a lower bound on when a unit there can arrive."""
    cap = net.capacity if net.capacity.ndim == 1 else net.capacity.max(axis=1)
    unl = None if net.unlimited is None else (net.unlimited if net.unlimited.ndim == 1 else net.unlimited.any(axis=1))
    open_ = (cap > 0) if unl is None else (cap > 0) | unl
    n = net.num_nodes
    # Dijkstra on the reversed lanes; a zero transit must stay an edge, so each lane weighs
    # transit * (n + 1) + 1 and the hop count (< n + 1) is dropped afterwards.
    # Transit is clipped to the horizon (a longer lane is never usable) so that the sums stay
    # exact in float64: at most n * horizon * (n + 1), below 2**53 within the size limit.
    weight = np.minimum(net.transit[open_], net.horizon).astype(np.float64) * (n + 1) + 1
    rows, cols = net.head[open_], net.tail[open_]
    # Parallel lanes: keep the quickest (a sparse matrix would add their weights).
    code = rows * n + cols
    order = np.lexsort((weight, code))
    first = np.ones(order.size, dtype=bool)
    first[1:] = np.diff(code[order]) != 0
    keep = order[first]
    graph = sparse.csr_matrix((weight[keep], (rows[keep], cols[keep])), shape=(n, n))
    dist = csgraph.dijkstra(graph, indices=sink, min_only=True)
    least = np.full(n, net.horizon, dtype=np.int64)
    found = np.isfinite(dist)
    least[found] = np.minimum(dist[found] // (n + 1), net.horizon).astype(np.int64)
    return least


def max_by_horizon(net: TimedNetwork, source: int, sink: int) -> OverTimeSolution:
    """The most units from ``source`` to ``sink`` by the last period, arriving as early as possible.

    Returns
    -------
    OverTimeSolution
        ``value``, ``arrivals`` per period, the schedule, the cut of the whole
        horizon, and a certificate with the cut of every period.

    Raises
    ------
    InputError
        Capacities over the horizon too large for exact 64-bit sums (``/horizon``).
    SelfCheckFailed
        When the answer fails its own check (a bug, never a 200).
    """
    net, _, _, scale = to_integers(net)
    big = _finite_total(net) + 1
    x = expand(net)
    path = unlimited_path(x, source, sink, net.horizon)
    engine = graph_engine("SimpleMaxFlow", method="nested minimum cuts", **scale.describe())
    if path is not None:
        steps = checks.check_unlimited_path(net, path, source, sink)
        return OverTimeSolution("unbounded", net.horizon, engine, unbounded_path=path,
                                certificate={"checked": True, "unbounded_path_steps": steps})
    fnet = through_network(x, source, sink, big, x_net=net)
    labels = nested_labels(fnet)
    flows = earliest_arrival_flow(fnet, labels, big)
    release_late(flows, x.holdover_arcs(np.array([source])), source_arcs(fnet)[None, :])
    schedule = Schedule.from_flows(x, flows)
    arrivals = _arrivals(fnet, flows, sink, x.num_nodes)
    H = net.horizon
    node_labels = labels[: x.num_expanded_nodes].reshape(H, net.num_nodes).T
    certificate = checks.check_through_flow(net, schedule, source, sink, arrivals, H)
    profile = checks.check_arrival_profile(net, node_labels, source, sink, arrivals)
    cut = checks.check_cut(net, node_labels == H, source, sink, H)
    if cut["capacity"] != certificate["value"]:
        checks._fail(f"the schedule moves {certificate['value']} but the cut holds {cut['capacity']}")
    certificate = {"checked": True, **certificate, "cut_capacity": cut["capacity"], "earliest_arrival": True,
                   "cumulative_arrivals": np.cumsum(arrivals), **profile, "tolerance": 0, **scale.describe()}
    return _through_answer(net, scale, engine, schedule, arrivals, cut, certificate, H)


def source_arcs(fnet: FlowNetwork) -> np.ndarray:
    """Indices of the arcs from the super source to each source copy, by period."""
    arcs = np.flatnonzero(fnet.tail == fnet.source)
    return arcs[np.argsort(fnet.head[arcs])]


def _arrivals(fnet: FlowNetwork, flows: np.ndarray, sink: int, n: int) -> np.ndarray:
    into = np.flatnonzero(fnet.head == fnet.sink)
    arrivals = np.zeros(fnet.horizon, np.int64)
    np.add.at(arrivals, fnet.tail[into].astype(np.int64) // max(n, 1), flows[into])
    return arrivals


def _through_answer(net, scale, engine, schedule, arrivals, cut, certificate, horizon) -> OverTimeSolution:
    value = certificate["value"]
    certificate["value"] = scale.units(value)
    certificate["cut_capacity"] = scale.units(certificate["cut_capacity"])
    for name in ("cumulative_arrivals", "cut_capacities"):
        if name in certificate:
            certificate[name] = scale.units(certificate[name])
    if scale.quantity and "total_arrival_time" in certificate:
        certificate["total_arrival_time"] = scale.units(certificate["total_arrival_time"])
        certificate["min_total_arrival_time"] = scale.units(certificate["min_total_arrival_time"])
    cut = {**cut, "capacity": scale.units(cut["capacity"]), "horizon": horizon}
    return OverTimeSolution("optimal", horizon, engine, value=scale.units(value), arrivals=scale.units(arrivals),
                            schedule=schedule, amounts=(scale.units(schedule.dep_amount),
                                                        scale.units(schedule.hold_amount)),
                            cut=cut, certificate=certificate)


def unlimited_path(x: Expansion, source: int, sink: int, horizon: int) -> dict | None:
    """Lane copies and holdover steps without limits that lead from a source copy to a sink copy, or ``None``."""
    if not x.unlimited.any():
        return None
    n = x.num_nodes
    nodes = n * horizon
    root = nodes
    arcs = np.flatnonzero(x.unlimited)
    tails = np.concatenate([x.tail[arcs], np.full(horizon, root)])
    heads = np.concatenate([x.head[arcs], np.arange(horizon) * n + source])
    ids = np.concatenate([arcs, np.full(horizon, -1)])
    pred = bfs_predecessors(nodes + 1, tails, heads, root)
    reached = np.flatnonzero(pred[np.arange(horizon) * n + sink] >= 0)
    if not reached.size:
        return None
    # Walk back from the earliest sink copy reached; each step's arc is found by its end codes.
    code = tails.astype(np.int64) * (nodes + 1) + heads
    order = np.argsort(code, kind="stable")
    steps = []
    v = int(reached[0]) * n + sink
    while v != root:
        u = int(pred[v])
        k = order[np.searchsorted(code[order], u * (nodes + 1) + v)]
        if ids[k] >= 0:
            steps.append(int(ids[k]))
        v = u
    steps = np.array(steps[::-1], dtype=np.int64)
    lane = steps[x.kind[steps] == 0]
    hold = steps[x.kind[steps] == 1]
    return {"dep_arc": x.ref[lane], "dep_period": x.period[lane], "hold_node": x.ref[hold],
            "hold_period": x.period[hold]}


# --- quickest -------------------------------------------------------------------------


def quickest(net: TimedNetwork, source: int, sink: int, amount) -> OverTimeSolution:
    """The fewest periods ``h <= H`` in which ``amount`` units reach the sink.

    Returns
    -------
    OverTimeSolution
        ``horizon`` = ``h``, a schedule moving exactly ``amount`` within it and the cut
        proving ``h - 1`` periods too few; ``status: infeasible`` with the cut of all
        ``H`` periods when even they are too few.
    """
    net, _, amount, scale = to_integers(net, amount=amount)
    _finite_total(net)
    x = expand(net)
    big = amount + 1  # a probe never moves more than the amount
    engine = graph_engine("SimpleMaxFlow", method="search over horizons", **scale.describe())
    probes = []

    def probe(h: int):
        """Solve the max-flow of the first ``h`` periods, capped at the amount.

        Each probed horizon is recorded in ``probes`` for the certificate.

        Returns
        -------
        (fnet, solver, arcs)
            The probe's network, the solved ``SimpleMaxFlow`` and its arc handles.
        """
        fnet = through_network(x, source, sink, big, horizon=h, cap=amount)
        solver, arcs = max_flow(fnet.num_nodes, fnet.tail, fnet.head, fnet.capacity, fnet.source, fnet.sink)
        probes.append(h)
        return fnet, solver, arcs

    H = net.horizon
    fnet, solver, arcs = probe(H)
    if solver.optimal_flow() < amount:
        side = _source_side(fnet, solver, x, H)
        cut = checks.check_cut(net, side, source, sink, H)
        if not cut["capacity"] < amount:
            checks._fail(f"the cut of all {H} periods holds {cut['capacity']}, not less than the amount")
        cert = {"checked": True, "amount": scale.units(amount), "cut_capacity": scale.units(cut["capacity"]),
                "probed_horizons": probes, "tolerance": 0, **scale.describe()}
        return OverTimeSolution("infeasible", H, engine, value=scale.units(int(solver.optimal_flow())),
                                cut={**cut, "capacity": scale.units(cut["capacity"]), "horizon": H},
                                certificate=cert)
    best = (fnet, np.asarray(solver.flows(arcs), dtype=np.int64))
    lo, short = 0, None  # largest horizon known too short, and its cut's node-period set
    hi = _last_arrival(*best, x.num_nodes) + 1
    while hi - lo > 1:
        h = (lo + hi) // 2
        fnet, solver, arcs = probe(h)
        if solver.optimal_flow() < amount:
            lo, short = h, _source_side(fnet, solver, x, h)
        else:
            flows = np.asarray(solver.flows(arcs), dtype=np.int64)
            best = (fnet, flows)
            hi = _last_arrival(fnet, flows, x.num_nodes) + 1
    h_best = hi
    fnet, flows = best
    # The probe may have had more periods than the answer needs: nothing it moved after
    # h_best - 1 reaches the sink (time only runs forward), so those arcs are left out.
    schedule = Schedule.from_flows(x, flows[: int(np.searchsorted(x.era, h_best))])
    arrivals = _arrivals(fnet, flows, sink, x.num_nodes)[:h_best]
    certificate = checks.check_through_flow(net, schedule, source, sink, arrivals, h_best)
    if certificate["value"] != amount:
        checks._fail(f"the schedule moves {certificate['value']}, not the amount {amount}")
    # The search ends with lo = h_best - 1: its probe's cut (none needed for 0 periods).
    side = short if short is not None else np.ones((net.num_nodes, 0), bool)
    cut = checks.check_cut(net, side, source, sink, h_best - 1)
    if not cut["capacity"] < amount:
        checks._fail(f"the cut of {h_best - 1} periods holds {cut['capacity']}, not less than the amount")
    certificate = {"checked": True, **certificate, "amount": scale.units(amount), "shorter_horizon": h_best - 1,
                   "cut_capacity": cut["capacity"], "probed_horizons": probes, "tolerance": 0, **scale.describe()}
    answer = _through_answer(net, scale, engine, schedule, arrivals, cut, certificate, h_best)
    answer.cut["horizon"] = h_best - 1
    return answer


def _last_arrival(fnet: FlowNetwork, flows: np.ndarray, n: int) -> int:
    into = np.flatnonzero((fnet.head == fnet.sink) & (flows > 0))
    return int(fnet.tail[into].max()) // max(n, 1) if into.size else 0


def _source_side(fnet: FlowNetwork, solver, x: Expansion, h: int) -> np.ndarray:
    """The largest source side of the probe's minimum cut, as node-periods of the first ``h`` periods."""
    reach = np.asarray(solver.get_sink_side_min_cut(), dtype=np.int64)
    nodes = x.num_nodes * h
    side = np.ones(nodes, bool)
    side[reach[reach < nodes]] = False
    return side.reshape(h, x.num_nodes).T
