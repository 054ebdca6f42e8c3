"""The service's own checks of min-cost flow and assignment answers.

Each checker recomputes its figures from the problem data and the answer alone
(independently of the solver and of :mod:`service.solvers.potentials`) and raises
:class:`~service.errors.SelfCheckFailed` when a condition fails. Integer data are
compared exactly (int64, or Python integers where int64 could overflow); fractional
data to the stated tolerance.

The optimality proof is LP duality. For ``min c.x`` subject to ``out(x) - in(x) =
supply`` and ``lower <= x <= capacity``, any potentials ``p`` give the lower bound

    dual_bound(p) = -sum(supply * p) + sum(lower * max(rc, 0)) - sum(capacity * max(-rc, 0))

with reduced costs ``rc = cost + p[tail] - p[head]`` (finite only when ``rc >= 0``
on arcs without a capacity limit). A feasible flow whose cost equals a dual bound is
optimal (weak duality); equality holds exactly when complementary slackness does.
"""

from __future__ import annotations

import numpy as np

from ..errors import SelfCheckFailed
from .certificates import capacity_excess, node_balance

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
    if float(np.abs(a).max()) * float(np.abs(b).max()) * a.size < _INT_SAFE:
        return int(a.astype(np.int64) @ b.astype(np.int64))
    return sum(x * y for x, y in zip(a.tolist(), b.tolist()))


def reduced_costs(cost: np.ndarray, potentials: np.ndarray, tail: np.ndarray, head: np.ndarray) -> np.ndarray:
    """``cost + p[tail] - p[head]``: what an arc costs beyond the price difference it spans."""
    return cost + potentials[tail] - potentials[head]


def check_min_cost_flow(num_nodes, tail, head, capacity, unlimited, lower, cost, supply, flows, potentials,
                        tolerance: float = 0.0) -> dict:
    """Certify a min-cost flow: feasibility, reduced-cost optimality, zero duality gap.

    Parameters
    ----------
    capacity : ndarray
        Ignored where ``unlimited``.
    lower : ndarray or None
        Lower bounds (0 when ``None``).
    supply : ndarray
        Required outflow minus inflow per node.
    flows, potentials : ndarray
        The answer: flows in the caller's terms, one potential per node.
    tolerance : float
        0 for integer data.

    Returns
    -------
    dict
        ``checked``, ``primal_cost``, ``dual_bound``, ``gap``, ``max_imbalance``,
        ``max_capacity_excess``, ``slackness_violations``, ``tolerance``.

    Raises
    ------
    SelfCheckFailed
        A bound or conservation is violated, an arc's reduced cost contradicts its
        flow, or the cost differs from the dual bound.
    """
    low = np.zeros_like(flows) if lower is None else lower
    excess = capacity_excess(flows, capacity, unlimited, low)
    max_excess = _num(excess.max()) if excess.size else 0
    if max_excess > tolerance:
        _fail(f"an arc carries flow outside [lower, capacity] by {max_excess}")
    imbalance = -node_balance(num_nodes, tail, head, flows) - supply
    max_imbalance = _num(np.abs(imbalance).max()) if imbalance.size else 0
    if max_imbalance > tolerance:
        _fail(f"flow is not conserved at a node (off by {max_imbalance})")
    rc = reduced_costs(cost, potentials, tail, head)
    limited = np.ones(flows.size, dtype=bool) if unlimited is None else ~unlimited
    # Complementary slackness: positive rc -> at the lower bound; negative -> at capacity.
    above = flows > low + tolerance
    below = (flows < capacity - tolerance) | ~limited
    bad = ((rc > tolerance) & above) | ((rc < -tolerance) & below)
    violations = int(bad.sum())
    if violations:
        i = int(np.flatnonzero(bad)[0])
        _fail(f"arc {i} has reduced cost {_num(rc[i])} but flow {_num(flows[i])} (complementary slackness)")
    primal = exact_dot(cost, flows)
    dual = _dual_bound(supply, potentials, rc, low, capacity, limited)
    gap = primal - dual
    if abs(gap) > tolerance * max(1.0, abs(float(primal))):
        _fail(f"flow cost {primal} differs from the dual bound {dual}")
    return {
        "checked": True,
        "primal_cost": primal,
        "dual_bound": dual,
        "gap": gap,
        "max_imbalance": max_imbalance,
        "max_capacity_excess": max_excess,
        "slackness_violations": violations,
        "tolerance": tolerance,
    }


def _dual_bound(supply, potentials, rc, low, capacity, limited):
    pos = np.maximum(rc, 0)
    neg = np.where(limited, np.maximum(-rc, 0), 0)
    return -exact_dot(supply, potentials) + exact_dot(low, pos) - exact_dot(np.where(limited, capacity, 0), neg)


def check_infeasible_set(tail, head, capacity, unlimited, lower, supply, members, optional: bool = False,
                         demand_room=None, tolerance: float = 0.0) -> dict:
    """Certify that no flow can move the supply out of a node set.

    Every flow must move ``net_supply`` out of the set ``members``: its supply plus the
    lower bounds of the arcs entering it (with ``optional``, supplies may be left
    unshipped and only the lower bounds count; ``demand_room`` then adds the demand
    the set may absorb to what can leave). The arcs leaving the set cannot carry more
    than their capacities, so ``net_supply > outgoing_capacity`` proves infeasibility.

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
    forced_in = 0 if lower is None else _num(lower[entering].sum())
    net = forced_in if optional else _num(supply[members].sum()) + forced_in
    out_cap = _num(capacity[leaving].sum())
    if demand_room is not None:
        out_cap = out_cap + _num(demand_room[members].sum())
    if not net > out_cap + tolerance:
        _fail(f"the infeasibility proof set has net supply {net}, not more than the {out_cap} that can leave")
    return {"net_supply": net, "outgoing_capacity": out_cap, "arcs": np.flatnonzero(leaving)}


def check_negative_cycle(tail, head, unlimited, cost, cycle: np.ndarray, tolerance: float = 0.0):
    """Certify a cycle of arcs without capacity limits whose cost is negative.

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
    total = _num(cost[cycle].sum())
    if not total < -tolerance:
        _fail(f"the cycle's cost {total} is not negative")
    return total


def check_shipped_cut(tail, head, capacity, unlimited, lower, members, source: int, sink: int, shipped,
                      tolerance: float = 0.0):
    """Certify that ``shipped`` is the most that can move from ``source`` to ``sink``.

    For a node set containing the source but not the sink, no flow ships more than
    the capacity of the arcs leaving it minus the lower bounds of the arcs entering
    it. Equality proves the amount maximum.

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
    bound = _num(capacity[leaving].sum()) - (0 if lower is None else _num(lower[entering].sum()))
    if abs(bound - shipped) > tolerance * max(1, int(leaving.sum())):
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
                        tolerance: float = 0.0) -> dict:
    """Certify that a flow respects every bound and conserves flow (supply = outflow - inflow)."""
    excess = capacity_excess(flows, capacity, unlimited, lower)
    max_excess = _num(excess.max()) if excess.size else 0
    imbalance = -node_balance(num_nodes, tail, head, flows) - supply
    max_imbalance = _num(np.abs(imbalance).max()) if imbalance.size else 0
    if max_excess > tolerance or max_imbalance > tolerance:
        _fail(f"the feasible flow is not feasible (excess {max_excess}, imbalance {max_imbalance})")
    return {"max_imbalance": max_imbalance, "max_capacity_excess": max_excess}
