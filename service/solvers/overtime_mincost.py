"""The cheapest schedule over time for balanced supplies and demands (see
:mod:`service.solvers.flowovertime`)."""

from __future__ import annotations

import numpy as np
from ortools.graph.python import min_cost_flow as ortools_min_cost_flow

from ..errors import InputError, SolverFailure
from . import overtime_checks as checks
from .graph import Graph
from .maxflow_graph import graph_engine
from .mincost_graph import GraphRangeError, auxiliary_max_flow, solver_bounds
from .overtime_common import OverTimeSolution, Scale, _finite_total, release_late, to_integers
from .potentials import node_potentials
from .timeexpanded import Schedule, TimedNetwork, expand


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
    p = node_potentials(Graph(count, tail, head, capacity, unlimited, cost), flows)
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
