"""The service's own checks of flows over time, replayed in the original network.

Every figure is recomputed from the network over time (lanes, transit, per-period
capacities, holdover limits) and the answer in the lanes' terms (departures,
holdover, arrivals, cuts as lane-periods and node-periods), never from the
time-expanded arrays the solver used. Integer data are compared exactly; a failed
condition raises :class:`~service.errors.SelfCheckFailed`.

The proofs:

* **Feasibility.** Each departure leaves within the horizon and arrives by its last
  period, within the lane's capacity for that period; each holdover within the
  node's limit; at every node and period the units arriving (lanes and holdover
  from the period before) equal those leaving (lanes and holdover to the next),
  except the source's own stock, the sink's arrivals, supplies and demands.
* **Maximum by a horizon.** A set of node-periods holding every source copy and no
  sink copy is a cut; no schedule moves more than the capacity of the lane copies
  and holdover steps leaving it (weak duality). Equal to the value: maximum.
* **Earliest arrival.** For each period ``q``, the labels give a cut of the network
  cut off after ``q``: ``Y_q = {(v, p) : label > q}``. Its capacity equalling the
  units arrived by ``q`` proves no schedule has more there by then; all periods at
  once make the schedule earliest-arrival, and so of minimum total arrival time.
* **Minimum cost.** Potentials per node-period (and per supply and demand) give the
  LP lower bound ``-sum(supply * p) - sum(capacity * max(-rc, 0))``; a feasible
  schedule whose cost equals it is optimal (weak duality).
* **Infeasible demand.** A node-period set from which more supply must leave than
  the capacity of the lane copies and holdover steps leaving it.
"""

from __future__ import annotations

import numpy as np

from ..errors import SelfCheckFailed
from .graph import node_balance
from .mincost_checks import exact_dot
from .timeexpanded import Schedule, TimedNetwork


def _fail(what: str) -> None:
    raise SelfCheckFailed(f"self-check failed: {what}")


def _num(x):
    return x.item() if hasattr(x, "item") else x


def replay(net: TimedNetwork, schedule: Schedule, horizon: int) -> tuple[np.ndarray, dict]:
    """Replay a schedule period by period in the original network.

    Parameters
    ----------
    horizon : int
        The periods the schedule may use (``<= net.horizon``).

    Returns
    -------
    (balance, figures)
        ``balance[v, p]``: units arriving at ``v`` in period ``p`` minus units leaving
        it then (lanes and holdover both); ``figures``: ``max_capacity_excess`` and
        ``max_holdover_excess`` (both 0 when the check passes).

    Raises
    ------
    SelfCheckFailed
        A departure outside the horizon or arriving after it, a negative amount, a
        lane or holdover over its limit.
    """
    s = schedule
    n = net.num_nodes
    if (s.dep_amount <= 0).any() or (s.hold_amount <= 0).any():
        _fail("a schedule entry carries a non-positive amount")
    if s.dep_arc.size and (s.dep_arc.min() < 0 or s.dep_arc.max() >= net.num_arcs):
        _fail("a departure names a lane that does not exist")
    arrive = s.dep_period + net.transit[s.dep_arc]
    if s.dep_period.size and (s.dep_period.min() < 0 or arrive.max() > horizon - 1):
        _fail("a departure leaves before period 0 or arrives after the last period")
    if s.hold_period.size and (s.hold_period.min() < 0 or s.hold_period.max() > horizon - 2
                               or s.hold_node.min() < 0 or s.hold_node.max() >= n):
        _fail("a holdover lies outside the periods 0 .. horizon-2 or names no node")
    cap, unl = net.lane_capacity(s.dep_arc, s.dep_period)
    over = np.where(unl, 0, s.dep_amount - cap)
    # Summed per (lane, period): a repeated entry must not pass two halves of one limit.
    _no_repeats(s.dep_arc * horizon + s.dep_period, "departure")
    _no_repeats(s.hold_node * horizon + s.hold_period, "holdover")
    max_cap_excess = max(int(over.max()) if over.size else 0, 0)
    if max_cap_excess > 0:
        _fail(f"a departure exceeds its lane's capacity in that period by {max_cap_excess}")
    limit, hunl = net.holdover_limit(s.hold_node)
    hover = np.where(hunl, 0, s.hold_amount - limit)
    max_hold_excess = max(int(hover.max()) if hover.size else 0, 0)
    if max_hold_excess > 0:
        _fail(f"a holdover exceeds its node's limit by {max_hold_excess}")
    # The time-expanded network: node (period, v) is period * n + v; a departure runs from
    # its period to its arrival, a holdover from its period to the next. Two balances
    # added, not one over concatenated arcs: the copies cost more than the sums.
    slots = n * horizon
    balance = (node_balance(slots, s.dep_period * n + net.tail[s.dep_arc], arrive * n + net.head[s.dep_arc],
                            s.dep_amount.astype(np.int64, copy=False))
               + node_balance(slots, s.hold_period * n + s.hold_node, (s.hold_period + 1) * n + s.hold_node,
                              s.hold_amount.astype(np.int64, copy=False)))
    figures = {"max_capacity_excess": max_cap_excess, "max_holdover_excess": max_hold_excess}
    return balance.reshape(horizon, n).T, figures


def _no_repeats(codes: np.ndarray, what: str) -> None:
    if np.unique(codes).size != codes.size:
        _fail(f"a {what} appears twice in the schedule")


def check_through_flow(net: TimedNetwork, schedule: Schedule, source: int, sink: int, arrivals: np.ndarray,
                       horizon: int) -> dict:
    """Feasibility of a schedule from one source to one sink, and its arrivals per period.

    Returns
    -------
    dict
        ``value`` (units arrived), ``max_imbalance`` and the replay's figures.
    """
    balance, figures = replay(net, schedule, horizon)
    releases = -balance[source]
    arrived = balance[sink]
    inner = balance.copy()
    inner[[source, sink]] = 0
    max_imbalance = int(np.abs(inner).max()) if inner.size else 0
    if max_imbalance:
        _fail(f"units are not conserved at a node in some period (imbalance {max_imbalance})")
    if (releases < 0).any():
        _fail("units are added to the source's own stock")
    if (arrived < 0).any():
        _fail("units leave the sink after they arrived")
    if arrivals.shape != (horizon,) or not np.array_equal(arrived, arrivals):
        _fail("the arrivals per period differ from the replayed schedule")
    value = int(arrived.sum())
    if int(releases.sum()) != value:
        _fail("the units released at the source differ from the units arrived")
    return {"value": value, "max_imbalance": max_imbalance, **figures}


def lane_periods(net: TimedNetwork, horizon: int):
    """Every lane copy usable within ``horizon``: (lane, departure, arrival) arrays."""
    usable = np.maximum(horizon - net.transit, 0)
    lane = np.repeat(np.arange(net.num_arcs), usable)
    dep = np.arange(lane.size) - np.repeat(np.cumsum(usable) - usable, usable)
    return lane, dep, dep + net.transit[lane]


def cut_crossing(net: TimedNetwork, side: np.ndarray, horizon: int) -> dict:
    """The lane copies and holdover steps leaving a node-period set, and their capacity.

    Parameters
    ----------
    side : ndarray of bool, shape (n, horizon)
        Membership of each node-period.

    Raises
    ------
    SelfCheckFailed
        When a copy or step without a capacity limit leaves the set.
    """
    lane, dep, arr = lane_periods(net, horizon)
    crossing = side[net.tail[lane], dep] & ~side[net.head[lane], arr]
    lane, dep = lane[crossing], dep[crossing]
    cap, unl = net.lane_capacity(lane, dep)
    open_lanes = cap > 0
    hold = side[:, :-1] & ~side[:, 1:]
    hold_node, hold_period = np.nonzero(hold)
    order = np.lexsort((hold_node, hold_period))
    hold_node, hold_period = hold_node[order], hold_period[order]
    limit, hunl = net.holdover_limit(hold_node)
    if unl.any() or hunl.any():
        _fail("the cut contains a lane copy or holdover without a capacity limit")
    held = limit > 0
    capacity = exact_dot(cap, np.ones_like(cap)) + exact_dot(limit, np.ones_like(limit))
    lane_order = np.lexsort((lane[open_lanes], dep[open_lanes]))
    return {"dep_arc": lane[open_lanes][lane_order], "dep_period": dep[open_lanes][lane_order],
            "hold_node": hold_node[held], "hold_period": hold_period[held], "capacity": capacity}


def check_cut(net: TimedNetwork, side: np.ndarray, source: int, sink: int, horizon: int) -> dict:
    """A source-sink cut of the network with ``horizon`` periods, and its crossing copies."""
    if side.shape != (net.num_nodes, horizon):
        _fail("the cut's node-period set has the wrong shape")
    if horizon and (not side[source].all() or side[sink].any()):
        _fail("the cut does not hold every source copy and no sink copy")
    return cut_crossing(net, side, horizon)


def check_arrival_profile(net: TimedNetwork, labels: np.ndarray, source: int, sink: int,
                          arrivals: np.ndarray) -> dict:
    """Prove the arrivals earliest: for every period ``q`` a cut of capacity ``arrivals[:q+1].sum()``.

    Parameters
    ----------
    labels : ndarray of int, shape (n, H)
        ``Y_q = {(v, p) : labels[v, p] > q}`` for each period ``q``.

    Returns
    -------
    dict
        ``cut_capacities`` (one per period), ``total_arrival_time`` and its lower
        bound ``min_total_arrival_time`` (equal when the check passes).
    """
    horizon = net.horizon
    if labels.shape != (net.num_nodes, horizon):
        _fail("the labels have the wrong shape")
    if (labels[source] != horizon).any() or (labels[sink] > np.arange(horizon)).any():
        _fail("a period's cut leaves out a source copy or holds a sink copy")
    lane, dep, arr = lane_periods(net, horizon)
    cap, unl = net.lane_capacity(lane, dep)
    lo = np.concatenate([np.maximum(arr, labels[net.head[lane], arr]),
                         np.maximum(np.arange(1, horizon), labels[:, 1:]).ravel()])
    hi = np.concatenate([labels[net.tail[lane], dep], labels[:, :-1].ravel()]) - 1
    hold_node = np.repeat(np.arange(net.num_nodes), max(horizon - 1, 0))
    limit, hunl = net.holdover_limit(hold_node)
    cap = np.concatenate([cap, limit])
    unl = np.concatenate([unl, hunl])
    spans = lo <= hi
    if (spans & unl).any():
        _fail("a period's cut contains a lane copy or holdover without a capacity limit")
    delta = np.zeros(horizon + 1, dtype=np.int64)
    np.add.at(delta, lo[spans], cap[spans])
    np.subtract.at(delta, hi[spans] + 1, cap[spans])
    capacities = np.cumsum(delta[:horizon])
    arrived = np.cumsum(arrivals)
    if not np.array_equal(capacities, arrived):
        q = int(np.flatnonzero(capacities != arrived)[0])
        _fail(f"by period {q}, {arrived[q]} units arrived but the cut proves only {capacities[q]}")
    value = int(arrived[-1]) if horizon else 0
    total_time = exact_dot(np.arange(horizon), arrivals)
    bound = sum(value - int(c) for c in capacities[:-1])
    return {"cut_capacities": capacities, "total_arrival_time": total_time, "min_total_arrival_time": bound}


def check_supplies_met(net: TimedNetwork, schedule: Schedule, supply: np.ndarray) -> tuple[dict, np.ndarray]:
    """Feasibility of a min-cost schedule: supplies released, demands delivered, conservation elsewhere.

    Returns
    -------
    (figures, balance)
        ``balance[v, p]`` as in :func:`replay`: minus the release at a supply node,
        the delivery at a demand node, 0 elsewhere.
    """
    horizon = net.horizon
    balance, figures = replay(net, schedule, horizon)
    sup, dem = supply > 0, supply < 0
    other = balance[~(sup | dem)]
    max_imbalance = int(np.abs(other).max()) if other.size else 0
    if max_imbalance:
        _fail(f"units are not conserved at a node in some period (imbalance {max_imbalance})")
    if (balance[sup] > 0).any() or (balance[dem] < 0).any():
        _fail("units are added to a supply's stock, or taken back from a delivered demand")
    if not np.array_equal(-balance[sup].sum(axis=1), supply[sup]) or \
            not np.array_equal(balance[dem].sum(axis=1), -supply[dem]):
        _fail("a supply is not released in full, or a demand not met in full")
    return {"max_imbalance": max_imbalance, **figures}, balance


def schedule_cost(net: TimedNetwork, schedule: Schedule):
    """The cost of a schedule: lane cost per unit moved plus holdover cost per unit-period.

    Exact on integer data (see :func:`~service.solvers.mincost_checks.exact_dot`), in
    the scaled units of ``net``.

    Parameters
    ----------
    net : TimedNetwork
    schedule : Schedule

    Returns
    -------
    int or float
        0 for a network without lane or holdover costs.
    """
    s = schedule
    lane_cost = 0 if net.cost is None else exact_dot(s.dep_amount, net.cost[s.dep_arc])
    hold_cost = 0 if net.holdover_cost is None else exact_dot(s.hold_amount, net.holdover_cost[s.hold_node])
    return lane_cost + hold_cost


def check_min_cost_duals(net: TimedNetwork, schedule: Schedule, supply: np.ndarray, balance: np.ndarray,
                         potentials: np.ndarray, release_price: np.ndarray, delivery_price: np.ndarray) -> dict:
    """Optimality of a feasible min-cost schedule by LP duality, in the original network.

    Parameters
    ----------
    potentials : ndarray of int64, shape (n, H)
        A price per node-period.
    release_price, delivery_price : ndarray of int64, shape (n,)
        Prices of each supply node's own stock and each demand node's deliveries
        (entries of other nodes are ignored).

    Returns
    -------
    dict
        ``primal_cost``, ``dual_bound``, ``gap`` (0 when the check passes),
        ``slackness_violations``.
    """
    horizon = net.horizon
    pi = potentials
    lane, dep, arr = lane_periods(net, horizon)
    cap, unl = net.lane_capacity(lane, dep)
    cost = np.zeros(net.num_arcs, np.int64) if net.cost is None else net.cost
    rc_lane = cost[lane] + pi[net.tail[lane], dep] - pi[net.head[lane], arr]
    hold_node = np.repeat(np.arange(net.num_nodes), max(horizon - 1, 0))
    hold_period = np.tile(np.arange(max(horizon - 1, 0)), net.num_nodes)
    limit, hunl = net.holdover_limit(hold_node)
    hcost = np.zeros(net.num_nodes, np.int64) if net.holdover_cost is None else net.holdover_cost
    rc_hold = hcost[hold_node] + pi[hold_node, hold_period] - pi[hold_node, hold_period + 1]
    # Flows on every copy, zeros included, to test complementary slackness.
    flow_lane = np.zeros(net.num_arcs * horizon, np.int64)
    flow_lane[schedule.dep_arc * horizon + schedule.dep_period] = schedule.dep_amount
    flow_lane = flow_lane[lane * horizon + dep]
    flow_hold = np.zeros(net.num_nodes * horizon, np.int64)
    flow_hold[schedule.hold_node * horizon + schedule.hold_period] = schedule.hold_amount
    flow_hold = flow_hold[hold_node * horizon + hold_period]
    rc = np.concatenate([rc_lane, rc_hold])
    flow = np.concatenate([flow_lane, flow_hold])
    bound = np.concatenate([cap, limit])
    free = np.concatenate([unl, hunl])
    sup, dem = np.flatnonzero(supply > 0), np.flatnonzero(supply < 0)
    rc_release = release_price[sup][:, None] - pi[sup]  # own stock -> node at each period, cost 0
    rc_deliver = pi[dem] - delivery_price[dem][:, None]
    if (free & (rc < 0)).any() or (rc_release < 0).any() or (rc_deliver < 0).any():
        _fail("a copy without a capacity limit has a negative reduced cost")
    violations = int(((rc > 0) & (flow > 0)).sum() + ((rc < 0) & (flow < bound)).sum()
                     + ((rc_release > 0) & (balance[sup] < 0)).sum() + ((rc_deliver > 0) & (balance[dem] > 0)).sum())
    primal = schedule_cost(net, schedule)
    dual = (-exact_dot(supply[sup], release_price[sup]) - exact_dot(supply[dem], delivery_price[dem])
            - exact_dot(np.where(free, 0, bound), np.maximum(-rc, 0)))
    if primal != dual:
        _fail(f"the schedule costs {primal} but the potentials bound the optimum only by {dual}")
    if violations:
        _fail(f"{violations} copies have reduced costs contradicting their flow")
    return {"primal_cost": primal, "dual_bound": dual, "gap": primal - dual, "slackness_violations": violations}


def check_shortfall(net: TimedNetwork, members: np.ndarray, supply: np.ndarray) -> dict:
    """Prove demand cannot be met in time: a node-period set that cannot send out what it must.

    ``members[v, p]`` marks the set ``Q``. Every supply node whose every period lies in
    ``Q`` must release its supply inside ``Q``; at most the demand of the demand nodes
    with some period in ``Q`` can be delivered inside it; the rest must leave by the
    lane copies and holdover steps leaving ``Q``.

    Returns
    -------
    dict
        ``net_supply``, ``outgoing_capacity`` (less than ``net_supply``) and the
        crossing copies.
    """
    crossing = cut_crossing(net, members, net.horizon)
    inside = members.all(axis=1) & (supply > 0)
    touched = members.any(axis=1) & (supply < 0)
    net_supply = int(supply[inside].sum()) + int(supply[touched].sum())
    if not net_supply > crossing["capacity"]:
        _fail(f"the shortfall set must send out {net_supply} but {crossing['capacity']} can leave it")
    return {"net_supply": net_supply, "outgoing_capacity": crossing["capacity"], **crossing}


def check_unlimited_path(net: TimedNetwork, path: dict, source: int, sink: int) -> int:
    """Prove a max-by-horizon problem unbounded: lane copies and holdover steps without
    limits that lead, one after the other, from a source copy to a sink copy in time.

    Returns
    -------
    int
        The number of steps.
    """
    lane, dep = path["dep_arc"], path["dep_period"]
    hold, held = path["hold_node"], path["hold_period"]
    # Steps in time order: (period, then a holdover after the lanes of its period).
    steps = sorted([(int(p), 0, int(a)) for a, p in zip(lane.tolist(), dep.tolist())]
                   + [(int(p), 1, int(v)) for v, p in zip(hold.tolist(), held.tolist())])
    here, now = source, steps[0][0] if steps else -1
    for period, is_hold, ref in steps:
        if period != now:
            _fail("the unbounded path waits without a holdover step")
        if is_hold:
            limit, unl = net.holdover_limit(np.array([ref]))
            if ref != here or not unl[0] or period + 1 > net.horizon - 1:
                _fail("the unbounded path holds over where it is not, or within a limit")
            now = period + 1
        else:
            cap, unl = net.lane_capacity(np.array([ref]), np.array([period]))
            if int(net.tail[ref]) != here or not unl[0]:
                _fail("the unbounded path takes a lane from elsewhere, or one with a limit")
            here, now = int(net.head[ref]), period + int(net.transit[ref])
            if now > net.horizon - 1:
                _fail("the unbounded path arrives after the last period")
    if here != sink or not steps:
        _fail("the unbounded path does not reach the sink")
    return len(steps)
