"""The request, query and response schemas of flows over time (:mod:`.flowovertime`)."""

from __future__ import annotations

from marshmallow import RAISE, Schema, ValidationError, fields, validate

from ..model.schemas import ArcsField, NodeId, NodesField, OptionsSchema, StrictNumber, detail_field
from .maxflow import EngineSchema, TimingSchema

OBJECTIVES = ["max-by-horizon", "quickest", "min-cost"]
THROUGH = ("max-by-horizon", "quickest")
DETAIL = ["departures", "holdover", "arrivals", "cut", "releases", "deliveries"]


class WholeNumber(fields.Field):
    """A JSON integer (not a boolean, not 3.0) of at least ``minimum``."""

    def __init__(self, *, minimum: int = 0, **kwargs):
        super().__init__(**kwargs)
        self.minimum = minimum

    def _deserialize(self, value, attr, data, **kwargs):
        if type(value) is not int:
            raise ValidationError("must be a whole number")
        if value < self.minimum:
            raise ValidationError(f"must be >= {self.minimum}")
        return value


class FlowOverTimeOptions(OptionsSchema):
    engine = fields.String(load_default="auto", validate=validate.OneOf(["auto", "graph"]), metadata={
        "description": "Flows over time are solved on the graph engine only (exact integers, or decimals with at "
                       "most 6 places by exact scaling)."})
    detail = detail_field(DETAIL)


_DEFAULT_OPTIONS = FlowOverTimeOptions().load({})


class FlowOverTimeRequest(Schema):
    class Meta:
        unknown = RAISE

    horizon = WholeNumber(minimum=1, required=True, metadata={
        "description": "Number of whole periods, 0 .. horizon-1. The problem's expanded size, horizon x (arcs + "
                       "nodes), must stay within the server's limit (413 otherwise).", "type": "integer",
        "minimum": 1})
    period = fields.String(load_default=None, validate=validate.Length(1, 50), metadata={
        "description": "A label for one period, such as \"30 min\" (echoed in the answer)."})
    objective = fields.String(load_default="max-by-horizon", validate=validate.OneOf(OBJECTIVES), metadata={
        "description": "max-by-horizon (default): the most units from source to sink by the last period, arriving "
                       "as early as possible. quickest: the fewest periods (at most horizon) that move amount. "
                       "min-cost: node supplies to demands by the last period at least cost."})
    source = NodeId(load_default=None, metadata={"description": "max-by-horizon and quickest: where units start "
                                                                "(its own stock, released in any period)."})
    sink = NodeId(load_default=None, metadata={"description": "max-by-horizon and quickest: where units arrive."})
    amount = StrictNumber(minimum=0, exclusive=True, load_default=None, metadata={
        "description": "quickest: the units that must reach the sink.", "type": "number"})
    arcs = ArcsField(required=True, metadata={
        "description": "Lanes, in object or columnar form: from, to, transit (whole periods >= 0, default 0), "
                       "capacity per departure period (a number, null = no limit, or a list of horizon numbers or "
                       "nulls, e.g. zeros while a lane is shut at night), cost per unit (>= 0), key."})
    nodes = NodesField(load_default=None, metadata={
        "description": "Node ids, or objects (or columns) with id, holdover (units that may wait from one period "
                       "to the next; null or absent = no limit, 0 = none), holdover_cost (per unit per period, "
                       ">= 0) and, for min-cost, supply (positive = supply, negative = demand; must balance)."})
    options = fields.Nested(FlowOverTimeOptions, load_default=lambda: dict(_DEFAULT_OPTIONS))


class FlowOverTimeQuery(Schema):
    """A flow-over-time question about a stored network: its arcs may carry transit and
    its nodes holdover and holdover_cost (stored with the network, or set by changes)."""

    class Meta:
        unknown = RAISE

    horizon = FlowOverTimeRequest._declared_fields["horizon"]
    period = FlowOverTimeRequest._declared_fields["period"]
    objective = FlowOverTimeRequest._declared_fields["objective"]
    source = FlowOverTimeRequest._declared_fields["source"]
    sink = FlowOverTimeRequest._declared_fields["sink"]
    amount = FlowOverTimeRequest._declared_fields["amount"]
    supplies = fields.Raw(load_default=None, metadata={
        "description": "min-cost: supplies for this query, in the nodes form: [{\"id\": \"depot\", \"supply\": 40}, "
                       "...] (or columns {\"id\": [...], \"supply\": [...]}); nodes not listed have supply 0."})
    options = FlowOverTimeRequest._declared_fields["options"]


class LanePeriodSchema(Schema):
    arc = fields.Integer(metadata={"description": "Index of the lane in the request's arcs."})
    period = fields.Integer(metadata={"description": "Departure period."})


class NodePeriodSchema(Schema):
    node = NodeId()
    period = fields.Integer(metadata={"description": "Period the units wait from (to the next)."})


class DepartureSchema(LanePeriodSchema):
    amount = fields.Float(metadata={"description": "Units leaving on the lane in that period."})


class NodeAmountSchema(Schema):
    node = NodeId()
    period = fields.Integer()
    amount = fields.Float()


class OverTimeCutSchema(Schema):
    departures = fields.List(fields.Nested(LanePeriodSchema), metadata={
        "description": "Lane copies leaving the cut's source side (lane, departure period)."})
    holdover = fields.List(fields.Nested(NodePeriodSchema), metadata={
        "description": "Holdover steps leaving it (node, period waited from)."})
    capacity = fields.Float(metadata={"description": "Their capacity: equals value (max-by-horizon), or is less "
                                                     "than amount (quickest: with one period fewer, or infeasible)."})
    horizon = fields.Integer(metadata={"description": "The periods of the network this cut separates."})


class InfeasibilityOverTimeSchema(Schema):
    node_periods = fields.List(fields.Nested(NodePeriodSchema), metadata={
        "description": "A set of node-periods: every supply node with all its periods in it must release its supply "
                       "inside it; at most the demand of the demand nodes with some period in it can be met inside "
                       "it; the rest must leave."})
    net_supply = fields.Float(metadata={"description": "What must leave the set."})
    outgoing_capacity = fields.Float(metadata={"description": "What can leave it: less than net_supply."})
    departures = fields.List(fields.Nested(LanePeriodSchema))
    holdover = fields.List(fields.Nested(NodePeriodSchema))


class UnboundedOverTimeSchema(Schema):
    departures = fields.List(fields.Nested(LanePeriodSchema), metadata={
        "description": "Lane copies without a capacity limit leading from the source to the sink in time."})
    holdover = fields.List(fields.Nested(NodePeriodSchema))


class OverTimeCertificate(Schema):
    checked = fields.Boolean()
    value = fields.Float(metadata={"description": "Units arrived, replayed from the schedule in the original network."})
    cut_capacity = fields.Float()
    max_imbalance = fields.Float(metadata={"description": "Largest conservation violation at a node-period (0)."})
    max_capacity_excess = fields.Float(metadata={"description": "Largest lane excess over its period's capacity (0)."})
    max_holdover_excess = fields.Float(metadata={"description": "Largest holdover excess over its limit (0)."})
    earliest_arrival = fields.Boolean(metadata={"description": "max-by-horizon: the arrivals by every period are "
                                                               "proved the most possible by then."})
    cumulative_arrivals = fields.List(fields.Float(), metadata={"description": "Units arrived by each period."})
    cut_capacities = fields.List(fields.Float(), metadata={
        "description": "For each period q, the capacity of a cut of the network cut off after q: equal to "
                       "cumulative_arrivals[q], which no schedule can beat (weak duality)."})
    total_arrival_time = fields.Float(metadata={"description": "sum(period x units arriving then)."})
    min_total_arrival_time = fields.Float(metadata={"description": "The least any maximum schedule can have, from "
                                                                   "the cuts: equal to total_arrival_time."})
    amount = fields.Float()
    shorter_horizon = fields.Integer(metadata={"description": "quickest: the periods the cut proves too few."})
    probed_horizons = fields.List(fields.Integer(), metadata={"description": "quickest: the horizons solved."})
    primal_cost = fields.Float()
    dual_bound = fields.Float(metadata={"description": "min-cost: the LP bound of the node-period potentials."})
    gap = fields.Float(metadata={"description": "primal_cost - dual_bound: 0 proves the schedule cheapest."})
    slackness_violations = fields.Integer()
    net_supply = fields.Float()
    outgoing_capacity = fields.Float()
    shippable = fields.Float(metadata={"description": "min-cost infeasible: the most the network can move in time."})
    unbounded_path_steps = fields.Integer()
    tolerance = fields.Float(metadata={"description": "0: integers (and scaled decimals) are compared exactly."})
    decimal_scale = fields.Integer()
    cost_scale = fields.Integer()


class OverTimeEngineSchema(EngineSchema):
    method = fields.String(metadata={"description": "nested minimum cuts (max-by-horizon: max-flows only), search "
                                                    "over horizons (quickest), or the min-cost flow itself."})
    cost_scale = fields.Integer()


class FlowOverTimeResponse(Schema):
    status = fields.String(validate=validate.OneOf(["optimal", "infeasible", "unbounded"]))
    objective = fields.String(validate=validate.OneOf(OBJECTIVES))
    horizon = fields.Integer(metadata={"description": "Periods used: the request's horizon, or for quickest the "
                                                      "fewest that move amount."})
    period = fields.String(metadata={"description": "The request's period label, when given."})
    value = fields.Float(allow_none=True, metadata={"description": "Units arrived at the sink (or, min-cost, "
                                                                   "supplied); null when unbounded."})
    cost = fields.Float(allow_none=True, metadata={"description": "min-cost: lane cost plus holdover cost."})
    arrivals = fields.List(fields.Float(), metadata={"description": "Units reaching the sink in each period."})
    departures = fields.List(fields.Nested(DepartureSchema), metadata={
        "description": "Non-zero departures, sorted by period, then lane."})
    holdover = fields.List(fields.Nested(NodeAmountSchema), metadata={
        "description": "Non-zero holdover (units waiting at a node from period to period + 1), sorted by period, "
                       "then node. A source's or supply's own stock waits outside it."})
    releases = fields.List(fields.Nested(NodeAmountSchema), metadata={
        "description": "min-cost: supply leaving each supply node's own stock, per period."})
    deliveries = fields.List(fields.Nested(NodeAmountSchema), metadata={
        "description": "min-cost: demand met at each demand node, per period."})
    cut = fields.Nested(OverTimeCutSchema)
    infeasibility = fields.Nested(InfeasibilityOverTimeSchema)
    unbounded_path = fields.Nested(UnboundedOverTimeSchema)
    certificate = fields.Nested(OverTimeCertificate)
    digest = fields.String()
    engine = fields.Nested(OverTimeEngineSchema)
    timing_ms = fields.Nested(TimingSchema)
