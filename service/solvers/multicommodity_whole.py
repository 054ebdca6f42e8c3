"""Whole-unit multi-commodity flow: integral plans and single-path plans, with a proven gap.

The front of ``options.integral`` and ``options.single_path``. In order, within one
time limit:

1. The LP relaxation (:func:`~.multicommodity.multicommodity_flow`, GLOP). Infeasible
   there means infeasible in whole units too (proof ``lp-relaxation``); its optimum is
   the first bound (rounded to the next whole unit of the objective: plans cost a
   whole number of the client's smallest cost decimal).
2. A rounding/repair heuristic (:mod:`.whole_heuristic`): a plan in milliseconds.
   For ``min-cost``, then, *fix and solve*: the commodities the LP already routes in
   whole units keep their routes and the engine solves the others exactly, in at most
   a quarter of the time left (:func:`_fix_and_solve`).
3. The MIP engine (CP-SAT, :mod:`.whole_engines`) on the arc-flow model
   (:mod:`.whole_model`), hinted with that plan, until the gap is at most
   ``gap`` or the time is up. Each better plan is reported to ``on_progress``.
4. ``max-throughput`` is lexicographic: the most delivery first; once that is proven
   (within ``gap``), the least cost with the delivery held, in the time left.

Status: ``optimal`` (gap <= the target), ``feasible`` (a plan; the time limit came
first), ``time_limit`` (no plan yet), ``infeasible`` (proof ``lp-relaxation`` or
``solver``), ``unbounded`` (integral with a negative-cost cycle of unlimited arcs:
the LP's ray, and an integral plan that it can be added to).

The gap is ``|plan - bound| / max(|plan|, |bound|)`` (0 when both are 0):
:func:`.whole_checks.relative_gap`.
"""

from __future__ import annotations

import logging
import math
import time
from dataclasses import dataclass, field, replace

import numpy as np

from ..deadline import Deadline
from ..errors import SolverFailure
from .graph import Graph
from .multicommodity import Commodities, MultiCommoditySolution, multicommodity_flow
from .whole_checks import check_flows, check_plan, plan_cost, relative_gap
from .whole_engines import engine_info, run_engine
from .whole_heuristic import Plan, cheapest_path, kept_from_lp, read_plan, route_greedily
from .whole_model import (WholeData, WholeModel, build_model, cost_scale, flow_upper, limited_mask,
                          no_detours, trivial_bound, whole_data_issue)
from .whole_search import BOUND_SLACK, OnProgress, Search, hold_delivery, plan_value, run_search

log = logging.getLogger("sluice.solver")

#: Share of the time left that fix-and-solve may take (min-cost). On the benchmark it
#: found the integral plan within 0.001% of the LP bound in under 2 s, where the full
#: model had not improved on the heuristic in 10 s; on the single-path model it found
#: nothing better, so most of the time stays with the full model.
FIX_SHARE = 0.25

#: The certificate of an answer without a plan: nothing to check but the reason.
NO_PLAN = {"checked": True, "reason": "no plan within the time limit"}


@dataclass
class WholeSolution:
    status: str  # optimal | feasible | time_limit | infeasible | unbounded
    cost: float | None = None
    delivered: np.ndarray | None = None  # int64 per commodity
    flows: np.ndarray | None = None  # int64 (K, m)
    paths: list | None = None  # single path: arc indices per commodity
    bound: float | None = None  # min-cost: cost; max-throughput: units delivered
    gap: float | None = None
    infeasibility: dict | None = None
    unbounded: dict | None = None
    certificate: dict = field(default_factory=lambda: {"checked": False})
    engine: dict = field(default_factory=lambda: engine_info("scip"))


def whole_unit_flow(net: Graph, com: Commodities, *, objective: str = "min-cost", single_path: bool = False,
                    deadline: Deadline, gap: float = 0.0, engine: str = "scip",
                    on_progress: OnProgress | None = None) -> WholeSolution:
    """Solve and certify a whole-unit multi-commodity flow problem.

    Parameters
    ----------
    net : Graph
        Capacities must be whole numbers; costs at most six decimals.
    com : Commodities
        Demands must be whole numbers.
    objective : {"min-cost", "max-throughput"}
    single_path : bool
        Each commodity's whole demand on one simple path (costs must be >= 0).
        ``max-throughput``: a commodity is delivered in full on one path, or not at all.
    gap : float
        Stop once the relative gap is at most this (0: prove the best plan).
    deadline : Deadline
        When everything (LP, heuristic, search) must end; the search stops there with
        the best plan so far.
    engine : {"cp-sat", "scip"}
    on_progress : callable, optional
        Told of every better plan and bound while the search runs.

    Returns
    -------
    WholeSolution

    Raises
    ------
    SelfCheckFailed
        A plan failed its certificate (a bug).
    ValueError
        Data the caller must refuse first: fractional capacities or demands, costs
        with more than six decimals, negative costs with ``single_path``.
    """
    started = time.perf_counter()
    data = _whole_data(net, com, objective, single_path)
    lp = _relaxation(net, com, objective, deadline)
    if lp is not None and lp.status == "infeasible":
        return _lp_infeasible(lp, engine)
    model = build_model(data)
    if lp is not None and lp.status == "unbounded":
        return _unbounded(data, model, lp, deadline, engine)
    search = Search(data, model, gap, started, on_progress, "deliver" if data.throughput else "cost",
                    trivial_bound(model))
    solved = lp is not None and lp.status == "optimal"
    if solved:
        search.tighten(_lp_bound(data, lp))
    # Keeping the LP's whole-unit commodities as they are usually wins, not always: both.
    for plan in [route_greedily(data, lp.flows, lp.delivered), route_greedily(data, lp.flows)] if solved else \
            [route_greedily(data)]:
        if plan is not None:
            search.offer(plan)
    if solved and not data.throughput:
        _fix_and_solve(search, lp, engine, Deadline.after(FIX_SHARE * deadline.remaining()))
    hint = search.plan.values(data) if search.plan is not None else _rounded_lp(data, lp)
    result = run_search(search, engine, hint, deadline)
    if result is not None and result.status == "infeasible":
        if search.plan is not None:
            raise SolverFailure("the engine calls the problem infeasible, yet a plan was found")
        return _solver_infeasible(data, engine)
    if search.plan is None:
        return WholeSolution("time_limit", bound=_in_units(data, search.model, search.bound),
                             certificate=dict(NO_PLAN),
                             engine=engine_info(engine))
    cost_bound = hold_delivery(search, engine, deadline) if data.throughput else None
    return _answer(data, search, cost_bound, engine)


def _whole_data(net: Graph, com: Commodities, objective: str, single_path: bool) -> WholeData:
    issue = whole_data_issue(net.capacity, limited_mask(net), net.cost, com.demands, single_path)
    if issue is not None:
        field_name, index, reason = issue
        raise ValueError(f"{field_name} {index}: {reason}")
    scale, cost = cost_scale(net.cost)
    return WholeData(net, com, com.demands.astype(np.int64), cost, scale, single_path, objective == "max-throughput")


def _relaxation(net: Graph, com: Commodities, objective: str, deadline: Deadline) -> MultiCommoditySolution | None:
    """The LP relaxation, or None when it could not be had (then the search starts cold)."""
    try:
        lp = multicommodity_flow(net, com, objective=objective, deadline=deadline)
    except SolverFailure as exc:  # the LP only warms the search up; the plan has its own certificate
        log.error("whole units: the LP relaxation failed (%s); searching without it", exc)
        return None
    return lp if lp.status != "time_limit" else None


def _lp_bound(data: WholeData, lp: MultiCommoditySolution) -> int:
    """The LP optimum as a bound in model units, rounded to the next whole unit
    (after a relative slack of BOUND_SLACK and, for deliveries, the LP's flow tolerance)."""
    if data.throughput:
        best = lp.certificate["delivery_bound"] + lp.certificate["tolerance"]
        return math.floor(best + BOUND_SLACK * max(1.0, abs(best)))
    best = min(lp.cost, lp.certificate["dual_bound"]) * 10**data.scale
    return math.ceil(best - BOUND_SLACK * max(1.0, abs(best)))


def _fix_and_solve(search: Search, lp: MultiCommoditySolution, engine: str, until: Deadline) -> None:
    """min-cost: keep the commodities the LP routes in whole units as they are and solve
    the others exactly (the same engine, until ``until``) on the capacity they leave.

    Usually only a few commodities are fractional in the LP (9 of 40 on the benchmark),
    so this model is a fraction of the full one; its plan is often best outright, which
    the LP bound then proves.
    """
    data = search.data
    if search.closed() or until.expired():
        return
    net, com = data.net, data.com
    kept = kept_from_lp(data, lp.flows, lp.delivered, no_detours(data, flow_upper(data)))
    free = np.asarray([k for k in range(com.count) if k not in kept and data.demands[k] > 0], dtype=np.int64)
    if not kept or not free.size:
        return
    used = sum(units * data.weight[k] for k, (units, _, _) in kept.items())
    room = np.where(data.limited, data.upper - used, 0)
    if (room < 0).any():
        return
    sub = WholeData(Graph(net.num_nodes, net.tail, net.head, room, net.unlimited, net.cost),
                    Commodities(com.sources[free], com.sinks[free], com.demands[free]), data.demands[free],
                    data.cost, data.scale, data.single_path, False)
    result = run_engine(engine, build_model(sub), None, deadline=until, gap=search.target)
    if result.values is None:
        return
    part = read_plan(sub, result.values)
    x = np.zeros(data.shape, dtype=np.int64)
    paths: list = [[] for _ in range(com.count)]
    for k, (units, _, path) in kept.items():
        x[k], paths[k] = units, path
    x[free] = part.x
    for i, k in enumerate(free.tolist()):
        paths[k] = part.paths[i] if part.paths is not None else []
    search.offer(Plan(x, data.demands.copy(), paths if data.single_path else None))


def _rounded_lp(data: WholeData, lp: MultiCommoditySolution | None) -> np.ndarray | None:
    """A hint from the LP plan when the heuristic found none: its flows rounded."""
    if lp is None or lp.status != "optimal":
        return None
    x = lp.flows / data.demands[:, None].clip(min=1) if data.single_path else lp.flows
    x = np.rint(x).astype(np.int64).ravel()
    if not data.throughput:
        return x
    delivered = lp.delivered >= data.demands if data.single_path else np.rint(lp.delivered)
    return np.concatenate([x, np.asarray(delivered, dtype=np.int64)])


def _in_units(data: WholeData, model: WholeModel, value: int) -> float:
    return value if model.maximize else value / 10**data.scale


def _answer(data: WholeData, search: Search, cost_bound: int | None, engine: str) -> WholeSolution:
    plan = search.plan
    flows = plan.flows(data)
    cost = plan_cost(data, flows)
    gap = relative_gap(plan_value(data, search.model, plan), search.bound)
    certificate = check_plan(data, flows, plan.delivered, plan.paths, cost=cost, bound=search.bound, gap=gap,
                             cost_bound=cost_bound)
    # max-throughput is optimal only when the delivery is proven and then the cost.
    done = gap <= search.target and (not data.throughput or (
        cost_bound is not None and certificate["cost_gap"] <= search.target))
    return WholeSolution("optimal" if done else "feasible", cost=cost / 10**data.scale, delivered=plan.delivered,
                         flows=flows, paths=plan.paths, bound=_in_units(data, search.model, search.bound), gap=gap,
                         certificate={**certificate, "decimal_scale": data.scale, "target_gap": search.target},
                         engine=engine_info(engine))


def _lp_infeasible(lp: MultiCommoditySolution, engine: str) -> WholeSolution:
    return WholeSolution("infeasible", infeasibility={"proof": "lp-relaxation", **lp.infeasibility},
                         certificate={**lp.certificate, "proof": "lp-relaxation"}, engine=engine_info(engine))


def _solver_infeasible(data: WholeData, engine: str) -> WholeSolution:
    """Proven by the engine. For single path, also which commodities have no path with
    room for their whole demand even with the network to themselves."""
    info: dict = {"proof": "solver"}
    if data.single_path:
        alone = [k for k in range(data.com.count) if data.demands[k] and cheapest_path(
            data, int(data.com.sources[k]), int(data.com.sinks[k]), data.upper >= data.demands[k]) is None]
        info["cannot_travel_alone"] = np.asarray(alone, dtype=np.int64)
    return WholeSolution("infeasible", infeasibility=info,
                         certificate={"checked": True, "proof": "solver", "solver_status": "INFEASIBLE"},
                         engine=engine_info(engine))


def _unbounded(data: WholeData, model: WholeModel, lp: MultiCommoditySolution, deadline: Deadline,
               engine: str) -> WholeSolution:
    """A negative-cost cycle of unlimited arcs (the LP's ray). Unbounded in whole units
    too once any whole-unit plan exists (the cycle is integral and can be added to it
    without limit); infeasible when none does. Delivering nothing is a max-throughput
    plan; a min-cost one is searched for with a zero objective."""
    K, m = data.shape
    if data.throughput:
        values = np.zeros(model.num_vars, dtype=np.int64)
    else:
        feasibility = replace(model, c=np.zeros_like(model.c))
        result = run_engine(engine, feasibility, None, deadline=deadline, gap=0.0)
        if result.status == "infeasible":
            return _solver_infeasible(data, engine)
        if result.values is None:
            return WholeSolution("time_limit", certificate=dict(NO_PLAN), engine=engine_info(engine))
        values = result.values
    plan = read_plan(data, values)
    _, _, figures = check_flows(data, plan.flows(data), plan.delivered, plan.paths)
    return WholeSolution("unbounded", unbounded=lp.unbounded,
                         certificate={**lp.certificate, "integral_plan": figures}, engine=engine_info(engine))
