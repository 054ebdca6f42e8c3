"""Min-cost flow: engine choice, lower bounds, shortage modes, proofs, certification.

The problem, in the caller's terms: node supplies ``b`` (positive supply, negative
demand), arcs with ``lower <= flow <= capacity`` (capacity may be unlimited) and a
cost per unit; minimise ``sum(cost * flow)`` subject to ``outflow - inflow = b`` at
every node.

* ``shortage="reject"``: supplies balance and everything ships.
* ``shortage="max-flow"``: ship as much as the network allows from the supply nodes
  (up to their supply) to the demand nodes (up to their demand), at least cost among
  the largest shipments. Modelled with a super source ``S`` feeding each supply node
  and a super sink ``T`` fed by each demand node; the amount is proved maximum by a
  cut, the cost by potentials on that augmented network.

Lower bounds are transformed away (``flow = lower + x``, supplies adjusted) before
the graph solver runs, and flows are reported back in the caller's terms.

Engines: ``graph`` solves integers exactly, and decimals with at most six places by
exact scaling (quantities and costs each by their own power of ten); ``lp`` uses
GLOP with the tolerance stated; ``auto`` takes the graph engine whenever it can
answer exactly.

Potentials ``p`` follow one sign convention everywhere: reduced cost
``rc = cost + p[tail] - p[head]``; ``p`` is a price per unit at each node, rising
along the arcs that carry flow by their cost, so ``p[j] - p[i]`` is the marginal cost
of moving one more unit from ``i`` to ``j`` (one more unit of demand at ``j``
against one more unit of supply at ``i``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import breadth_first_order

from ..errors import FieldError, InputError, SelfCheckFailed, SolverFailure, SolveTimeout
from . import mincost_checks as checks
from .lp import incidence_matrix, solve_lp
from .maxflow_lp import LP_TOLERANCE, max_flow_lp
from .mincost_graph import (
    GraphRangeError,
    auxiliary_max_flow,
    check_ranges,
    mincost_engine,
    negative_unlimited_cycle,
    solve_balanced,
)
from .potentials import node_potentials, residual_masks
from .scaling import common_scale


@dataclass
class MinCostSolution:
    """A solved min-cost flow problem, in the caller's terms.

    ``status`` is ``optimal``, ``infeasible`` or ``unbounded``. ``infeasibility``
    holds ``members`` (bool mask over nodes), ``arcs``, ``net_supply``,
    ``outgoing_capacity`` and ``side`` (``supply``: the set cannot send out what it
    must; ``demand``: it cannot receive what it must, with the arcs entering it).
    """

    status: str
    engine: dict
    cost: Any = None
    shipped: Any = None
    flows: np.ndarray | None = None
    potentials: np.ndarray | None = None
    reduced_costs: np.ndarray | None = None
    unmet: np.ndarray | None = None
    infeasibility: dict | None = None
    negative_cycle: np.ndarray | None = None
    tolerance: float = 0.0
    extra: dict = field(default_factory=dict)


@dataclass
class _Net:
    n: int
    tail: np.ndarray
    head: np.ndarray
    cap: np.ndarray
    unl: np.ndarray | None
    cost: np.ndarray
    low: np.ndarray | None
    sup: np.ndarray


def imbalance(supply: np.ndarray):
    """Total supply minus total demand, exactly (0 when balanced).

    Integers are summed exactly; decimals with at most six places are summed as
    scaled integers (so 0.1 + 0.2 - 0.3 balances); other fractions to 1e-9 relative.
    """
    if not supply.size:
        return 0
    scaled = common_scale(supply)
    if scaled is not None:
        d, (ints,) = scaled
        total = checks.exact_dot(ints, np.ones(ints.size, dtype=np.int64))
        return total if not d else total / 10**d
    total = math.fsum(supply.tolist())
    return 0 if abs(total) <= 1e-9 * float(np.abs(supply).sum()) else total


def min_cost_flow(num_nodes: int, tail: np.ndarray, head: np.ndarray, capacity: np.ndarray,
                  unlimited: np.ndarray | None, cost: np.ndarray | None, lower: np.ndarray | None,
                  supply: np.ndarray, *, shortage: str = "reject", engine: str = "auto",
                  time_limit: float | None = None) -> tuple[MinCostSolution, dict]:
    """Solve and certify a min-cost flow problem.

    Parameters
    ----------
    num_nodes : int
    tail, head : ndarray of int32
    capacity : ndarray
        0 where ``unlimited``.
    unlimited : ndarray of bool or None
    cost, lower : ndarray or None
        ``None`` means all zero.
    supply : ndarray
        Per node; must sum to 0 when ``shortage == "reject"``.
    shortage : {"reject", "max-flow"}
    engine : {"auto", "graph", "lp"}
    time_limit : float, optional
        Seconds, for the LP engine.

    Returns
    -------
    (MinCostSolution, certificate)

    Raises
    ------
    InputError
        ``engine="graph"`` on data it cannot solve exactly; unbalanced supplies with
        ``shortage="reject"``.
    SelfCheckFailed
        When the answer fails its certificate (a bug).
    """
    if shortage == "reject" and imbalance(supply) != 0:
        raise InputError(FieldError("/nodes", f"supplies exceed demands by {imbalance(supply)}"))
    net = _Net(num_nodes, tail, head, capacity,
               unlimited if unlimited is not None and unlimited.any() else None,
               np.zeros(tail.size, dtype=np.int64) if cost is None else cost,
               lower if lower is not None and lower.any() else None, supply)
    refused = None
    if engine != "lp":
        answer = _graph_route(net, shortage, forced=engine == "graph")
        if not isinstance(answer, str):
            return answer
        refused = answer
    try:
        return _lp_route(net, shortage, time_limit)
    except SelfCheckFailed:
        raise
    except SolverFailure as exc:
        if refused is None:
            raise
        # Out of the graph engine's range and too extreme for the LP engine: the data's fault.
        raise InputError(FieldError("/arcs", f"{refused}; the LP engine failed on it too ({exc.detail})")) from None


# ----------------------------------------------------------------------------- graph


def _graph_refused(reason: str) -> InputError:
    return InputError(FieldError("/arcs", f"{reason}; the graph engine cannot solve it exactly "
                                          "(use options.engine 'lp' or 'auto')"))


def _graph_route(net: _Net, shortage: str, *, forced: bool):
    quantities = common_scale(net.cap, net.low, net.sup)
    costs = common_scale(net.cost)
    if quantities is None or costs is None:
        if forced:
            raise _graph_refused("the data have more than 6 decimal places or are too large once scaled")
        return "the data have more than 6 decimal places or are too large once scaled"
    dq, (cap, low, sup) = quantities
    dc, (cost,) = costs
    scaled = _Net(net.n, net.tail, net.head, cap, net.unl, cost, low, sup)
    try:
        if shortage == "reject":
            solution, certificate = _solve_reject(scaled)
        else:
            solution, certificate = _solve_max_flow(scaled)
    except GraphRangeError as exc:
        if forced:
            raise _graph_refused(str(exc)) from None
        return str(exc)
    if dq or dc:
        _unscale(solution, certificate, 10**dq, 10**dc)
    return solution, certificate


def _transform(net: _Net):
    """Remove lower bounds: capacities ``u - l`` and supplies ``b - out(l) + in(l)``."""
    if net.low is None:
        return net.cap, net.sup.copy()
    cap = net.cap - net.low
    if net.unl is not None:
        cap = np.where(net.unl, 0, cap)
    sup = net.sup.astype(np.int64, copy=True)
    np.subtract.at(sup, net.tail, net.low)
    np.add.at(sup, net.head, net.low)
    return cap, sup


def _plus_lower(flows, low):
    return flows if low is None else flows + low


def _solve_reject(net: _Net):
    cap_t, sup_t = _transform(net)
    big = check_ranges(net.n, cap_t, net.unl, net.cost, sup_t)
    if net.unl is not None and (net.unl & (net.cost < 0)).any():
        # A negative unlimited cycle makes a feasible problem unbounded: test feasibility first.
        value, aux_flows, side = auxiliary_max_flow(net.n, net.tail, net.head, cap_t, net.unl, sup_t, big)
        if value < int(sup_t[sup_t > 0].sum()):
            return _infeasible(net, side)
        cycle = negative_unlimited_cycle(net.n, net.tail, net.head, net.cost, net.unl)
        if cycle is not None:
            return _unbounded(net, cycle, _plus_lower(aux_flows, net.low))
    flows_t = solve_balanced(net.n, net.tail, net.head, cap_t, net.unl, net.cost, sup_t, big)
    if flows_t is None:
        _, _, side = auxiliary_max_flow(net.n, net.tail, net.head, cap_t, net.unl, sup_t, big)
        return _infeasible(net, side)
    p = node_potentials(net.n, net.tail, net.head, net.cost, flows_t, cap_t, net.unl)
    flows = _plus_lower(flows_t, net.low)
    certificate = checks.check_min_cost_flow(net.n, net.tail, net.head, net.cap, net.unl, net.low, net.cost,
                                             net.sup, flows, p)
    solution = MinCostSolution(
        "optimal", mincost_engine(), cost=certificate["primal_cost"], shipped=net.sup[net.sup > 0].sum().item(),
        flows=flows, potentials=p, reduced_costs=checks.reduced_costs(net.cost, p, net.tail, net.head))
    return solution, certificate


def _infeasible(net: _Net, side: np.ndarray, *, optional: bool = False, demand_room=None, tolerance=0.0):
    proof = checks.check_infeasible_set(net.tail, net.head, net.cap, net.unl, net.low, net.sup, side,
                                        optional=optional, demand_room=demand_room, tolerance=tolerance)
    proof.update(members=side, side="supply")
    certificate = {"checked": True, "net_supply": proof["net_supply"],
                   "outgoing_capacity": proof["outgoing_capacity"], "tolerance": tolerance}
    return MinCostSolution("infeasible", mincost_engine(), infeasibility=proof, tolerance=tolerance), certificate


def _unbounded(net: _Net, cycle: np.ndarray, feasible_flow: np.ndarray | None, tolerance=0.0):
    total = checks.check_negative_cycle(net.tail, net.head, net.unl, net.cost, cycle, tolerance)
    certificate = {"checked": True, "cycle_cost": total, "cycle_arcs": int(cycle.size), "tolerance": tolerance}
    if feasible_flow is not None:
        certificate.update(checks.check_feasible_flow(net.n, net.tail, net.head, net.cap, net.unl, net.low,
                                                      net.sup, feasible_flow, tolerance))
    solution = MinCostSolution("unbounded", mincost_engine(), negative_cycle=cycle, tolerance=tolerance)
    solution.extra["cycle_cost"] = total
    return solution, certificate


def _augment(net: _Net):
    """The max-flow-mode network: super source S -> supply nodes, demand nodes -> super sink T."""
    s, t = net.n, net.n + 1
    src = np.flatnonzero(net.sup > 0)
    dst = np.flatnonzero(net.sup < 0)
    k = src.size + dst.size
    zeros = np.zeros(k, dtype=net.cost.dtype)
    aug = _Net(
        net.n + 2,
        np.concatenate([net.tail, np.full(src.size, s, net.tail.dtype), dst.astype(net.tail.dtype)]),
        np.concatenate([net.head, src.astype(net.head.dtype), np.full(dst.size, t, net.head.dtype)]),
        np.concatenate([net.cap, net.sup[src], -net.sup[dst]]),
        None if net.unl is None else np.concatenate([net.unl, np.zeros(k, dtype=bool)]),
        np.concatenate([net.cost, zeros]),
        None if net.low is None else np.concatenate([net.low, np.zeros(k, dtype=net.low.dtype)]),
        np.zeros(net.n + 2, dtype=net.sup.dtype),
    )
    return aug, src, dst


def _solve_max_flow(net: _Net):
    aug, src, dst = _augment(net)
    s, t = net.n, net.n + 1
    total = net.sup[src].sum().item()
    cap_t, e = _transform(aug)
    bound = e.copy()
    bound[s] += total
    bound[t] -= total
    big = check_ranges(aug.n, cap_t, aug.unl, aug.cost, bound)
    shipped = _most_shippable(aug, cap_t, e, big, total)
    if shipped is None:
        return _lower_bounds_infeasible(net, aug, cap_t, e, big)
    cycle = negative_unlimited_cycle(net.n, net.tail, net.head, net.cost, net.unl)
    if cycle is not None:
        return _unbounded(net, cycle, None)
    e[s] += shipped
    e[t] -= shipped
    flows_t = solve_balanced(aug.n, aug.tail, aug.head, cap_t, aug.unl, aug.cost, e, big)
    if flows_t is None:
        raise SolverFailure("the min-cost flow of the largest shipment was reported infeasible")
    p = node_potentials(aug.n, aug.tail, aug.head, aug.cost, flows_t, cap_t, aug.unl)
    flows = _plus_lower(flows_t, aug.low)
    aug.sup[s], aug.sup[t] = shipped, -shipped
    certificate = checks.check_min_cost_flow(aug.n, aug.tail, aug.head, aug.cap, aug.unl, aug.low, aug.cost,
                                             aug.sup, flows, p)
    side = _residual_reach(aug.n, aug.tail, aug.head, flows_t, cap_t, aug.unl, s)
    certificate["shipped_bound"] = checks.check_shipped_cut(aug.tail, aug.head, aug.cap, aug.unl, aug.low, side,
                                                            s, t, shipped)
    return _max_flow_solution(net, aug, src, dst, flows, p, shipped, certificate), certificate


def _max_flow_solution(net, aug, src, dst, flows, p, shipped, certificate, engine=None, tolerance=0.0):
    m = net.tail.size
    unmet = net.sup.copy()
    unmet[src] -= flows[m:m + src.size]
    unmet[dst] += flows[m + src.size:]
    pn = p[:net.n]
    return MinCostSolution(
        "optimal", engine or mincost_engine(), cost=certificate["primal_cost"], shipped=shipped, flows=flows[:m],
        potentials=pn, reduced_costs=checks.reduced_costs(net.cost, pn, net.tail, net.head), unmet=unmet,
        tolerance=tolerance)


def _most_shippable(aug: _Net, cap_t, e, big, total):
    """The largest amount S can ship to T while every lower bound holds; None if they cannot."""
    s, t = aug.n - 2, aug.n - 1
    if aug.low is None:
        # No lower bounds: a plain maximum flow, here from the auxiliary network.
        probe = np.zeros(aug.n, dtype=np.int64)
        probe[s], probe[t] = total, -total
        value, _, _ = auxiliary_max_flow(aug.n, aug.tail, aug.head, cap_t, aug.unl, probe, big)
        return value
    # With lower bounds: a circulation with a return arc T -> S at cost -1 maximises the shipment.
    tail = np.concatenate([aug.tail, [t]]).astype(np.int32)
    head = np.concatenate([aug.head, [s]]).astype(np.int32)
    cost = np.zeros(tail.size, dtype=np.int64)
    cost[-1] = -1
    cap = np.concatenate([cap_t, [total]])
    flows = solve_balanced(aug.n, tail, head, cap, None if aug.unl is None else np.append(aug.unl, False),
                           cost, e, big)
    return None if flows is None else int(flows[-1])


def _lower_bounds_infeasible(net, aug, cap_t, e, big, tolerance=0.0, side=None):
    """Proof that the lower bounds cannot hold even when shipping is optional.

    On the network with a return arc T -> S, a minimum cut X of the auxiliary network
    proves it. When X holds neither S nor T (or S only), its real nodes receive more
    through lower bounds than can leave them or be absorbed by their demand. When X
    holds both, the real nodes outside X must send out more through lower bounds than
    can enter them or be supplied inside.
    """
    s, t = net.n, net.n + 1
    if side is None:
        tail = np.concatenate([aug.tail, [t]]).astype(np.int32)
        head = np.concatenate([aug.head, [s]]).astype(np.int32)
        unl = np.concatenate([np.zeros(aug.tail.size, bool) if aug.unl is None else aug.unl, [True]])
        _, _, side = auxiliary_max_flow(aug.n, tail, head, np.append(cap_t, 0), unl, e, big)
    demand_room = np.maximum(-net.sup, 0)
    supply_room = np.maximum(net.sup, 0)
    if side[s] and side[t]:
        members = ~side[:net.n]
        flipped = _Net(net.n, net.head, net.tail, net.cap, net.unl, net.cost, net.low, -net.sup)
        solution, certificate = _infeasible(flipped, members, optional=True, demand_room=supply_room,
                                            tolerance=tolerance)
        solution.infeasibility["side"] = "demand"
        return solution, certificate
    return _infeasible(net, side[:net.n].copy(), optional=True, demand_room=demand_room, tolerance=tolerance)


def _residual_reach(num_nodes, tail, head, flows, cap, unl, start, tol=0):
    forward, backward = residual_masks(flows, cap, unl, tol)
    rows = np.concatenate([tail[forward], head[backward]])
    cols = np.concatenate([head[forward], tail[backward]])
    graph = sp.csr_matrix((np.ones(rows.size, dtype=np.int8), (rows, cols)), shape=(num_nodes, num_nodes))
    mask = np.zeros(num_nodes, dtype=bool)
    mask[breadth_first_order(graph, start, directed=True, return_predecessors=False)] = True
    return mask


def _unscale(solution: MinCostSolution, certificate: dict, fq: int, fc: int) -> None:
    """Divide an exact integer answer back by the decimal scales (one rounding per number)."""
    for name in ("flows", "unmet"):
        value = getattr(solution, name)
        if value is not None:
            setattr(solution, name, value / fq)
    for name in ("potentials", "reduced_costs"):
        value = getattr(solution, name)
        if value is not None:
            setattr(solution, name, value / fc)
    if solution.cost is not None:
        solution.cost = solution.cost / (fq * fc)
    if solution.shipped is not None:
        solution.shipped = solution.shipped / fq
    if solution.infeasibility:
        for name in ("net_supply", "outgoing_capacity"):
            solution.infeasibility[name] = solution.infeasibility[name] / fq
    if "cycle_cost" in solution.extra:
        solution.extra["cycle_cost"] = solution.extra["cycle_cost"] / fc
    for name in ("primal_cost", "dual_bound", "gap"):
        if name in certificate:
            certificate[name] = certificate[name] / (fq * fc)
    for name in ("net_supply", "outgoing_capacity", "shipped_bound"):
        if name in certificate:
            certificate[name] = certificate[name] / fq
    if "cycle_cost" in certificate:
        certificate["cycle_cost"] = certificate["cycle_cost"] / fc
    certificate["decimal_scale"] = fq
    certificate["cost_scale"] = fc
    solution.engine = dict(solution.engine, decimal_scale=fq, cost_scale=fc)


# -------------------------------------------------------------------------------- lp


def _float(a):
    return None if a is None else a.astype(np.float64)


def _lp_route(net: _Net, shortage: str, time_limit):
    net = _Net(net.n, net.tail, net.head, _float(net.cap), net.unl, _float(net.cost), _float(net.low),
               _float(net.sup))
    scale = max(1.0, float(np.abs(net.cap).max()) if net.cap.size else 1.0,
                float(np.abs(net.sup).max()) if net.sup.size else 1.0)
    tol = LP_TOLERANCE * scale
    if shortage == "reject":
        return _lp_reject(net, tol, time_limit)
    return _lp_max_flow(net, tol, time_limit)


def _lp_engine(tol):
    return {"kind": "lp", "solver": "OR-Tools GLOP", "version": mincost_engine()["version"], "tolerance": tol}


def _float_negative_cycle(net: _Net, tol):
    """A negative unlimited cycle for fractional costs, found on costs rounded to 2**-40 of the largest."""
    if net.unl is None or not (net.unl & (net.cost < 0)).any():
        return None
    top = float(np.abs(net.cost[net.unl]).max())
    ints = np.rint(net.cost * (2.0**40 / top)).astype(np.int64)
    cycle = negative_unlimited_cycle(net.n, net.tail, net.head, ints, net.unl)
    if cycle is None or not float(net.cost[cycle].sum()) < -tol:
        return None
    return cycle


def _lp(net: _Net, supply, c, time_limit, extra_cols=None):
    upper = net.cap if net.unl is None else np.where(net.unl, np.inf, net.cap)
    low = np.zeros(net.tail.size) if net.low is None else net.low
    lp = solve_lp(c, incidence_matrix(net.n, net.tail, net.head), supply, supply, low, upper,
                  time_limit=time_limit)
    if lp.status == "time_limit":
        raise SolveTimeout("the LP engine hit the time limit")
    return lp, low, upper


def _lp_certified(net: _Net, lp, low, upper, tol):
    """Flows and potentials of an optimal LP answer, with their certificate.

    GLOP's duals of the conservation rows, negated, are the potentials of the
    reduced-cost convention (cost + p[from] - p[to]).
    """
    flows = np.clip(lp.x, low, upper)
    p = -lp.row_duals
    certificate = checks.check_min_cost_flow(net.n, net.tail, net.head, net.cap, net.unl, net.low, net.cost,
                                             net.sup, flows, p, tol)
    return flows, p, certificate


def _lp_reject(net: _Net, tol, time_limit):
    cycle = _float_negative_cycle(net, tol)
    if cycle is not None:
        # GLOP's presolve may call an unbounded model infeasible: decide feasibility by max-flow.
        mf, demand = _lp_auxiliary(net)
        if mf.value < demand - tol:
            return _lp_infeasible(net, mf, tol)
        feasible = mf.flows[: net.tail.size] + (0 if net.low is None else net.low)
        solution, certificate = _unbounded(net, cycle, feasible, tol * max(1, net.n))
        solution.engine = _lp_engine(tol)
        return solution, certificate
    lp, low, upper = _lp(net, net.sup, net.cost, time_limit)
    if lp.status == "infeasible":
        return _lp_infeasible(net, _lp_auxiliary(net)[0], tol)
    if lp.status != "optimal":
        raise SolverFailure(f"GLOP returned {lp.status} for a model without a negative unlimited cycle")
    flows, p, certificate = _lp_certified(net, lp, low, upper, tol)
    solution = MinCostSolution("optimal", _lp_engine(tol), cost=certificate["primal_cost"],
                               shipped=float(net.sup[net.sup > 0].sum()), flows=flows, potentials=p,
                               reduced_costs=checks.reduced_costs(net.cost, p, net.tail, net.head), tolerance=tol)
    return solution, certificate


def _lp_auxiliary(net: _Net):
    """Maximum flow of the auxiliary network (super source to supplies, demands to super sink), by LP."""
    cap_t, sup_t = _transform_float(net)
    s, t = net.n, net.n + 1
    src, dst = np.flatnonzero(sup_t > 0), np.flatnonzero(sup_t < 0)
    tail = np.concatenate([net.tail, np.full(src.size, s), dst]).astype(np.int32)
    head = np.concatenate([net.head, src, np.full(dst.size, t)]).astype(np.int32)
    cap = np.concatenate([cap_t, sup_t[src], -sup_t[dst]])
    unl = None if net.unl is None else np.concatenate([net.unl, np.zeros(src.size + dst.size, bool)])
    return max_flow_lp(net.n + 2, tail, head, cap, unl, s, t), float(sup_t[src].sum())


def _lp_infeasible(net: _Net, mf, tol):
    """Proof set from the minimum cut of the auxiliary network."""
    solution, certificate = _infeasible(net, mf.source_side[:net.n].copy(), tolerance=tol)
    solution.engine = _lp_engine(tol)
    return solution, certificate


def _transform_float(net: _Net):
    if net.low is None:
        return net.cap, net.sup
    cap = net.cap - net.low
    if net.unl is not None:
        cap = np.where(net.unl, 0, cap)
    sup = net.sup - np.bincount(net.tail, net.low, net.n) + np.bincount(net.head, net.low, net.n)
    return cap, sup


def _lp_max_flow(net: _Net, tol, time_limit):
    aug, src, dst = _augment(net)
    s, t = net.n, net.n + 1
    total = float(net.sup[src].sum())
    # Phase 1: the largest shipment, as a circulation with a return arc T -> S worth -1 per unit.
    ret = _Net(aug.n, np.append(aug.tail, t), np.append(aug.head, s), np.append(aug.cap, total),
               None if aug.unl is None else np.append(aug.unl, False), None,
               None if aug.low is None else np.append(aug.low, 0.0), aug.sup)
    c = np.zeros(ret.tail.size)
    c[-1] = -1.0
    lp, _, _ = _lp(ret, aug.sup, c, time_limit)
    if lp.status != "optimal":
        if lp.status != "infeasible":
            raise SolverFailure(f"GLOP returned {lp.status} for the largest shipment")
        cap_t, e = _transform_float(aug)
        unl = np.concatenate([np.zeros(aug.tail.size, bool) if aug.unl is None else aug.unl, [True]])
        pos, neg = np.flatnonzero(e > tol), np.flatnonzero(e < -tol)
        n2 = aug.n
        tail = np.concatenate([ret.tail, np.full(pos.size, n2), neg]).astype(np.int32)
        head = np.concatenate([ret.head, pos, np.full(neg.size, n2 + 1)]).astype(np.int32)
        cap = np.concatenate([cap_t, [0.0], e[pos], -e[neg]])
        unl = np.concatenate([unl, np.zeros(pos.size + neg.size, bool)])
        mf = max_flow_lp(n2 + 2, tail, head, cap, unl, n2, n2 + 1)
        solution, certificate = _lower_bounds_infeasible(net, aug, None, None, None, tol, mf.source_side[:n2])
        solution.engine = _lp_engine(tol)
        return solution, certificate
    cycle = _float_negative_cycle(net, tol)
    if cycle is not None:
        solution, certificate = _unbounded(net, cycle, None, tol)
        solution.engine = _lp_engine(tol)
        return solution, certificate
    shipped = float(lp.x[-1])
    aug.sup[s], aug.sup[t] = shipped, -shipped
    lp, low, upper = _lp(aug, aug.sup, aug.cost, time_limit)
    if lp.status != "optimal":
        raise SolverFailure(f"GLOP returned {lp.status} for the min-cost largest shipment")
    flows, p, certificate = _lp_certified(aug, lp, low, upper, tol)
    side = _residual_reach(aug.n, aug.tail, aug.head, flows - low, aug.cap - low, aug.unl, s, tol)
    certificate["shipped_bound"] = checks.check_shipped_cut(aug.tail, aug.head, aug.cap, aug.unl, aug.low, side,
                                                            s, t, shipped, tol)
    solution = _max_flow_solution(net, aug, src, dst, flows, p, shipped, certificate, _lp_engine(tol), tol)
    return solution, certificate
