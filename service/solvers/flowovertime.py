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

from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
from ortools.graph.python import min_cost_flow as ortools_min_cost_flow
from scipy import sparse
from scipy.sparse import csgraph

from ..errors import FieldError, InputError, SolverFailure
from . import overtime_checks as checks
from .earliest import FlowNetwork, earliest_arrival_flow, max_flow, nested_labels
from .maxflow_graph import graph_engine
from .mincost_graph import GraphRangeError, auxiliary_max_flow, solver_bounds
from .potentials import node_potentials
from .scaling import common_scale
from .timeexpanded import Expansion, OverflowRisk, Schedule, TimedNetwork, expand, finite_total


@dataclass
class OverTimeSolution:
    """A solved flow-over-time problem, in the lanes' own terms (already unscaled).

    ``status``: ``optimal``, ``infeasible`` (quickest or min-cost) or ``unbounded``
    (max-by-horizon along lanes without limits). ``cut``: dict with ``dep_arc``,
    ``dep_period``, ``hold_node``, ``hold_period``, ``capacity`` (and ``horizon``,
    the periods of the network it cuts).
    """

    status: str
    horizon: int
    engine: dict
    value: Any = None
    cost: Any = None
    arrivals: np.ndarray | None = None
    schedule: Schedule | None = None
    amounts: tuple | None = None  # (departure amounts, holdover amounts) in the caller's units
    cut: dict | None = None
    deliveries: dict | None = None
    releases: dict | None = None
    infeasibility: dict | None = None
    unbounded_path: dict | None = None
    certificate: dict = field(default_factory=dict)


# --- scaling --------------------------------------------------------------------------


@dataclass(frozen=True)
class Scale:
    quantity: int = 0  # decimal places of capacities, holdover, supplies, amount
    cost: int = 0

    def units(self, x):
        """Scaled integers back to the caller's units."""
        if not self.quantity:
            return x
        return x / 10.0**self.quantity if isinstance(x, np.ndarray) else x / 10**self.quantity

    def money(self, x):
        places = self.quantity + self.cost
        return x if not places else x / 10**places

    def describe(self) -> dict:
        out = {}
        if self.quantity:
            out["decimal_scale"] = 10**self.quantity
        if self.cost:
            out["cost_scale"] = 10**self.cost
        return out


def to_integers(net: TimedNetwork, supply=None, amount=None):
    """Scale decimal data to exact integers.

    Returns
    -------
    (TimedNetwork, supply, amount, Scale)

    Raises
    ------
    InputError
        When some value needs more than nine decimals (naming the field).
    """
    quantities = {"capacity": net.capacity, "holdover": net.holdover, "supply": supply,
                  "amount": None if amount is None else np.asarray([amount])}
    costs = {"cost": net.cost, "holdover_cost": net.holdover_cost}
    if all(a is None or a.dtype.kind == "i" for a in (*quantities.values(), *costs.values())):
        return net, supply, amount, Scale()
    scaled_q = _common(quantities)
    scaled_c = _common(costs)
    d, (capacity, holdover, supply, amount_arr) = scaled_q
    e, (cost, holdover_cost) = scaled_c
    net = replace(net, capacity=capacity, holdover=holdover, cost=cost, holdover_cost=holdover_cost)
    return net, supply, None if amount_arr is None else int(amount_arr[0]), Scale(d, e)


#: Where each scaled field lives in a request, for the error that names it.
_FIELD_POINTERS = {"capacity": "/arcs", "cost": "/arcs", "holdover": "/nodes", "holdover_cost": "/nodes",
                   "supply": "/nodes", "amount": "/amount"}


def _common(arrays: dict):
    found = common_scale(*arrays.values())
    if found is None:
        name = next((k for k, a in arrays.items() if a is not None and common_scale(a) is None), None)
        name = name or next(k for k, a in arrays.items() if a is not None)
        raise InputError(FieldError(_FIELD_POINTERS[name],
                                    f"{name} values need more than 9 decimal places, or are too large once scaled "
                                    "to integers; round them"))
    return found


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


def release_late(flows: np.ndarray, hold: np.ndarray, release: np.ndarray) -> None:
    """Let own stock wait in the stock, not in the node's holdover (in place).

    A unit released in period ``p`` and held at its node into ``p + 1`` is the same
    unit released in ``p + 1``: at no extra cost, and free of the holdover limit.
    Rows are nodes; ``hold[:, p]`` the node's holdover arc from ``p`` (``-1``: none),
    ``release[:, p]`` the arc releasing its stock in ``p``. One vectorised step per
    period moves what can be moved.
    """
    for p in range(hold.shape[1]):
        has = hold[:, p] >= 0
        h, r, r_next = hold[has, p], release[has, p], release[has, p + 1]
        shift = np.minimum(flows[h], flows[r])
        flows[h] -= shift
        flows[r] -= shift
        flows[r_next] += shift


def _finite_total(net: TimedNetwork) -> int:
    try:
        return finite_total(net)
    except OverflowRisk as exc:
        raise InputError.at("/horizon", f"{exc}: too large for exact 64-bit arithmetic; shorten the horizon "
                                        "or lower the capacities") from None


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
    graph = sparse.csr_matrix((np.ones(tails.size, bool), (tails, heads)), shape=(nodes + 1, nodes + 1))
    _, pred = csgraph.breadth_first_order(graph, root, directed=True, return_predecessors=True)
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


# --- min cost -------------------------------------------------------------------------


def min_cost(net: TimedNetwork, supply: np.ndarray) -> OverTimeSolution:
    """The cheapest schedule releasing every supply and meeting every demand by the last period.

    Parameters
    ----------
    supply : ndarray, shape (n,)
        Positive supply, negative demand; sums to 0.

    Returns
    -------
    OverTimeSolution
        ``cost``, the schedule, releases and deliveries per node and period; or
        ``status: infeasible`` with a node-period set that proves the demand cannot be
        met in time.
    """
    net, supply, _, scale = to_integers(net, supply=np.asarray(supply))
    _finite_total(net)
    x = expand(net, with_cost=True)
    H, n = net.horizon, net.num_nodes
    nodes = n * H
    sup, dem = np.flatnonzero(supply > 0), np.flatnonzero(supply < 0)
    own = nodes + np.arange(sup.size)  # each supply node's own stock
    sink = nodes + sup.size + np.arange(dem.size)  # each demand node's deliveries
    periods = np.arange(H)
    tail = np.concatenate([x.tail, np.repeat(own, H), (periods[None, :] * n + dem[:, None]).ravel()])
    head = np.concatenate([x.head, (periods[None, :] * n + sup[:, None]).ravel(), np.repeat(sink, H)])
    count = nodes + sup.size + dem.size
    node_supply = np.concatenate([np.zeros(nodes, np.int64), supply[sup], supply[dem]]).astype(np.int64)
    unlimited = np.concatenate([x.unlimited, np.ones((sup.size + dem.size) * H, bool)])
    capacity = np.concatenate([x.capacity, np.zeros((sup.size + dem.size) * H, np.int64)])
    cost = np.concatenate([x.cost, np.zeros((sup.size + dem.size) * H, np.int64)])
    engine = graph_engine("SimpleMinCostFlow", **scale.describe())
    try:
        # Stand-ins for the unlimited arcs (and any capacity too large for int64 sums);
        # costs are >= 0 here, so no cycle needs them.
        cap = solver_bounds(count, tail, head, capacity, unlimited, cost, node_supply).caps
    except GraphRangeError as exc:
        raise InputError.at("", f"{exc}; lower the costs or capacities, or shorten the horizon") from None
    solver = ortools_min_cost_flow.SimpleMinCostFlow()
    handles = solver.add_arcs_with_capacity_and_unit_cost(tail.astype(np.int32), head.astype(np.int32), cap, cost)
    solver.set_nodes_supplies(np.arange(count, dtype=np.int32), node_supply)
    status = solver.solve()
    if status == solver.INFEASIBLE:
        return _shortfall(net, supply, count, tail, head, cap, node_supply, engine, scale)
    if status != solver.OPTIMAL:
        raise SolverFailure(f"OR-Tools min-cost flow returned status {status.name}")
    flows = np.asarray(solver.flows(handles), dtype=np.int64)
    # Only holding without a holdover cost can be moved (anything else would not be optimal).
    release_late(flows, x.holdover_arcs(sup), x.num_arcs + np.arange(sup.size * H).reshape(sup.size, H))
    schedule = Schedule.from_flows(x, flows)
    figures, balance = checks.check_supplies_met(net, schedule, supply)
    p = node_potentials(count, tail, head, cost, flows, capacity, unlimited)
    release_price = np.zeros(n, np.int64)
    release_price[sup] = p[own]
    delivery_price = np.zeros(n, np.int64)
    delivery_price[dem] = p[sink]
    duals = checks.check_min_cost_duals(net, schedule, supply, balance, p[:nodes].reshape(H, n).T, release_price,
                                        delivery_price)
    certificate = {"checked": True, **duals, **figures, "tolerance": 0, **scale.describe()}
    for name in ("primal_cost", "dual_bound", "gap"):
        certificate[name] = scale.money(certificate[name])
    releases = _per_node(-balance, sup, scale)
    deliveries = _per_node(balance, dem, scale)
    return OverTimeSolution("optimal", H, engine, cost=certificate["primal_cost"], value=scale.units(
        int(supply[sup].sum())), schedule=schedule, amounts=(scale.units(schedule.dep_amount),
                                                             scale.units(schedule.hold_amount)),
        releases=releases, deliveries=deliveries, certificate=certificate)


def _per_node(amounts: np.ndarray, rows: np.ndarray, scale: Scale) -> dict:
    """Non-zero (node, period, amount) entries of the given rows, sorted by period then node."""
    sub = amounts[rows]
    r, p = np.nonzero(sub)
    order = np.lexsort((rows[r], p))
    return {"node": rows[r][order], "period": p[order], "amount": scale.units(sub[r, p][order])}


def _shortfall(net, supply, count, tail, head, cap, node_supply, engine, scale):
    # The stand-ins exceed the total supply, so no minimum cut crosses one.
    value, _, side = auxiliary_max_flow(count, tail, head, cap, node_supply)
    nodes = net.num_nodes * net.horizon
    members = side[:nodes].reshape(net.horizon, net.num_nodes).T
    proof = checks.check_shortfall(net, members, supply)
    member_node, member_period = np.nonzero(members)
    order = np.lexsort((member_node, member_period))
    infeasibility = {**proof, "member_node": member_node[order], "member_period": member_period[order]}
    for name in ("net_supply", "outgoing_capacity"):
        infeasibility[name] = scale.units(infeasibility[name])
    certificate = {"checked": True, "net_supply": infeasibility["net_supply"],
                   "outgoing_capacity": infeasibility["outgoing_capacity"], "shippable": scale.units(value),
                   "tolerance": 0, **scale.describe()}
    return OverTimeSolution("infeasible", net.horizon, engine, infeasibility=infeasibility, certificate=certificate)
