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

import numpy as np

from ..deadline import Deadline
from ..errors import FieldError, InputError, SolverFailure
from . import mincost_checks as checks
from .graph import Graph, residual_reach
from .mincost_graph import (
    GraphRangeError,
    SolverBounds,
    auxiliary_max_flow,
    mincost_engine,
    negative_unlimited_cycle,
    solve_balanced,
    solver_bounds,
)
from .potentials import node_potentials
from .scaling import MAX_DECIMALS, common_scale, is_object
from .mincost_lp import _lp_route
from .mincost_net import (
    MinCostSolution, _augment, _infeasible, _lower_bounds_infeasible, _max_flow_solution, _Net, _plus_lower,
    _report, _return_arc, _transform, _unbounded,
)


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


def min_cost_flow(graph: Graph, supply: np.ndarray, *, shortage: str = "reject", engine: str = "auto",
                  deadline: Deadline | None = None) -> tuple[MinCostSolution, dict]:
    """Solve and certify a min-cost flow problem.

    Parameters
    ----------
    graph : Graph
        ``capacity`` (0 where ``unlimited``), ``unlimited``, ``cost`` and ``lower``
        (``None`` cost or lower bounds mean all zero).
    supply : ndarray
        Per node; must sum to 0 when ``shortage == "reject"``.
    shortage : {"reject", "max-flow"}
    engine : {"auto", "graph", "lp"}
    deadline : Deadline, optional
        When the LP engine must stop; the graph engine does not read it.

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

    Examples
    --------
    >>> import numpy as np
    >>> g = Graph(3, np.array([0, 1, 0]), np.array([1, 2, 2]), np.array([4, 4, 1]), cost=np.array([1, 1, 5]))
    >>> solution, certificate = min_cost_flow(g, np.array([2, 0, -2]))
    >>> solution.status, solution.cost, solution.flows.tolist()
    ('optimal', 4, [2, 2, 0])
    """
    if shortage == "reject" and imbalance(supply) != 0:
        raise InputError(FieldError("/nodes", f"supplies exceed demands by {imbalance(supply)}"))
    tail, unlimited, cost, lower = graph.tail, graph.unlimited, graph.cost, graph.lower
    net = _Net(graph.num_nodes, tail, graph.head, graph.capacity,
               unlimited if unlimited is not None and unlimited.any() else None,
               np.zeros(tail.size, dtype=np.int64) if cost is None else cost,
               lower if lower is not None and lower.any() else None, supply)
    if engine != "lp":
        answer = _graph_route(net, shortage, forced=engine == "graph")
        if answer is not None:
            return answer
    return _lp_route(net, shortage, deadline)


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
    p = node_potentials(Graph(net.n, net.tail, net.head, bounds.caps, bounds.stand_in, net.cost), flows_t)
    flows = _plus_lower(flows_t, net.low)
    certificate = checks.check_min_cost_flow(net.graph, net.sup, flows, p)
    solution = MinCostSolution(
        "optimal", mincost_engine(), cost=certificate["primal_cost"], shipped=checks.exact_sum(net.sup[net.sup > 0]),
        flows=flows, potentials=p, reduced_costs=checks.reduced_costs(net.cost, p, net.tail, net.head))
    return solution, certificate


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
    p = node_potentials(Graph(aug.n, aug.tail, aug.head, bounds.caps, bounds.stand_in, aug.cost), flows_t)
    flows = _plus_lower(flows_t, aug.low)
    aug.sup[s], aug.sup[t] = shipped, -shipped
    certificate = checks.check_min_cost_flow(aug.graph, aug.sup, flows, p)
    side = residual_reach(aug.n, aug.tail, aug.head, flows_t, bounds.caps, bounds.stand_in, s)
    certificate["shipped_bound"] = checks.check_shipped_cut(aug.tail, aug.head, aug.cap, aug.unl, aug.low, side,
                                                            s, t, shipped)
    return _max_flow_solution(net, aug, src, dst, flows, p, shipped, certificate), certificate


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


def _lower_bounds_side(aug: _Net, bounds: SolverBounds, e) -> np.ndarray:
    """A minimum cut of the auxiliary network of the circulation with a return arc."""
    tail, head, _ = _return_arc(aug)
    _, _, side = auxiliary_max_flow(aug.n, tail, head, np.append(bounds.caps, bounds.big), e)
    return side
