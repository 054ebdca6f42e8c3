"""Linear programs: variables with bounds, linear constraints, min or max, on GLOP."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from marshmallow import RAISE, Schema, fields, validate

from ..deadline import Deadline
from ..errors import SolverFailure
from ..model.digest import problem_digest
from ..model.linear import LinearModel, read_linear_model
from ..model.schemas import OptionsSchema, StrictBoolean, StrictNumber, detail_field, load_envelope
from ..solvers.glop import beyond_range
from ..solvers.lp import LPModel, solve_certified
from ..solvers.versions import ORTOOLS_VERSION
from .base import Kind, Limits, digest_detail, problem_size, wants
from .maxflow import EngineSchema, TimingSchema

DETAIL = ["values", "duals", "reduced_costs"]

CONVENTION = (
    "Sign convention, the same for min and max: the change of the objective per unit increase of the "
    "active bound (right-hand side)."
)

_NUMBER_MAP = {"type": "object", "additionalProperties": {"type": "number"}}
_NUMBER_OR_NULL = {"oneOf": [{"type": "number"}, {"type": "null"}]}
# Named by `id` like every other kind; `name` (the first spelling) is read as its alias,
# one of the two per variable or constraint. Responses are maps keyed by these ids.
_ID = {"type": "string", "minLength": 1, "maxLength": 200}
_ID_ALIAS = {**_ID, "deprecated": True, "description": "Older spelling of id, still read; give one of the two."}
_ID_REQUIRED = [{"required": ["id"]}, {"required": ["name"]}]
_VARIABLE = {
    "type": "object", "oneOf": _ID_REQUIRED, "additionalProperties": False,
    "properties": {
        "id": {**_ID, "description": "The variable's id: keys values and reduced_costs, names it in terms."},
        "name": _ID_ALIAS,
        "lower": {**_NUMBER_OR_NULL, "description": "Lower bound; default 0, null = no limit."},
        "upper": {**_NUMBER_OR_NULL, "description": "Upper bound; default and null = no limit."},
    },
}
_CONSTRAINT = {
    "type": "object", "oneOf": _ID_REQUIRED, "additionalProperties": False,
    "properties": {
        "id": {**_ID, "description": "The constraint's id: keys duals."},
        "name": _ID_ALIAS,
        "terms": {**_NUMBER_MAP, "description": "{variable id: coefficient}."},
        "lower": {**_NUMBER_OR_NULL, "description": "The sum of the terms is at least this."},
        "upper": {**_NUMBER_OR_NULL, "description": "The sum of the terms is at most this."},
        "equals": {**_NUMBER_OR_NULL, "description": "The sum of the terms equals this (not with lower/upper)."},
    },
}


def _columns_of(record: dict, what: str) -> dict:
    props = {name: {"type": "array", "items": schema} for name, schema in record["properties"].items()
             if name != "terms"}
    return {"type": "object", "oneOf": _ID_REQUIRED, "additionalProperties": False, "properties": props,
            "description": f"Columnar form: one list per field, one entry per {what}."}


class LPOptions(OptionsSchema):
    engine = fields.String(
        load_default="auto", validate=validate.OneOf(["auto", "lp"]),
        metadata={"description": "auto or lp: linear programs are always solved by GLOP."},
    )
    detail = detail_field(DETAIL)


class ObjectiveSchema(Schema):
    class Meta:
        unknown = RAISE

    sense = fields.String(required=True, validate=validate.OneOf(["min", "max"]))
    terms = fields.Raw(load_default=None, metadata={
        **_NUMBER_MAP, "description": "{variable id: coefficient}; must name at least one variable."})
    coefficients = fields.Raw(load_default=None, metadata={
        "type": "array", "items": {"type": "number"},
        "description": "Instead of terms, for large models: one coefficient per variable, in variables order."})
    constant = StrictNumber(load_default=0, metadata={"description": "Added to the objective value."})


class LPRequest(Schema):
    class Meta:
        unknown = RAISE

    objective = fields.Nested(ObjectiveSchema, required=True)
    variables = fields.Raw(required=True, metadata={
        "oneOf": [{"type": "array", "items": _VARIABLE}, _columns_of(_VARIABLE, "variable")],
        "description": "Every variable a term names, with its bounds (default 0 and no limit)."})
    constraints = fields.Raw(load_default=None, metadata={
        "oneOf": [{"type": "array", "items": _CONSTRAINT}, _columns_of(_CONSTRAINT, "constraint"), {"type": "null"}],
        "description": "Linear constraints (absent or null: none), each with lower and/or upper, or equals. In columnar form the "
                       "coefficients come from matrix."})
    matrix = fields.Raw(load_default=None, metadata={
        "type": "object", "required": ["row", "column", "value"], "additionalProperties": False,
        "properties": {"row": {"type": "array", "items": {"type": "integer", "minimum": 0}},
                       "column": {"type": "array", "items": {"type": "integer", "minimum": 0}},
                       "value": {"type": "array", "items": {"type": "number"}}},
        "description": "Sparse coefficients for large models: 0-based indices into constraints (row) and "
                       "variables (column). May be combined with terms; a (row, column) pair given twice "
                       "is an error."})
    options = fields.Nested(LPOptions, load_default=lambda: LPOptions().load({}))


class LPCertificate(Schema):
    checked = StrictBoolean(metadata={"description": "True when the service verified the answer below."})
    primal_residual = fields.Float(metadata={"description": "Largest violation of a constraint or bound, "
                                                            "recomputed from values."})
    dual_residual = fields.Float(metadata={"description": "Largest dual infeasibility: a dual pointing at an "
                                                          "absent bound, or a reduced cost that differs from "
                                                          "c - A^T y."})
    gap = fields.Float(metadata={"description": "|primal objective - dual objective|, recomputed."})
    complementarity = fields.Float(metadata={"description": "Largest |dual x slack| product."})
    primal_objective = fields.Float()
    dual_objective = fields.Float()
    duals_unique = fields.Boolean(metadata={"description": "True when the duals are provably the only optimal "
                                                           "ones. False when the solution is degenerate (or "
                                                           "uniqueness could not be proved): other duals may be "
                                                           "equally optimal, and a shadow price may hold for an "
                                                           "increase or a decrease of its bound only."})
    degenerate = fields.Boolean(metadata={"description": "The solution has fewer variables strictly inside "
                                                         "their bounds than active constraints."})
    least_total_violation = fields.Float(metadata={"description": "Infeasible: a proven lower bound on the "
                                                                  "total violation of the constraints, each "
                                                                  "relative to 1 + |its bound| (the dual "
                                                                  "objective of a least-violation model)."})
    direction_residual = fields.Float()
    improvement_per_step = fields.Float(metadata={"description": "Unbounded: objective gain per unit step "
                                                                 "along the ray."})
    primal_residual_relative = fields.Float(metadata={"description": "Largest violation relative to 1 + the "
                                                                     "row's bound + the magnitude of its terms "
                                                                     "(checked <= tolerance.relative)."})
    dual_residual_relative = fields.Float(metadata={"description": "Largest dual infeasibility relative to the "
                                                                   "magnitude of its terms (checked <= "
                                                                   "tolerance.relative)."})
    tolerance = fields.Raw(metadata={"type": "object",
                                     "description": "relative: the bound on the relative residuals (1e-6); gap: "
                                                    "the absolute bound on the gap and on each complementarity "
                                                    "product; dual: the size below which a dual is noise."})
    reason = fields.String()


class LPInfeasibility(Schema):
    constraints = fields.List(fields.String(), metadata={"description": "Constraints taking part in the proof "
                                                                        "(nonzero multipliers of the "
                                                                        "least-violation model)."})
    variables = fields.List(fields.String(), metadata={"description": "Variables whose bounds take part."})
    least_total_violation = fields.Float(metadata={
        "description": "A proven lower bound on how far the constraints are from being met together: the least "
                       "possible sum, over the constraints, of each one's violation divided by 1 + |its bound| "
                       "(so a shortfall of 5 on a bound of 240 counts 5/241, on a bound of 0 counts 5), with "
                       "every variable inside its own bounds. It is the dual objective of that least-violation "
                       "model, checked by the service; > 0 proves the model infeasible."})


class LPRay(Schema):
    start = fields.Dict(keys=fields.String(), values=fields.Float(),
                        metadata={"description": "A feasible point."})
    direction = fields.Dict(keys=fields.String(), values=fields.Float(),
                            metadata={"description": "Nonzero entries of a direction along which the objective "
                                                     "improves without limit."})


class LPResponse(Schema):
    status = fields.String(validate=validate.OneOf(["optimal", "infeasible", "unbounded", "time_limit"]))
    objective = fields.Float(allow_none=True, metadata={"description": "Objective value, constant included."})
    values = fields.Dict(keys=fields.String(), values=fields.Float(),
                         metadata={"description": "Optimal value of every variable, by id."})
    duals = fields.Dict(keys=fields.String(), values=fields.Float(), metadata={
        "description": "Shadow price of every constraint, by id. " + CONVENTION + " So for min a binding "
                       "lower bound has a dual >= 0 and a binding upper bound <= 0; for max the reverse."})
    reduced_costs = fields.Dict(keys=fields.String(), values=fields.Float(), metadata={
        "description": "Of every variable, by id: the change of the objective per unit increase of the "
                       "variable's active bound (equal to c - A^T duals). " + CONVENTION})
    infeasibility = fields.Nested(LPInfeasibility)
    ray = fields.Nested(LPRay)
    certificate = fields.Nested(LPCertificate)
    digest = fields.String()
    engine = fields.Nested(EngineSchema)
    timing_ms = fields.Nested(TimingSchema)


@dataclass
class LPProblem:
    model: LinearModel
    options: dict
    digest: str

    @property
    def size(self) -> int:
        """Nonzeros plus variables: small models solve inline (see api/bounded)."""
        return int(self.model.matrix.nnz + self.model.c.size)


def parse(body, limits: Limits) -> LPProblem:
    """Validate and normalise an LP request.

    Parameters
    ----------
    body : dict
        The decoded ``POST /v1/lp`` body.
    limits : Limits
        Size limits (a larger problem is a 413 naming the field).

    Returns
    -------
    LPProblem
        With its ``digest`` and ``options``.

    Raises
    ------
    InputError
        Naming the offending field by JSON Pointer.
    ProblemTooLarge
        More variables or coefficients than ``limits.max_arcs``, or more constraints
        than ``limits.max_nodes``.
    """
    envelope = load_envelope(LPRequest(), body)
    model = read_linear_model(envelope, max_vars=limits.max_arcs, max_rows=limits.max_nodes,
                              max_nonzeros=limits.max_arcs)
    options = envelope["options"]
    return LPProblem(model, options, digest_of(model, options))


def digest_of(model: LinearModel, options: dict) -> str:
    """The problem's digest: the result cache's key and the ``digest`` of the answer.

    Parameters
    ----------
    model : LinearModel
    options : dict

    Returns
    -------
    str
    """
    a = model.matrix
    return problem_digest(
        "lp", ORTOOLS_VERSION, model.c, a.indptr, a.indices, a.data, model.row_lower, model.row_upper,
        model.col_lower, model.col_upper,
        [model.variables, model.constraints, model.maximize, model.constant],
        {"detail": digest_detail(options, DETAIL)},
    )


def _named(names: list, values: np.ndarray) -> dict:
    return dict(zip(names, (values + 0.0).tolist()))  # + 0.0 turns -0.0 into 0.0


def solve(problem: LPProblem, deadline: Deadline) -> dict:
    """Solve a parsed problem and build its response document.

    Parameters
    ----------
    problem : LPProblem
        From :func:`parse` (linear programs are not asked of stored networks).
    deadline : Deadline
        When the solve must stop: made once per request or job.

    Returns
    -------
    dict
        ``status``, ``objective``; values, duals and reduced costs by name (optimal)
        or the conflicting constraints (infeasible), ``certificate``, ``digest``.
    """
    m = problem.model
    model = LPModel(m.c, m.matrix, m.row_lower, m.row_upper, m.col_lower, m.col_upper, m.maximize, m.constant)
    try:
        result = solve_certified(model, deadline=deadline)
    except SolverFailure as exc:  # abnormal stops and failed certificates: the data's range, said clearly
        raise beyond_range(exc, "/constraints", objective=m.c, coefficients=m.matrix.data,
                           bounds=np.concatenate([m.row_lower, m.row_upper, m.col_lower, m.col_upper])) from None
    out: dict = {"status": result.status, "objective": result.objective}
    options = problem.options
    if result.status == "optimal":
        if wants(options, "values"):
            out["values"] = _named(m.variables, result.x)
        if wants(options, "duals"):
            out["duals"] = _named(m.constraints, result.duals)
        if wants(options, "reduced_costs"):
            out["reduced_costs"] = _named(m.variables, result.reduced_costs)
    elif result.status == "infeasible":
        out["infeasibility"] = {
            "constraints": [m.constraints[i] for i in result.conflict_rows.tolist()],
            "variables": [m.variables[j] for j in result.conflict_cols.tolist()],
            "least_total_violation": result.certificate["least_total_violation"],
        }
    elif result.status == "unbounded":
        moving = np.flatnonzero(result.ray)
        out["ray"] = {
            "start": _named(m.variables, result.x),
            "direction": dict(zip([m.variables[j] for j in moving.tolist()], result.ray[moving].tolist())),
        }
    out["certificate"] = result.certificate
    out["digest"] = problem.digest
    out["engine"] = result.engine
    return out


KIND = Kind(
    name="lp",
    summary="Linear program (min or max) with shadow prices and reduced costs, certified",
    request_schema=LPRequest,
    response_schema=LPResponse,
    example="depots-lp.json",
    parse=parse,
    solve=solve,
    size=problem_size,
    #: GLOP stops itself at its deadline and answers status "time_limit".
    honours_time_limit=True,
    examples=("depots-lp-matrix.json",),
)
