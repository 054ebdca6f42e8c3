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

from ..deadline import Deadline
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
from ..model.schemas import load_envelope
from ..solvers.flowovertime import OverTimeSolution, max_by_horizon, min_cost, quickest
from ..solvers.timeexpanded import TimedNetwork
from ..solvers.versions import ORTOOLS_VERSION
from .base import Kind, Limits, ids_of, node_position, posted_whole, problem_size
from .flowovertime_schemas import THROUGH, FlowOverTimeQuery, FlowOverTimeRequest, FlowOverTimeResponse
from .picture import timed_picture

_REQUEST = FlowOverTimeRequest()
_QUERY = FlowOverTimeQuery()


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


def solve(problem: FlowOverTimeProblem, deadline: Deadline) -> dict:
    """Solve a parsed flow-over-time problem for its objective.

    Parameters
    ----------
    problem : FlowOverTimeProblem
        ``max-by-horizon`` (source to sink), ``quickest`` (``amount`` from source to sink) or
        ``min-cost`` (supplies and demands).
    deadline : Deadline
        Not passed on: these solvers take none.

    Returns
    -------
    dict
        The response document (:func:`answer`).
    """
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
    picture=timed_picture(DRAWER),
    per_period_capacity=True,
    size=problem_size,
)
