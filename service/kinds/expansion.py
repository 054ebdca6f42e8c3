"""Capacity expansion: the cheapest capacity to add to today's lanes to carry a target."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from marshmallow import RAISE, Schema, fields, validate

from ..deadline import Deadline
from ..drawing.expansion import DRAWER
from ..errors import FieldError, InputError
from ..model.arccolumns import EXPANSION_FIELDS
from ..model.arcs import Network, read_network_with
from ..model.columns import MAX_REPORTED_ERRORS, number_column, number_value
from ..model.digest import problem_digest
from ..model.schemas import ArcsField, NodeId, NodesField, OptionsSchema, StrictNumber, detail_field, load_envelope
from ..solvers.expansion import Lanes, cheapest_expansion
from ..solvers.versions import ORTOOLS_VERSION
from .base import Kind, Limits, ids_of, node_position, posted_whole, wants, without_arc_keys
from .maxflow import TimingSchema
from .mincostflow import POTENTIAL_MEANING
from .picture import network_picture, lanes_ends

DETAIL = ["flows", "additions", "potentials", "cut"]


class ExpansionOptions(OptionsSchema):
    class Meta:
        unknown = RAISE
        exclude = ("engine",)  # always exact: min-cost flow, or CP-SAT with one-off charges

    detail = detail_field(DETAIL)
    gap = StrictNumber(minimum=0, load_default=0, metadata={
        "description": "With one-off charges: stop the search once the relative gap (cost - bound) / cost is at "
                       "most this (default 0: prove the plan optimal, or answer feasible at the time limit)."})


class ExpansionRequest(Schema):
    class Meta:
        unknown = RAISE

    source = NodeId(required=True, metadata={"description": "Node the flow leaves."})
    sink = NodeId(required=True, metadata={"description": "Node the flow reaches."})
    target = StrictNumber(required=True, minimum=0, metadata={
        "description": "Units that must move from the source to the sink."})
    arcs = ArcsField(required=True, metadata={
        "description": "Arcs in object or columnar form: capacity today (null = no limit) and, where a lane can be "
                       "widened, expand_cost (per unit added; absent or null = cannot be widened), expand_max (null "
                       "or absent = no limit) and expand_fixed (a one-off charge for widening it at all)."})
    nodes = NodesField(load_default=None, metadata={"description": "Optional node ids (or objects with id)."})
    options = fields.Nested(ExpansionOptions, load_default=lambda: ExpansionOptions().load({}))


class ExpansionQuery(Schema):
    """An expansion question about a stored network: its arcs carry capacity and the
    expand_* columns (stored with the network, or set by changes)."""

    class Meta:
        unknown = RAISE

    source = ExpansionRequest._declared_fields["source"]
    sink = ExpansionRequest._declared_fields["sink"]
    target = ExpansionRequest._declared_fields["target"]
    options = ExpansionRequest._declared_fields["options"]


#: Reused across requests: building a schema deep-copies its fields.
_REQUEST = ExpansionRequest()
_QUERY = ExpansionQuery()


class ExpansionCutSchema(Schema):
    source_side = fields.List(NodeId(), metadata={"description": "Nodes on the source side of the cut."})
    arcs = fields.List(fields.Integer(), metadata={"description": "Indices of the arcs leaving the source side."})
    capacity = fields.Float(metadata={"description": "Their capacity with every lane widened as far as it may be: "
                                                     "less than the target, so no plan exists."})


class ExpansionCertificate(Schema):
    checked = fields.Boolean()
    cost = fields.Float(metadata={"description": "The plan's cost, recomputed from the additions: sum(expand_cost * "
                                                 "addition) plus expand_fixed of every widened lane."})
    value = fields.Float(metadata={"description": "Units the flows carry from the source (the target), recomputed; "
                                                  "infeasible: the most full widening carries."})
    widened = fields.Integer(metadata={"description": "Lanes with an addition."})
    max_imbalance = fields.Float()
    max_capacity_excess = fields.Float(metadata={"description": "Largest excess of a flow over its widened capacity "
                                                                "(0)."})
    primal_cost = fields.Float(metadata={"description": "Per-unit charges: cost of the flow on the augmented "
                                                        "network (a parallel added-capacity arc per lane)."})
    dual_bound = fields.Float(metadata={"description": "Per-unit charges: the LP dual bound of the potentials on "
                                                       "the augmented network; equal to the cost, it proves the plan "
                                                       "optimal."})
    bound = fields.Float(metadata={"description": "One-off charges: the best proved lower bound on any plan's "
                                                  "cost (the larger of own_bound and solver_bound)."})
    own_bound = fields.Float(metadata={"description": "One-off charges: the optimum for per-unit charges alone, "
                                                      "proved by its potentials (one-off charges only add)."})
    solver_bound = fields.Float(allow_none=True, metadata={
        "description": "One-off charges: CP-SAT's own bound (its proof; not rechecked here)."})
    gap = fields.Float(metadata={"description": "Relative gap (cost - bound) / cost; 0 with per-unit charges."})
    gap_absolute = fields.Float()
    target = fields.Float()
    cut_capacity = fields.Float(metadata={"description": "Infeasible: the cut's fully widened capacity, recomputed."})
    shortfall = fields.Float(metadata={"description": "Infeasible: target minus cut_capacity (> 0)."})
    tolerance = fields.Float(metadata={"description": "0: exact integer arithmetic."})
    decimal_scale = fields.Integer(metadata={"description": "Present when decimals were solved exactly as integers: "
                                                            "the factor applied to capacities, expand_max and target."})
    cost_scale = fields.Integer(metadata={"description": "Likewise, the factor applied to expand_cost and "
                                                         "expand_fixed."})


class ExpansionEngineSchema(Schema):
    kind = fields.String(validate=validate.OneOf(["graph", "mip"]))
    solver = fields.String()
    version = fields.String()
    max_flow = fields.String(metadata={"description": "Infeasible: the solver of the fully widened maximum flow."})
    decimal_scale = fields.Integer()
    cost_scale = fields.Integer()


class ExpansionResponse(Schema):
    status = fields.String(validate=validate.OneOf(["optimal", "feasible", "infeasible"]), metadata={
        "description": "optimal: the cheapest plan (proved). feasible: one-off charges, and the time limit came "
                       "before the gap closed (see bound and gap). infeasible: even full widening cannot carry the "
                       "target (see cut)."})
    cost = fields.Float(allow_none=True, metadata={"description": "Cost of the plan; null when infeasible."})
    value = fields.Float(metadata={"description": "Units carried: the target; infeasible: the most that full "
                                                  "widening can carry."})
    target = fields.Float()
    additions = fields.List(fields.Float(), metadata={"description": "Capacity added per arc, aligned with the "
                                                                     "request's arcs."})
    widened = fields.List(fields.Integer(), metadata={"description": "Indices of the arcs with an addition."})
    flows = fields.List(fields.Float(), metadata={"description": "Flow per arc under the plan, aligned with arcs."})
    node_ids = fields.List(NodeId(), metadata={"description": "Node order of potentials."})
    potentials = fields.List(fields.Float(), metadata={"description": (
        "Per-unit charges only: " + POTENTIAL_MEANING + " Here costs are the expand_cost of the added capacity "
        "(today's capacity costs 0), so potential[sink] - potential[source] is the marginal cost of one more unit "
        "of target.")})
    bound = fields.Float(metadata={"description": "One-off charges: proved lower bound on the cheapest plan."})
    gap = fields.Float(metadata={"description": "One-off charges: relative gap (cost - bound) / cost."})
    cut = fields.Nested(ExpansionCutSchema)
    certificate = fields.Nested(ExpansionCertificate)
    digest = fields.String()
    engine = fields.Nested(ExpansionEngineSchema)
    timing_ms = fields.Nested(TimingSchema)


@dataclass
class ExpansionProblem:
    network: Network
    lanes: Lanes
    options: dict
    digest: str


def parse(body, limits: Limits) -> ExpansionProblem:
    """Validate and normalise an expansion request.

    Parameters
    ----------
    body : dict
        The decoded ``POST /v1/expansion`` body.
    limits : Limits
        Size limits (a larger problem is a 413 naming the field).

    Returns
    -------
    ExpansionProblem
        With its ``digest`` and ``options``.

    Raises
    ------
    InputError
        Naming the offending field by JSON Pointer (``/target`` below zero, a negative
        ``/arcs/3/expand_cost``, widening terms on a lane without ``expand_cost``).
    """
    envelope = load_envelope(_REQUEST, body)
    network, _, extra = read_network_with(envelope["arcs"], envelope["nodes"], max_arcs=limits.max_arcs,
                                          max_nodes=limits.max_nodes, allow_lower=False,
                                          arc_fields=EXPANSION_FIELDS)
    if network.cost is not None and network.cost.any():
        i = int(np.flatnonzero(network.cost)[0])
        where = f"/arcs/cost/{i}" if isinstance(envelope["arcs"], dict) else f"/arcs/{i}/cost"
        raise InputError.at(where, "expansion charges only for added capacity: give expand_cost, not cost")
    source = node_position(network.nodes, envelope["source"], "/source")
    sink = node_position(network.nodes, envelope["sink"], "/sink")
    if source == sink:
        raise InputError.at("/sink", "must differ from the source")
    target = number_value(envelope["target"], "/target", minimum=0)
    lanes = _lanes(network, extra, source, sink, target)
    options = envelope["options"]
    return ExpansionProblem(network, lanes, options, digest_of(network, lanes, options))


def from_network(network: Network, query, limits: Limits) -> ExpansionProblem:
    """An expansion question about a stored network, read as the same request posted whole.

    Parameters
    ----------
    network : Network
        The stored network (with its ``expand_*`` arc columns), what-if changes applied.
    query : dict
        ``source``, ``sink``, ``target`` and ``options``, as in a ``POST /v1/expansion``
        body; pointers in errors are relative to it.
    limits : Limits

    Returns
    -------
    ExpansionProblem
    """
    return parse(posted_whole(network, query, _QUERY, arc_fields=EXPANSION_FIELDS), limits)


def _lanes(network: Network, extra: dict, source: int, sink: int, target) -> Lanes:
    m = network.num_arcs
    cost_col = extra.get("expand_cost")
    if cost_col is None:
        widenable, expand_cost = np.zeros(m, dtype=bool), np.zeros(m, dtype=np.int64)
    else:
        checked = number_column(cost_col.values, cost_col.where, allow_null=True, minimum=0)
        widenable = np.ones(m, dtype=bool) if checked.null is None else ~checked.null
        expand_cost = checked.values
    max_col = extra.get("expand_max")
    if max_col is None:
        expand_max, free = np.zeros(m, dtype=np.int64), np.ones(m, dtype=bool)
    else:
        checked = number_column(max_col.values, max_col.where, allow_null=True, minimum=0)
        expand_max, free = checked.values, (np.zeros(m, bool) if checked.null is None else checked.null)
        _only_where_widenable(~free & ~widenable, max_col, "expand_max")
    fixed_col = extra.get("expand_fixed")
    expand_fixed = None
    if fixed_col is not None:
        expand_fixed = number_column(fixed_col.values, fixed_col.where, minimum=0).values
        _only_where_widenable((expand_fixed > 0) & ~widenable, fixed_col, "expand_fixed")
    expand_max = np.where(widenable & ~free, expand_max, 0)
    return Lanes(network.num_nodes, network.tail, network.head, network.capacity, network.unlimited, widenable,
                 np.where(widenable, expand_cost, 0), expand_max, widenable & free, expand_fixed, source, sink, target)


def _only_where_widenable(bad: np.ndarray, col, name: str) -> None:
    if bad.any():
        idx = np.flatnonzero(bad)[:MAX_REPORTED_ERRORS]
        raise InputError([FieldError(col.where(int(i)), f"{name} needs expand_cost on the same arc: a lane without "
                                                         "it cannot be widened (use expand_cost 0 for a lane with "
                                                         "only a one-off charge)") for i in idx])


def digest_of(network: Network, lanes: Lanes, options: dict) -> str:
    """The problem's digest: the result cache's key and the ``digest`` of the answer.

    Parameters
    ----------
    network : Network
    lanes : Lanes
        The lanes with their widening terms, source, sink and target.
    options : dict

    Returns
    -------
    str
    """
    return problem_digest(
        "expansion", ORTOOLS_VERSION, network.nodes.ids, lanes.tail, lanes.head, lanes.capacity, lanes.unlimited,
        lanes.widenable, lanes.expand_cost, lanes.expand_max, lanes.expand_unlimited, lanes.expand_fixed,
        [lanes.source, lanes.sink, lanes.target], {"detail": options.get("detail"), "gap": options["gap"]},
    )


def solve(problem: ExpansionProblem, deadline: Deadline) -> dict:
    """Solve a parsed problem and build its response document.

    Parameters
    ----------
    problem : ExpansionProblem
        From :func:`parse` or :func:`from_network`.
    deadline : Deadline
        When the solve must stop: made once per request or job.

    Returns
    -------
    dict
        ``status``, ``cost``, ``value``, ``target``; the widened lanes and their
        additions (or the cut a full widening cannot pass), ``certificate``, ``digest``.
    """
    options = problem.options
    solution, certificate = cheapest_expansion(problem.lanes, deadline=deadline,
                                               gap=float(options["gap"]))
    nodes = problem.network.nodes
    out: dict = {"status": solution.status, "cost": solution.cost, "value": solution.value,
                 "target": problem.lanes.target}
    if solution.status == "infeasible":
        if wants(options, "cut"):
            out["cut"] = {"source_side": ids_of(nodes, np.flatnonzero(solution.source_side)),
                          "arcs": solution.cut_arcs, "capacity": solution.cut_capacity}
    else:
        out["widened"] = np.flatnonzero(solution.additions)
        if wants(options, "additions"):
            out["additions"] = solution.additions
        if wants(options, "flows"):
            out["flows"] = solution.flows
        if solution.potentials is not None and wants(options, "potentials"):
            out["node_ids"] = nodes.ids
            out["potentials"] = solution.potentials
        if solution.bound is not None:
            out["bound"], out["gap"] = solution.bound, solution.gap
    out["certificate"] = certificate
    out["digest"] = problem.digest
    out["engine"] = solution.engine
    return out


KIND = Kind(
    name="expansion",
    summary="The cheapest capacity to add to the lanes so that a target can move",
    request_schema=ExpansionRequest,
    response_schema=ExpansionResponse,
    example="night-pallets-expansion.json",
    parse=parse,
    solve=solve,
    query_schema=ExpansionQuery,
    from_network=from_network,
    picture=network_picture(DRAWER, ends=lanes_ends),
    for_solver_process=without_arc_keys,
)
