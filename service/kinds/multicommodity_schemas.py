"""The request, query and response schemas of multi-commodity flow (:mod:`.multicommodity`)."""

from __future__ import annotations

from marshmallow import RAISE, Schema, fields, validate

from ..model.schemas import ArcsField, NodeId, NodesField, OptionsSchema, StrictBoolean, StrictNumber, detail_field
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
    """The ``options.objective`` field, made fresh for each schema that declares it.

    Returns
    -------
    marshmallow.fields.String
        ``min-cost`` (the default) or ``max-throughput``, with its description for the spec.
    """
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
