"""Background jobs: ``POST /v1/jobs``, ``GET``/``DELETE /v1/jobs/{id}``, ``Prefer: respond-async``.

A job is validated when it is submitted (the kind's ``parse``: a bad problem is a 422
then, with pointers under ``/problem``), recorded, and run later by a solver process
under the job time limit (``SLUICE_JOB_TIME_LIMIT``). Jobs belong to the tenant that
submitted them; another tenant's job id answers 404.
"""

from __future__ import annotations

import logging

import orjson
from flask import Blueprint, Flask, current_app, request
from marshmallow import Schema, fields, validate

from ..config import Settings
from ..errors import Conflict, FieldError, InputError, NotFound, Unavailable
from ..jobs import FINAL, STATES, JobsDown, open_jobs
from ..jobs.model import DUMP_OPTIONS, JOB_ID
from ..kinds import KINDS, Kind, Limits
from ..kinds.base import budget_seconds
from .auth import current_tenant
from .declare import SOLVE_BODY_TEXT, header_parameter, json_body, ok, operation, path_parameter, problem, problems
from .jsonio import json_response, read_json_body
from .metrics import JOB_EVENTS, job_finished

log = logging.getLogger("sluice.jobs")
bp = Blueprint("jobs", __name__, url_prefix="/v1")
EXTENSION = "sluice.jobs"


class JobRequestSchema(Schema):
    kind = fields.String(required=True, validate=validate.OneOf(sorted(KINDS)),
                         metadata={"description": "The problem kind (the solve endpoint's name)."})
    problem = fields.Dict(required=True, metadata={"description": "A request body of that solve endpoint."})


class JobSchema(Schema):
    id = fields.String(metadata={"description": "32 hex digits.", "pattern": "^[0-9a-f]{32}$"})
    kind = fields.String()
    state = fields.String(validate=validate.OneOf(STATES))
    created_at = fields.String(metadata={"format": "date-time"})
    started_at = fields.String(allow_none=True, metadata={"format": "date-time"})
    finished_at = fields.String(allow_none=True, metadata={"format": "date-time"})
    attempts = fields.Integer(metadata={"description": "Times a worker started the job."})
    time_limit = fields.Float(metadata={"description": "Seconds the job may run."})
    cancel_requested = fields.Boolean(metadata={"description": "DELETE was asked; the process is being stopped."})
    progress = fields.Dict(metadata={
        "description": "While running, for kinds that report it (multicommodity with integral or single_path): "
                       "the latest report, {phase, incumbent, bound, gap, seconds}: phase deliver or cost, "
                       "incumbent the best plan's objective so far (null before the first), bound the best "
                       "proven bound, gap as in the answer, seconds since the solve started."})
    result = fields.Dict(metadata={"description": "When done: the solve response of the job's kind."})
    error = fields.Dict(metadata={"description": "When failed: a problem object (type, title, status, detail)."})


#: What the operations of this module and every solve (``Prefer: respond-async``) declare.
JOB_SCHEMAS = {"Job": JobSchema}
PREFER_PARAM = header_parameter("Prefer", "`respond-async` (RFC 7240): answer 202 with a job instead of solving now.",
                                required=False)
ACCEPTED = ok("Accepted as a job.", json_body("Job"),
              headers={"Location": {"description": "URL of the job.", "schema": {"type": "string"}}})
_JOB_ID = path_parameter("job_id", {"type": "string"}, "The id from the 202 answer's Location.")
_JOBS_DOWN = problem(503, "The job store or queue does not answer.")
_NO_JOB = problem(404, "No such job for this tenant.")


def backend():
    """The job backend :func:`init_app` opened for this app (SQLite, or RQ on Redis when configured)."""
    return current_app.extensions[EXTENSION]


def _limits() -> Limits:
    return current_app.extensions["sluice"].limits


def _job_time_limit() -> float:
    return current_app.extensions["sluice"].settings.job_time_limit


def _under(prefix: str, exc: InputError) -> InputError:
    """The same error with every pointer moved under ``prefix`` (the job envelope)."""
    return type(exc)([FieldError(prefix + e.pointer, e.detail) for e in exc.errors])


def prefers_async() -> bool:
    """``Prefer: respond-async`` (RFC 7240), alone or among other preferences."""
    for header in request.headers.getlist("Prefer"):
        for pref in header.split(","):
            if pref.split(";")[0].strip().lower() == "respond-async":
                return True
    return False


def _location(job_id: str) -> str:
    return f"/v1/jobs/{job_id}"


def submit(kind: Kind, problem_body, pointer_prefix: str = ""):
    """Validate ``problem_body`` as ``kind`` and queue it; the 202 response."""
    try:
        problem = kind.parse(problem_body, _limits())
    except InputError as exc:
        raise (_under(pointer_prefix, exc) if pointer_prefix else exc) from None
    # Stored as seconds, not a deadline: the job runs later, perhaps on another host;
    # the job runner makes its deadline when a solver process is ready for it.
    seconds = budget_seconds(problem.options, _job_time_limit())
    body = orjson.dumps(problem_body, option=DUMP_OPTIONS)
    jobs = backend()
    try:
        record = jobs.submit(current_tenant(), kind.name, body, seconds)
    except JobsDown as exc:
        log.error("job queue unavailable: %s", exc)
        raise Unavailable("the job queue does not answer; retry later, or solve synchronously") from None
    jobs.start()
    JOB_EVENTS.labels(kind.name, "submitted").inc()
    headers = {"Location": _location(record.id), "Retry-After": "1"}
    if prefers_async():
        headers["Preference-Applied"] = "respond-async"
    return json_response(record.document(), 202, headers=headers)


@bp.post("/jobs")
@operation("submit_job", "Submit a problem of any kind as a background job.",
           request=json_body("JobRequest"), schemas={"JobRequest": JobRequestSchema, **JOB_SCHEMAS},
           responses={"202": ACCEPTED, **problems(400, 413, 415, texts=SOLVE_BODY_TEXT),
                      "422": problem(422, "Not a valid job (pointers into the body, under /problem for the problem)."),
                      "503": _JOBS_DOWN})
def create_job():
    """Submit a problem of any kind as a background job."""
    body = read_json_body()
    if not isinstance(body, dict):
        raise InputError.at("", "the request body must be a JSON object with kind and problem")
    errors = [FieldError(f"/{k}", "unknown field") for k in body if k not in ("kind", "problem")]
    kind_name = body.get("kind")
    if kind_name is None:
        errors.append(FieldError("/kind", "is required"))
    elif not isinstance(kind_name, str) or kind_name not in KINDS:
        errors.append(FieldError("/kind", f"must be one of: {', '.join(sorted(KINDS))}"))
    if "problem" not in body:
        errors.append(FieldError("/problem", "is required"))
    elif not isinstance(body["problem"], dict):
        errors.append(FieldError("/problem", "must be a JSON object (a solve request body)"))
    if errors:
        raise InputError(errors)
    return submit(KINDS[kind_name], body["problem"], "/problem")


def _find(job_id: str):
    if not JOB_ID.match(job_id):
        raise NotFound(f"no job {job_id!r}")
    return job_id


def _answer(record, job_id: str, status: int = 200):
    if record is None:
        raise NotFound(f"no job {job_id!r}")
    headers = None if record.state in FINAL else {"Retry-After": "1"}
    return json_response(record.document(), status, headers=headers)


@bp.get("/jobs/<job_id>")
@operation("get_job", "A job's state, with its result or error.", parameters=[_JOB_ID], schemas=JOB_SCHEMAS,
           responses={"200": ok("The job.", json_body("Job")), "404": _NO_JOB, "503": _JOBS_DOWN})
def get_job(job_id: str):
    """A job's state, with its result when done or its error when failed."""
    try:
        return _answer(backend().get(current_tenant(), _find(job_id)), job_id)
    except JobsDown:
        raise Unavailable("the job store does not answer; retry later") from None


@bp.delete("/jobs/<job_id>")
@operation("cancel_job", "Cancel a job (a running job's process is killed).", parameters=[_JOB_ID],
           schemas=JOB_SCHEMAS,
           responses={"200": ok("Cancelled.", json_body("Job")),
                      "202": ok("Cancel under way (the process is being stopped).", json_body("Job")),
                      "404": _NO_JOB, "409": problem(409, "The job has already finished."), "503": _JOBS_DOWN})
def cancel_job(job_id: str):
    """Cancel a job: a queued one at once, a running one by killing its process."""
    jobs = backend()
    try:
        before = jobs.get(current_tenant(), _find(job_id))
        if before is None:
            raise NotFound(f"no job {job_id!r}")
        if before.state in FINAL and before.state != "cancelled":
            raise Conflict(f"the job is already {before.state}; nothing to cancel")
        record = jobs.cancel(current_tenant(), job_id)
    except JobsDown:
        raise Unavailable("the job store does not answer; retry later") from None
    return _answer(record, job_id, 200 if record is not None and record.state in FINAL else 202)


def init_app(app: Flask, settings: Settings, limits: Limits):
    """Open the job backend the settings ask for, keep it in ``app.extensions`` and count its finished jobs.

    Parameters
    ----------
    app : Flask
    settings : Settings
        Where jobs live (Redis when ``SLUICE_REDIS_URL`` is set, else SQLite in the data folder),
        their lease, attempts and time to live.
    limits : Limits
        The size limits a job's problem is parsed with.

    Returns
    -------
    The backend (:func:`backend` in a request).
    """
    jobs = open_jobs(settings, limits)
    jobs.on_finish = job_finished
    app.extensions[EXTENSION] = jobs
    return jobs
