"""What the min-cost flow routes share: the problem as solved, the answer, and the
answers' common parts (lower bounds taken out and put back, infeasible sets, unbounded
cycles, the max-flow shortage mode's augmented network, the report in the caller's
units). The front is :func:`service.solvers.mincost.min_cost_flow`."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from . import mincost_checks as checks
from .graph import Graph, node_balance
from .mincost_graph import mincost_engine
from .scaling import is_object, rescale

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

    @property
    def graph(self) -> Graph:
        """The arcs and their bounds and costs as the solvers' graph (no copies)."""
        return Graph(self.n, self.tail, self.head, self.cap, self.unl, self.cost, self.low)


def _transform(net: _Net):
    """Remove lower bounds: capacities ``u - l`` and supplies ``b - out(l) + in(l)``."""
    if net.low is None:
        return net.cap, net.sup.copy()
    cap = net.cap - net.low
    if net.unl is not None:
        cap = np.where(net.unl, 0, cap)
    sup = net.sup.copy() if is_object(net.sup) or is_object(net.low) else net.sup.astype(np.int64, copy=True)
    low = net.low.astype(sup.dtype, casting="same_kind", copy=False)  # exact: Python ints stay ints
    sup += node_balance(net.n, net.tail, net.head, low)
    return cap, sup


def _plus_lower(flows, low):
    return flows if low is None else flows + low


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


def _return_arc(aug: _Net):
    """The augmented network's arcs plus a return arc T -> S without a limit."""
    s, t = aug.n - 2, aug.n - 1
    tail = np.concatenate([aug.tail, [t]]).astype(np.int32)
    head = np.concatenate([aug.head, [s]]).astype(np.int32)
    unl = np.concatenate([np.zeros(aug.tail.size, bool) if aug.unl is None else aug.unl, [True]])
    return tail, head, unl


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
