"""Assignment: give each agent (van, crew) at most one task (drop, job) at least total cost."""

from __future__ import annotations

from dataclasses import dataclass
from itertools import chain
from operator import itemgetter

import numpy as np
from marshmallow import RAISE, Schema, fields, validate

from ..deadline import Deadline
from ..errors import FieldError, InputError, ProblemTooLarge
from ..model.columns import MAX_REPORTED_ERRORS, number_column
from ..model.digest import problem_digest
from ..model.ids import MAX_ID_LENGTH
from ..model.schemas import NODE_ID_MESSAGE, NodeId, OptionsSchema, StrictBoolean, load_envelope
from ..solvers.assignment import solve_assignment
from ..solvers.versions import ORTOOLS_VERSION
from .base import Kind, Limits, problem_size
from .maxflow import EngineSchema, TimingSchema

PAIR_FIELDS = ("agent", "task", "cost")

DUALS_MEANING = (
    "Duals of the assignment LP, aligned with the request's agents and tasks. Minimisation: u[agent] + v[task] <= "
    "cost on every allowed pair, with equality on assigned pairs; the duals of a side that need not be fully "
    "assigned are <= 0 (0 for its unassigned members); sum(u) + sum(v) = total_cost. With maximize the "
    "inequalities flip (u + v >= cost, optional-side duals >= 0). A task's dual is what one more agent able to "
    "take it would be worth at the margin, an agent's dual likewise for one more task.")


class AssignmentOptions(OptionsSchema):
    maximize = StrictBoolean(load_default=False, metadata={"description": "Maximise the total instead."})
    require = fields.String(
        load_default="min-side", validate=validate.OneOf(["agents", "tasks", "min-side"]),
        metadata={"description": "Which side must be fully assigned: agents, tasks, or min-side (default: the "
                                 "smaller side; both when they are equal). When it cannot be, status is "
                                 "infeasible with a Hall-violating set."})


class AssignmentRequest(Schema):
    class Meta:
        unknown = RAISE

    # Checked in parse() as whole lists (a per-element field costs more than the solve at 10 x 10).
    agents = fields.Raw(required=True, metadata={
        "description": "Agent ids (strings of 1-200 characters or non-negative integers), unique, at least one.",
        "type": "array", "minItems": 1, "items": {"oneOf": [{"type": "string", "minLength": 1, "maxLength": 200},
                                                            {"type": "integer", "minimum": 0}]}})
    tasks = fields.Raw(required=True, metadata={
        "description": "Task ids, unique, at least one.",
        "type": "array", "minItems": 1, "items": {"oneOf": [{"type": "string", "minLength": 1, "maxLength": 200},
                                                            {"type": "integer", "minimum": 0}]}})
    costs = fields.Raw(load_default=None, metadata={
        "description": "Cost matrix: one row per agent, one entry per task; null = pair not allowed.",
        "type": "array", "items": {"type": "array", "items": {"type": ["number", "null"]}}})
    pairs = fields.Raw(load_default=None, metadata={
        "description": "Sparse alternative to costs: the allowed pairs [{agent, task, cost}].",
        "type": "array", "items": {"type": "object", "required": list(PAIR_FIELDS), "properties": {
            "agent": {"oneOf": [{"type": "string"}, {"type": "integer", "minimum": 0}]},
            "task": {"oneOf": [{"type": "string"}, {"type": "integer", "minimum": 0}]},
            "cost": {"type": "number"}}}})
    options = fields.Nested(AssignmentOptions, load_default=lambda: dict(_DEFAULT_OPTIONS))


_DEFAULT_OPTIONS = AssignmentOptions().load({})
#: One schema instance for every request: building one deep-copies its fields.
_REQUEST = AssignmentRequest()


class AssignedSchema(Schema):
    agent = NodeId()
    task = NodeId()
    cost = fields.Float()


class DualsSchema(Schema):
    agents = fields.List(fields.Float())
    tasks = fields.List(fields.Float())


class HallSchema(Schema):
    side = fields.String(validate=validate.OneOf(["agents", "tasks"]))
    members = fields.List(NodeId(), metadata={"description": "Members of the required side ..."})
    allowed = fields.List(NodeId(), metadata={"description": "... whose allowed partners are only these, fewer "
                                                             "than the members (Hall's condition fails)."})


class AssignmentCertificate(Schema):
    checked = fields.Boolean()
    primal_cost = fields.Float()
    dual_bound = fields.Float(metadata={"description": "sum of the duals; equals primal_cost."})
    gap = fields.Float()
    tolerance = fields.Float()
    members = fields.Integer()
    allowed = fields.Integer()
    largest_assignment = fields.Integer()
    decimal_scale = fields.Integer(metadata={"description": "Present when decimal costs were solved exactly as "
                                                            "integers: the factor applied to them."})


class AssignmentEngineSchema(EngineSchema):
    cost_factor = fields.Integer(metadata={"description": "Present when the min-cost engine divided the costs by "
                                                          "this common factor (an equivalent problem)."})


class AssignmentResponse(Schema):
    status = fields.String(validate=validate.OneOf(["optimal", "infeasible"]))
    total_cost = fields.Float(allow_none=True)
    assignments = fields.List(fields.Nested(AssignedSchema))
    unassigned_agents = fields.List(NodeId())
    unassigned_tasks = fields.List(NodeId())
    duals = fields.Nested(DualsSchema, metadata={"description": DUALS_MEANING})
    infeasibility = fields.Nested(HallSchema)
    certificate = fields.Nested(AssignmentCertificate)
    digest = fields.String()
    engine = fields.Nested(AssignmentEngineSchema)
    timing_ms = fields.Nested(TimingSchema)


@dataclass
class AssignmentProblem:
    agents: list
    tasks: list
    rows: np.ndarray
    cols: np.ndarray
    cost: np.ndarray
    dense: bool
    options: dict
    digest: str

    @property
    def size(self) -> int:
        """Allowed agent-task pairs: what the solve's time grows with (see api/bounded)."""
        return int(self.cost.size)


_GRIDS: dict[tuple[int, int], tuple[np.ndarray, np.ndarray]] = {}


def _grid(k: int, t: int):
    """Row and column index of every matrix entry (cached: the same sizes recur)."""
    hit = _GRIDS.get((k, t))
    if hit is None:
        hit = (np.repeat(np.arange(k, dtype=np.int32), t), np.tile(np.arange(t, dtype=np.int32), k))
        if k * t <= 1_000_000 and len(_GRIDS) < 64:
            _GRIDS[(k, t)] = hit
    return hit


def parse(body, limits: Limits) -> AssignmentProblem:
    """Validate and normalise an assignment request.

    Parameters
    ----------
    body : dict
        The decoded ``POST /v1/assignment`` body.
    limits : Limits
        Size limits (a larger problem is a 413 naming the field).

    Returns
    -------
    AssignmentProblem
        With its ``digest`` and ``options``.

    Raises
    ------
    InputError
        Naming the offending field by JSON Pointer (ragged rows: ``/costs/3``).
    """
    envelope = load_envelope(_REQUEST, body)
    agents, tasks = envelope["agents"], envelope["tasks"]
    _check_ids(agents, "/agents")
    _check_ids(tasks, "/tasks")
    k, t = len(agents), len(tasks)
    costs, pairs = envelope["costs"], envelope["pairs"]
    if costs is not None and pairs is not None:
        raise InputError.at("/pairs", "give either costs or pairs, not both")
    if costs is None and pairs is None:
        raise InputError.at("/costs", "is required (or give pairs)")
    if costs is not None:
        if k * t > limits.max_arcs:
            raise ProblemTooLarge(FieldError("/costs", f"has {k * t} entries; the limit is {limits.max_arcs}"))
        rows, cols, cost, dense = _read_matrix(costs, k, t)
    else:
        rows, cols, cost = _read_pairs(pairs, agents, tasks, limits)
        dense = False
    options = envelope["options"]
    digest = problem_digest("assignment", ORTOOLS_VERSION, agents, tasks, rows, cols, cost,
                            {k: options[k] for k in ("maximize", "require", "engine")})
    return AssignmentProblem(agents, tasks, rows, cols, cost, dense, options, digest)


def _check_ids(ids, ptr: str) -> None:
    if type(ids) is not list:
        raise InputError.at(ptr, "must be a list of ids")
    if not ids:
        raise InputError.at(ptr, "must not be empty")
    kinds = set(map(type, ids))
    if not kinds <= {str, int}:
        i = next(i for i, v in enumerate(ids) if type(v) not in (str, int))
        raise InputError.at(f"{ptr}/{i}", NODE_ID_MESSAGE)
    if str in kinds:
        bad = [i for i, v in enumerate(ids) if type(v) is str and not 1 <= len(v) <= MAX_ID_LENGTH]
        if bad:
            raise InputError.at(f"{ptr}/{bad[0]}", "must be 1-200 characters long")
    elif min(ids) < 0:
        raise InputError.at(f"{ptr}/{ids.index(min(ids))}", NODE_ID_MESSAGE)
    if len(kinds) > 1:
        first = type(ids[0])
        i = next(i for i, v in enumerate(ids) if type(v) is not first)
        raise InputError.at(f"{ptr}/{i}", "ids in one list must all be strings or all be integers")
    if len(set(ids)) < len(ids):
        seen = set()
        for i, v in enumerate(ids):
            if v in seen:
                raise InputError.at(f"{ptr}/{i}", f"duplicate id {v!r}")
            seen.add(v)


def _read_matrix(costs, k: int, t: int):
    if type(costs) is not list:
        raise InputError.at("/costs", "must be a list of rows")
    if len(costs) != k:
        raise InputError.at("/costs", f"has {len(costs)} rows; there are {k} agents")
    if set(map(type, costs)) != {list}:
        i = next(i for i, r in enumerate(costs) if type(r) is not list)
        raise InputError.at(f"/costs/{i}", "must be a list of costs (one per task)")
    if set(map(len, costs)) != {t}:
        bad = [i for i, r in enumerate(costs) if len(r) != t][:MAX_REPORTED_ERRORS]
        raise InputError([FieldError(f"/costs/{i}", f"has {len(costs[i])} entries; there are {t} tasks")
                          for i in bad])
    flat = list(chain.from_iterable(costs))
    column = number_column(flat, lambda i: f"/costs/{i // t}/{i % t}", allow_null=True)
    rows, cols = _grid(k, t)
    if column.null is None:
        return rows, cols, column.values, True
    keep = np.flatnonzero(~column.null)
    return rows[keep], cols[keep], column.values[keep], False


def _read_pairs(pairs, agents: list, tasks: list, limits: Limits):
    if type(pairs) is not list:
        raise InputError.at("/pairs", "must be a list of {agent, task, cost} objects")
    if len(pairs) > limits.max_arcs:
        raise ProblemTooLarge(FieldError("/pairs", f"has {len(pairs)} pairs; the limit is {limits.max_arcs}"))
    if set(map(type, pairs)) - {dict}:
        i = next(i for i, p in enumerate(pairs) if type(p) is not dict)
        raise InputError.at(f"/pairs/{i}", "must be an object with agent, task and cost")
    for i, p in enumerate(pairs):
        if p.keys() != set(PAIR_FIELDS):
            extra = sorted(set(p) - set(PAIR_FIELDS), key=str)
            if extra:
                raise InputError.at(f"/pairs/{i}/{extra[0]}", "unknown field")
            missing = next(f for f in PAIR_FIELDS if f not in p)
            raise InputError.at(f"/pairs/{i}/{missing}", "is required")
    rows = _lookup([p["agent"] for p in pairs], agents, "agent")
    cols = _lookup([p["task"] for p in pairs], tasks, "task")
    cost = number_column(list(map(itemgetter("cost"), pairs)), lambda i: f"/pairs/{i}/cost").values
    code = rows.astype(np.int64) * len(tasks) + cols
    if np.unique(code).size < code.size:
        seen = set()
        for i, c in enumerate(code.tolist()):
            if c in seen:
                raise InputError.at(f"/pairs/{i}", "duplicate pair (the same agent and task appear earlier)")
            seen.add(c)
    return rows, cols, cost


def _lookup(values: list, ids: list, name: str) -> np.ndarray:
    index = dict(zip(ids, range(len(ids))))
    out = np.fromiter((index.get(v, -1) if type(v) in (str, int) and type(v) is not bool else -1 for v in values),
                      dtype=np.int32, count=len(values))
    if (out < 0).any():
        i = int(np.flatnonzero(out < 0)[0])
        v = values[i]
        detail = (f"unknown {name} {v!r}: not in {name}s" if type(v) in (str, int) and type(v) is not bool
                  else f"must be a {name} id")
        if type(v) is str and not 1 <= len(v) <= MAX_ID_LENGTH:
            detail = "must be 1-200 characters long"
        raise InputError.at(f"/pairs/{i}/{name}", detail)
    return out


def solve(problem: AssignmentProblem, deadline: Deadline) -> dict:
    """Solve a parsed problem and build its response document.

    Parameters
    ----------
    problem : AssignmentProblem
        From :func:`parse` (assignments are not asked of stored networks).
    deadline : Deadline
        Not passed on: the assignment solvers take none (a solve in a solver process
        is stopped at it all the same).

    Returns
    -------
    dict
        ``status``, ``total_cost``, the assignments and duals (or a Hall set proving
        that none exists), ``certificate``, ``digest`` and ``engine``.
    """
    options = problem.options
    k, t = len(problem.agents), len(problem.tasks)
    solution, certificate = solve_assignment(
        k, t, problem.rows, problem.cols, problem.cost, dense=problem.dense, maximize=options["maximize"],
        require=options["require"], engine=options["engine"])
    out: dict = {"status": solution.status, "total_cost": solution.total}
    agents, tasks = problem.agents, problem.tasks
    if solution.status == "optimal":
        a, tk = solution.agent.tolist(), solution.task.tolist()
        out["assignments"] = [{"agent": agents[i], "task": tasks[j], "cost": c}
                              for i, j, c in zip(a, tk, solution.cost.tolist())]
        out["unassigned_agents"] = _unassigned(agents, a)
        out["unassigned_tasks"] = _unassigned(tasks, tk)
        out["duals"] = {"agents": solution.u, "tasks": solution.v}
    else:
        hall = solution.hall
        own, other = (agents, tasks) if hall["side"] == "agents" else (tasks, agents)
        out["infeasibility"] = {"side": hall["side"], "members": [own[i] for i in hall["members"].tolist()],
                                "allowed": [other[i] for i in hall["allowed"].tolist()]}
    out["certificate"] = certificate
    out["digest"] = problem.digest
    out["engine"] = solution.engine
    return out


def _unassigned(ids: list, used: list) -> list:
    if len(used) == len(ids):
        return []
    taken = set(used)
    return [v for i, v in enumerate(ids) if i not in taken]


KIND = Kind(
    name="assignment",
    summary="Assignment of agents to tasks at least (or most) total cost, with duals",
    request_schema=AssignmentRequest,
    response_schema=AssignmentResponse,
    example="vans-assignment.json",
    parse=parse,
    solve=solve,
    size=problem_size,
)
