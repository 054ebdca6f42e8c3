"""Multi-commodity flow: commodities with their own source, sink and demand share the arcs."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..deadline import Deadline
from ..errors import FieldError, InputError, ProblemTooLarge
from ..model.arcs import Network, read_network
from ..model.digest import problem_digest
from ..model.schemas import load_envelope
from ..solvers.multicommodity import Commodities, multicommodity_flow
from ..solvers.graph import Graph
from ..solvers.multicommodity_whole import whole_unit_flow
from ..solvers.versions import ORTOOLS_VERSION
from ..solvers.whole_model import whole_data_issue
from . import progress
from .base import Kind, Limits, digest_detail, node_position, problem_size, wants, without_arc_keys
from .multicommodity_schemas import DETAIL, MultiCommodityQuery, MultiCommodityRequest, MultiCommodityResponse

#: Reused across requests: building a schema deep-copies its fields.
_REQUEST = MultiCommodityRequest()
_QUERY = MultiCommodityQuery()


@dataclass
class MultiCommodityProblem:
    network: Network
    commodity_ids: list
    commodities: Commodities
    objective: str
    options: dict
    digest: str

    @property
    def whole(self) -> bool:
        """Whether the flows must be whole units (:func:`whole_units` of the options)."""
        return whole_units(self.options)

    @property
    def size(self) -> int:
        """Flow variables, arcs x commodities, whole units or not: a 180 KB body of 2,000
        arcs and 1,000 commodities is an LP of 2M columns (gigabytes while it is solved)."""
        return self.network.num_arcs * len(self.commodity_ids)


def whole_units(options: dict) -> bool:
    """Whether ``options`` ask for whole units: ``integral``, or ``single_path`` (each demand whole on one path)."""
    return bool(options.get("integral")) or bool(options.get("single_path"))


def parse(body, limits: Limits) -> MultiCommodityProblem:
    """Validate and normalise a multi-commodity request.

    Raises
    ------
    InputError
        Naming the offending field by JSON Pointer.
    ProblemTooLarge
        Arcs x commodities above ``limits.max_arcs``.
    """
    envelope = load_envelope(_REQUEST, body)
    _check_options(envelope["options"])
    network, _ = read_network(envelope["arcs"], envelope["nodes"], max_arcs=limits.max_arcs,
                              max_nodes=limits.max_nodes, allow_lower=False, node_fields=())
    raw = envelope["arcs"]
    return _problem(network, envelope, limits,
                    lambda i, name: f"/arcs/{name}/{i}" if isinstance(raw, dict) else f"/arcs/{i}/{name}")


def from_network(network: Network, query, limits: Limits) -> MultiCommodityProblem:
    """Build a problem from a stored, already normalised network and a query.

    Parameters
    ----------
    query : dict
        ``{"commodities": [...], "objective": ..., "options": {...}}``. Pointers in
        errors are relative to the query body; a stored arc that whole units cannot
        take is named by its index, at the option that asked for whole units.
    """
    envelope = load_envelope(_QUERY, query)
    options = envelope["options"]
    _check_options(options)
    if network.lower is not None:
        raise InputError.at("", "the stored network has lower bounds, which multi-commodity flow does not support")
    asked = "/options/single_path" if options.get("single_path") else "/options/integral"
    return _problem(network, envelope, limits, lambda i, name: asked, stored=True)


def _check_options(options: dict) -> None:
    """Options that contradict each other, each named by its own pointer."""
    errors = []
    if options.get("single_path") and options.get("integral") is False:
        errors.append(FieldError("/options/integral", "single_path plans are whole units: leave integral out or "
                                                      "set it to true"))
    if whole_units(options) and options.get("engine") == "lp":
        errors.append(FieldError("/options/engine", "must be auto with integral or single_path (whole units are "
                                                    "solved by the MIP engine)"))
    if options.get("gap") is not None and not whole_units(options):
        errors.append(FieldError("/options/gap", "applies to whole-unit plans only (integral or single_path); "
                                                 "fractional plans are always solved to optimality"))
    if errors:
        raise InputError(errors)


def _problem(network: Network, envelope: dict, limits: Limits, arc_pointer, stored: bool = False):
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
    whole = whole_units(options)
    if whole:
        _check_whole_data(network, demands, options, arc_pointer, stored)
    # The whole-unit options enter the digest only when set, so fractional answers keep
    # the digests they had before these options existed.
    extra = {"whole": [bool(options.get("integral")) or bool(options.get("single_path")),
                       bool(options.get("single_path")), float(options.get("gap") or 0.0)]} if whole else {}
    digest = problem_digest(
        "multicommodity", ORTOOLS_VERSION, network.nodes.ids, network.tail, network.head, network.capacity,
        network.unlimited, network.cost, commodities.sources, commodities.sinks, demands,
        [ids, objective], {"detail": digest_detail(options, DETAIL), **extra},
    )
    return MultiCommodityProblem(network, ids, commodities, objective, options, digest)


def _check_whole_data(network: Network, demands: np.ndarray, options: dict, arc_pointer, stored: bool) -> None:
    """Whole units take whole-number capacities and demands and costs with at most six
    decimals (>= 0 for single path), so that the plan and its cost are exact."""
    cost = np.zeros(network.num_arcs) if network.cost is None else network.cost
    limited = np.ones(network.num_arcs, dtype=bool) if network.unlimited is None else ~network.unlimited
    issue = whole_data_issue(network.capacity, limited, cost, demands, bool(options.get("single_path")))
    if issue is None:
        return
    field_name, index, reason = issue
    if field_name == "demand":
        raise InputError.at(f"/commodities/{index}/demand", reason)
    if field_name == "objective":
        asked = "/options/single_path" if options.get("single_path") else "/options/integral"
        raise InputError.at(asked, f"cannot be solved exactly: {reason}")
    where = f"arc {index} of the stored network: its {field_name} " if stored else ""
    raise InputError.at(arc_pointer(index, field_name), where + reason)


def solve(problem: MultiCommodityProblem, deadline: Deadline) -> dict:
    """Solve a parsed multi-commodity problem: as an LP, or with whole units by :func:`_solve_whole`.

    Parameters
    ----------
    problem : MultiCommodityProblem
    deadline : Deadline
        When the solve must end (status ``time_limit`` then).

    Returns
    -------
    dict
        The response document. As an LP: status, objective and cost; when optimal, what was
        delivered, the flows and capacity prices asked for, and the bottlenecks; when infeasible
        or unbounded, why; then the certificate, digest and engine. With whole units, the
        document of :func:`_solve_whole` (paths, bound and gap among its members).
    """
    net = problem.network
    cost = np.zeros(net.num_arcs) if net.cost is None else net.cost.astype(np.float64)
    flow_net = Graph(net.num_nodes, net.tail, net.head, net.capacity, net.unlimited, cost)
    if problem.whole:
        return _solve_whole(problem, flow_net, deadline)
    solution = multicommodity_flow(flow_net, problem.commodities, objective=problem.objective,
                                   deadline=deadline)
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
        out["infeasibility"] = _infeasibility(ids, solution.infeasibility)
    elif solution.status == "unbounded":
        out["unbounded"] = {"commodity": ids[solution.unbounded["commodity"]], "arcs": solution.unbounded["arcs"]}
    out["certificate"] = solution.certificate
    out["digest"] = problem.digest
    out["engine"] = solution.engine
    return out


def _infeasibility(ids: list, info: dict) -> dict:
    return {
        "commodities": [ids[k] for k in info["short"].tolist()],
        "shortfall": info["shortfall"],
        "max_delivered": info["max_delivered"],
        "arcs": info["binding"],
        "cannot_meet_alone": [ids[k] for k in info["alone"].tolist()],
    }


def _solve_whole(problem: MultiCommodityProblem, flow_net: Graph, deadline: Deadline) -> dict:
    options, ids = problem.options, problem.commodity_ids
    solution = whole_unit_flow(flow_net, problem.commodities, objective=problem.objective,
                               single_path=bool(options.get("single_path")), gap=float(options.get("gap") or 0.0),
                               deadline=deadline, on_progress=progress.reporter())
    out: dict = {"status": solution.status, "objective": problem.objective, "cost": solution.cost}
    if solution.flows is not None:
        out["delivered"] = solution.delivered
        if wants(options, "flows"):
            out["flows"] = solution.flows
        if solution.paths is not None and wants(options, "paths"):
            out["paths"] = [{"commodity": ids[k], "arcs": path} for k, path in enumerate(solution.paths)]
    if solution.status in ("optimal", "feasible", "time_limit"):
        out["bound"] = solution.bound
        out["gap"] = solution.gap
    if solution.infeasibility is not None:
        info = solution.infeasibility
        if info["proof"] == "lp-relaxation":
            out["infeasibility"] = {**_infeasibility(ids, info), "proof": "lp-relaxation"}
        else:
            out["infeasibility"] = {"proof": "solver", **({"cannot_travel_alone": [
                ids[k] for k in info["cannot_travel_alone"].tolist()]} if "cannot_travel_alone" in info else {})}
    if solution.unbounded is not None:
        out["unbounded"] = {"commodity": ids[solution.unbounded["commodity"]], "arcs": solution.unbounded["arcs"]}
    out["certificate"] = solution.certificate
    out["digest"] = problem.digest
    out["engine"] = solution.engine
    return out


KIND = Kind(
    name="multicommodity",
    summary="Multi-commodity flow: shared capacities, min-cost or max-throughput, with capacity prices",
    request_schema=MultiCommodityRequest,
    response_schema=MultiCommodityResponse,
    example="depots-multicommodity.json",
    parse=parse,
    solve=solve,
    query_schema=MultiCommodityQuery,
    from_network=from_network,
    size=problem_size,
    #: GLOP and the MIP engines stop themselves at their deadline (the MIP with its
    #: plan so far: status "feasible").
    honours_time_limit=True,
    for_solver_process=without_arc_keys,
    examples=("depots-multicommodity-whole.json",),
)
