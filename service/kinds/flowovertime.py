"""Flows over time: lanes with transit times, dock hours and holdover, by a horizon.

Whole periods ``0 .. horizon-1``; a unit leaving ``u`` at period ``p`` on a lane with
``transit`` r reaches ``v`` at ``p + r`` and counts only if that is within the horizon.
Objectives: ``max-by-horizon`` (the most units by the last period, arriving as early
as possible), ``quickest`` (the fewest periods for an ``amount``), ``min-cost``
(supplies to demands by the last period, at least lane and holdover cost).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from marshmallow import RAISE, Schema, ValidationError, fields, validate

from ..drawing.flowovertime import DRAWER
from ..errors import FieldError, InputError, ProblemTooLarge
from ..model.arccolumns import read_arcs
from ..model.arcs import read_keys
from ..model.columns import check_numbers, number_column
from ..model.digest import problem_digest
from ..model.ids import NodeIndex
from ..model.interning import intern_ids
from ..model.nodes import read_nodes
from ..model.overtime import (
    NODE_DEFAULTS,
    NODE_FIELDS,
    TIMED_ARC_FIELDS,
    capacity_column,
    node_column,
    transit_column,
)
from ..model.schemas import ArcsField, NodeId, NodesField, OptionsSchema, StrictNumber, detail_field, load_envelope
from ..solvers.flowovertime import OverTimeSolution, max_by_horizon, min_cost, quickest
from ..solvers.timeexpanded import TimedNetwork
from ..solvers.versions import ORTOOLS_VERSION
from .base import Kind, Limits, ids_of, node_position, posted_whole, problem_size
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


_DEFAULT_OPTIONS = FlowOverTimeOptions().load({})
_REQUEST = FlowOverTimeRequest()
_QUERY = FlowOverTimeQuery()


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


@dataclass
class FlowOverTimeProblem:
    network: TimedNetwork
    nodes: NodeIndex
    objective: str
    source: int | None
    sink: int | None
    amount: int | float | None
    supply: np.ndarray | None
    period: str | None
    options: dict
    digest: str
    size: int  # expanded size: horizon x (arcs + nodes), for the inline/solver-process choice
    keys: list | None = None  # the lanes' labels, for diagrams


def parse(body, limits: Limits) -> FlowOverTimeProblem:
    """Validate and normalise a flow-over-time request.

    Raises
    ------
    InputError
        Naming the offending field by JSON Pointer.
    ProblemTooLarge
        ``/horizon`` when horizon x (arcs + nodes) exceeds ``limits.max_expanded``.
    """
    env = load_envelope(_REQUEST, body)
    horizon, objective = env["horizon"], env["objective"]
    _check_expanded(horizon, 0, 1, limits)
    # A capacity may be a list per period: read here, not as one number per arc.
    arcs = read_arcs(env["arcs"], max_arcs=limits.max_arcs, fields=TIMED_ARC_FIELDS, as_decoded=("capacity",))
    nodes = read_nodes(env["nodes"], extra_fields=NODE_FIELDS, defaults=NODE_DEFAULTS)
    index, tail, head = intern_ids(nodes.ids, arcs.ends, arcs.where("from"), arcs.where("to"))
    n, m = len(index), arcs.count
    if n > limits.max_nodes:
        raise ProblemTooLarge(FieldError("/nodes", f"has {n} nodes; the limit is {limits.max_nodes}"))
    _check_expanded(horizon, m, n, limits)
    keys = read_keys(arcs.keys, arcs.where("key"))
    capacity = capacity_column(arcs.column("capacity"), m, horizon)
    cost = None if "cost" not in arcs.numbers else \
        check_numbers(arcs.numbers["cost"], arcs.where("cost"), minimum=0).values
    declared = len(nodes.ids.values)
    holdover, unlimited = node_column(nodes.fields, "holdover", declared, n, allow_null=True, minimum=0)
    holdover_cost, _ = node_column(nodes.fields, "holdover_cost", declared, n, minimum=0)
    supply, _ = node_column(nodes.fields, "supply", declared, n)
    net = TimedNetwork(n, horizon, tail.astype(np.int64), head.astype(np.int64),
                       transit_column(arcs.column("transit"), m), capacity.values, capacity.null, cost, holdover,
                       unlimited, holdover_cost)
    source, sink, amount = _ends(env, index, objective)
    supply = _supply(supply, nodes, objective, n)
    options = env["options"]
    costs = (net.cost, net.holdover_cost) if objective == "min-cost" else (None, None)  # only they price anything
    digest = problem_digest(
        "flowovertime", ORTOOLS_VERSION, index.ids, net.tail, net.head, net.transit, net.capacity, net.unlimited,
        net.holdover, net.holdover_unlimited, *costs, supply,
        [horizon, objective, source, sink, amount, env["period"]], {"detail": options.get("detail")})
    return FlowOverTimeProblem(net, index, objective, source, sink, amount, supply, env["period"], options, digest,
                               horizon * (m + n), keys)


def from_network(network, query, limits: Limits) -> FlowOverTimeProblem:
    """A flow-over-time question about a stored network, read as the same request posted whole.

    Raises
    ------
    InputError
        Naming the field of the query (``/supplies/0/id``) or of the stored network.
    """
    if network.lower is not None:
        raise InputError.at("", "the stored network has lower bounds on some arcs; flows over time do not "
                                "support them")
    body = posted_whole(network, query, _QUERY, arc_fields=("transit",), node_fields=("holdover", "holdover_cost"))
    _check_period_changes(network, body["horizon"])
    supplies = body.pop("supplies", None)
    if supplies is not None:
        supply = _stored_supply(network, supplies)
        nodes = body["nodes"] if isinstance(body["nodes"], dict) else {"id": body["nodes"]}
        body["nodes"] = {**nodes, "supply": supply}
    return parse(body, limits)


def _check_period_changes(network, horizon: int) -> None:
    """A what-if's per-period capacity list needs one entry per period (named at its change)."""
    where = (network.extra or {}).get("period_where", {})
    wrong = [(at, len(network.extra["periods"][arc])) for arc, at in where.items()
             if len(network.extra["periods"][arc]) != horizon]
    if wrong:
        raise InputError([FieldError(at, f"has {n} entries; a capacity list needs one per period: horizon is "
                                         f"{horizon}") for at, n in wrong])


def _stored_supply(network, supplies) -> list:
    raw = read_nodes(supplies, extra_fields=("supply",), base="/supplies")
    supply = [0] * network.num_nodes
    column = raw.fields.get("supply")
    values = None if column is None else number_column(column.values, column.where).values.tolist()
    for i, node_id in enumerate(raw.ids.values):
        at = node_position(network.nodes, node_id, raw.ids.where(i))
        if values is not None:
            supply[at] = values[i]
    return supply


def _check_expanded(horizon: int, arcs: int, nodes: int, limits: Limits) -> None:
    size = horizon * (arcs + nodes)
    if size > limits.max_expanded:
        raise ProblemTooLarge(FieldError(
            "/horizon", f"the time-expanded problem would hold horizon x (arcs + nodes) = {horizon} x ({arcs} + "
                        f"{nodes}) = {size} lane and node periods; the limit is {limits.max_expanded}"))


def _ends(env: dict, index: NodeIndex, objective: str):
    if objective not in THROUGH:
        for name in ("source", "sink", "amount"):
            if env[name] is not None:
                raise InputError.at(f"/{name}", "min-cost takes supplies and demands on nodes, not a source, sink "
                                                "or amount")
        return None, None, None
    for name in ("source", "sink"):
        if env[name] is None:
            raise InputError.at(f"/{name}", f"is required for {objective}")
    source = node_position(index, env["source"], "/source")
    sink = node_position(index, env["sink"], "/sink")
    if source == sink:
        raise InputError.at("/sink", "must differ from the source")
    amount = env["amount"]
    if objective == "quickest" and amount is None:
        raise InputError.at("/amount", "is required for quickest: the units that must reach the sink")
    if objective != "quickest" and amount is not None:
        raise InputError.at("/amount", "only quickest takes an amount")
    return source, sink, amount


def _supply(supply, nodes, objective: str, n: int):
    if objective != "min-cost":
        if supply is not None and supply.any():
            i = int(np.flatnonzero(supply)[0])
            raise InputError.at(nodes.fields["supply"].where(i), f"supply applies to min-cost only, not {objective}")
        return None
    supply = np.zeros(n, np.int64) if supply is None else supply
    total = supply.sum()
    if total != 0:
        more, less = ("supply", "demand") if total > 0 else ("demand", "supply")
        raise InputError.at("/nodes", f"supplies and demands do not balance: total {more} exceeds total {less} by "
                                      f"{abs(total.item()):g}")
    return supply


def solve(problem: FlowOverTimeProblem, limits: Limits) -> dict:
    net = problem.network
    if problem.objective == "max-by-horizon":
        sol = max_by_horizon(net, problem.source, problem.sink)
    elif problem.objective == "quickest":
        sol = quickest(net, problem.source, problem.sink, problem.amount)
    else:
        sol = min_cost(net, problem.supply)
    return answer(problem, sol)


def answer(problem: FlowOverTimeProblem, sol: OverTimeSolution) -> dict:
    """The response document of a solution, in the lanes' own terms."""
    nodes, detail = problem.nodes, problem.options.get("detail")
    wants = (lambda part: True) if detail is None else (lambda part: part in detail)
    out: dict = {"status": sol.status, "objective": problem.objective, "horizon": sol.horizon}
    if problem.period is not None:
        out["period"] = problem.period
    out["value"] = sol.value
    if problem.objective == "min-cost":
        out["cost"] = sol.cost
    if sol.arrivals is not None and wants("arrivals"):
        out["arrivals"] = sol.arrivals
    if sol.schedule is not None:
        s = sol.schedule
        dep_amount, hold_amount = sol.amounts
        if wants("departures"):
            out["departures"] = [{"arc": a, "period": p, "amount": x} for a, p, x in
                                 zip(s.dep_arc.tolist(), s.dep_period.tolist(), dep_amount.tolist())]
        if wants("holdover"):
            out["holdover"] = _node_entries(nodes, s.hold_node, s.hold_period, hold_amount)
    for name in ("releases", "deliveries"):
        entries = getattr(sol, name)
        if entries is not None and wants(name):
            out[name] = _node_entries(nodes, entries["node"], entries["period"], entries["amount"])
    if sol.cut is not None and wants("cut"):
        out["cut"] = {**_steps(nodes, sol.cut), "capacity": sol.cut["capacity"], "horizon": sol.cut["horizon"]}
    if sol.infeasibility is not None:
        proof = sol.infeasibility
        out["infeasibility"] = {
            "node_periods": _node_entries(nodes, proof["member_node"], proof["member_period"]),
            "net_supply": proof["net_supply"], "outgoing_capacity": proof["outgoing_capacity"], **_steps(nodes, proof)}
    if sol.unbounded_path is not None:
        out["value"] = None
        out["unbounded_path"] = _steps(nodes, sol.unbounded_path)
    out["certificate"] = sol.certificate
    out["digest"] = problem.digest
    out["engine"] = sol.engine
    return out


def _node_entries(nodes: NodeIndex, node: np.ndarray, period: np.ndarray, amount: np.ndarray | None = None) -> list:
    ids = ids_of(nodes, node)
    ids = ids.tolist() if isinstance(ids, np.ndarray) else ids
    if amount is None:
        return [{"node": v, "period": p} for v, p in zip(ids, period.tolist())]
    return [{"node": v, "period": p, "amount": x} for v, p, x in zip(ids, period.tolist(), amount.tolist())]


def _steps(nodes: NodeIndex, steps: dict) -> dict:
    return {"departures": [{"arc": a, "period": p} for a, p in zip(steps["dep_arc"].tolist(),
                                                                    steps["dep_period"].tolist())],
            "holdover": _node_entries(nodes, steps["hold_node"], steps["hold_period"])}


KIND = Kind(
    name="flowovertime",
    summary="Flows over time: the most by a horizon (earliest arrival), the quickest, or the cheapest schedule",
    request_schema=FlowOverTimeRequest,
    response_schema=FlowOverTimeResponse,
    example="xdock-night-flowovertime.json",
    parse=parse,
    solve=solve,
    query_schema=FlowOverTimeQuery,
    from_network=from_network,
    drawer=DRAWER,
    per_period_capacity=True,
    size=problem_size,
)
