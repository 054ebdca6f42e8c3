"""Multi-commodity flow: commodities with their own source, sink and demand share the arcs."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from marshmallow import RAISE, Schema, fields, validate

from ..deadline import Deadline
from ..errors import FieldError, InputError, ProblemTooLarge
from ..model.arcs import Network, read_network
from ..model.digest import problem_digest
from ..model.schemas import (
    ArcsField,
    NodeId,
    NodesField,
    OptionsSchema,
    StrictBoolean,
    StrictNumber,
    detail_field,
    load_envelope,
)
from ..solvers.multicommodity import Commodities, multicommodity_flow
from ..solvers.multicommodity import Network as FlowNetwork
from ..solvers.multicommodity_whole import whole_unit_flow
from ..solvers.versions import ORTOOLS_VERSION
from ..solvers.whole_model import whole_data_issue
from . import progress
from .base import Kind, Limits, digest_detail, node_position, problem_size, wants, without_arc_keys
from .maxflow import EngineSchema, TimingSchema

DETAIL = ["flows", "capacity_prices"]


class CommoditySchema(Schema):
    class Meta:
        unknown = RAISE

    id = NodeId(required=True, metadata={"description": "Commodity id (a string or a non-negative integer), "
                                                        "unique."})
    source = NodeId(required=True, metadata={"description": "Node the commodity leaves."})
    sink = NodeId(required=True, metadata={"description": "Node the commodity must reach."})
    demand = StrictNumber(required=True, minimum=0, metadata={"description": "Units to move from source to sink."})


class MultiCommodityOptions(OptionsSchema):
    engine = fields.String(
        load_default="auto", validate=validate.OneOf(["auto", "lp"]),
        metadata={"description": "auto or lp: fractional plans are solved by GLOP; whole-unit plans (integral, "
                                 "single_path) by the MIP engine, with auto only."},
    )
    detail = detail_field(DETAIL + ["paths"])
    integral = StrictBoolean(load_default=None, metadata={
        "type": "boolean",
        "description": "true: every flow a whole number (capacities and demands must be whole numbers, costs at "
                       "most 6 decimals); shared capacities and conservation hold exactly. The answer is a MIP "
                       "plan with its bound and gap."})
    single_path = StrictBoolean(load_default=False, metadata={
        "type": "boolean",
        "description": "true: each commodity's whole demand on one simple path (whole units implied; costs must "
                       "be >= 0); the answer adds paths. With max-throughput a commodity is delivered in full "
                       "on one path or not at all."})
    gap = StrictNumber(minimum=0, load_default=None, allow_none=True, validate=validate.Range(max=1), metadata={
        "type": "number", "maximum": 1,
        "description": "Whole units: stop once the relative gap |plan - bound| / max(|plan|, |bound|) is at "
                       "most this (default 0: prove the best plan, or answer feasible at the time limit)."})


def objective_field() -> fields.String:
    return fields.String(
        load_default="min-cost", validate=validate.OneOf(["min-cost", "max-throughput"]),
        metadata={"description": "min-cost (default): every demand met, at least total cost. max-throughput: "
                                 "the most total delivery (each commodity up to its demand), ties at least "
                                 "cost (solved lexicographically: delivery first, then cost)."},
    )


class MultiCommodityRequest(Schema):
    class Meta:
        unknown = RAISE

    arcs = ArcsField(required=True, metadata={"description": "Arcs in object or columnar form; capacity is shared "
                                                             "by all commodities, cost is per unit of any "
                                                             "commodity. lower is not supported."})
    nodes = NodesField(load_default=None, metadata={"description": "Optional node ids (or objects with id)."})
    commodities = fields.List(fields.Nested(CommoditySchema), required=True, validate=validate.Length(min=1))
    objective = objective_field()
    options = fields.Nested(MultiCommodityOptions, load_default=lambda: MultiCommodityOptions().load({}))


class MultiCommodityCertificate(Schema):
    checked = fields.Boolean()
    cost = fields.Float(metadata={"description": "Total cost recomputed from the flows."})
    max_imbalance = fields.Float(metadata={"description": "Largest conservation violation of any commodity."})
    max_capacity_excess = fields.Float(metadata={"description": "Largest excess of a shared capacity (or "
                                                                "negative flow)."})
    primal_residual = fields.Float()
    dual_residual = fields.Float()
    dual_bound = fields.Float(metadata={"description": "Dual objective of the cost model (equals cost)."})
    gap = fields.Float()
    delivered_total = fields.Float(metadata={"description": "max-throughput: total delivered."})
    delivery_bound = fields.Float(metadata={"description": "max-throughput, and infeasible min-cost: proven "
                                                           "upper bound on any plan's total delivery (dual "
                                                           "objective of the delivery model); below "
                                                           "total_demand when infeasible."})
    delivery_gap = fields.Float()
    duals_unique = fields.Boolean()
    prices_unique = fields.Boolean(metadata={"description": "max-throughput: whether the capacity prices are "
                                                            "provably unique."})
    degenerate = fields.Boolean()
    total_demand = fields.Float(metadata={"description": "Infeasible: the demand to meet."})
    tolerance = fields.Raw(metadata={"oneOf": [{"type": "number"}, {"type": "object"}],
                                     "description": "The largest absolute slack any flow check allowed (0 for "
                                                    "whole units, checked in exact integers). Unbounded: the LP "
                                                    "check's {relative: 1e-6}."})
    primal_residual_relative = fields.Float(metadata={"description": "Unbounded: the start point's largest "
                                                                     "violation, relative to its row."})
    direction_residual = fields.Float(metadata={"description": "Unbounded: how far the improving direction "
                                                               "leaves a finite bound per unit step."})
    improvement_per_step = fields.Float(metadata={"description": "Unbounded: cost saved per unit step along "
                                                                 "the direction."})
    relative_tolerance = fields.Float(metadata={"description": "Each flow figure holds to this times its own "
                                                               "magnitude: a commodity at a node against its "
                                                               "throughput there, an arc against its capacity, a "
                                                               "delivery against its demand."})
    cost_tolerance = fields.Float(metadata={"description": "Absolute bound on the duality gap: the cost is optimal "
                                                           "to within it."})
    reason = fields.String()
    integral = fields.Boolean(metadata={"description": "Whole units: every flow was checked to be a whole "
                                                       "number, exactly."})
    paths_checked = fields.Integer(metadata={"description": "Single path: paths checked to be simple, from "
                                                            "source to sink, carrying the whole demand."})
    bound = fields.Float(metadata={"description": "Whole units: the bound, checked never to be better than the "
                                                  "plan."})
    cost_bound = fields.Float(metadata={"description": "Whole units, max-throughput: the least cost of any plan "
                                                       "delivering as much (proven), once the delivery is proven."})
    cost_gap = fields.Float(metadata={"description": "Whole units, max-throughput: relative gap of the cost to "
                                                     "cost_bound."})
    target_gap = fields.Float(metadata={"description": "Whole units: options.gap."})
    decimal_scale = fields.Integer(metadata={"description": "Whole units: costs were solved as integers in units "
                                                            "of 10**-decimal_scale."})
    proof = fields.String(metadata={"description": "Whole units, infeasible: lp-relaxation or solver."})
    solver_status = fields.String()
    integral_plan = fields.Dict(metadata={"description": "Whole units, unbounded: the checks of the whole-unit "
                                                         "plan the cycle can be added to."})


class MultiCommodityInfeasibility(Schema):
    commodities = fields.List(NodeId(), metadata={"description": "Commodities left short in a maximum-delivery "
                                                                 "plan."})
    shortfall = fields.List(fields.Float(), metadata={"description": "Per commodity (request order): demand "
                                                                     "minus delivery in that plan."})
    max_delivered = fields.Float(metadata={"description": "The most that can be delivered in total."})
    arcs = fields.List(fields.Integer(), metadata={"description": "Arcs that bind: one more unit of their "
                                                                  "capacity would deliver more. Empty when "
                                                                  "no capacity binds (e.g. a sink is "
                                                                  "unreachable)."})
    cannot_meet_alone = fields.List(NodeId(), metadata={"description": "Commodities whose demand exceeds the "
                                                                       "maximum flow from their source to their "
                                                                       "sink even with the arcs to themselves."})
    proof = fields.String(validate=validate.OneOf(["lp-relaxation", "solver"]), metadata={
        "description": "Whole units: lp-relaxation (even fractional plans cannot meet the demand: the fields "
                       "above say why) or solver (the MIP engine proved that no whole-unit plan exists)."})
    cannot_travel_alone = fields.List(NodeId(), metadata={
        "description": "Single path, proof solver: commodities with no path whose every lane has room for "
                       "their whole demand, even with the network to themselves."})


class MultiCommodityUnbounded(Schema):
    commodity = NodeId(metadata={"description": "A commodity whose cost falls without limit."})
    arcs = fields.List(fields.Integer(), metadata={"description": "Arcs of a negative-cost cycle without "
                                                                  "capacity limit."})


class PathSchema(Schema):
    commodity = NodeId(metadata={"description": "The commodity's id."})
    arcs = fields.List(fields.Integer(), metadata={"description": "Arc indices from the source to the sink, in "
                                                                  "order; empty when the commodity is not "
                                                                  "delivered (max-throughput) or has no demand."})


class WholeEngineSchema(EngineSchema):
    kind = fields.String(validate=validate.OneOf(["lp", "mip"]))


class MultiCommodityResponse(Schema):
    status = fields.String(validate=validate.OneOf(["optimal", "feasible", "infeasible", "unbounded", "time_limit"]),
                           metadata={"description": "Whole units: optimal (gap <= options.gap), feasible (a plan; "
                                                    "the time limit came before the gap closed), time_limit (no "
                                                    "plan yet), infeasible (infeasibility.proof says how it was "
                                                    "proven), unbounded."})
    objective = fields.String()
    cost = fields.Float(allow_none=True, metadata={"description": "Total cost of the plan."})
    delivered = fields.List(fields.Float(), metadata={"description": "Units delivered per commodity, in the "
                                                                     "request's commodities order."})
    flows = fields.List(fields.List(fields.Float()), metadata={
        "description": "Per commodity (request order), the flow on every arc (request arc order)."})
    capacity_prices = fields.List(fields.Float(), metadata={
        "description": "Per arc: what one more unit of its shared capacity is worth, >= 0 (0 on arcs "
                       "without a limit). min-cost: the cost saved, i.e. minus the capacity row's dual in "
                       "the LP convention (change of the objective per unit increase of the bound). "
                       "max-throughput: the extra delivery, i.e. the capacity row's dual in the delivery "
                       "model."})
    bottlenecks = fields.List(fields.Integer(), metadata={"description": "Indices of the arcs with a positive "
                                                                         "capacity price."})
    paths = fields.List(fields.Nested(PathSchema), metadata={
        "description": "Single path: one entry per commodity (request order)."})
    bound = fields.Float(allow_none=True, metadata={
        "description": "Whole units: the best proven bound on the objective: a cost no plan can beat "
                       "(min-cost), or units no plan can exceed (max-throughput)."})
    gap = fields.Float(allow_none=True, metadata={
        "description": "Whole units: |plan - bound| / max(|plan|, |bound|) (0 when both are 0), of the cost "
                       "(min-cost) or of the total delivered (max-throughput); null without a plan."})
    infeasibility = fields.Nested(MultiCommodityInfeasibility)
    unbounded = fields.Nested(MultiCommodityUnbounded)
    certificate = fields.Nested(MultiCommodityCertificate)
    digest = fields.String()
    engine = fields.Nested(WholeEngineSchema)
    timing_ms = fields.Nested(TimingSchema)


class MultiCommodityQuery(Schema):
    """A multi-commodity question about a stored network (see :func:`from_network`)."""

    class Meta:
        unknown = RAISE

    commodities = fields.List(fields.Nested(CommoditySchema), required=True, validate=validate.Length(min=1))
    objective = objective_field()
    changes = fields.Raw(load_default=None, metadata={
        "description": "Arc changes; applied by the stored-network layer before the query is built."})
    options = fields.Nested(MultiCommodityOptions, load_default=lambda: MultiCommodityOptions().load({}))


#: Reused across requests: building a schema deep-copies its fields.
_REQUEST = MultiCommodityRequest()
_QUERY = MultiCommodityQuery()


@dataclass
class MultiCommodityProblem:
    network: Network
    commodity_ids: list
    commodities: Commodities
    objective: str
    options: dict
    digest: str

    @property
    def whole(self) -> bool:
        return whole_units(self.options)

    @property
    def size(self) -> int:
        """Flow variables, arcs x commodities, whole units or not: a 180 KB body of 2,000
        arcs and 1,000 commodities is an LP of 2M columns (gigabytes while it is solved)."""
        return self.network.num_arcs * len(self.commodity_ids)


def whole_units(options: dict) -> bool:
    return bool(options.get("integral")) or bool(options.get("single_path"))


def parse(body, limits: Limits) -> MultiCommodityProblem:
    """Validate and normalise a multi-commodity request.

    Raises
    ------
    InputError
        Naming the offending field by JSON Pointer.
    ProblemTooLarge
        Arcs x commodities above ``limits.max_arcs``.
    """
    envelope = load_envelope(_REQUEST, body)
    _check_options(envelope["options"])
    network, _ = read_network(envelope["arcs"], envelope["nodes"], max_arcs=limits.max_arcs,
                              max_nodes=limits.max_nodes, allow_lower=False, node_fields=())
    raw = envelope["arcs"]
    return _problem(network, envelope, limits,
                    lambda i, name: f"/arcs/{name}/{i}" if isinstance(raw, dict) else f"/arcs/{i}/{name}")


def from_network(network: Network, query, limits: Limits) -> MultiCommodityProblem:
    """Build a problem from a stored, already normalised network and a query.

    Parameters
    ----------
    query : dict
        ``{"commodities": [...], "objective": ..., "options": {...}}``. Pointers in
        errors are relative to the query body; a stored arc that whole units cannot
        take is named by its index, at the option that asked for whole units.
    """
    envelope = load_envelope(_QUERY, query)
    options = envelope["options"]
    _check_options(options)
    if network.lower is not None:
        raise InputError.at("", "the stored network has lower bounds, which multi-commodity flow does not support")
    asked = "/options/single_path" if options.get("single_path") else "/options/integral"
    return _problem(network, envelope, limits, lambda i, name: asked, stored=True)


def _check_options(options: dict) -> None:
    """Options that contradict each other, each named by its own pointer."""
    errors = []
    if options.get("single_path") and options.get("integral") is False:
        errors.append(FieldError("/options/integral", "single_path plans are whole units: leave integral out or "
                                                      "set it to true"))
    if whole_units(options) and options.get("engine") == "lp":
        errors.append(FieldError("/options/engine", "must be auto with integral or single_path (whole units are "
                                                    "solved by the MIP engine)"))
    if options.get("gap") is not None and not whole_units(options):
        errors.append(FieldError("/options/gap", "applies to whole-unit plans only (integral or single_path); "
                                                 "fractional plans are always solved to optimality"))
    if errors:
        raise InputError(errors)


def _problem(network: Network, envelope: dict, limits: Limits, arc_pointer, stored: bool = False):
    listed = envelope["commodities"]
    # Each commodity is one block of the model (SLUICE_MAX_COMMODITIES, default 1,000).
    if len(listed) > limits.max_commodities:
        raise ProblemTooLarge(FieldError("/commodities", f"has {len(listed)} commodities; the limit is "
                                                         f"{limits.max_commodities}"))
    if len(listed) * network.num_arcs > limits.max_arcs:
        raise ProblemTooLarge(FieldError("/commodities", f"{len(listed)} commodities x {network.num_arcs} arcs "
                                                         f"exceed the limit of {limits.max_arcs} flow variables"))
    ids, sources, sinks = [], [], []
    seen: dict = {}
    for i, item in enumerate(listed):  # one entry per commodity: a handful, not per arc
        key = (type(item["id"]), item["id"])
        if key in seen:
            raise InputError.at(f"/commodities/{i}/id", f"duplicate commodity id (first at {seen[key]})")
        seen[key] = i
        s = node_position(network.nodes, item["source"], f"/commodities/{i}/source")
        t = node_position(network.nodes, item["sink"], f"/commodities/{i}/sink")
        if s == t:
            raise InputError.at(f"/commodities/{i}/sink", "must differ from the source")
        ids.append(item["id"])
        sources.append(s)
        sinks.append(t)
    demands = np.asarray([float(item["demand"]) for item in listed])
    commodities = Commodities(np.asarray(sources, dtype=np.int64), np.asarray(sinks, dtype=np.int64), demands)
    options = envelope["options"]
    objective = envelope["objective"]
    whole = whole_units(options)
    if whole:
        _check_whole_data(network, demands, options, arc_pointer, stored)
    # The whole-unit options enter the digest only when set, so fractional answers keep
    # the digests they had before these options existed.
    extra = {"whole": [bool(options.get("integral")) or bool(options.get("single_path")),
                       bool(options.get("single_path")), float(options.get("gap") or 0.0)]} if whole else {}
    digest = problem_digest(
        "multicommodity", ORTOOLS_VERSION, network.nodes.ids, network.tail, network.head, network.capacity,
        network.unlimited, network.cost, commodities.sources, commodities.sinks, demands,
        [ids, objective], {"detail": digest_detail(options, DETAIL), **extra},
    )
    return MultiCommodityProblem(network, ids, commodities, objective, options, digest)


def _check_whole_data(network: Network, demands: np.ndarray, options: dict, arc_pointer, stored: bool) -> None:
    """Whole units take whole-number capacities and demands and costs with at most six
    decimals (>= 0 for single path), so that the plan and its cost are exact."""
    cost = np.zeros(network.num_arcs) if network.cost is None else network.cost
    limited = np.ones(network.num_arcs, dtype=bool) if network.unlimited is None else ~network.unlimited
    issue = whole_data_issue(network.capacity, limited, cost, demands, bool(options.get("single_path")))
    if issue is None:
        return
    field_name, index, reason = issue
    if field_name == "demand":
        raise InputError.at(f"/commodities/{index}/demand", reason)
    if field_name == "objective":
        asked = "/options/single_path" if options.get("single_path") else "/options/integral"
        raise InputError.at(asked, f"cannot be solved exactly: {reason}")
    where = f"arc {index} of the stored network: its {field_name} " if stored else ""
    raise InputError.at(arc_pointer(index, field_name), where + reason)


def solve(problem: MultiCommodityProblem, deadline: Deadline) -> dict:
    net = problem.network
    cost = np.zeros(net.num_arcs) if net.cost is None else net.cost.astype(np.float64)
    flow_net = FlowNetwork(net.num_nodes, net.tail, net.head, net.capacity, net.unlimited, cost)
    if problem.whole:
        return _solve_whole(problem, flow_net, deadline)
    solution = multicommodity_flow(flow_net, problem.commodities, objective=problem.objective,
                                   deadline=deadline)
    ids = problem.commodity_ids
    out: dict = {"status": solution.status, "objective": problem.objective, "cost": solution.cost}
    if solution.status == "optimal":
        out["delivered"] = solution.delivered + 0.0
        if wants(problem.options, "flows"):
            out["flows"] = solution.flows + 0.0
        if wants(problem.options, "capacity_prices"):
            out["capacity_prices"] = solution.capacity_prices + 0.0
        out["bottlenecks"] = solution.bottlenecks
    elif solution.status == "infeasible":
        out["infeasibility"] = _infeasibility(ids, solution.infeasibility)
    elif solution.status == "unbounded":
        out["unbounded"] = {"commodity": ids[solution.unbounded["commodity"]], "arcs": solution.unbounded["arcs"]}
    out["certificate"] = solution.certificate
    out["digest"] = problem.digest
    out["engine"] = solution.engine
    return out


def _infeasibility(ids: list, info: dict) -> dict:
    return {
        "commodities": [ids[k] for k in info["short"].tolist()],
        "shortfall": info["shortfall"],
        "max_delivered": info["max_delivered"],
        "arcs": info["binding"],
        "cannot_meet_alone": [ids[k] for k in info["alone"].tolist()],
    }


def _solve_whole(problem: MultiCommodityProblem, flow_net: FlowNetwork, deadline: Deadline) -> dict:
    options, ids = problem.options, problem.commodity_ids
    solution = whole_unit_flow(flow_net, problem.commodities, objective=problem.objective,
                               single_path=bool(options.get("single_path")), gap=float(options.get("gap") or 0.0),
                               deadline=deadline, on_progress=progress.reporter())
    out: dict = {"status": solution.status, "objective": problem.objective, "cost": solution.cost}
    if solution.flows is not None:
        out["delivered"] = solution.delivered
        if wants(options, "flows"):
            out["flows"] = solution.flows
        if solution.paths is not None and wants(options, "paths"):
            out["paths"] = [{"commodity": ids[k], "arcs": path} for k, path in enumerate(solution.paths)]
    if solution.status in ("optimal", "feasible", "time_limit"):
        out["bound"] = solution.bound
        out["gap"] = solution.gap
    if solution.infeasibility is not None:
        info = solution.infeasibility
        if info["proof"] == "lp-relaxation":
            out["infeasibility"] = {**_infeasibility(ids, info), "proof": "lp-relaxation"}
        else:
            out["infeasibility"] = {"proof": "solver", **({"cannot_travel_alone": [
                ids[k] for k in info["cannot_travel_alone"].tolist()]} if "cannot_travel_alone" in info else {})}
    if solution.unbounded is not None:
        out["unbounded"] = {"commodity": ids[solution.unbounded["commodity"]], "arcs": solution.unbounded["arcs"]}
    out["certificate"] = solution.certificate
    out["digest"] = problem.digest
    out["engine"] = solution.engine
    return out


KIND = Kind(
    name="multicommodity",
    summary="Multi-commodity flow: shared capacities, min-cost or max-throughput, with capacity prices",
    request_schema=MultiCommodityRequest,
    response_schema=MultiCommodityResponse,
    example="depots-multicommodity.json",
    parse=parse,
    solve=solve,
    query_schema=MultiCommodityQuery,
    from_network=from_network,
    size=problem_size,
    #: GLOP and the MIP engines stop themselves at their deadline (the MIP with its
    #: plan so far: status "feasible").
    honours_time_limit=True,
    for_solver_process=without_arc_keys,
)
