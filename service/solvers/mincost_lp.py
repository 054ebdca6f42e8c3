"""The LP route of min-cost flow (GLOP) for fractions that are not exact decimals:
answers certified relative to each figure's own magnitude, their proofs (infeasible
sets from an exact max-flow, negative cycles) exactly."""

from __future__ import annotations

import numpy as np

from ..errors import SolverFailure, SolveTimeout
from . import mincost_checks as checks
from .certificates import throughput
from .front import exact_max_flow
from .graph import Graph, residual_reach
from .glop import beyond_range, incidence_matrix, solve_lp
from .maxflow_lp import LP_TOLERANCE
from .mincost_graph import GraphRangeError, mincost_engine, negative_unlimited_cycle
from .scaling import rescale
from .mincost_net import (
    ROUNDING, MinCostSolution, _Net, _augment, _infeasible, _lower_bounds_infeasible, _max_flow_solution, _return_arc,
    _unbounded,
)


def _float(a):
    return None if a is None else a.astype(np.float64)


def _lp_route(net: _Net, shortage: str, deadline):
    net = _Net(net.n, net.tail, net.head, _float(net.cap), net.unl, _float(net.cost), _float(net.low),
               _float(net.sup))
    try:
        if shortage == "reject":
            return _lp_reject(net, deadline)
        return _lp_max_flow(net, deadline)
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


def _lp(net: _Net, supply, c, deadline):
    upper = net.cap if net.unl is None else np.where(net.unl, np.inf, net.cap)
    low = np.zeros(net.tail.size) if net.low is None else net.low
    lp = solve_lp(c, incidence_matrix(net.n, net.tail, net.head), supply, supply, low, upper,
                  deadline=deadline)
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
    certificate = checks.check_min_cost_flow(net.graph, net.sup, flows, p, LP_TOLERANCE)
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
    solution, _, ints, denominator, _ = exact_max_flow(Graph(n + 2, all_tail, all_head, all_cap, all_unl), s, t)
    if solution.value < checks.exact_sum(ints[m:m + src.size]):
        return solution.source_side[:n].copy(), None
    flows = rescale(solution.flows[:m], 1, denominator)
    return None, flows if low is None else flows + low


def _lp_reject(net: _Net, deadline):
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
    lp, low, upper = _lp(net, net.sup, net.cost, deadline)
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


def _lp_max_flow(net: _Net, deadline):
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
    lp, _, _ = _lp(ret, aug.sup, c, deadline)
    if lp.status != "optimal":
        raise SolverFailure(f"GLOP returned {lp.status} for the largest shipment")
    cycle = _float_negative_cycle(net)
    if cycle is not None:
        solution, certificate = _unbounded(net, cycle, None)
        solution.engine = _lp_engine()
        return solution, certificate
    shipped = float(lp.x[-1])
    aug.sup[s], aug.sup[t] = shipped, -shipped
    lp, low, upper = _lp(aug, aug.sup, aug.cost, deadline)
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
