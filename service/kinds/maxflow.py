"""Max-flow: the most that can move from a source to a sink, with a minimum cut."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from marshmallow import RAISE, Schema, fields, validate

from ..deadline import Deadline
from ..drawing.maxflow import DRAWER
from ..model.arcs import Network, read_network
from ..model.digest import problem_digest
from ..model.schemas import (
    ArcsField,
    NodeId,
    NodesField,
    OptionsSchema,
    detail_field,
    load_envelope,
)
from ..solvers import maximum_flow
from ..solvers.versions import ORTOOLS_VERSION
from ..errors import InputError, ProblemTooLarge, FieldError
from .base import (
    Kind, Limits, digest_detail, graph_of, ids_of, node_position, problem_size, wants, without_arc_keys,
)
from .picture import network_picture, problem_ends
from .verify import max_flow_plans

DETAIL = ["flows", "cut"]


class MaxFlowOptions(OptionsSchema):
    detail = detail_field(DETAIL)


class MaxFlowRequest(Schema):
    class Meta:
        unknown = RAISE

    source = NodeId(required=True, metadata={"description": "Node the flow leaves."})
    sink = NodeId(required=True, metadata={"description": "Node the flow reaches."})
    arcs = ArcsField(required=True, metadata={"description": "Arcs in object or columnar form."})
    nodes = NodesField(load_default=None, metadata={"description": "Optional node ids (or objects with id)."})
    options = fields.Nested(MaxFlowOptions, load_default=lambda: MaxFlowOptions().load({}))


class MaxFlowQuery(Schema):
    """A max-flow question about a stored network (the arcs come from the store)."""

    class Meta:
        unknown = RAISE

    source = NodeId(required=True, metadata={"description": "Node the flow leaves."})
    sink = NodeId(required=True, metadata={"description": "Node the flow reaches."})
    options = fields.Nested(MaxFlowOptions, load_default=lambda: MaxFlowOptions().load({}))


class CutSchema(Schema):
    source_side = fields.List(NodeId(), metadata={"description": "Nodes on the source side of a minimum cut."})
    arcs = fields.List(fields.Integer(), metadata={"description": "Indices of the arcs leaving the source side."})
    capacity = fields.Float(metadata={"description": "Total capacity of those arcs; equals value."})


class MaxFlowCertificate(Schema):
    checked = fields.Boolean()
    flow_value = fields.Float(metadata={"description": "Net flow out of the source, recomputed from flows."})
    cut_capacity = fields.Float(metadata={"description": "Capacity of the returned cut, recomputed."})
    max_imbalance = fields.Float(metadata={"description": "Largest conservation violation at an inner node."})
    max_capacity_excess = fields.Float(metadata={"description": "Largest capacity violation on an arc."})
    tolerance = fields.Float(metadata={"description": "0: the answer was solved and checked exactly in integers. "
                                                      "Otherwise (options.engine 'lp') the largest absolute "
                                                      "slack any check allowed."})
    relative_tolerance = fields.Float(metadata={"description": "options.engine 'lp': each figure holds to this "
                                                               "times its own magnitude (an arc's capacity, a "
                                                               "node's throughput)."})
    decimal_scale = fields.Integer(metadata={"description": "Present when decimals were solved exactly as integers "
                                                            "scaled by this factor."})
    binary_exponent = fields.Integer(metadata={"description": "Present when fractions that are not decimals of "
                                                              "at most nine places were solved exactly on their "
                                                              "binary values, as integers times 2**-exponent."})
    unbounded_path_arcs = fields.Integer()


class EngineSchema(Schema):
    kind = fields.String(validate=validate.OneOf(["graph", "lp"]))
    solver = fields.String()
    version = fields.String()
    decimal_scale = fields.Integer()
    binary_exponent = fields.Integer()
    phases = fields.Integer(metadata={"description": "Present when sums beyond int64 were solved exactly in this "
                                                     "many scaling phases."})
    tolerance = fields.Float(metadata={"description": "LP engine: its relative tolerance."})


class TimingSchema(Schema):
    parse = fields.Float()
    solve = fields.Float()
    total = fields.Float()


class UnboundedPathSchema(Schema):
    arcs = fields.List(fields.Integer(), metadata={"description": "Arc indices of an s-t path without limits."})
    nodes = fields.List(NodeId())


class MaxFlowResponse(Schema):
    status = fields.String(validate=validate.OneOf(["optimal", "unbounded"]))
    value = fields.Float(allow_none=True, metadata={"description": "Maximum flow value; null when unbounded."})
    flows = fields.List(fields.Float(), metadata={"description": "Flow per arc, aligned with the request's arcs."})
    cut = fields.Nested(CutSchema)
    unbounded_path = fields.Nested(UnboundedPathSchema)
    certificate = fields.Nested(MaxFlowCertificate)
    digest = fields.String(metadata={"description": "sha256 of the normalised problem and answer-changing options."})
    engine = fields.Nested(EngineSchema)
    timing_ms = fields.Nested(TimingSchema)


@dataclass
class MaxFlowProblem:
    network: Network
    source: int
    sink: int
    options: dict
    digest: str

    @property
    def size(self) -> int:
        """Arcs: what the solve's time and memory grow with (see api/bounded)."""
        return self.network.num_arcs


def parse(body, limits: Limits) -> MaxFlowProblem:
    """Validate and normalise a max-flow request.

    Parameters
    ----------
    body : dict
        The decoded ``POST /v1/maxflow`` body.
    limits : Limits
        Size limits (a larger problem is a 413 naming the field).

    Returns
    -------
    MaxFlowProblem
        With its ``digest`` and ``options``.

    Raises
    ------
    InputError
        Naming the offending field by JSON Pointer.
    """
    envelope = load_envelope(MaxFlowRequest(), body)
    network, _ = read_network(envelope["arcs"], envelope["nodes"], max_arcs=limits.max_arcs,
                              max_nodes=limits.max_nodes, allow_lower=False)
    return _problem(network, envelope)


def from_network(network: Network, query, limits: Limits) -> MaxFlowProblem:
    """Build a max-flow problem from an already-normalised (stored) network.

    Parameters
    ----------
    network : Network
        A stored network, with any what-if changes already applied.
    query : dict
        ``source``, ``sink`` and optional ``options`` (as in a ``POST /v1/maxflow`` body).
    limits : Limits

    Returns
    -------
    MaxFlowProblem

    Raises
    ------
    InputError
        Naming the offending field of the query by JSON Pointer.
    """
    envelope = load_envelope(MaxFlowQuery(), query)
    if network.lower is not None:
        raise InputError.at("", "the stored network has lower bounds on some arcs; max-flow does not support them")
    if network.num_arcs > limits.max_arcs:
        raise ProblemTooLarge(FieldError("", f"the network has {network.num_arcs} arcs; the limit is {limits.max_arcs}"))
    return _problem(network, envelope)


def _problem(network: Network, envelope: dict) -> MaxFlowProblem:
    source = node_position(network.nodes, envelope["source"], "/source")
    sink = node_position(network.nodes, envelope["sink"], "/sink")
    if source == sink:
        raise InputError.at("/sink", "must differ from the source")
    options = envelope["options"]
    return MaxFlowProblem(network, source, sink, options, digest_of(network, source, sink, options))


def digest_of(network: Network, source: int, sink: int, options: dict) -> str:
    """The problem's digest: the result cache's key and the ``digest`` of the answer.

    Parameters
    ----------
    network : Network
    source, sink : int
        Node positions.
    options : dict

    Returns
    -------
    str
    """
    return problem_digest(
        "maxflow", ORTOOLS_VERSION, network.nodes.ids, network.tail, network.head, network.capacity,
        network.unlimited, [source, sink], {"engine": options["engine"], "detail": digest_detail(options, DETAIL)},
    )


def solve(problem: MaxFlowProblem, deadline: Deadline) -> dict:
    """Solve a parsed problem and build its response document.

    Parameters
    ----------
    problem : MaxFlowProblem
        From :func:`parse` or :func:`from_network`.
    deadline : Deadline
        When the solve must stop: made once per request or job.

    Returns
    -------
    dict
        ``status``, ``value``; flows and a minimum cut (or a path of unlimited arcs
        when unbounded), ``certificate``, ``digest`` and ``engine``.
    """
    net = problem.network
    solution, certificate = maximum_flow(graph_of(net), problem.source, problem.sink,
                                         engine=problem.options["engine"], deadline=deadline)
    out: dict = {"status": solution.status, "value": solution.value}
    if solution.status == "unbounded":
        path = solution.unbounded_path
        out["unbounded_path"] = {
            "arcs": path,
            "nodes": ids_of(net.nodes, np.append(net.tail[path], net.head[path[-1]])),
        }
    else:
        if wants(problem.options, "flows"):
            out["flows"] = solution.flows
        if wants(problem.options, "cut"):
            side = solution.source_side
            crossing = np.flatnonzero(side[net.tail] & ~side[net.head])
            out["cut"] = {
                "source_side": ids_of(net.nodes, np.flatnonzero(side)),
                "arcs": crossing,
                "capacity": certificate["cut_capacity"],
            }
    out["certificate"] = certificate
    out["digest"] = problem.digest
    out["engine"] = solution.engine
    return out


KIND = Kind(
    name="maxflow",
    summary="Maximum flow from a source to a sink, with a minimum cut",
    request_schema=MaxFlowRequest,
    response_schema=MaxFlowResponse,
    example="depots-maxflow.json",
    parse=parse,
    solve=solve,
    query_schema=MaxFlowQuery,
    from_network=from_network,
    dimacs="max",
    picture=network_picture(DRAWER, ends=problem_ends),
    verify=max_flow_plans(parse),
    size=problem_size,
    for_solver_process=without_arc_keys,
    examples=("depots-maxflow-columns.json", "depots-maxflow.dimacs", "verify-depots-maxflow.json"),
)
