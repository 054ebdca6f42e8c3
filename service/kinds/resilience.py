"""Resilience: which single lane closure lowers the maximum flow, and by how much."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from marshmallow import RAISE, Schema, fields, validate

from ..deadline import Deadline
from ..drawing.resilience import DRAWER
from ..errors import InputError
from ..model.arcs import Network, read_network
from ..model.digest import problem_digest
from ..model.schemas import OptionsSchema, detail_field, load_envelope
from ..solvers.resilience import arc_closures
from ..solvers.versions import ORTOOLS_VERSION
from .base import Kind, Limits, ids_of, node_position, posted_whole, wants, without_arc_keys
from .maxflow import CutSchema, EngineSchema, MaxFlowCertificate, MaxFlowRequest, TimingSchema, UnboundedPathSchema
from .picture import network_picture, problem_ends

DETAIL = ["flows", "cut", "cuts"]


class ResilienceOptions(OptionsSchema):
    class Meta:
        unknown = RAISE
        exclude = ("engine",)  # always exact: integers, or decimals scaled

    detail = detail_field(DETAIL)


class ResilienceRequest(MaxFlowRequest):
    """A max-flow request, plus ``top``."""

    top = fields.Integer(strict=True, load_default=None, validate=validate.Range(min=1), metadata={
        "description": "How many closures to list, worst first; default every closure that lowers the value."})
    options = fields.Nested(ResilienceOptions, load_default=lambda: ResilienceOptions().load({}))


class ResilienceQuery(Schema):
    """A resilience question about a stored network (the arcs come from the store)."""

    class Meta:
        unknown = RAISE

    source = ResilienceRequest._declared_fields["source"]
    sink = ResilienceRequest._declared_fields["sink"]
    top = ResilienceRequest._declared_fields["top"]
    options = ResilienceRequest._declared_fields["options"]


#: Reused across requests: building a schema deep-copies its fields.
_REQUEST = ResilienceRequest()
_QUERY = ResilienceQuery()


class FailureSchema(Schema):
    arc = fields.Integer(metadata={"description": "Index of the closed arc in the request's arcs."})
    key = fields.String(allow_none=True, metadata={"description": "The arc's key label, if it has one."})
    value_without = fields.Float(metadata={"description": "Maximum flow with this arc closed."})
    loss = fields.Float(metadata={"description": "value - value_without (> 0): the least flow this arc carries in "
                                                 "any maximum flow."})


class ClosureCutSchema(Schema):
    arc = fields.Integer(metadata={"description": "The closed arc (as in failures)."})
    arcs = fields.List(fields.Integer(), metadata={"description": "Arcs of an s-t cut of the network without the "
                                                                  "closed arc (indices into the request's arcs)."})
    capacity = fields.Float(metadata={"description": "Their total capacity: equals value_without, which no flow "
                                                     "without the arc can exceed."})


class ResilienceCertificate(MaxFlowCertificate):
    flows_checked = fields.Integer(metadata={"description": "Maximum flows checked as witnesses: every arc not "
                                                            "listed carries no flow in one of them (so closing it "
                                                            "loses nothing), and each listed arc carries exactly "
                                                            "its loss in one (so value_without is reachable)."})
    cuts_checked = fields.Integer(metadata={"description": "Closures whose value_without was checked against a cut "
                                                           "of the network without the arc (all listed ones)."})
    closures_checked = fields.Integer(metadata={"description": "Arcs whose closure was accounted for (all)."})
    cuts = fields.List(fields.Nested(ClosureCutSchema), metadata={
        "description": "Aligned with failures (options.detail 'cuts'): the checked cut of each."})


class ResilienceResponse(Schema):
    status = fields.String(validate=validate.OneOf(["optimal", "unbounded"]), metadata={
        "description": "optimal; unbounded: a path without capacity limits joins the source to the sink (see "
                       "unbounded_path) and no closures are listed."})
    value = fields.Float(allow_none=True, metadata={"description": "Maximum flow with every lane open."})
    failures = fields.List(fields.Nested(FailureSchema), metadata={
        "description": "Every arc whose closure lowers the value, worst first (ties by arc index); the first top "
                       "when top is given."})
    failures_total = fields.Integer(metadata={"description": "How many closures lower the value (before top)."})
    flows = fields.List(fields.Float(), metadata={"description": "A maximum flow with every lane open, aligned with "
                                                                 "arcs."})
    cut = fields.Nested(CutSchema, metadata={"description": "A minimum cut with every lane open."})
    unbounded_path = fields.Nested(UnboundedPathSchema)
    certificate = fields.Nested(ResilienceCertificate)
    digest = fields.String()
    engine = fields.Nested(EngineSchema)
    timing_ms = fields.Nested(TimingSchema)


@dataclass
class ResilienceProblem:
    network: Network
    source: int
    sink: int
    top: int | None
    keys: list | None  # beside the network: solver processes get networks without their keys
    options: dict
    digest: str


def parse(body, limits: Limits) -> ResilienceProblem:
    """Validate and normalise a resilience request.

    Parameters
    ----------
    body : dict
        The decoded ``POST /v1/resilience`` body.
    limits : Limits
        Size limits (a larger problem is a 413 naming the field).

    Returns
    -------
    ResilienceProblem
        With its ``digest`` and ``options``.

    Raises
    ------
    InputError
        Naming the offending field by JSON Pointer (``/top`` below 1, ...).
    """
    if isinstance(body, dict) and type(body.get("top")) is bool:
        raise InputError.at("/top", "must be an integer")
    envelope = load_envelope(_REQUEST, body)
    network, _ = read_network(envelope["arcs"], envelope["nodes"], max_arcs=limits.max_arcs,
                              max_nodes=limits.max_nodes, allow_lower=False)
    source = node_position(network.nodes, envelope["source"], "/source")
    sink = node_position(network.nodes, envelope["sink"], "/sink")
    if source == sink:
        raise InputError.at("/sink", "must differ from the source")
    options, top = envelope["options"], envelope["top"]
    return ResilienceProblem(network, source, sink, top, network.keys, options,
                             digest_of(network, source, sink, top, options))


def from_network(network: Network, query, limits: Limits) -> ResilienceProblem:
    """A resilience question about a stored network, read as the same request posted whole.

    Parameters
    ----------
    network : Network
        The stored network, what-if changes applied.
    query : dict
        ``source``, ``sink``, ``top`` and ``options``, as in a ``POST /v1/resilience``
        body; pointers in errors are relative to it.
    limits : Limits

    Returns
    -------
    ResilienceProblem
    """
    return parse(posted_whole(network, query, _QUERY), limits)


def digest_of(network: Network, source: int, sink: int, top, options: dict) -> str:
    """The problem's digest: the result cache's key and the ``digest`` of the answer.

    Parameters
    ----------
    network : Network
        With its arc keys (the answer names closed arcs by them).
    source, sink : int
        Node positions.
    top : int or None
        How many closures are listed.
    options : dict

    Returns
    -------
    str
    """
    return problem_digest(
        "resilience", ORTOOLS_VERSION, network.nodes.ids, network.tail, network.head, network.capacity,
        network.unlimited, network.keys, [source, sink, top], {"detail": options.get("detail")},
    )


def solve(problem: ResilienceProblem, deadline: Deadline) -> dict:
    """Solve a parsed problem and build its response document.

    Parameters
    ----------
    problem : ResilienceProblem
        From :func:`parse` or :func:`from_network`.
    deadline : Deadline
        When the solve must stop: made once per request or job.

    Returns
    -------
    dict
        ``status``, ``value``; the closures that lower the value, worst first (or a
        path of unlimited arcs when unbounded), ``certificate``, ``digest``.
    """
    net, options = problem.network, problem.options
    solution, certificate = arc_closures(net.num_nodes, net.tail, net.head, net.capacity, net.unlimited,
                                         problem.source, problem.sink, deadline=deadline)
    out: dict = {"status": solution.status, "value": solution.value}
    if solution.status == "unbounded":
        path = solution.unbounded_path
        out["unbounded_path"] = {"arcs": path, "nodes": ids_of(net.nodes, np.append(net.tail[path], net.head[path[-1]]))}
    else:
        shown = solution.failing.size if problem.top is None else min(problem.top, solution.failing.size)
        arcs = solution.failing[:shown].tolist()
        without = solution.value_without[:shown].tolist()
        keys = problem.keys
        out["failures"] = [{"arc": a, "key": None if keys is None else keys[a], "value_without": v, "loss": loss}
                           for a, v, loss in zip(arcs, without, solution.loss[:shown].tolist())]
        out["failures_total"] = int(solution.failing.size)
        if wants(options, "flows"):
            out["flows"] = solution.flows
        if wants(options, "cut"):
            side = solution.source_side
            out["cut"] = {"source_side": ids_of(net.nodes, np.flatnonzero(side)),
                          "arcs": np.flatnonzero(side[net.tail] & ~side[net.head]),
                          "capacity": certificate["cut_capacity"]}
        if wants(options, "cuts"):
            certificate["cuts"] = [{"arc": a, "arcs": cut, "capacity": v}
                                   for a, cut, v in zip(arcs, solution.cuts[:shown], without)]
    out["certificate"] = certificate
    out["digest"] = problem.digest
    out["engine"] = solution.engine
    return out


KIND = Kind(
    name="resilience",
    summary="Which single lane closure lowers the maximum flow most, with each loss checked by a cut",
    request_schema=ResilienceRequest,
    response_schema=ResilienceResponse,
    example="night-pallets-resilience.json",
    parse=parse,
    solve=solve,
    query_schema=ResilienceQuery,
    from_network=from_network,
    picture=network_picture(DRAWER, ends=problem_ends),
    for_solver_process=without_arc_keys,
)
