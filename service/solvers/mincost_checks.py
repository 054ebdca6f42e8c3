"""The service's own checks of min-cost flow and assignment answers.

Each checker recomputes its figures from the problem data and the answer alone
(independently of the solver and of :mod:`service.solvers.potentials`) and raises
:class:`~service.errors.SelfCheckFailed` when a condition fails. Integer data are
compared exactly (int64, or Python integers where int64 could overflow). Answers of
the LP engine hold to a relative tolerance, each figure against its own magnitude (an
arc against its bounds, a node against its throughput and supply, a reduced cost
against the cost and potentials it is made of, the gap against the terms of the two
objectives); the certificate states it. Proofs (infeasible sets, negative cycles)
are checked exactly on any data: floats by their correctly rounded exact sums.

The optimality proof is LP duality. For ``min c.x`` subject to ``out(x) - in(x) =
supply`` and ``lower <= x <= capacity``, any potentials ``p`` give the lower bound

    dual_bound(p) = -sum(supply * p) + sum(lower * max(rc, 0)) - sum(capacity * max(-rc, 0))

with reduced costs ``rc = cost + p[tail] - p[head]`` (finite only when ``rc >= 0``
on arcs without a capacity limit). A feasible flow whose cost equals a dual bound is
optimal (weak duality); equality holds exactly when complementary slackness does.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import SelfCheckFailed
from .certificates import arc_magnitude, beyond, capacity_excess, node_balance, throughput
from .graph import Graph

#: Above this magnitude int64 dot products switch to exact Python integers.
_INT_SAFE = 2.0**62


def _fail(what: str) -> None:
    raise SelfCheckFailed(f"self-check failed: {what}")


def _num(x):
    return x.item() if hasattr(x, "item") else x


def exact_dot(a: np.ndarray, b: np.ndarray):
    """``a @ b`` exactly for integer arrays (Python integers when int64 could overflow)."""
    if a.dtype.kind == "f" or b.dtype.kind == "f":
        return float(a.astype(np.float64) @ b.astype(np.float64))
    if not a.size:
        return 0
    if a.dtype != object and b.dtype != object and \
            float(np.abs(a).max()) * float(np.abs(b).max()) * a.size < _INT_SAFE:
        return int(a.astype(np.int64) @ b.astype(np.int64))
    return sum(x * y for x, y in zip(a.tolist(), b.tolist()))


def exact_sum(a: np.ndarray):
    """The sum of ``a``: exact for integers (Python ints past int64), correctly rounded for floats."""
    if a.dtype.kind == "f":
        return math.fsum(a.tolist())
    if a.dtype != object and (not a.size or float(np.abs(a).max()) * a.size < _INT_SAFE):
        return int(a.sum())
    return sum(int(x) for x in a.tolist())


def _exceeds(plus: list, minus: list) -> bool:
    """Whether ``sum(plus) > sum(minus)``, decided exactly (the sign of a correctly
    rounded float sum is exact; integer sums are exact)."""
    arrays = list(plus) + [-a for a in minus]
    if any(a.dtype.kind == "f" for a in arrays):
        return math.fsum(np.concatenate([a.astype(np.float64) for a in arrays]).tolist()) > 0
    return sum(exact_sum(a) for a in arrays) > 0


def reduced_costs(cost: np.ndarray, potentials: np.ndarray, tail: np.ndarray, head: np.ndarray) -> np.ndarray:
    """``cost + p[tail] - p[head]``: what an arc costs beyond the price difference it spans."""
    return cost + potentials[tail] - potentials[head]


def check_min_cost_flow(graph: Graph, supply, flows, potentials, relative: float = 0.0) -> dict:
    """Certify a min-cost flow: feasibility, reduced-cost optimality, zero duality gap.

    Parameters
    ----------
    graph : Graph
        ``capacity`` (ignored where ``unlimited``), ``unlimited``, ``cost`` (not None)
        and ``lower`` (0 when ``None``).
    supply : ndarray
        Required outflow minus inflow per node.
    flows, potentials : ndarray
        The answer: flows in the caller's terms, one potential per node.
    relative : float
        0 for exact data (every comparison exact); for LP answers, the tolerance
        relative to each figure's own magnitude (see the module doc).

    Returns
    -------
    dict
        ``checked``, ``primal_cost``, ``dual_bound``, ``gap``, ``max_imbalance``,
        ``max_capacity_excess``, ``slackness_violations``, ``tolerance`` (the largest
        absolute allowance used; 0 for exact data) and, when ``relative`` is not 0,
        ``relative_tolerance``.

    Raises
    ------
    SelfCheckFailed
        A bound or conservation is violated, an arc's reduced cost contradicts its
        flow, or the cost differs from the dual bound.
    """
    num_nodes, tail, head, cost = graph.num_nodes, graph.tail, graph.head, graph.cost
    capacity, unlimited, lower = graph.capacity, graph.unlimited, graph.lower
    low = np.zeros_like(flows) if lower is None else lower
    excess = capacity_excess(flows, capacity, unlimited, low)
    arcs = relative * arc_magnitude(capacity, unlimited, flows, lower) if relative else 0
    bad = beyond(excess, arcs, relative)
    if bad.any():
        _fail(f"an arc carries flow outside [lower, capacity] by {_num(excess[bad].max())}")
    max_excess = _num(excess.max()) if excess.size else 0
    imbalance = -node_balance(num_nodes, tail, head, flows) - supply
    nodes = relative * (throughput(num_nodes, tail, head, flows) + np.abs(supply.astype(np.float64))) \
        if relative else np.zeros(num_nodes)
    off = beyond(abs(imbalance), nodes, relative)
    if off.any():
        _fail(f"flow is not conserved at a node (off by {_num(abs(imbalance[off]).max())})")
    max_imbalance = _num(abs(imbalance).max()) if imbalance.size else 0
    rc = reduced_costs(cost, potentials, tail, head)
    limited = np.ones(flows.size, dtype=bool) if unlimited is None else ~unlimited
    # Complementary slackness: positive rc -> at the lower bound; negative -> at capacity.
    above = flows > low + arcs
    below = (flows < capacity - arcs) | ~limited
    prices = 0
    if relative:
        p = np.abs(potentials.astype(np.float64))
        prices = relative * (np.abs(cost.astype(np.float64)) + p[tail] + p[head])
    bad = ((rc > prices) & above) | ((rc < -prices) & below)
    violations = int(bad.sum())
    if violations:
        i = int(np.flatnonzero(bad)[0])
        _fail(f"arc {i} has reduced cost {_num(rc[i])} but flow {_num(flows[i])} (complementary slackness)")
    primal = exact_dot(cost, flows)
    dual = _dual_bound(supply, potentials, rc, low, capacity, limited)
    gap = primal - dual
    gap_allowed = relative * _objective_terms(cost, flows, supply, potentials, rc, low, capacity, limited) \
        if relative else 0.0
    if beyond(abs(gap), gap_allowed, relative):
        _fail(f"flow cost {primal} differs from the dual bound {dual}")
    certificate = {
        "checked": True,
        "primal_cost": primal,
        "dual_bound": dual,
        "gap": gap,
        "max_imbalance": max_imbalance,
        "max_capacity_excess": max_excess,
        "slackness_violations": violations,
        "tolerance": max(float(np.max(arcs, initial=0.0)), float(nodes.max(initial=0.0)), gap_allowed),
    }
    if relative:
        certificate["relative_tolerance"] = relative
    return certificate


def _objective_terms(cost, flows, supply, potentials, rc, low, capacity, limited) -> float:
    """The magnitude of the terms of both objectives: what their gap is measured against."""
    f = np.float64
    pos = np.maximum(rc, 0).astype(f)
    neg = np.where(limited, np.maximum(-rc, 0), 0).astype(f)
    return float(np.abs(cost.astype(f)) @ np.abs(flows.astype(f)) + np.abs(supply.astype(f)) @ np.abs(
        potentials.astype(f)) + np.abs(low.astype(f)) @ pos + np.abs(np.where(limited, capacity, 0).astype(f)) @ neg)


def _dual_bound(supply, potentials, rc, low, capacity, limited):
    pos = np.maximum(rc, 0)
    neg = np.where(limited, np.maximum(-rc, 0), 0)
    return -exact_dot(supply, potentials) + exact_dot(low, pos) - exact_dot(np.where(limited, capacity, 0), neg)


def check_infeasible_set(tail, head, capacity, unlimited, lower, supply, members, optional: bool = False,
                         demand_room=None) -> dict:
    """Certify that no flow can move the supply out of a node set.

    Every flow must move ``net_supply`` out of the set ``members``: its supply plus the
    lower bounds of the arcs entering it (with ``optional``, supplies may be left
    unshipped and only the lower bounds count; ``demand_room`` then adds the demand
    the set may absorb to what can leave). The arcs leaving the set cannot carry more
    than their capacities, so ``net_supply > outgoing_capacity`` proves infeasibility.
    The comparison is exact on any data (integers, or floats by their exact sums).

    Returns
    -------
    dict
        ``net_supply``, ``outgoing_capacity``, ``arcs`` (indices of the arcs leaving).

    Raises
    ------
    SelfCheckFailed
        When the set does not prove anything.
    """
    leaving = members[tail] & ~members[head]
    entering = ~members[tail] & members[head]
    if unlimited is not None and (leaving & unlimited).any():
        _fail("the infeasibility proof set has an arc without a capacity limit leaving it")
    must = [] if lower is None else [lower[entering]]
    if not optional:
        must.append(supply[members])
    can = [capacity[leaving]]
    if demand_room is not None:
        can.append(demand_room[members])
    net = sum(exact_sum(a) for a in must) if must else 0
    out_cap = sum(exact_sum(a) for a in can)
    if not must or not _exceeds(must, can):
        _fail(f"the infeasibility proof set has net supply {net}, not more than the {out_cap} that can leave")
    return {"net_supply": net, "outgoing_capacity": out_cap, "arcs": np.flatnonzero(leaving)}


def check_negative_cycle(tail, head, unlimited, cost, cycle: np.ndarray):
    """Certify a cycle of arcs without capacity limits whose cost is negative (exactly).

    Returns
    -------
    The cycle's cost per unit of flow sent around it.
    """
    if cycle.size == 0:
        _fail("the negative cycle is empty")
    if not np.array_equal(head[cycle], tail[np.roll(cycle, -1)]):
        _fail("the negative cycle is not a closed walk")
    if unlimited is None or not unlimited[cycle].all():
        _fail("the negative cycle uses an arc with a capacity limit")
    total = exact_sum(cost[cycle])
    if not total < 0:
        _fail(f"the cycle's cost {total} is not negative")
    return total


def check_shipped_cut(tail, head, capacity, unlimited, lower, members, source: int, sink: int, shipped,
                      relative: float = 0.0, through=None):
    """Certify that ``shipped`` is the most that can move from ``source`` to ``sink``.

    For a node set containing the source but not the sink, no flow ships more than
    the capacity of the arcs leaving it minus the lower bounds of the arcs entering
    it. Equality proves the amount maximum: exactly, or for LP answers within
    ``relative`` times the bounds of the arcs crossing the cut either way plus the
    throughput (``through``, per node) of the set's nodes.

    Returns
    -------
    The cut's bound (equal to ``shipped``).
    """
    if not members[source] or members[sink]:
        _fail("the shipping cut does not separate the source side from the sink side")
    leaving = members[tail] & ~members[head]
    entering = ~members[tail] & members[head]
    if unlimited is not None and (leaving & unlimited).any():
        _fail("the shipping cut has an arc without a capacity limit")
    bound = exact_sum(capacity[leaving]) - (0 if lower is None else exact_sum(lower[entering]))
    allowed = 0.0
    if relative:
        sizes = arc_magnitude(capacity, unlimited, np.zeros(capacity.size), lower)
        allowed = relative * (float(sizes[leaving | entering].sum()) + float(through[members].sum()))
    if beyond(abs(bound - shipped), allowed, relative):
        _fail(f"shipped {shipped} differs from the cut bound {bound}")
    return bound


def check_assignment(n_agents: int, n_tasks: int, rows, cols, cost, chosen: np.ndarray, u: np.ndarray,
                     v: np.ndarray, require_agents: bool, require_tasks: bool, tolerance: float = 0.0) -> dict:
    """Certify a minimum-cost assignment by LP duality.

    The LP: minimise ``sum cost * x`` over the allowed pairs, each agent at most once
    (exactly once when required), each task likewise. Duals ``u`` (agents) and ``v``
    (tasks) are feasible when ``u[a] + v[t] <= cost`` on every allowed pair and the
    duals of a side that is not required are ``<= 0``; then ``sum u + sum v`` bounds
    the cost from below.

    Parameters
    ----------
    rows, cols, cost : ndarray
        The allowed pairs.
    chosen : ndarray of int
        Indices into the pairs of the assignment.

    Returns
    -------
    dict
        ``checked``, ``primal_cost``, ``dual_bound``, ``gap``, ``tolerance``.
    """
    a, t = rows[chosen], cols[chosen]
    if np.unique(a).size != a.size or np.unique(t).size != t.size:
        _fail("an agent or a task is assigned twice")
    if require_agents and a.size != n_agents:
        _fail("not every agent is assigned")
    if require_tasks and t.size != n_tasks:
        _fail("not every task is assigned")
    slack = cost - u[rows] - v[cols]
    if slack.size and _num(slack.min()) < -tolerance:
        i = int(np.argmin(slack))
        _fail(f"dual constraint of pair {i} is violated by {-_num(slack[i])}")
    if (not require_agents and u.size and _num(u.max()) > tolerance) or \
            (not require_tasks and v.size and _num(v.max()) > tolerance):
        _fail("a dual of a side that need not be fully assigned is positive")
    primal = _num(cost[chosen].sum()) if chosen.size else 0
    if cost.dtype.kind == "i":
        primal = exact_dot(cost[chosen], np.ones(chosen.size, dtype=np.int64))
    dual = _num(u.sum()) + _num(v.sum())
    gap = primal - dual
    if abs(gap) > tolerance * max(1, n_agents + n_tasks):
        _fail(f"assignment cost {primal} differs from the dual bound {dual}")
    return {"checked": True, "primal_cost": primal, "dual_bound": dual, "gap": gap, "tolerance": tolerance}


def check_hall_violation(rows, cols, members: np.ndarray, partners: np.ndarray, by_agents: bool) -> None:
    """Certify a Hall violation: ``members`` of one side allowed only ``partners``, fewer than they are."""
    own, other = (rows, cols) if by_agents else (cols, rows)
    if members.size == 0:
        _fail("the Hall-violating set is empty")
    inside = np.isin(own, members)
    allowed = np.unique(other[inside])
    if not np.isin(allowed, partners).all():
        _fail("the Hall-violating set has an allowed partner outside the reported ones")
    if not partners.size < members.size:
        _fail(f"{members.size} members with {partners.size} allowed partners do not violate Hall's condition")


def check_feasible_flow(num_nodes, tail, head, capacity, unlimited, lower, supply, flows,
                        relative: float = 0.0) -> dict:
    """Certify that a flow respects every bound and conserves flow (supply = outflow - inflow),
    exactly, or within ``relative`` of each arc's bounds and each node's throughput and supply."""
    excess = capacity_excess(flows, capacity, unlimited, lower)
    imbalance = -node_balance(num_nodes, tail, head, flows) - supply
    arcs = relative * arc_magnitude(capacity, unlimited, flows, lower) if relative else 0
    nodes = relative * (throughput(num_nodes, tail, head, flows) + np.abs(supply.astype(np.float64))) \
        if relative else 0
    max_excess = _num(excess.max()) if excess.size else 0
    max_imbalance = _num(abs(imbalance).max()) if imbalance.size else 0
    if beyond(excess, arcs, relative).any() or beyond(abs(imbalance), nodes, relative).any():
        _fail(f"the feasible flow is not feasible (excess {max_excess}, imbalance {max_imbalance})")
    return {"max_imbalance": max_imbalance, "max_capacity_excess": max_excess}
