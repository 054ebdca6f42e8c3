"""The certificate of a whole-unit multi-commodity plan, checked in exact integers.

Everything is re-derived from the plan's flows, never taken from the engine: every
flow a whole number (checked on the values themselves, before any conversion),
non-negative and within the shared capacities, conservation of every commodity at
every node, each commodity's delivery (all of its demand for ``min-cost``; on one
simple source-to-sink path carrying all of it, or nothing, for single path), the cost
recomputed from the flows, and the bound on the right side of the plan. Costs are
compared as integers (scaled by ``10**scale``, the client's decimals), so every
tolerance is 0.

A failed check raises :class:`~service.errors.SelfCheckFailed`: a bug, never a 200.
"""

from __future__ import annotations

import numpy as np

from ..errors import SelfCheckFailed
from .graph import node_balance
from .whole_model import WholeData


def relative_gap(plan: int, bound: int) -> float:
    """``|plan - bound| / max(|plan|, |bound|)``, 0 when both are 0.

    Scale-free (the same for cents and for euros), 0 exactly when the plan is proven
    best, and at most 1 while plan and bound have the same sign (at most 2 otherwise).
    """
    if plan == bound:
        return 0.0
    return abs(plan - bound) / max(abs(plan), abs(bound))


def _fail(what: str) -> None:
    raise SelfCheckFailed(f"self-check failed: {what}")


def whole_units(flows: np.ndarray) -> np.ndarray:
    """The flows as int64 after checking, exactly, that every value is a whole number."""
    values = np.asarray(flows)
    if values.dtype.kind in "iu":
        return values.astype(np.int64)
    if values.dtype.kind != "f" or not np.isfinite(values).all():
        _fail("a flow is not a finite number")
    if not np.array_equal(values, np.trunc(values)):
        _fail("a flow is not a whole number")
    if values.size and np.abs(values).max() >= 2.0**62:
        _fail("a flow is out of range")
    return values.astype(np.int64)


def plan_cost(data: WholeData, flows: np.ndarray) -> int:
    """The plan's cost in scaled units, as an exact Python integer."""
    total = flows.sum(axis=0)
    return int(np.dot(total.astype(object), data.cost.astype(object))) if total.size else 0


def check_flows(data: WholeData, flows, delivered, paths) -> tuple[np.ndarray, np.ndarray, dict]:
    """Check that a plan is a whole-unit plan of the problem (objective aside).

    Parameters
    ----------
    data : WholeData
    flows : array (K, m)
        Units of every commodity on every arc.
    delivered : array (K,)
        Units delivered per commodity.
    paths : list of lists, or None
        Single path: the arcs of each commodity's path, in order ([] when it is not
        delivered).

    Returns
    -------
    (units, shipped, figures)
        The flows and deliveries as int64, and the certificate's figures.

    Raises
    ------
    SelfCheckFailed
    """
    net, com = data.net, data.com
    K, m = data.shape
    n = net.num_nodes
    units = whole_units(flows)
    shipped = whole_units(delivered)
    if units.shape != (K, m) or shipped.shape != (K,):
        _fail("the plan's shape does not match the problem")
    if (units < 0).any():
        _fail("a flow is negative")
    total = units.sum(axis=0)
    excess = total - data.upper
    if (excess[data.limited] > 0).any():
        a = int(np.flatnonzero(data.limited & (excess > 0))[0])
        _fail(f"arc {a} carries {int(total[a])}, above its capacity {int(data.upper[a])}")
    offset = (n * np.arange(K))[:, None]  # commodity k's copy of node v is k * n + v
    balance = -node_balance(K * n, (offset + net.tail[None, :]).ravel(), (offset + net.head[None, :]).ravel(),
                            units.ravel())  # out minus in
    np.subtract.at(balance, n * np.arange(K) + com.sources, shipped)
    np.add.at(balance, n * np.arange(K) + com.sinks, shipped)
    if balance.any():
        i = int(np.flatnonzero(balance)[0])
        _fail(f"commodity {i // n} is not conserved at node {i % n} (off by {int(balance[i])})")
    if data.throughput:
        if (shipped < 0).any() or (shipped > data.demands).any():
            _fail("a commodity is delivered outside 0..its demand")
    elif not np.array_equal(shipped, data.demands):
        _fail("a commodity's demand is not met")
    figures = {"checked": True, "integral": True, "delivered_total": int(shipped.sum()), "max_imbalance": 0,
               "max_capacity_excess": max(0, int(excess[data.limited].max(initial=0))), "tolerance": 0.0}
    if data.single_path:
        figures["paths_checked"] = _check_paths(data, units, shipped, paths)
    return units, shipped, figures


def check_plan(data: WholeData, flows, delivered, paths, *, cost: int, bound: int, gap: float,
               cost_bound: int | None = None) -> dict:
    """Check a whole-unit plan (:func:`check_flows`), its cost and its bound; the
    certificate's figures on success.

    Parameters
    ----------
    cost : int
        The plan's claimed cost, scaled by ``10**data.scale``.
    bound : int
        The claimed bound on the objective (scaled cost for ``min-cost``, units for
        ``max-throughput``); ``gap`` the claimed relative gap.
    cost_bound : int, optional
        ``max-throughput``: the claimed least cost (scaled) of any plan delivering as much.

    Raises
    ------
    SelfCheckFailed
    """
    units, shipped, figures = check_flows(data, flows, delivered, paths)
    recomputed = plan_cost(data, units)
    if recomputed != cost:
        _fail(f"the cost {cost} does not match the flows ({recomputed})")
    achieved = int(shipped.sum()) if data.throughput else recomputed
    if (bound < achieved) if data.throughput else (bound > achieved):
        _fail(f"the bound {bound} is better than the plan itself ({achieved})")
    if relative_gap(achieved, bound) != gap:
        _fail(f"the gap {gap} does not follow from the plan and the bound")
    unit = 10**data.scale
    figures.update(cost=recomputed / unit, bound=bound if data.throughput else bound / unit, gap=gap)
    if cost_bound is not None:
        if cost_bound > recomputed:
            _fail(f"the cost bound {cost_bound} is above the plan's cost {recomputed}")
        figures.update(cost_bound=cost_bound / unit, cost_gap=relative_gap(recomputed, cost_bound))
    return figures


def _check_paths(data: WholeData, units: np.ndarray, shipped: np.ndarray, paths) -> int:
    """Each delivered commodity on one simple source-to-sink path carrying all of its
    demand, nothing anywhere else; the others on no arc at all."""
    net, com = data.net, data.com
    if paths is None or len(paths) != com.count:
        _fail("single path: one path per commodity is required")
    count = 0
    for k, path in enumerate(paths):  # one entry per commodity, each at most n arcs
        d = int(data.demands[k])
        expected = np.zeros(net.num_arcs, dtype=np.int64)
        if shipped[k] not in (0, d):
            _fail(f"commodity {k} is split: {int(shipped[k])} of {d} delivered")
        if shipped[k] and d:
            arcs = np.asarray(path, dtype=np.int64)
            if arcs.size == 0 or arcs.min() < 0 or arcs.max() >= net.num_arcs:
                _fail(f"commodity {k} has no valid path")
            nodes = np.concatenate([net.tail[arcs[:1]], net.head[arcs]])
            if nodes[0] != com.sources[k] or nodes[-1] != com.sinks[k]:
                _fail(f"commodity {k}'s path does not run from its source to its sink")
            if (net.tail[arcs[1:]] != net.head[arcs[:-1]]).any():
                _fail(f"commodity {k}'s path is not connected")
            if np.unique(nodes).size != nodes.size:
                _fail(f"commodity {k}'s path is not simple (a node repeats)")
            expected[arcs] = d
            count += 1
        elif path:
            _fail(f"commodity {k} is not delivered but has a path")
        if not np.array_equal(units[k], expected):
            _fail(f"commodity {k}'s flows are not its path carrying its whole demand")
    return count
