"""A first whole-unit plan in milliseconds: round the LP plan, repair what rounding breaks.

Commodities are routed one at a time, largest demand first, on what the earlier ones
left of each shared capacity:

0. *Keeping*: a commodity the LP plan already routes in whole units (single path: on
   one unsplit simple path) keeps that route.
1. *Rounding*: the commodity's own LP support, with each arc's room rounded up from
   its LP flow (``ceil(f_ka)``), routed as an exact integer min-cost flow (or, single
   path, the cheapest path with room for the whole demand).
2. *Repair*: when the rounded support cannot take the commodity, the whole residual
   network.

The plan is only a start: the MIP engine takes it as its hint and improves it, and
every plan is checked before it is returned (:mod:`service.solvers.whole_checks`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from ortools.graph.python import min_cost_flow
from scipy.sparse.csgraph import dijkstra

from ..errors import SolverFailure
from .whole_model import WholeData, flow_upper, no_detours

#: An LP flow below this counts as zero when reading the LP's support.
SUPPORT_TOL = 1e-7


@dataclass
class Plan:
    """A whole-unit plan in model units: ``x`` (K, m) units per arc (integral) or 0/1
    path indicators (single path); ``delivered`` (K,) units per commodity."""

    x: np.ndarray
    delivered: np.ndarray
    paths: list | None = None  # single path: arc indices per commodity ([] when not delivered)

    def flows(self, data: WholeData) -> np.ndarray:
        """Units per commodity and arc, (K, m) int64."""
        return self.x * data.demands[:, None] if data.single_path else self.x

    def values(self, data: WholeData) -> np.ndarray:
        """The plan as a vector of the model's columns (for a hint)."""
        x = self.x.ravel()
        if not data.throughput:
            return x
        shipped = (self.delivered > 0).astype(np.int64) if data.single_path else self.delivered
        return np.concatenate([x, shipped])


def route_greedily(data: WholeData, lp_flows: np.ndarray | None = None,
                   lp_delivered: np.ndarray | None = None) -> Plan | None:
    """A plan for every commodity in turn (see the module doc); None when a ``min-cost``
    commodity cannot be routed on what is left."""
    K, m = data.shape
    residual = data.upper.copy()
    ub = no_detours(data, flow_upper(data))
    x = np.zeros((K, m), dtype=np.int64)
    delivered = np.zeros(K, dtype=np.int64)
    paths: list = [[] for _ in range(K)]
    kept = kept_from_lp(data, lp_flows, lp_delivered, ub) if lp_flows is not None else {}
    for k, (units, shipped, path) in kept.items():
        x[k], delivered[k], paths[k] = units, shipped, path
        residual -= units * data.weight[k]
    if (residual[data.limited] < 0).any():  # round-off in the LP plan: start from nothing instead
        return route_greedily(data, lp_flows)
    for k in np.argsort(-data.demands, kind="stable").tolist():
        if data.demands[k] == 0 or k in kept:
            continue
        support = None if lp_flows is None else lp_flows[k] > SUPPORT_TOL
        if data.single_path:
            path = _route_path(data, k, residual, ub[k], support)
            if path is not None:
                x[k, path] = 1
                paths[k] = path
                delivered[k] = data.demands[k]
                residual[path] -= data.demands[k]
        else:
            got = _route_units(data, k, residual, ub[k], support, lp_flows)
            if got is not None:
                x[k], delivered[k] = got
                residual -= x[k]
        if delivered[k] == 0 and not data.throughput:
            return None
    return Plan(x, delivered, paths if data.single_path else None)


def kept_from_lp(data: WholeData, lp_flows: np.ndarray, lp_delivered: np.ndarray | None, ub: np.ndarray) -> dict:
    """Commodities the LP plan already routes in whole units (single path: unsplit, on
    one simple path), within the model's bounds: ``{k: (x_k, delivered_k, path)}``.
    Taken as they are, since together they fit (they are part of the LP plan)."""
    if lp_delivered is None:
        return {}
    rounded = np.rint(lp_flows)
    scale = np.maximum(1.0, data.demands.astype(np.float64))[:, None]
    whole = (np.abs(lp_flows - rounded) <= 1e-6 * scale).all(axis=1)
    shipped = np.rint(lp_delivered).astype(np.int64)
    whole &= np.abs(lp_delivered - shipped) <= 1e-6 * scale[:, 0]
    if data.single_path:
        d = data.demands[:, None]
        whole &= ((rounded == 0) | (rounded == d)).all(axis=1) & (shipped == data.demands)
        units = (rounded > 0).astype(np.int64)
    else:
        units = rounded.astype(np.int64)
    whole &= (units <= ub).all(axis=1) & (data.demands > 0)
    kept = {}
    for k in np.flatnonzero(whole).tolist():
        path = None
        if data.single_path:
            path = simple_path(data, k, np.flatnonzero(units[k]))
            if len(path) != int(units[k].sum()):  # the LP added a cycle: route it afresh
                continue
        kept[k] = (units[k], int(shipped[k]), path or [])
    return kept


def _route_units(data: WholeData, k: int, residual, ub, support, lp_flows):
    """(units per arc, units delivered) for commodity k, or None."""
    room = np.minimum(residual, ub)
    if support is not None:
        rounded = np.where(support, np.minimum(room, np.ceil(lp_flows[k] - SUPPORT_TOL).astype(np.int64)), 0)
        got = _min_cost_units(data, k, rounded, short=False)
        if got is not None:
            return got
    return _min_cost_units(data, k, room, short=data.throughput)


def _min_cost_units(data: WholeData, k: int, room: np.ndarray, *, short: bool):
    net, d = data.net, int(data.demands[k])
    solver = min_cost_flow.SimpleMinCostFlow()
    arcs = solver.add_arcs_with_capacity_and_unit_cost(
        net.tail.astype(np.int32), net.head.astype(np.int32), room.astype(np.int64), data.cost)
    solver.set_node_supply(int(data.com.sources[k]), d)
    solver.set_node_supply(int(data.com.sinks[k]), -d)
    status = solver.solve_max_flow_with_min_cost() if short else solver.solve()
    if status != solver.OPTIMAL:
        return None
    units = np.asarray(solver.flows(arcs), dtype=np.int64)
    shipped = int(solver.maximum_flow()) if short else d
    return (units, shipped) if shipped > 0 else None


def _route_path(data: WholeData, k: int, residual, ub, support):
    """Arc indices of the cheapest path with room for the whole demand, or None."""
    fits = (residual >= data.demands[k]) & (ub > 0)
    for allowed in ([fits & support] if support is not None else []) + [fits]:
        path = cheapest_path(data, int(data.com.sources[k]), int(data.com.sinks[k]), allowed)
        if path is not None:
            return path
    return None


def cheapest_path(data: WholeData, s: int, t: int, allowed: np.ndarray) -> list | None:
    """Arc indices of a cheapest simple s-t path over the allowed arcs (costs >= 0).

    Dijkstra on weights ``cost * n + 1``: positive (so zero-cost arcs are kept, which
    scipy's sparse graphs would drop as non-edges), and since a simple path has fewer
    than ``n`` arcs the hop term never outweighs one unit of cost. Of parallel arcs the
    cheapest is kept.
    """
    net = data.net
    n = net.num_nodes
    arcs = np.flatnonzero(allowed)
    if not arcs.size:
        return None
    weight = data.cost[arcs].astype(np.float64) * n + 1.0
    # Cheapest arc per (tail, head): sort by pair then weight, keep the first of each pair.
    order = np.lexsort((weight, net.head[arcs], net.tail[arcs]))
    arcs, weight = arcs[order], weight[order]
    pair = net.tail[arcs].astype(np.int64) * n + net.head[arcs]
    first = np.concatenate([[True], pair[1:] != pair[:-1]])
    arcs, weight = arcs[first], weight[first]
    graph = sp.csr_matrix((weight, (net.tail[arcs], net.head[arcs])), shape=(n, n))
    dist, pred = dijkstra(graph, indices=s, return_predecessors=True)
    if not np.isfinite(dist[t]):
        return None
    lookup = dict(zip((net.tail[arcs].astype(np.int64) * n + net.head[arcs]).tolist(), arcs.tolist()))
    nodes = [t]
    while nodes[-1] != s:
        nodes.append(int(pred[nodes[-1]]))
    nodes.reverse()
    return [lookup[u * n + v] for u, v in zip(nodes[:-1], nodes[1:])]


def read_plan(data: WholeData, values: np.ndarray) -> Plan:
    """A plan from the model's column values (integers). Single path: each commodity's
    support is walked from its source to its sink and its loops erased, leaving one
    simple path; arcs on dropped cycles are freed (costs >= 0, so this never costs
    more)."""
    K, m = data.shape
    x = values[:K * m].reshape(K, m).astype(np.int64)
    if not data.single_path:
        delivered = values[K * m:].astype(np.int64) if data.throughput else data.demands.copy()
        return Plan(x, delivered)
    shipped = (values[K * m:] > 0 if data.throughput else True) & (data.demands > 0)
    paths = [simple_path(data, k, np.flatnonzero(x[k] > 0)) if shipped[k] else [] for k in range(K)]
    out = np.zeros((K, m), dtype=np.int64)
    for k, path in enumerate(paths):
        out[k, path] = 1
    return Plan(out, np.where(shipped, data.demands, 0), paths)


def simple_path(data: WholeData, k: int, support: np.ndarray) -> list:
    """The loop-erased walk from the source to the sink over ``support`` (a flow of one
    unit: every node but the ends has as many used arcs in as out, so the walk cannot
    get stuck before the sink)."""
    net = data.net
    s, t = int(data.com.sources[k]), int(data.com.sinks[k])
    out: dict[int, list[int]] = {}
    for a in support.tolist():
        out.setdefault(int(net.tail[a]), []).append(a)
    path: list[int] = []
    at = {s: 0}  # node -> its position on the path
    node = s
    while node != t:
        if not out.get(node):
            raise SolverFailure(f"commodity {k}'s arcs do not form a flow from its source to its sink")
        arc = out[node].pop()
        node = int(net.head[arc])
        if node in at:  # a loop: erase it
            del path[at[node]:]
            at = {v: i for v, i in at.items() if i <= at[node]}
        else:
            path.append(arc)
            at[node] = len(path)
    return path
