"""Checking a client's own plan: ``POST /v1/verify/{kind}``.

A kind whose plans can be checked declares it in its :class:`~service.kinds.base.Kind`
with ``verify=max_flow_plans(parse)`` or ``verify=min_cost_plans(parse)``, handing over
its own ``parse``; the route and ``GET /v1/kinds`` follow from that field.

The request is ``{"problem": <a solve request body>, "flows": [...]}``. The problem is
read exactly as the solve endpoint reads it (errors point under ``/problem``); the
flows must be one finite number per arc (errors point under ``/flows``). The checks
themselves are :mod:`service.solvers.verify`.

The min-cost flow problem is read here from the model's arrays (``nodes`` with
``supply``, ``arcs`` with ``capacity``, ``cost`` and ``lower``) so that the check does
not depend on the min-cost solver; the kind's own ``parse`` runs first, so verify
accepts exactly what ``POST /v1/mincostflow`` accepts.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import partial
from collections.abc import Callable
from typing import Any

import numpy as np
from marshmallow import EXCLUDE, RAISE, Schema, fields, validate

from ..deadline import Deadline
from ..errors import InputError
from ..model.arcs import Network, read_network
from ..model.columns import number_column
from ..model.schemas import ArcsField, NodesField, load_envelope
from ..solvers.verify import FORWARD, Verdict, verify_max_flow, verify_min_cost_flow
from .base import Limits, PlanVerifier, graph_of, ids_of
from .nested import under

class VerifyRequest(Schema):
    class Meta:
        unknown = RAISE

    problem = fields.Dict(required=True, metadata={
        "description": "The problem, exactly as the solve endpoint of this kind takes it."})
    flows = fields.List(fields.Float(), required=True, metadata={
        "description": "The client's flow on every arc, aligned with the problem's arcs."})


class PathStepSchema(Schema):
    arc = fields.Integer(metadata={"description": "Index of the arc in the problem's arcs."})
    direction = fields.String(validate=validate.OneOf(["forward", "backward"]), metadata={
        "description": "forward: push more flow along the arc; backward: take flow off it."})
    from_ = fields.Raw(data_key="from", metadata={"description": "Node the step leaves (in the step's direction)."})
    to = fields.Raw(metadata={"description": "Node the step reaches."})


class ViolationSchema(Schema):
    arc = fields.Integer(metadata={"description": "Arc index (capacity and lower-bound violations)."})
    node = fields.Raw(metadata={"description": "Node id (conservation violations)."})
    kind = fields.String(validate=validate.OneOf(["capacity", "lower", "conservation"]))
    excess = fields.Float(metadata={"description": "capacity: flow minus capacity; lower: lower bound minus "
                                                   "flow (the lower bound is 0 unless given). Always > 0."})
    imbalance = fields.Float(metadata={"description": "supply + inflow - outflow at the node (supply is 0 for "
                                                      "inner max-flow nodes): > 0 means flow is left over at the "
                                                      "node, < 0 that more leaves than arrives."})
    key = fields.String(metadata={"description": "The arc's key, when it has one."})


class VerifyCutSchema(Schema):
    source_side = fields.List(fields.Raw())
    arcs = fields.List(fields.Integer())
    capacity = fields.Float()


class VerifyCertificate(Schema):
    checked = fields.Boolean()
    proof = fields.String(validate=validate.OneOf(["cut", "augmenting-path", "potentials", "negative-cycle"]),
                          metadata={"description": "What the verdict rests on (checked again before answering)."})
    tolerance = fields.Float(metadata={"description": "0 for integer data and flows."})


class VerifyTiming(Schema):
    parse = fields.Float()
    solve = fields.Float()
    total = fields.Float()


class VerifyResponse(Schema):
    timing_ms = fields.Nested(VerifyTiming, metadata={"description": "Milliseconds spent reading and checking."})
    feasible = fields.Boolean(metadata={"description": "No bound or conservation violation."})
    optimal = fields.Boolean(metadata={"description": "Feasible and no better plan exists."})
    value = fields.Float(metadata={"description": "max-flow: the plan's net flow out of the source."})
    cost = fields.Float(metadata={"description": "min-cost flow: the plan's total cost."})
    violations = fields.List(fields.Nested(ViolationSchema), metadata={
        "description": "Every violation: arcs first by index, then nodes in node order (at most 10,000 listed)."})
    violation_count = fields.Integer(metadata={"description": "Total number of violations."})
    improving_path = fields.List(fields.Nested(PathStepSchema), metadata={
        "description": "max-flow, feasible but not maximum: an augmenting path with the fewest arcs, from the "
                       "source to the sink in the residual network of the plan."})
    improving_cycle = fields.List(fields.Nested(PathStepSchema), metadata={
        "description": "min-cost flow, feasible but not cheapest: a negative-cost cycle in the residual network "
                       "of the plan, in walking order."})
    gain = fields.Float(allow_none=True, metadata={
        "description": "max-flow: the value the path adds (its smallest residual capacity); min-cost flow: the "
                       "cost saved by pushing `amount` round the cycle. null when the path or cycle has no limit "
                       "(the problem is unbounded)."})
    amount = fields.Float(allow_none=True, metadata={"description": "Flow to push along the path or round the cycle."})
    unit_cost = fields.Float(metadata={"description": "min-cost flow: cost per unit pushed round the cycle (< 0)."})
    unbounded = fields.Boolean(metadata={"description": "Present and true when the improving path or cycle has no "
                                                        "limit: the problem itself is unbounded."})
    cut = fields.Nested(VerifyCutSchema, metadata={
        "description": "max-flow, optimal plan: a minimum cut whose capacity equals the plan's value."})
    node_ids = fields.List(fields.Raw(), metadata={"description": "Node order of `potentials`."})
    potentials = fields.List(fields.Float(), metadata={
        "description": "min-cost flow, optimal plan: potentials p with cost + p[from] - p[to] >= 0 on every arc "
                       "that can carry more and <= 0 on every arc that can carry less (the proof of optimality)."})
    certificate = fields.Nested(VerifyCertificate)


@dataclass
class VerifyProblem:
    """A client's plan with the problem it is for, as the checks read them.

    Attributes
    ----------
    network : Network
        The problem's network.
    flows : ndarray
        The client's flow on every arc.
    source, sink : int, optional
        Max-flow: the ends, as node positions.
    supply : ndarray, optional
        Min-cost flow: supply per node (demand negative).
    """

    network: Network
    flows: np.ndarray | None = None
    source: int | None = None
    sink: int | None = None
    supply: np.ndarray | None = None


def max_flow_plans(parse_problem: Callable[[Any, Limits], Any]) -> PlanVerifier:
    """The plan checks of max-flow, for :attr:`Kind.verify <service.kinds.base.Kind.verify>`.

    Parameters
    ----------
    parse_problem : callable
        The kind's own ``parse(body, limits)``: the problem is read exactly as the solve
        endpoint reads it, and its ``network``, ``source`` and ``sink`` are checked.

    Returns
    -------
    PlanVerifier
    """
    return PlanVerifier(partial(_parse_max_flow, parse_problem), check_max_flow)


def min_cost_plans(parse_problem: Callable[[Any, Limits], Any]) -> PlanVerifier:
    """The plan checks of min-cost flow, for :attr:`Kind.verify <service.kinds.base.Kind.verify>`.

    Parameters
    ----------
    parse_problem : callable
        The kind's own ``parse(body, limits)``, run first so that verify accepts exactly
        what the solve endpoint accepts; the network and supplies are then read from
        the model's arrays (:func:`read_min_cost`), not from the solver's problem.

    Returns
    -------
    PlanVerifier
    """
    return PlanVerifier(partial(_parse_min_cost, parse_problem), check_min_cost)


def _parse_max_flow(parse_problem, body, limits: Limits) -> VerifyProblem:
    envelope = load_envelope(_ENVELOPE, body)
    with under("/problem"):
        parsed = parse_problem(envelope["problem"], limits)
    return _with_flows(VerifyProblem(parsed.network, source=parsed.source, sink=parsed.sink), envelope)


def _parse_min_cost(parse_problem, body, limits: Limits) -> VerifyProblem:
    envelope = load_envelope(_ENVELOPE, body)
    with under("/problem"):
        parse_problem(envelope["problem"], limits)  # same acceptance as the solve endpoint
        network, supply = read_min_cost(envelope["problem"], limits)
    return _with_flows(VerifyProblem(network, supply=supply), envelope)


def _with_flows(problem: VerifyProblem, envelope: dict) -> VerifyProblem:
    """Raises :class:`InputError` at ``/flows`` when they are not one number per arc."""
    problem.flows = read_flows(envelope["flows"], problem.network.num_arcs)
    return problem


class _Envelope(Schema):
    class Meta:
        unknown = RAISE

    problem = fields.Raw(required=True)
    flows = fields.Raw(required=True)


_ENVELOPE = _Envelope()


def read_flows(raw, num_arcs: int) -> np.ndarray:
    """The client's flows as a numpy array, one finite number per arc.

    Parameters
    ----------
    raw : list
        ``flows`` as the request gives it.
    num_arcs : int
        How many arcs the problem has.

    Returns
    -------
    ndarray
        int64 for whole numbers, else float64.

    Raises
    ------
    InputError
        At ``/flows`` (not a list, wrong length) or ``/flows/<i>``.
    """
    if not isinstance(raw, list):
        raise InputError.at("/flows", "must be a list of numbers, one per arc")
    if len(raw) != num_arcs:
        raise InputError.at("/flows", f"has {len(raw)} entries; the problem has {num_arcs} arcs")
    return number_column(raw, lambda i: f"/flows/{i}").values


class _MinCostOptions(Schema):
    class Meta:
        unknown = EXCLUDE  # engine, detail, time_limit, cache: they do not change the check

    shortage = fields.String(load_default="reject", validate=validate.OneOf(["reject", "max-flow"]))


class _MinCostEnvelope(Schema):
    class Meta:
        unknown = RAISE

    nodes = NodesField(load_default=None)
    arcs = ArcsField(required=True)
    options = fields.Nested(_MinCostOptions, load_default=lambda: {"shortage": "reject"})


def read_min_cost(body, limits: Limits) -> tuple[Network, np.ndarray]:
    """A min-cost flow request as a Network and a supply per node (demand negative).

    Only ``options.shortage = "reject"`` (the default: every supply must ship) is
    checked; a plan for ``"max-flow"`` gets a 422 at ``/options/shortage``.

    Parameters
    ----------
    body : dict
        A ``POST /v1/mincostflow`` body.
    limits : Limits
        Size limits.

    Returns
    -------
    (Network, ndarray)
        The network and the supply per node in node order (int64, or float64 when
        a supply is not whole).
    """
    envelope = load_envelope(_MinCostEnvelope(), body)
    if envelope["options"]["shortage"] != "reject":
        raise InputError.at("/options/shortage", "verify checks plans under the default shortage 'reject' only")
    network, nodes = read_network(envelope["arcs"], envelope["nodes"], max_arcs=limits.max_arcs,
                                  max_nodes=limits.max_nodes)
    supply = np.zeros(network.num_nodes, dtype=np.int64)
    column = nodes.fields.get("supply")
    if column is not None:
        values = number_column(column.values, column.where).values
        if values.dtype.kind == "f":
            supply = supply.astype(np.float64)
        supply[: values.size] = values  # declared nodes come first in node order
    return network, supply


def check_max_flow(problem: VerifyProblem, deadline: Deadline) -> dict:
    """Check a max-flow plan and build the response document.

    Parameters
    ----------
    problem : VerifyProblem
        With ``source`` and ``sink``.
    deadline : Deadline
        Unused: the check is one breadth-first search (kept for the
        :class:`~service.kinds.base.PlanVerifier` signature).

    Returns
    -------
    dict
        ``feasible``, ``optimal``, ``value``, the violations, and an augmenting path or
        a minimum cut as the proof.
    """
    net = problem.network
    verdict = verify_max_flow(graph_of(net), problem.source, problem.sink, problem.flows)
    out = _verdict(net, verdict, "value")
    if verdict.steps is not None:
        out["improving_path"] = _steps(net, verdict.steps)
        _improvement(out, verdict, unit_cost=False)
        proof = "augmenting-path"
    elif verdict.optimal:
        out["cut"] = {"source_side": ids_of(net.nodes, np.flatnonzero(verdict.source_side)),
                      "arcs": verdict.cut_arcs, "capacity": verdict.cut_capacity}
        proof = "cut"
    else:
        return out
    return _certified(out, proof, verdict)


def check_min_cost(problem: VerifyProblem, deadline: Deadline) -> dict:
    """Check a min-cost flow plan and build the response document.

    Parameters
    ----------
    problem : VerifyProblem
        With ``supply``.
    deadline : Deadline
        Bounds the search for a negative-cost cycle.

    Returns
    -------
    dict
        ``feasible``, ``optimal``, ``cost``, the violations, and a negative-cost cycle
        or node potentials as the proof.
    """
    net = problem.network
    verdict = verify_min_cost_flow(graph_of(net), problem.supply, problem.flows, deadline=deadline)
    out = _verdict(net, verdict, "cost")
    if verdict.steps is not None:
        out["improving_cycle"] = _steps(net, verdict.steps)
        _improvement(out, verdict, unit_cost=True)
        proof = "negative-cycle"
    elif verdict.optimal:
        out["node_ids"] = net.nodes.ids
        out["potentials"] = verdict.potentials
        proof = "potentials"
    else:
        return out
    return _certified(out, proof, verdict)


def _verdict(net: Network, verdict: Verdict, objective: str) -> dict:
    """The fields every plan check answers: feasibility, optimality, the plan's value or cost, violations."""
    return {"feasible": verdict.feasible, "optimal": verdict.optimal, objective: verdict.objective,
            "violations": _violations(net, verdict), "violation_count": verdict.violation_count}


def _improvement(out: dict, verdict: Verdict, *, unit_cost: bool) -> None:
    """What pushing along the improving path or cycle gains (``unbounded`` when nothing limits it)."""
    out["gain"] = verdict.gain
    out["amount"] = verdict.amount
    if unit_cost:
        out["unit_cost"] = verdict.unit_cost
    if verdict.amount is None:
        out["unbounded"] = True


def _certified(out: dict, proof: str, verdict: Verdict) -> dict:
    out["certificate"] = {"checked": True, "proof": proof, "tolerance": verdict.tolerance}
    return out


def _direction(d: int) -> str:
    return "forward" if d == FORWARD else "backward"


def _steps(net: Network, steps: list) -> list:
    out = []
    for arc, d in steps:
        a, b = net.tail[arc], net.head[arc]
        if d != FORWARD:
            a, b = b, a
        out.append({"arc": arc, "direction": _direction(d), "from": net.nodes.ids[a], "to": net.nodes.ids[b]})
    return out


def _violations(net: Network, verdict: Verdict) -> list:
    out = []
    for arc, kind, excess in verdict.arc_violations:
        item = {"arc": arc, "kind": kind, "excess": excess}
        if net.keys is not None and net.keys[arc] is not None:
            item["key"] = net.keys[arc]
        out.append(item)
    for node, imbalance in verdict.node_violations:
        out.append({"node": net.nodes.ids[node], "kind": "conservation", "imbalance": imbalance})
    return out
