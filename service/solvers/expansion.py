"""Capacity expansion: the cheapest capacity to add so that a target can move.

The problem: carry ``target`` units from a source to a sink; a lane may be widened
where it has an ``expand_cost`` (per unit added), by at most ``expand_max`` (or
without limit), and widening it at all may carry a one-off ``expand_fixed`` charge.
Minimise the charges.

Linear charges only: a min-cost flow, solved exactly. Each lane that may be widened
gets a parallel "added capacity" arc (capacity ``expand_max``, cost ``expand_cost``)
beside the original (today's capacity, cost 0); the target is a supply at the source
and a demand at the sink. A flow (x, y) of that network is a plan (flow x + y on the
lane, addition y) and a plan gives such a flow of no larger cost (x = min(flow,
capacity)), so the optima coincide. The potentials of the augmented network prove
the plan optimal (reduced-cost optimality, zero duality gap), and the addition on a
lane is what its flow exceeds today's capacity by: on a lane with a positive charge an
optimal flow only uses the added arc once the original is full (complementary
slackness), so this costs the same.

One-off charges: a mixed integer model on OR-Tools CP-SAT, one 0/1 choice per lane with
such a charge (``y <= expand_max * z``). Integer variables lose nothing: with the
choices fixed, what is left is a min-cost flow with integer data, which has an
integral optimum. The plan without one-off charges is both a first solution (the
search's hint, and the answer if the time limit comes first) and a lower bound proved
by its potentials; the answer reports ``bound`` (the better of that and CP-SAT's own)
and the relative ``gap``.

Infeasible: when even full widening cannot carry the target, a maximum flow of the
fully widened network and its minimum cut, whose capacity is below the target.

Decimals with at most six places are solved exactly as scaled integers (quantities
and charges each by their own power of ten).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from ortools.sat.python import cp_model

from ..deadline import Deadline
from ..errors import FieldError, InputError, SolverFailure
from . import expansion_checks as checks
from .graph import Graph
from .maxflow_graph import CapacityOverflow, graph_engine, max_flow_graph
from .mincost_checks import check_min_cost_flow
from .mincost_graph import GraphRangeError, solve_balanced, solver_bounds
from .potentials import node_potentials
from .scaling import common_scale
from .versions import ORTOOLS_VERSION

#: CP-SAT reports its bound as a double: keep every objective where doubles are exact.
EXACT_OBJECTIVE = 2**53
#: One search worker: the same request gets the same plan, and the service already
#: runs requests side by side in its solver processes.
MIP_WORKERS = 1


@dataclass
class Lanes:
    """The network and its widening terms, in integers (scaled) or as given.

    ``capacity`` is 0 where ``unlimited``; ``expand_cost`` and ``expand_max`` are 0
    where a lane cannot be widened, ``expand_max`` also where ``expand_unlimited``.
    """

    num_nodes: int
    tail: np.ndarray
    head: np.ndarray
    capacity: np.ndarray
    unlimited: np.ndarray | None
    widenable: np.ndarray
    expand_cost: np.ndarray
    expand_max: np.ndarray
    expand_unlimited: np.ndarray
    expand_fixed: np.ndarray | None
    source: int
    sink: int
    target: int | float

    def widened_fully(self):
        """Capacities with every lane widened as far as it may be, and which are unlimited."""
        free = self.widenable & self.expand_unlimited
        unlimited = free if self.unlimited is None else self.unlimited | free
        return np.where(unlimited, 0, self.capacity + self.expand_max), (unlimited if unlimited.any() else None)

    @property
    def extendable(self) -> np.ndarray:
        """Lanes that get an added-capacity arc (an unlimited lane needs none, and a
        self-loop carries nothing from the source to the sink)."""
        lanes = self.widenable & (self.tail != self.head)
        return lanes if self.unlimited is None else lanes & ~self.unlimited


@dataclass
class ExpansionSolution:
    """``status`` ``optimal``, ``feasible`` (one-off charges, time limit first) or
    ``infeasible`` (``source_side`` and ``cut_arcs`` prove it; ``value`` is the most
    full widening can carry)."""

    status: str
    value: int | float
    engine: dict
    cost: int | float | None = None
    flows: np.ndarray | None = None
    additions: np.ndarray | None = None
    potentials: np.ndarray | None = None
    bound: int | float | None = None
    gap: float | None = None
    source_side: np.ndarray | None = None
    cut_arcs: np.ndarray | None = None
    cut_capacity: int | float | None = None
    stats: dict = field(default_factory=dict)


def cheapest_expansion(lanes: Lanes, *, deadline: Deadline | None = None,
                       gap: float = 0.0) -> tuple[ExpansionSolution, dict]:
    """Solve and certify a capacity expansion problem.

    Parameters
    ----------
    lanes : Lanes
        As given by the caller (integers or decimals).
    deadline : Deadline, optional
        When the whole solve must end; with one-off charges the search stops then with
        the best plan so far (``feasible``). None: no limit.
    gap : float
        With one-off charges: stop once the relative gap is at most this.

    Returns
    -------
    (ExpansionSolution, certificate)

    Raises
    ------
    InputError
        Data that cannot be solved exactly in 64-bit integers, naming the field.
    SelfCheckFailed
        When the answer fails its own check (a bug).

    Examples
    --------
    >>> import numpy as np
    >>> lanes = Lanes(3, np.array([0, 1, 0]), np.array([1, 2, 2]), np.array([5, 4, 2]), None,
    ...               np.array([False, True, True]), np.array([0, 3, 7]), np.array([0, 10, 10]),
    ...               np.zeros(3, bool), None, 0, 2, 8)
    >>> s, _ = cheapest_expansion(lanes)
    >>> s.status, s.cost, s.additions.tolist(), s.flows.tolist()
    ('optimal', 10, [0, 1, 1], [5, 5, 3])
    """
    scaled, fq, fc = _scaled(lanes)
    if scaled.expand_fixed is not None and (scaled.expand_fixed[scaled.extendable] > 0).any():
        solution, certificate = _with_one_off_charges(scaled, deadline, gap)
    else:
        solution, certificate = _linear(scaled)
    if fq > 1 or fc > 1:
        _unscale(solution, certificate, fq, fc)
    return solution, certificate


def _scaled(lanes: Lanes) -> tuple[Lanes, int, int]:
    quantities = common_scale(lanes.capacity, lanes.expand_max, np.array([lanes.target]))
    if quantities is None:
        raise InputError(FieldError("/arcs", "capacities, expand_max and the target have more than 6 decimal places "
                                             "or are too large once scaled; expansion is solved exactly"))
    charges = common_scale(lanes.expand_cost, lanes.expand_fixed)
    if charges is None:
        raise InputError(FieldError("/arcs", "expand_cost and expand_fixed have more than 6 decimal places or are "
                                             "too large once scaled; expansion is solved exactly"))
    dq, (capacity, expand_max, target) = quantities
    dc, (expand_cost, expand_fixed) = charges
    scaled = Lanes(lanes.num_nodes, lanes.tail, lanes.head, capacity, lanes.unlimited, lanes.widenable, expand_cost,
                   expand_max, lanes.expand_unlimited, expand_fixed, lanes.source, lanes.sink, int(target[0]))
    return scaled, 10**dq, 10**dc


#: What is scaled back, and by which factor: quantities by the quantity scale, charges
#: (per-unit charge times quantity) by both, potentials (per unit) by the charge scale.
_QUANTITIES = ("value", "target", "cut_capacity", "shortfall", "flows", "additions")
_CHARGES = ("cost", "bound", "primal_cost", "dual_bound", "gap_absolute", "own_bound", "solver_bound")


def _unscale(solution: ExpansionSolution, certificate: dict, fq: int, fc: int) -> None:
    """Back to the caller's units (one division per number)."""
    for names, factor in ((_QUANTITIES, fq), (_CHARGES, fq * fc), (("potentials",), fc)):
        for name in names:
            if getattr(solution, name, None) is not None:
                setattr(solution, name, getattr(solution, name) / factor)
            if certificate.get(name) is not None:
                certificate[name] = certificate[name] / factor
    certificate["decimal_scale"], certificate["cost_scale"] = fq, fc
    solution.engine = dict(solution.engine, decimal_scale=fq, cost_scale=fc)


def _augmented(lanes: Lanes):
    """The min-cost flow network with an added-capacity arc beside each extendable lane."""
    extra = np.flatnonzero(lanes.extendable)
    m = lanes.tail.size
    tail = np.concatenate([lanes.tail, lanes.tail[extra]]).astype(np.int32)
    head = np.concatenate([lanes.head, lanes.head[extra]]).astype(np.int32)
    capacity = np.concatenate([lanes.capacity, lanes.expand_max[extra]]).astype(np.int64)
    unlimited = np.concatenate([np.zeros(m, bool) if lanes.unlimited is None else lanes.unlimited,
                                lanes.expand_unlimited[extra]])
    cost = np.concatenate([np.zeros(m, np.int64), lanes.expand_cost[extra]]).astype(np.int64)
    supply = np.zeros(lanes.num_nodes, dtype=np.int64)
    supply[lanes.source], supply[lanes.sink] = lanes.target, -lanes.target
    return extra, tail, head, capacity, (unlimited if unlimited.any() else None), cost, supply


def _min_cost_plan(lanes: Lanes):
    """The cheapest plan for the per-unit charges alone, with its potentials and
    certificate on the augmented network; ``None`` when the target is out of reach."""
    extra, tail, head, capacity, unlimited, cost, supply = _augmented(lanes)
    try:
        bounds = solver_bounds(lanes.num_nodes, tail, head, capacity, unlimited, cost, supply)
    except GraphRangeError as exc:
        raise InputError(FieldError("/arcs", f"{exc}; expansion is solved exactly in 64-bit integers")) from None
    # Costs are >= 0, so some optimal flow carries at most the target on any arc: the
    # target caps every arc, standing in for "no limit" too (the certificate still
    # checks against the real capacities and treats those arcs as unlimited).
    caps = np.minimum(bounds.caps, max(lanes.target, 1))
    flows = solve_balanced(lanes.num_nodes, tail, head, caps, cost, supply)
    if flows is None:
        return None
    graph = Graph(lanes.num_nodes, tail, head, capacity, unlimited, cost)
    potentials = node_potentials(graph, flows)
    certificate = check_min_cost_flow(graph, supply, flows, potentials)
    m = lanes.tail.size
    lane_flows = flows[:m].copy()
    lane_flows[extra] += flows[m:]
    return lane_flows, _additions(lanes, lane_flows), potentials, certificate


def _additions(lanes: Lanes, flows: np.ndarray) -> np.ndarray:
    """What each lane's flow exceeds today's capacity by."""
    additions = np.maximum(flows - lanes.capacity, 0)
    if lanes.unlimited is not None:
        additions[lanes.unlimited] = 0
    return additions


def _replay(lanes: Lanes, flows, additions) -> dict:
    return checks.check_plan(lanes.num_nodes, lanes.tail, lanes.head, lanes.capacity, lanes.unlimited,
                             lanes.widenable, lanes.expand_cost, lanes.expand_max, lanes.expand_unlimited,
                             lanes.expand_fixed, lanes.source, lanes.sink, lanes.target, flows, additions)


def _linear(lanes: Lanes) -> tuple[ExpansionSolution, dict]:
    plan = _min_cost_plan(lanes)
    engine = graph_engine("SimpleMinCostFlow")
    if plan is None:
        return _infeasible(lanes, engine)
    flows, additions, potentials, flow_certificate = plan
    certificate = _replay(lanes, flows, additions)
    if certificate["cost"] != flow_certificate["dual_bound"]:
        checks._fail(f"the plan costs {certificate['cost']}, not the proved minimum {flow_certificate['dual_bound']}")
    certificate = {"checked": True, **certificate, "primal_cost": flow_certificate["primal_cost"],
                   "dual_bound": flow_certificate["dual_bound"], "gap": 0, "tolerance": 0}
    return ExpansionSolution("optimal", lanes.target, engine, cost=certificate["cost"], flows=flows,
                             additions=additions, potentials=potentials), certificate


def _infeasible(lanes: Lanes, engine: dict) -> tuple[ExpansionSolution, dict]:
    full, full_unlimited = lanes.widened_fully()
    try:
        best = max_flow_graph(lanes.num_nodes, lanes.tail, lanes.head, full, full_unlimited, lanes.source, lanes.sink)
    except CapacityOverflow as exc:
        raise InputError(FieldError("/arcs", f"{exc} once fully widened")) from None
    if best.status != "optimal":
        raise SolverFailure("the min-cost flow found no plan, yet full widening has a path without limits")
    proof = checks.check_shortfall_cut(lanes.tail, lanes.head, full, full_unlimited, lanes.source, lanes.sink,
                                       best.source_side, lanes.target)
    if proof["cut_capacity"] != best.value:
        checks._fail(f"full widening carries {best.value}, but its cut has capacity {proof['cut_capacity']}")
    side = best.source_side
    crossing = np.flatnonzero(side[lanes.tail] & ~side[lanes.head])
    certificate = {"checked": True, "value": best.value, "target": lanes.target, **proof}
    return ExpansionSolution("infeasible", best.value, dict(engine, max_flow="OR-Tools SimpleMaxFlow"),
                             source_side=side, cut_arcs=crossing, cut_capacity=proof["cut_capacity"]), certificate


def _with_one_off_charges(lanes: Lanes, deadline: Deadline | None,
                          gap: float) -> tuple[ExpansionSolution, dict]:
    engine = {"kind": "mip", "solver": "OR-Tools CP-SAT", "version": ORTOOLS_VERSION}
    plan = _min_cost_plan(lanes)
    if plan is None:
        return _infeasible(lanes, engine)
    first_flows, first_additions, _, first_certificate = plan
    own_bound = first_certificate["dual_bound"]  # the one-off charges only add to any plan's cost
    first = _replay(lanes, first_flows, first_additions)
    found, solver_bound, search = _search(lanes, first_flows, deadline, gap)
    flows, certificate = first_flows, first
    if found is not None:
        found_certificate = _replay(lanes, found, _additions(lanes, found))
        if found_certificate["cost"] <= first["cost"]:
            flows, certificate = found, found_certificate
    cost = certificate["cost"]
    bound = own_bound if solver_bound is None else max(own_bound, solver_bound)
    if bound > cost:
        checks._fail(f"the bound {bound} exceeds the cost {cost} of a checked plan")
    relative = 0.0 if cost == bound else (cost - bound) / cost
    certificate = {"checked": True, **certificate, "bound": bound, "own_bound": own_bound,
                   "solver_bound": solver_bound, "gap": relative, "gap_absolute": cost - bound, "tolerance": 0}
    status = "optimal" if relative <= gap else "feasible"
    return ExpansionSolution(status, lanes.target, engine, cost=cost, flows=flows, additions=_additions(lanes, flows),
                             bound=bound, gap=relative, stats={"search": search}), certificate


def _search(lanes: Lanes, hint_flows: np.ndarray, deadline: Deadline | None, gap: float):
    """CP-SAT on the fixed-charge model, hinted with the plan for per-unit charges alone,
    given what is left of ``deadline`` once the model is built (at least 0.01 s).

    Returns
    -------
    (flows or None, bound or None, status name)
    """
    m = lanes.tail.size
    extra = np.flatnonzero(lanes.extendable)
    unlimited = np.zeros(m, bool) if lanes.unlimited is None else lanes.unlimited
    target = int(lanes.target)
    x_upper = np.where(unlimited, target, np.minimum(lanes.capacity, target)).tolist()
    y_upper = np.where(lanes.expand_unlimited[extra], target, np.minimum(lanes.expand_max[extra], target))
    fixed = lanes.expand_fixed[extra]
    charged = np.flatnonzero(fixed > 0)
    largest = float(lanes.expand_cost[extra].astype(np.float64) @ y_upper.astype(np.float64)) + float(fixed.sum())
    if largest >= EXACT_OBJECTIVE:
        raise InputError(FieldError("/arcs", "the charges could sum to more than 2**53; with one-off charges the "
                                             "search needs its objective exact in double precision"))
    model = cp_model.CpModel()
    x = [model.new_int_var(0, ub, "") for ub in x_upper]
    y = [model.new_int_var(0, ub, "") for ub in y_upper.tolist()]
    z = [model.new_bool_var("") for _ in charged]
    for j, k in enumerate(charged.tolist()):
        model.add(y[k] <= int(y_upper[k]) * z[j])
    variables = x + y
    tails = np.concatenate([lanes.tail, lanes.tail[extra]])
    heads = np.concatenate([lanes.head, lanes.head[extra]])
    supply = np.zeros(lanes.num_nodes, dtype=np.int64)
    supply[lanes.source], supply[lanes.sink] = target, -target
    for node, terms, weights in _incidence(lanes.num_nodes, tails, heads):
        model.add(cp_model.LinearExpr.weighted_sum([variables[i] for i in terms], weights) == int(supply[node]))
    model.minimize(cp_model.LinearExpr.weighted_sum(
        y + z, lanes.expand_cost[extra].tolist() + fixed[charged].tolist()))
    hint_x = np.where(unlimited, hint_flows, np.minimum(hint_flows, lanes.capacity))
    hint_y = (hint_flows - hint_x)[extra]
    for var, value in zip(variables, np.concatenate([hint_x, hint_y]).tolist()):
        model.add_hint(var, value)
    for var, k in zip(z, charged.tolist()):
        model.add_hint(var, bool(hint_y[k] > 0))
    solver = cp_model.CpSolver()
    solver.parameters.num_workers = MIP_WORKERS
    solver.parameters.relative_gap_limit = gap
    if deadline is not None:
        solver.parameters.max_time_in_seconds = max(0.01, deadline.remaining())
    status = solver.solve(model)
    if status in (cp_model.INFEASIBLE, cp_model.MODEL_INVALID):
        raise SolverFailure(f"CP-SAT returned {solver.status_name(status)} for a feasible expansion")
    found = None
    if status in (cp_model.OPTIMAL, cp_model.FEASIBLE):
        values = np.asarray(solver.response_proto.solution, dtype=np.int64)
        found = values[:m].copy()
        found[extra] += values[m:m + extra.size]
    bound = solver.best_objective_bound
    # The objective is an integer, so any bound rounds up; the slack absorbs a double
    # that lands a hair above an integral bound.
    solver_bound = math.ceil(bound - 1e-6 * max(1.0, abs(bound))) if math.isfinite(bound) else None
    return found, solver_bound, solver.status_name(status)


def _incidence(num_nodes: int, tails: np.ndarray, heads: np.ndarray):
    """Per node with arcs: the variable indices leaving (+1) and entering (-1) it."""
    ends = np.concatenate([tails, heads])
    index = np.concatenate([np.arange(tails.size), np.arange(heads.size)])
    sign = np.concatenate([np.ones(tails.size, np.int64), -np.ones(heads.size, np.int64)])
    order = np.argsort(ends, kind="stable")
    ends, index, sign = ends[order], index[order].tolist(), sign[order].tolist()
    bounds = np.searchsorted(ends, np.arange(num_nodes + 1)).tolist()
    for node in range(num_nodes):
        lo, hi = bounds[node], bounds[node + 1]
        if lo < hi:
            yield node, index[lo:hi], sign[lo:hi]
