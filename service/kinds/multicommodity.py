"""Multi-commodity flow: commodities with their own source, sink and demand share the arcs."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from marshmallow import RAISE, Schema, fields, validate

from ..errors import FieldError, InputError, ProblemTooLarge
from ..model.arcs import Network, read_network
from ..model.digest import problem_digest
from ..model.schemas import (
    ArcsField,
    NodeId,
    NodesField,
    OptionsSchema,
    StrictNumber,
    detail_field,
    load_envelope,
)
from ..solvers.multicommodity import Commodities, multicommodity_flow
from ..solvers.multicommodity import Network as FlowNetwork
from ..solvers.versions import ORTOOLS_VERSION
from .base import Limits, digest_detail, node_position, time_limit, wants
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
        metadata={"description": "auto or lp: multi-commodity flow is always solved by GLOP."},
    )
    detail = detail_field(DETAIL)


class MultiCommodityRequest(Schema):
    class Meta:
        unknown = RAISE

    arcs = ArcsField(required=True, metadata={"description": "Arcs in object or columnar form; capacity is shared "
                                                             "by all commodities, cost is per unit of any "
                                                             "commodity. lower is not supported."})
    nodes = NodesField(load_default=None, metadata={"description": "Optional node ids (or objects with id)."})
    commodities = fields.List(fields.Nested(CommoditySchema), required=True, validate=validate.Length(min=1))
    objective = fields.String(
        load_default="min-cost", validate=validate.OneOf(["min-cost", "max-throughput"]),
        metadata={"description": "min-cost (default): every demand met, at least total cost. max-throughput: "
                                 "the most total delivery (each commodity up to its demand), ties at least "
                                 "cost (solved lexicographically: delivery first, then cost)."},
    )
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
                                     "description": "Absolute tolerance of the flow checks (1e-6 relative to "
                                                    "the largest capacity or demand). Unbounded: the LP "
                                                    "check's {relative: 1e-6}."})
    primal_residual_relative = fields.Float(metadata={"description": "Unbounded: the start point's largest "
                                                                     "violation, relative to its row."})
    direction_residual = fields.Float(metadata={"description": "Unbounded: how far the improving direction "
                                                               "leaves a finite bound per unit step."})
    improvement_per_step = fields.Float(metadata={"description": "Unbounded: cost saved per unit step along "
                                                                 "the direction."})
    reason = fields.String()


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


class MultiCommodityUnbounded(Schema):
    commodity = NodeId(metadata={"description": "A commodity whose cost falls without limit."})
    arcs = fields.List(fields.Integer(), metadata={"description": "Arcs of a negative-cost cycle without "
                                                                  "capacity limit."})


class MultiCommodityResponse(Schema):
    status = fields.String(validate=validate.OneOf(["optimal", "infeasible", "unbounded", "time_limit"]))
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
    infeasibility = fields.Nested(MultiCommodityInfeasibility)
    unbounded = fields.Nested(MultiCommodityUnbounded)
    certificate = fields.Nested(MultiCommodityCertificate)
    digest = fields.String()
    engine = fields.Nested(EngineSchema)
    timing_ms = fields.Nested(TimingSchema)


@dataclass
class MultiCommodityProblem:
    network: Network
    commodity_ids: list
    commodities: Commodities
    objective: str
    options: dict
    digest: str

    @property
    def size(self) -> int:
        """Flow variables, arcs x commodities: a 180 KB body of 2,000 arcs and 1,000
        commodities is an LP of 2M columns (gigabytes while it is solved)."""
        return self.network.num_arcs * len(self.commodity_ids)


def parse(body, limits: Limits) -> MultiCommodityProblem:
    """Validate and normalise a multi-commodity request.

    Raises
    ------
    InputError
        Naming the offending field by JSON Pointer.
    ProblemTooLarge
        Arcs x commodities above ``limits.max_arcs``.
    """
    envelope = load_envelope(MultiCommodityRequest(), body)
    network, _ = read_network(envelope["arcs"], envelope["nodes"], max_arcs=limits.max_arcs,
                              max_nodes=limits.max_nodes, allow_lower=False, node_fields=())
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
    digest = problem_digest(
        "multicommodity", ORTOOLS_VERSION, network.nodes.ids, network.tail, network.head, network.capacity,
        network.unlimited, network.cost, commodities.sources, commodities.sinks, demands,
        [ids, objective], {"detail": digest_detail(options, DETAIL)},
    )
    return MultiCommodityProblem(network, ids, commodities, objective, options, digest)


def solve(problem: MultiCommodityProblem, limits: Limits) -> dict:
    net = problem.network
    cost = np.zeros(net.num_arcs) if net.cost is None else net.cost.astype(np.float64)
    flow_net = FlowNetwork(net.num_nodes, net.tail, net.head, net.capacity, net.unlimited, cost)
    solution = multicommodity_flow(flow_net, problem.commodities, objective=problem.objective,
                                   time_limit=time_limit(problem.options, limits))
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
        info = solution.infeasibility
        out["infeasibility"] = {
            "commodities": [ids[k] for k in info["short"].tolist()],
            "shortfall": info["shortfall"],
            "max_delivered": info["max_delivered"],
            "arcs": info["binding"],
            "cannot_meet_alone": [ids[k] for k in info["alone"].tolist()],
        }
    elif solution.status == "unbounded":
        out["unbounded"] = {"commodity": ids[solution.unbounded["commodity"]], "arcs": solution.unbounded["arcs"]}
    out["certificate"] = solution.certificate
    out["digest"] = problem.digest
    out["engine"] = solution.engine
    return out


class MultiCommodityKind:
    name = "multicommodity"
    #: GLOP stops itself at options.time_limit and answers status "time_limit".
    honours_time_limit = True
    summary = "Multi-commodity flow: shared capacities, min-cost or max-throughput, with capacity prices"
    request_schema = MultiCommodityRequest
    response_schema = MultiCommodityResponse
    example = "depots-multicommodity.json"
    parse = staticmethod(parse)
    solve = staticmethod(solve)


KIND = MultiCommodityKind()
