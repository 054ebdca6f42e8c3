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

Engines: ``graph`` solves integers exactly, and decimals with at most nine places
(as written: :mod:`service.solvers.scaling`) by exact scaling, quantities and costs
each by their own power of ten; data that are not exact in int64 there are divided by
their common factors, and otherwise refused with a 422 naming the field and the
limit, never handed to a floating-point engine. ``auto`` does the same and takes the
LP engine (GLOP) only for fractions that are not such decimals; ``lp`` takes it
always. LP answers are certified relative to each figure's own magnitude, and their
proofs (infeasible sets from an exact max-flow, negative cycles) exactly.

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

from ..errors import FieldError, InputError, SolverFailure, SolveTimeout
from . import mincost_checks as checks
from .certificates import throughput
from .front import exact_max_flow
from .lp import beyond_range, incidence_matrix, solve_lp
from .maxflow_lp import LP_TOLERANCE
from .mincost_graph import (
    GraphRangeError,
    SolverBounds,
    auxiliary_max_flow,
    mincost_engine,
    negative_unlimited_cycle,
    solve_balanced,
    solver_bounds,
)
from .potentials import node_potentials, residual_reach
from .scaling import MAX_DECIMALS, common_scale, is_object, rescale

#: Relative slack of a flow rounded once from an exact answer (conservation over many arcs).
ROUNDING = 1e-9


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

    Integers are summed exactly; decimals with at most nine places are summed as
    scaled integers (so 0.1 + 0.2 - 0.3 balances); other fractions to 1e-9 relative.
    """
    if not supply.size:
        return 0
    scaled = common_scale(supply)
    if scaled is not None:
        d, (ints,) = scaled
        total = checks.exact_sum(ints)
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
        Integer or decimal data beyond the exact range (naming the field and the
        limit); ``engine="graph"`` on other fractions; unbalanced supplies with
        ``shortage="reject"``; data whose range the LP engine cannot certify.
    SelfCheckFailed
        When an exact answer fails its certificate (a bug).
    """
    if shortage == "reject" and imbalance(supply) != 0:
        raise InputError(FieldError("/nodes", f"supplies exceed demands by {imbalance(supply)}"))
    net = _Net(num_nodes, tail, head, capacity,
               unlimited if unlimited is not None and unlimited.any() else None,
               np.zeros(tail.size, dtype=np.int64) if cost is None else cost,
               lower if lower is not None and lower.any() else None, supply)
    if engine != "lp":
        answer = _graph_route(net, shortage, forced=engine == "graph")
        if answer is not None:
            return answer
    return _lp_route(net, shortage, time_limit)


# ----------------------------------------------------------------------------- graph


def _graph_refused(reason: str) -> InputError:
    return InputError(FieldError("/arcs", f"{reason}; the graph engine cannot solve it exactly "
                                          "(use options.engine 'lp' or 'auto')"))


def _graph_route(net: _Net, shortage: str, *, forced: bool):
    """Exact integers (scaled from decimals), or None for other fractions (the LP engine's)."""
    quantities = common_scale(net.cap, net.low, net.sup)
    costs = common_scale(net.cost)
    if quantities is None or costs is None:
        if forced:
            raise _graph_refused(f"the data have more than {MAX_DECIMALS} decimal places")
        return None
    dq, (cap, low, sup) = quantities
    dc, (cost,) = costs
    exact = _Net(net.n, net.tail, net.head, cap, net.unl, cost, low, sup)
    gq = gc = 1
    try:
        solution, certificate = _solve_ints(exact, shortage)
    except GraphRangeError as exc:
        reduced, gq, gc = _divide_common_factors(exact)
        if reduced is None:
            raise _out_of_range(exc, net.n, dq, dc) from None
        try:
            solution, certificate = _solve_ints(reduced, shortage)
        except GraphRangeError as again:
            raise _out_of_range(again, net.n, dq, dc, gq, gc) from None
    _report(solution, certificate, (gq, 10**dq), (gc, 10**dc))
    return solution, certificate


def _solve_ints(net: _Net, shortage: str):
    return _solve_reject(net) if shortage == "reject" else _solve_max_flow(net)


def _gcd(*arrays) -> int:
    g = 0
    for a in arrays:
        if a is None or not a.size:
            continue
        g = math.gcd(g, *map(int, a.tolist())) if is_object(a) else math.gcd(g, int(np.gcd.reduce(np.abs(a))))
    return max(g, 1)


def _divided(a, g: int):
    if a is None or g == 1:
        return a
    out = a // g
    if is_object(out) and (not out.size or max(abs(int(x)) for x in out.tolist()) < 2**62):
        out = out.astype(np.int64)
    return out


def _divide_common_factors(net: _Net):
    """The problem with quantities and costs divided by their greatest common factors
    (an equivalent problem: flows scale by the first, potentials by the second), or
    None when both are 1."""
    limited = net.cap if net.unl is None else net.cap[~net.unl]
    gq = _gcd(limited, net.low, net.sup)
    gc = _gcd(net.cost)
    if gq == 1 and gc == 1:
        return None, 1, 1
    reduced = _Net(net.n, net.tail, net.head, _divided(net.cap, gq), net.unl, _divided(net.cost, gc),
                   _divided(net.low, gq), _divided(net.sup, gq))
    return reduced, gq, gc


def _out_of_range(exc: GraphRangeError, n: int, dq: int, dc: int, gq: int = 1, gc: int = 1) -> InputError:
    """A 422 naming the field and the limit in the caller's units; ``culprit`` keeps
    the field and arc for callers that know the request's pointers (assignment)."""
    error = _range_error(exc, n, dq, dc, gq, gc)
    error.culprit = (exc.field, exc.index)
    return error


def _range_error(exc: GraphRangeError, n: int, dq: int, dc: int, gq: int, gc: int) -> InputError:
    exact = "integers and decimals of at most 9 places are solved exactly or refused, never approximated"
    if exc.field == "cost":
        limit = exc.limit * gc / 10**dc
        which = "the costs" if exc.index is None else f"arc {exc.index}'s cost"
        units = f", in units of 10**-{dc}" if dc else ""
        return InputError(FieldError("/arcs", f"{which} is beyond the exact range for {n} nodes: costs must be at "
                                              f"most {limit:g} in magnitude here ({exc}{units}); {exact}"))
    if exc.field == "supply":
        limit = exc.limit * gq / 10**dq
        return InputError(FieldError("/nodes", f"the supplies are beyond the exact range: {exc} (the limit here "
                                               f"is {limit:g} in total magnitude); {exact}"))
    return InputError(FieldError("/arcs", f"{exc}; {exact}"))


def _transform(net: _Net):
    """Remove lower bounds: capacities ``u - l`` and supplies ``b - out(l) + in(l)``."""
    if net.low is None:
        return net.cap, net.sup.copy()
    cap = net.cap - net.low
    if net.unl is not None:
        cap = np.where(net.unl, 0, cap)
    sup = net.sup.copy() if is_object(net.sup) or is_object(net.low) else net.sup.astype(np.int64, copy=True)
    np.subtract.at(sup, net.tail, net.low)
    np.add.at(sup, net.head, net.low)
    return cap, sup


def _plus_lower(flows, low):
    return flows if low is None else flows + low


def _negative_stand_ins(cost: np.ndarray, bounds: SolverBounds) -> bool:
    """Whether a negative-cost arc has a stand-in capacity (no limit, or a huge one)."""
    return bounds.stand_in is not None and bool((bounds.stand_in & (cost < 0)).any()) or \
        bounds.huge is not None and bool((bounds.huge & (cost < 0)).any())


def _refuse_huge_cycle(n, tail, head, cost, unl, bounds: SolverBounds) -> None:
    """Negative cycles through huge (capped) and unlimited arcs only are out of the exact
    range: their optimum sends flow around them up to those capacities."""
    if bounds.huge is None:
        return
    mask = bounds.huge if unl is None else bounds.huge | unl
    if not (mask & (cost < 0)).any():
        return
    cycle = negative_unlimited_cycle(n, tail, head, cost, mask)
    if cycle is not None:
        arcs = ", ".join(map(str, cycle[:10].tolist()))
        raise GraphRangeError(f"a negative-cost cycle (arcs {arcs}) runs through arcs whose capacities are "
                              "beyond the exact range, so its optimum is too: lower those capacities",
                              "capacity", int(cycle[0]))


def _solve_reject(net: _Net):
    cap_t, sup_t = _transform(net)
    bounds = solver_bounds(net.n, net.tail, net.head, cap_t, net.unl, net.cost, sup_t)
    if _negative_stand_ins(net.cost, bounds):
        # A negative unlimited cycle makes a feasible problem unbounded: test feasibility first.
        value, aux_flows, side = auxiliary_max_flow(net.n, net.tail, net.head, bounds.caps, sup_t)
        if value < checks.exact_sum(sup_t[sup_t > 0]):
            return _infeasible(net, side)
        cycle = negative_unlimited_cycle(net.n, net.tail, net.head, net.cost, net.unl)
        if cycle is not None:
            return _unbounded(net, cycle, _plus_lower(aux_flows, net.low))
        _refuse_huge_cycle(net.n, net.tail, net.head, net.cost, net.unl, bounds)
    flows_t = solve_balanced(net.n, net.tail, net.head, bounds.caps, net.cost, sup_t)
    if flows_t is None:
        _, _, side = auxiliary_max_flow(net.n, net.tail, net.head, bounds.caps, sup_t)
        return _infeasible(net, side)
    p = node_potentials(net.n, net.tail, net.head, net.cost, flows_t, bounds.caps, bounds.stand_in)
    flows = _plus_lower(flows_t, net.low)
    certificate = checks.check_min_cost_flow(net.n, net.tail, net.head, net.cap, net.unl, net.low, net.cost,
                                             net.sup, flows, p)
    solution = MinCostSolution(
        "optimal", mincost_engine(), cost=certificate["primal_cost"], shipped=checks.exact_sum(net.sup[net.sup > 0]),
        flows=flows, potentials=p, reduced_costs=checks.reduced_costs(net.cost, p, net.tail, net.head))
    return solution, certificate


def _infeasible(net: _Net, side: np.ndarray, *, optional: bool = False, demand_room=None):
    proof = checks.check_infeasible_set(net.tail, net.head, net.cap, net.unl, net.low, net.sup, side,
                                        optional=optional, demand_room=demand_room)
    proof.update(members=side, side="supply")
    certificate = {"checked": True, "net_supply": proof["net_supply"],
                   "outgoing_capacity": proof["outgoing_capacity"], "tolerance": 0.0}
    return MinCostSolution("infeasible", mincost_engine(), infeasibility=proof), certificate


def _unbounded(net: _Net, cycle: np.ndarray, feasible_flow: np.ndarray | None, relative: float = 0.0):
    total = checks.check_negative_cycle(net.tail, net.head, net.unl, net.cost, cycle)
    certificate = {"checked": True, "cycle_cost": total, "cycle_arcs": int(cycle.size), "tolerance": 0.0}
    if feasible_flow is not None:
        certificate.update(checks.check_feasible_flow(net.n, net.tail, net.head, net.cap, net.unl, net.low,
                                                      net.sup, feasible_flow, relative))
        if relative:  # a flow rounded once from an exact one: checked to that rounding
            certificate["relative_tolerance"] = relative
    solution = MinCostSolution("unbounded", mincost_engine(), negative_cycle=cycle)
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
    total = checks.exact_sum(net.sup[src])
    cap_t, e = _transform(aug)
    bound = e.copy()
    bound[s] += total
    bound[t] -= total
    bounds = solver_bounds(aug.n, aug.tail, aug.head, cap_t, aug.unl, aug.cost, bound)
    shipped = _most_shippable(aug, bounds, e, total)
    if shipped is None:
        return _lower_bounds_infeasible(net, _lower_bounds_side(aug, bounds, e))
    cycle = negative_unlimited_cycle(net.n, net.tail, net.head, net.cost, net.unl)
    if cycle is not None:
        return _unbounded(net, cycle, None)
    _refuse_huge_cycle(aug.n, aug.tail, aug.head, aug.cost, aug.unl, bounds)
    e[s] += shipped
    e[t] -= shipped
    flows_t = solve_balanced(aug.n, aug.tail, aug.head, bounds.caps, aug.cost, e)
    if flows_t is None:
        raise SolverFailure("the min-cost flow of the largest shipment was reported infeasible")
    p = node_potentials(aug.n, aug.tail, aug.head, aug.cost, flows_t, bounds.caps, bounds.stand_in)
    flows = _plus_lower(flows_t, aug.low)
    aug.sup[s], aug.sup[t] = shipped, -shipped
    certificate = checks.check_min_cost_flow(aug.n, aug.tail, aug.head, aug.cap, aug.unl, aug.low, aug.cost,
                                             aug.sup, flows, p)
    side = residual_reach(aug.n, aug.tail, aug.head, flows_t, bounds.caps, bounds.stand_in, s)
    certificate["shipped_bound"] = checks.check_shipped_cut(aug.tail, aug.head, aug.cap, aug.unl, aug.low, side,
                                                            s, t, shipped)
    return _max_flow_solution(net, aug, src, dst, flows, p, shipped, certificate), certificate


def _max_flow_solution(net, aug, src, dst, flows, p, shipped, certificate, engine=None):
    m = net.tail.size
    unmet = net.sup.copy()
    unmet[src] -= flows[m:m + src.size]
    unmet[dst] += flows[m + src.size:]
    pn = p[:net.n]
    return MinCostSolution(
        "optimal", engine or mincost_engine(), cost=certificate["primal_cost"], shipped=shipped, flows=flows[:m],
        potentials=pn, reduced_costs=checks.reduced_costs(net.cost, pn, net.tail, net.head), unmet=unmet,
        tolerance=certificate["tolerance"])


def _most_shippable(aug: _Net, bounds: SolverBounds, e, total):
    """The largest amount S can ship to T while every lower bound holds; None if they cannot."""
    s, t = aug.n - 2, aug.n - 1
    if aug.low is None:
        # No lower bounds: a plain maximum flow, here from the auxiliary network.
        probe = np.zeros(aug.n, dtype=np.int64)
        probe[s], probe[t] = total, -total
        value, _, _ = auxiliary_max_flow(aug.n, aug.tail, aug.head, bounds.caps, probe)
        return value
    # With lower bounds: a circulation with a return arc T -> S at cost -1 maximises the shipment.
    tail = np.concatenate([aug.tail, [t]]).astype(np.int32)
    head = np.concatenate([aug.head, [s]]).astype(np.int32)
    cost = np.zeros(tail.size, dtype=np.int64)
    cost[-1] = -1
    flows = solve_balanced(aug.n, tail, head, np.append(bounds.caps, total), cost, e)
    return None if flows is None else int(flows[-1])


def _return_arc(aug: _Net):
    """The augmented network's arcs plus a return arc T -> S without a limit."""
    s, t = aug.n - 2, aug.n - 1
    tail = np.concatenate([aug.tail, [t]]).astype(np.int32)
    head = np.concatenate([aug.head, [s]]).astype(np.int32)
    unl = np.concatenate([np.zeros(aug.tail.size, bool) if aug.unl is None else aug.unl, [True]])
    return tail, head, unl


def _lower_bounds_side(aug: _Net, bounds: SolverBounds, e) -> np.ndarray:
    """A minimum cut of the auxiliary network of the circulation with a return arc."""
    tail, head, _ = _return_arc(aug)
    _, _, side = auxiliary_max_flow(aug.n, tail, head, np.append(bounds.caps, bounds.big), e)
    return side


def _lower_bounds_infeasible(net, side):
    """Proof that the lower bounds cannot hold even when shipping is optional.

    On the network with a return arc T -> S, a minimum cut X of the auxiliary network
    proves it. When X holds neither S nor T (or S only), its real nodes receive more
    through lower bounds than can leave them or be absorbed by their demand. When X
    holds both, the real nodes outside X must send out more through lower bounds than
    can enter them or be supplied inside.
    """
    s, t = net.n, net.n + 1
    demand_room = np.maximum(-net.sup, 0)
    supply_room = np.maximum(net.sup, 0)
    if side[s] and side[t]:
        members = ~side[:net.n]
        flipped = _Net(net.n, net.head, net.tail, net.cap, net.unl, net.cost, net.low, -net.sup)
        solution, certificate = _infeasible(flipped, members, optional=True, demand_room=supply_room)
        solution.infeasibility["side"] = "demand"
        return solution, certificate
    return _infeasible(net, side[:net.n].copy(), optional=True, demand_room=demand_room)


def _report(solution: MinCostSolution, certificate: dict, quantities: tuple[int, int], costs: tuple[int, int]):
    """The exact integer answer in the caller's units: times the common factors, divided
    by the decimal scales, rounded once per number (integers kept where JSON holds them)."""
    totals = (quantities[0] * costs[0], quantities[1] * costs[1])
    for name in ("flows", "unmet", "shipped"):
        if getattr(solution, name) is not None:
            setattr(solution, name, rescale(getattr(solution, name), *quantities))
    for name in ("potentials", "reduced_costs"):
        if getattr(solution, name) is not None:
            setattr(solution, name, rescale(getattr(solution, name), *costs))
    if solution.cost is not None:
        solution.cost = rescale(solution.cost, *totals)
    if solution.infeasibility:
        for name in ("net_supply", "outgoing_capacity"):
            solution.infeasibility[name] = rescale(solution.infeasibility[name], *quantities)
    if "cycle_cost" in solution.extra:
        solution.extra["cycle_cost"] = rescale(solution.extra["cycle_cost"], *costs)
    for names, factor in ((("primal_cost", "dual_bound", "gap"), totals),
                          (("net_supply", "outgoing_capacity", "shipped_bound"), quantities),
                          (("cycle_cost",), costs)):
        for name in names:
            if name in certificate:
                certificate[name] = rescale(certificate[name], *factor)
    scaled = {}
    if quantities[1] != 1 or costs[1] != 1:
        scaled.update(decimal_scale=quantities[1], cost_scale=costs[1])
    if quantities[0] != 1:
        scaled["quantity_factor"] = rescale(quantities[0])  # a double past int64 (it only informs)
    if costs[0] != 1:
        scaled["cost_factor"] = rescale(costs[0])
    certificate.update(scaled)
    solution.engine = dict(solution.engine, **scaled)


# -------------------------------------------------------------------------------- lp


def _float(a):
    return None if a is None else a.astype(np.float64)


def _lp_route(net: _Net, shortage: str, time_limit):
    net = _Net(net.n, net.tail, net.head, _float(net.cap), net.unl, _float(net.cost), _float(net.low),
               _float(net.sup))
    try:
        if shortage == "reject":
            return _lp_reject(net, time_limit)
        return _lp_max_flow(net, time_limit)
    except SolverFailure as exc:  # a failed certificate too: GLOP could not reach the tolerance here
        capacities = net.cap if net.unl is None else net.cap[~net.unl]
        raise beyond_range(exc, "/arcs", capacities=capacities, costs=net.cost, supplies=net.sup) from None


def _lp_engine():
    return {"kind": "lp", "solver": "OR-Tools GLOP", "version": mincost_engine()["version"],
            "tolerance": LP_TOLERANCE}


def _float_negative_cycle(net: _Net):
    """A negative unlimited cycle for fractional costs, found on the costs rounded to a
    grid of 2**-bits of the largest (as many bits as OR-Tools takes for this many
    nodes) and kept only when its exact cost is negative."""
    if net.unl is None or not (net.unl & (net.cost < 0)).any():
        return None
    top = float(np.abs(net.cost[net.unl]).max())
    bits = min(40, 58 - (net.n + 4).bit_length())
    ints = np.rint(np.ldexp(np.where(net.unl, net.cost, 0.0), bits - int(np.frexp(top)[1]))).astype(np.int64)
    try:
        cycle = negative_unlimited_cycle(net.n, net.tail, net.head, ints, net.unl)
    except GraphRangeError as exc:
        raise SolverFailure(f"no negative-cycle search fits these costs ({exc})") from None
    if cycle is None or not checks.exact_sum(net.cost[cycle]) < 0:
        return None
    return cycle


def _lp(net: _Net, supply, c, time_limit):
    upper = net.cap if net.unl is None else np.where(net.unl, np.inf, net.cap)
    low = np.zeros(net.tail.size) if net.low is None else net.low
    lp = solve_lp(c, incidence_matrix(net.n, net.tail, net.head), supply, supply, low, upper,
                  time_limit=time_limit)
    if lp.status == "time_limit":
        raise SolveTimeout("the LP engine hit the time limit")
    return lp, low, upper


def _lp_certified(net: _Net, lp, low, upper):
    """Flows and potentials of an optimal LP answer, with their certificate.

    GLOP's duals of the conservation rows, negated, are the potentials of the
    reduced-cost convention (cost + p[from] - p[to]).
    """
    flows = np.clip(lp.x, low, upper)
    p = -lp.row_duals
    certificate = checks.check_min_cost_flow(net.n, net.tail, net.head, net.cap, net.unl, net.low, net.cost,
                                             net.sup, flows, p, LP_TOLERANCE)
    return flows, p, certificate


def _exact_auxiliary(n, tail, head, cap, unl, supply, low=None):
    """Exact maximum flow of the auxiliary network (super source to the supplies,
    demands to a super sink) on the data's binary values: ``(source_side or None when
    every supply moves, flows on the given arcs rounded once plus ``low``)``."""
    s, t = n, n + 1
    src, dst = np.flatnonzero(supply > 0), np.flatnonzero(supply < 0)
    m = tail.size
    all_tail = np.concatenate([tail, np.full(src.size, s), dst]).astype(np.int32)
    all_head = np.concatenate([head, src, np.full(dst.size, t)]).astype(np.int32)
    all_cap = np.concatenate([cap, supply[src], -supply[dst]])
    all_unl = None if unl is None else np.concatenate([unl, np.zeros(src.size + dst.size, bool)])
    solution, _, ints, denominator, _ = exact_max_flow(n + 2, all_tail, all_head, all_cap, all_unl, s, t)
    if solution.value < checks.exact_sum(ints[m:m + src.size]):
        return solution.source_side[:n].copy(), None
    flows = rescale(solution.flows[:m], 1, denominator)
    return None, flows if low is None else flows + low


def _lp_reject(net: _Net, time_limit):
    cap_t, sup_t = _transform_float(net)
    cycle = _float_negative_cycle(net)
    if cycle is not None:
        # GLOP's presolve may call an unbounded model infeasible: decide feasibility by an exact max-flow.
        side, feasible = _exact_auxiliary(net.n, net.tail, net.head, cap_t, net.unl, sup_t, net.low)
        if side is not None:
            return _lp_infeasible(net, side)
        solution, certificate = _unbounded(net, cycle, feasible, ROUNDING)
        solution.engine = _lp_engine()
        return solution, certificate
    lp, low, upper = _lp(net, net.sup, net.cost, time_limit)
    if lp.status == "infeasible":
        side, _ = _exact_auxiliary(net.n, net.tail, net.head, cap_t, net.unl, sup_t)
        if side is None:
            raise SolverFailure("GLOP called the model infeasible, yet an exact max-flow moves every supply")
        return _lp_infeasible(net, side)
    if lp.status != "optimal":
        raise SolverFailure(f"GLOP returned {lp.status} for a model without a negative unlimited cycle")
    flows, p, certificate = _lp_certified(net, lp, low, upper)
    solution = MinCostSolution("optimal", _lp_engine(), cost=certificate["primal_cost"],
                               shipped=checks.exact_sum(net.sup[net.sup > 0]), flows=flows, potentials=p,
                               reduced_costs=checks.reduced_costs(net.cost, p, net.tail, net.head),
                               tolerance=certificate["tolerance"])
    return solution, certificate


def _lp_infeasible(net: _Net, side):
    """Proof set from the minimum cut of the auxiliary network (exact)."""
    solution, certificate = _infeasible(net, side)
    solution.engine = _lp_engine()
    return solution, certificate


def _transform_float(net: _Net):
    if net.low is None:
        return net.cap, net.sup
    cap = net.cap - net.low
    if net.unl is not None:
        cap = np.where(net.unl, 0, cap)
    sup = net.sup - np.bincount(net.tail, net.low, net.n) + np.bincount(net.head, net.low, net.n)
    return cap, sup


def _lp_max_flow(net: _Net, time_limit):
    aug, src, dst = _augment(net)
    s, t = net.n, net.n + 1
    if aug.low is not None:
        # Whether the lower bounds can hold at all, decided exactly (GLOP's word on
        # infeasibility depends on its tolerances).
        cap_t, e = _transform_float(aug)
        tail, head, unl = _return_arc(aug)
        side, _ = _exact_auxiliary(aug.n, tail, head, np.append(cap_t, 0.0), unl, e)
        if side is not None:
            solution, certificate = _lower_bounds_infeasible(net, side)
            solution.engine = _lp_engine()
            return solution, certificate
    total = float(net.sup[src].sum())
    # Phase 1: the largest shipment, as a circulation with a return arc T -> S worth -1 per unit.
    ret = _Net(aug.n, np.append(aug.tail, t), np.append(aug.head, s), np.append(aug.cap, total),
               None if aug.unl is None else np.append(aug.unl, False), None,
               None if aug.low is None else np.append(aug.low, 0.0), aug.sup)
    c = np.zeros(ret.tail.size)
    c[-1] = -1.0
    lp, _, _ = _lp(ret, aug.sup, c, time_limit)
    if lp.status != "optimal":
        raise SolverFailure(f"GLOP returned {lp.status} for the largest shipment")
    cycle = _float_negative_cycle(net)
    if cycle is not None:
        solution, certificate = _unbounded(net, cycle, None)
        solution.engine = _lp_engine()
        return solution, certificate
    shipped = float(lp.x[-1])
    aug.sup[s], aug.sup[t] = shipped, -shipped
    lp, low, upper = _lp(aug, aug.sup, aug.cost, time_limit)
    if lp.status != "optimal":
        raise SolverFailure(f"GLOP returned {lp.status} for the min-cost largest shipment")
    flows, p, certificate = _lp_certified(aug, lp, low, upper)
    room = upper - low
    slack = LP_TOLERANCE * np.where(np.isfinite(room), room, abs(shipped))
    side = residual_reach(aug.n, aug.tail, aug.head, flows - low, room, aug.unl, s, slack)
    through = throughput(aug.n, aug.tail, aug.head, flows)
    certificate["shipped_bound"] = checks.check_shipped_cut(aug.tail, aug.head, aug.cap, aug.unl, aug.low, side,
                                                            s, t, shipped, LP_TOLERANCE, through)
    solution = _max_flow_solution(net, aug, src, dst, flows, p, shipped, certificate, _lp_engine())
    return solution, certificate
