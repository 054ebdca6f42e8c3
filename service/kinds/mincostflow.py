"""Min-cost flow: move every node's supply to the demand at least cost, with potentials."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from marshmallow import RAISE, Schema, fields, validate

from ..deadline import Deadline
from ..drawing.mincostflow import DRAWER
from ..errors import FieldError, InputError, ProblemTooLarge
from ..model.arcs import Network, read_network
from ..model.columns import number_column
from ..model.digest import problem_digest
from ..model.ids import IdColumn, lookalike, shown_id
from ..model.nodes import read_nodes
from ..model.schemas import ArcsField, NodeId, NodesField, OptionsSchema, detail_field, load_envelope
from ..solvers.mincost import imbalance, min_cost_flow
from ..solvers.versions import ORTOOLS_VERSION
from .base import Kind, Limits, digest_detail, graph_of, ids_of, problem_size, wants, without_arc_keys
from .maxflow import EngineSchema, TimingSchema
from .picture import network_picture, problem_supply
from .verify import min_cost_plans

DETAIL = ["flows", "potentials", "reduced_costs"]
DEFAULT_DETAIL = ("flows", "potentials")

POTENTIAL_MEANING = (
    "Node potentials: the duals of flow conservation, one per node, aligned with node_ids. Sign convention: the "
    "reduced cost of an arc is cost + potential[from] - potential[to]; an arc with flow strictly between its "
    "bounds has reduced cost 0, one at its lower bound >= 0, one at its capacity <= 0. A potential is a price per "
    "unit at the node: it rises along every arc that carries flow by that arc's cost, so potential[j] - "
    "potential[i] is the marginal cost of one more unit of supply at i delivered as one more unit of demand at "
    "j (equivalently, one more unit of demand at a node costs its potential, relative to where the extra unit "
    "comes from). Potentials are determined up to a constant on each connected part of the network; they are "
    "normalised so that the smallest is 0. Exact for integer data; for decimals solved by exact scaling, "
    "divided back by the cost scale.")


class MinCostFlowOptions(OptionsSchema):
    detail = detail_field(DETAIL)
    shortage = fields.String(
        load_default="reject", validate=validate.OneOf(["reject", "max-flow"]),
        metadata={"description": "reject (default): supplies must balance the demands and all must ship; an "
                                 "unbalanced problem is a 422 saying by how much. max-flow: ship as much as the "
                                 "network allows from supply to demand nodes, at least cost among the largest "
                                 "shipments; the response reports shipped and the unmet part per node."})


class MinCostFlowRequest(Schema):
    class Meta:
        unknown = RAISE

    nodes = NodesField(load_default=None, metadata={
        "description": "Nodes with their supply: [{\"id\": \"dc-east\", \"supply\": 120}, ...] (positive supply, "
                       "negative demand, missing = 0), or columns {\"id\": [...], \"supply\": [...]}."})
    arcs = ArcsField(required=True, metadata={"description": "Arcs (object or columnar form) with cost, optional "
                                                             "lower bound and capacity (null = no limit)."})
    options = fields.Nested(MinCostFlowOptions, load_default=lambda: MinCostFlowOptions().load({}))


class MinCostFlowQuery(Schema):
    """A min-cost query against a stored network (see :func:`from_network`)."""

    class Meta:
        unknown = RAISE

    supplies = fields.Raw(load_default=None, metadata={
        "description": "Supplies for this query, in the nodes form: [{\"id\": \"dc-east\", \"supply\": 120}, ...] "
                       "(or columns {\"id\": [...], \"supply\": [...]}); ids must be nodes of the stored network; "
                       "nodes not listed have supply 0."})
    changes = fields.Raw(load_default=None, metadata={
        "description": "Arc changes; applied by the stored-network layer before the query is built."})
    options = fields.Nested(MinCostFlowOptions, load_default=lambda: MinCostFlowOptions().load({}))


#: Reused across requests: building a schema deep-copies its fields.
_REQUEST = MinCostFlowRequest()
_QUERY = MinCostFlowQuery()


class CertificateSchema(Schema):
    checked = fields.Boolean()
    primal_cost = fields.Float(metadata={"description": "Cost of the returned flows, recomputed."})
    dual_bound = fields.Float(metadata={"description": "LP dual objective of the potentials: -sum(supply * p) + "
                                                       "sum(lower * max(rc, 0)) - sum(capacity * max(-rc, 0))."})
    gap = fields.Float(metadata={"description": "primal_cost - dual_bound; 0 proves the flows optimal."})
    max_imbalance = fields.Float()
    max_capacity_excess = fields.Float()
    slackness_violations = fields.Integer(metadata={"description": "Arcs whose reduced cost contradicts their "
                                                                   "flow (always 0 in a 200)."})
    shipped_bound = fields.Float(metadata={"description": "max-flow mode: capacity of a cut proving shipped "
                                                          "maximum."})
    net_supply = fields.Float()
    outgoing_capacity = fields.Float()
    cycle_cost = fields.Float(metadata={"description": "Unbounded: the cost of one trip round the negative cycle."})
    cycle_arcs = fields.Integer(metadata={"description": "Unbounded: the number of arcs on that cycle."})
    tolerance = fields.Float(metadata={"description": "0: solved and checked exactly in integers. Otherwise "
                                                      "(LP engine) the largest absolute slack any check allowed."})
    relative_tolerance = fields.Float(metadata={"description": "LP engine: each figure holds to this times its own "
                                                               "magnitude (an arc's bounds, a node's throughput "
                                                               "and supply, the terms of the two objectives)."})
    decimal_scale = fields.Integer(metadata={"description": "Present when decimals were solved exactly as integers: "
                                                            "the factor applied to capacities, lower bounds and "
                                                            "supplies."})
    cost_scale = fields.Integer(metadata={"description": "Likewise, the factor applied to costs."})
    quantity_factor = fields.Integer(metadata={"description": "Present when capacities, lower bounds and supplies "
                                                              "were divided by this common factor to fit the exact "
                                                              "solver (an equivalent problem)."})
    cost_factor = fields.Integer(metadata={"description": "Likewise, the common factor the costs were divided by."})


class MinCostEngineSchema(EngineSchema):
    cost_scale = fields.Integer(metadata={"description": "Factor applied to costs for exact scaling."})
    quantity_factor = fields.Integer()
    cost_factor = fields.Integer()


class InfeasibilitySchema(Schema):
    nodes = fields.List(NodeId(), metadata={"description": "A node set that cannot send out what it must."})
    net_supply = fields.Float(metadata={
        "description": "What must leave the set: its net supply plus the lower bounds of the arcs entering it (in "
                       "max-flow mode supplies are optional and only lower bounds count). With side 'demand', "
                       "what must enter it."})
    outgoing_capacity = fields.Float(metadata={
        "description": "The most that can leave: capacities of the arcs leaving the set (in max-flow mode plus the "
                       "demand the set can absorb). Always less than net_supply."})
    arcs = fields.List(fields.Integer(), metadata={"description": "Indices of the arcs leaving the set (entering "
                                                                  "it for side 'demand')."})
    side = fields.String(validate=validate.OneOf(["supply", "demand"]))


class NegativeCycleSchema(Schema):
    arcs = fields.List(fields.Integer(), metadata={"description": "Arc indices of a cycle without capacity limits."})
    nodes = fields.List(NodeId())
    cost = fields.Float(metadata={"description": "Cost per unit sent around the cycle (negative)."})


class MinCostFlowResponse(Schema):
    status = fields.String(validate=validate.OneOf(["optimal", "infeasible", "unbounded"]))
    cost = fields.Float(allow_none=True, metadata={"description": "Total cost sum(cost * flow); null unless optimal."})
    shipped = fields.Float(allow_none=True, metadata={"description": "Units moved from supply to demand nodes."})
    flows = fields.List(fields.Float(), metadata={"description": "Flow per arc, aligned with the request's arcs, in "
                                                                 "the caller's terms (lower bounds included)."})
    node_ids = fields.List(NodeId(), metadata={"description": "Node order of the node-level arrays."})
    potentials = fields.List(fields.Float(), metadata={"description": POTENTIAL_MEANING})
    reduced_costs = fields.List(fields.Float(), metadata={
        "description": "Per arc: cost + potential[from] - potential[to] (options.detail 'reduced_costs')."})
    unmet = fields.List(fields.Float(), metadata={
        "description": "max-flow mode: per node (aligned with node_ids), the part of its supply (positive) or "
                       "demand (negative) that was not shipped."})
    infeasibility = fields.Nested(InfeasibilitySchema)
    negative_cycle = fields.Nested(NegativeCycleSchema)
    certificate = fields.Nested(CertificateSchema)
    digest = fields.String()
    engine = fields.Nested(MinCostEngineSchema)
    timing_ms = fields.Nested(TimingSchema)


@dataclass
class MinCostFlowProblem:
    network: Network
    supply: np.ndarray
    options: dict
    digest: str

    @property
    def size(self) -> int:
        """Arcs: what the solve's time and memory grow with (see api/bounded)."""
        return self.network.num_arcs


def parse(body, limits: Limits) -> MinCostFlowProblem:
    """Validate and normalise a min-cost flow request.

    Parameters
    ----------
    body : dict
        The decoded ``POST /v1/mincostflow`` body.
    limits : Limits
        Size limits (a larger problem is a 413 naming the field).

    Returns
    -------
    MinCostFlowProblem
        With its ``digest`` and ``options``.

    Raises
    ------
    InputError
        Naming the offending field by JSON Pointer (unbalanced supplies: ``/nodes``).
    """
    envelope = load_envelope(_REQUEST, body)
    network, nodes = read_network(envelope["arcs"], envelope["nodes"], max_arcs=limits.max_arcs,
                                  max_nodes=limits.max_nodes)
    supply = np.zeros(network.num_nodes, dtype=np.int64)
    column = nodes.fields.get("supply")
    if column is not None and column.values:
        values = number_column(column.values, column.where).values
        supply = _place(supply, np.arange(values.size), values)
    return _problem(network, supply, envelope["options"])


def from_network(network: Network, query, limits: Limits) -> MinCostFlowProblem:
    """Build a problem from a stored, already normalised network and a query.

    Parameters
    ----------
    network : Network
        As built by :func:`service.model.arcs.build_network` (arcs are not re-read).
    query : dict
        ``{"supplies": [{"id": ..., "supply": ...}, ...], "options": {...}}``; the
        supplies may also be columns ``{"id": [...], "supply": [...]}``. Pointers in
        errors are relative to the query body (``/supplies/3/id``).
    limits : Limits

    Returns
    -------
    MinCostFlowProblem
    """
    envelope = load_envelope(_QUERY, query)
    _check_size(network, limits)
    supply = np.zeros(network.num_nodes, dtype=np.int64)
    raw = read_nodes(envelope["supplies"], extra_fields=("supply",), base="/supplies")
    if raw.ids.values:
        index = _positions(network, raw.ids)
        column = raw.fields.get("supply")
        if column is not None:
            values = number_column(column.values, column.where).values
            supply = _place(supply, index, values)
    return _problem(network, supply, envelope["options"])


def _positions(network: Network, ids: IdColumn) -> np.ndarray:
    """Node indices of the given ids; unknown or repeated ids are input errors."""
    nodes = network.nodes
    lookup = nodes.lookup if nodes.lookup is not None else dict(zip(nodes.ids, range(len(nodes.ids))))
    index = np.fromiter((lookup.get(v, -1) if type(v) is nodes.kind else -1 for v in ids.values),
                        dtype=np.int64, count=len(ids.values))
    if (index < 0).any():
        i = int(np.flatnonzero(index < 0)[0])
        raise InputError.at(ids.where(i), f"unknown node {shown_id(ids.values[i])}: it is not in the stored "
                                          f"network{lookalike(ids.values[i], nodes.ids)}")
    if np.unique(index).size < index.size:
        seen = set()
        for i, v in enumerate(index.tolist()):
            if v in seen:
                raise InputError.at(ids.where(i), f"duplicate node id {ids.values[i]!r}")
            seen.add(v)
    return index


def _place(supply: np.ndarray, index: np.ndarray, values: np.ndarray) -> np.ndarray:
    out = supply.astype(values.dtype) if values.dtype.kind == "f" else supply
    out[index] = values
    return out


def _check_size(network: Network, limits: Limits) -> None:
    if network.num_nodes > limits.max_nodes:
        raise ProblemTooLarge(FieldError("/nodes", f"has {network.num_nodes} nodes; the limit is {limits.max_nodes}"))


def _problem(network: Network, supply: np.ndarray, options: dict) -> MinCostFlowProblem:
    if options["shortage"] == "reject":
        excess = imbalance(supply)
        if excess != 0:
            more, less, amount = ("supply", "demand", excess) if excess > 0 else ("demand", "supply", -excess)
            raise InputError(FieldError(
                "/nodes", f"supplies and demands do not balance: total {more} exceeds total {less} by {amount:g} "
                          "(fix the supplies, or set options.shortage to 'max-flow')"))
    return MinCostFlowProblem(network, supply, options, digest_of(network, supply, options))


def digest_of(network: Network, supply: np.ndarray, options: dict) -> str:
    """The problem's digest: the result cache's key and the ``digest`` of the answer.

    Parameters
    ----------
    network : Network
    supply : ndarray
        Per node (demand negative).
    options : dict

    Returns
    -------
    str
    """
    return problem_digest(
        "mincostflow", ORTOOLS_VERSION, network.nodes.ids, network.tail, network.head, network.capacity,
        network.unlimited, network.cost, network.lower, supply,
        {"engine": options["engine"], "detail": digest_detail(options, DEFAULT_DETAIL),
         "shortage": options["shortage"]},
    )


def _wants(options: dict, part: str) -> bool:
    if options.get("detail") is None:
        return part in DEFAULT_DETAIL
    return wants(options, part)


def solve(problem: MinCostFlowProblem, deadline: Deadline) -> dict:
    """Solve a parsed problem and build its response document.

    Parameters
    ----------
    problem : MinCostFlowProblem
        From :func:`parse` or :func:`from_network`.
    deadline : Deadline
        When the solve must stop: made once per request or job.

    Returns
    -------
    dict
        ``status``, ``cost``, ``shipped``; flows, potentials and reduced costs
        (optimal), or a proof set (infeasible) or a negative cycle (unbounded);
        ``certificate``, ``digest`` and ``engine``.
    """
    net = problem.network
    options = problem.options
    solution, certificate = min_cost_flow(graph_of(net), problem.supply, shortage=options["shortage"],
                                          engine=options["engine"], deadline=deadline)
    out: dict = {"status": solution.status, "cost": solution.cost, "shipped": solution.shipped}
    if solution.status == "optimal":
        if _wants(options, "flows"):
            out["flows"] = solution.flows
        out["node_ids"] = net.nodes.ids
        if _wants(options, "potentials"):
            out["potentials"] = solution.potentials
        if _wants(options, "reduced_costs"):
            out["reduced_costs"] = solution.reduced_costs
        if solution.unmet is not None:
            out["unmet"] = solution.unmet
    elif solution.status == "infeasible":
        proof = solution.infeasibility
        out["infeasibility"] = {
            "nodes": ids_of(net.nodes, np.flatnonzero(proof["members"])),
            "net_supply": proof["net_supply"],
            "outgoing_capacity": proof["outgoing_capacity"],
            "arcs": proof["arcs"],
            "side": proof["side"],
        }
    else:
        cycle = solution.negative_cycle
        out["negative_cycle"] = {"arcs": cycle, "nodes": ids_of(net.nodes, net.tail[cycle]),
                                 "cost": solution.extra["cycle_cost"]}
    out["certificate"] = certificate
    out["digest"] = problem.digest
    out["engine"] = solution.engine
    return out


KIND = Kind(
    name="mincostflow",
    summary="Minimum-cost flow from supplies to demands, with node potentials and proofs",
    request_schema=MinCostFlowRequest,
    response_schema=MinCostFlowResponse,
    example="depots-mincostflow.json",
    parse=parse,
    solve=solve,
    query_schema=MinCostFlowQuery,
    from_network=from_network,
    dimacs="min",
    picture=network_picture(DRAWER, supply=problem_supply),
    verify=min_cost_plans(parse),
    size=problem_size,
    for_solver_process=without_arc_keys,
    examples=("verify-depots-mincostflow.json",),
)
