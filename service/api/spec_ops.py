"""OpenAPI entries of the operational surface: jobs, auth, limits, metrics.

Kept apart from :mod:`service.api.spec` so that file stays about the problem kinds;
``build_spec`` calls :func:`register` and merges :func:`solve_extras` into every solve
operation.
"""

from __future__ import annotations

import copy

from marshmallow import Schema, fields, validate

from ..jobs import STATES
from ..kinds import KINDS

OPS_DESCRIPTION = """
## Jobs and time limits

A synchronous solve has a hard limit of `SLUICE_TIME_LIMIT` seconds (default 30;
`options.time_limit` may lower it). Problems of up to `SLUICE_INLINE_MAX_ARCS` arcs
(default 20,000) are solved on the request thread in milliseconds; larger ones run in a
solver process that is killed at the limit, and the answer is 504 `time-limit` with a hint
to submit a job. `POST /v1/jobs` (or any solve endpoint with `Prefer: respond-async`,
RFC 7240) validates the problem at once (422 with pointers then, not later), answers 202
with `Location: /v1/jobs/{id}`, and runs it in the background under
`SLUICE_JOB_TIME_LIMIT` (default 600 s). `GET /v1/jobs/{id}` gives the `state`
(`queued`, `running`, `done`, `failed`, `cancelled`) with the `result` (the solve
response) or the `error` (a problem object); `DELETE` cancels, killing the computation
of a running job. A job whose worker dies is queued again while it has attempts left
(`SLUICE_JOB_ATTEMPTS`, embedded backend) or marked failed; it never stays `running`.

## Access

With API keys configured, every `/v1` request needs `Authorization: Bearer <key>`
(RFC 6750): 401 with `WWW-Authenticate` without a valid key, 403 when a read-only key
(`tenant:key:read`) is used to write. Jobs (and stored data) are visible to their own
tenant only; another tenant's job answers 404. Without keys the service runs open.
Each tenant has a request budget (`SLUICE_RATE_LIMIT`, default 600/minute): 429 with
`Retry-After` beyond it. Size limits (`SLUICE_MAX_BODY_MB`, `SLUICE_MAX_ARCS`,
`SLUICE_MAX_NODES`, `SLUICE_MAX_COMMODITIES`, `SLUICE_MAX_BATCH_ITEMS`) answer 413 with
a pointer to the field.

## Operations

`/healthz` (the process is up), `/readyz` (a tiny solve and the job store or Redis:
503 only when the solver fails; `degraded` with 200 when the job store or Redis does not
answer, since synchronous solves still work), `/metrics` (Prometheus text format, summed
over all workers), `/openapi.json`. Every response echoes `X-Request-Id` (the client's,
when it is 1-128 characters of letters, digits and `._:-`, else a new one)."""


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


PROBLEM = {"application/problem+json": {"schema": "Problem"}}
RETRY_AFTER = {"Retry-After": {"description": "Seconds to wait before retrying.", "schema": {"type": "integer"}}}
JOB_LOCATION = {"Location": {"description": "URL of the job.", "schema": {"type": "string"}}}
JOB_ID_PARAM = {"name": "job_id", "in": "path", "required": True, "schema": {"type": "string"},
                "description": "The id from the 202 answer's Location."}
PREFER_PARAM = {"name": "Prefer", "in": "header", "required": False, "schema": {"type": "string"},
                "description": "`respond-async` (RFC 7240): answer 202 with a job instead of solving now."}


def _auth_responses(write: bool) -> dict:
    out = {
        "401": {"description": "No valid API key (when keys are configured).", "content": PROBLEM,
                "headers": {"WWW-Authenticate": {"schema": {"type": "string"}}}},
        "429": {"description": "The tenant's rate limit is used up.", "content": PROBLEM, "headers": RETRY_AFTER},
    }
    if write:
        out["403"] = {"description": "A read-only key cannot write.", "content": PROBLEM}
    return out


def add_access_responses(paths: dict) -> None:
    """Give every ``/v1`` operation its 401 and 429 (and 403 when it is not a GET): keys
    and rate limits apply to all of ``/v1`` (``auth.py``, ``ratelimit.py``), not only to
    the solves. ``paths`` is the finished document's, so references are spelled out."""
    problem = {"application/problem+json": {"schema": {"$ref": "#/components/schemas/Problem"}}}
    for path, item in paths.items():
        if not path.startswith("/v1"):
            continue
        for method, operation in item.items():
            if method == "parameters":
                continue
            operation.setdefault("security", [{"bearer": []}, {}])
            for status, response in _auth_responses(method != "get").items():
                # A copy each: shared objects would come out as YAML anchors.
                operation["responses"].setdefault(status, copy.deepcopy({**response, "content": problem}))


def _accepted() -> dict:
    return {"description": "Accepted as a job.", "headers": JOB_LOCATION,
            "content": {"application/json": {"schema": "Job"}}}


def solve_extras() -> dict:
    """Parameters and responses every solve operation has besides its own."""
    return {
        "parameters": [PREFER_PARAM],
        "responses": {
            "202": _accepted(),
            **_auth_responses(True),
            "503": {"description": "Solver processes busy, or (with Prefer) the job queue is down.",
                    "content": PROBLEM, "headers": RETRY_AFTER},
            "504": {"description": "The solve exceeded the synchronous time limit and was stopped; use a job.",
                    "content": PROBLEM},
        },
    }


def register(spec) -> None:
    """Add the jobs and metrics paths and the bearer security scheme."""
    spec.components.schema("JobRequest", schema=JobRequestSchema)
    spec.components.schema("Job", schema=JobSchema)
    spec.components.security_scheme("bearer", {"type": "http", "scheme": "bearer",
                                               "description": "An API key (when the service has keys)."})
    unavailable = {"description": "The job store or queue does not answer.", "content": PROBLEM,
                   "headers": RETRY_AFTER}
    job_doc = {"application/json": {"schema": "Job"}}
    security = [{"bearer": []}, {}]
    spec.path(path="/v1/jobs", operations={"post": {
        "operationId": "submit_job", "summary": "Submit a problem of any kind as a background job.",
        "security": security,
        "requestBody": {"required": True, "content": {"application/json": {"schema": "JobRequest"}}},
        "responses": {
            "202": _accepted(),
            "400": {"description": "The body is not valid JSON.", "content": PROBLEM},
            "413": {"description": "The body or problem exceeds a size limit.", "content": PROBLEM},
            "415": {"description": "The Content-Type is not JSON.", "content": PROBLEM},
            "422": {"description": "Not a valid job (pointers into the body, under /problem for the problem).",
                    "content": PROBLEM},
            **_auth_responses(True),
            "503": unavailable,
        }}})
    spec.path(path="/v1/jobs/{job_id}", operations={
        "get": {
            "operationId": "get_job", "summary": "A job's state, with its result or error.",
            "security": security, "parameters": [JOB_ID_PARAM],
            "responses": {"200": {"description": "The job.", "content": job_doc},
                          "404": {"description": "No such job for this tenant.", "content": PROBLEM},
                          **_auth_responses(False), "503": unavailable}},
        "delete": {
            "operationId": "cancel_job", "summary": "Cancel a job (a running job's process is killed).",
            "security": security, "parameters": [JOB_ID_PARAM],
            "responses": {"200": {"description": "Cancelled.", "content": job_doc},
                          "202": {"description": "Cancel under way (the process is being stopped).",
                                  "content": job_doc},
                          "404": {"description": "No such job for this tenant.", "content": PROBLEM},
                          "409": {"description": "The job has already finished.", "content": PROBLEM},
                          **_auth_responses(True), "503": unavailable}},
    })
    spec.path(path="/metrics", operations={"get": {
        "operationId": "metrics", "summary": "Prometheus metrics (text exposition format), all workers summed.",
        "description": "Every series whose labels are known in advance (solves, timeouts, the result cache and "
                       "jobs, for every kind, engine, result and event) is there at 0 from start-up; the HTTP "
                       "series appear with each route's first request. Who may read it is the operator's "
                       "choice, SLUICE_METRICS: open (the default), key (Authorization: Bearer with "
                       "SLUICE_METRICS_KEY, a key of its own: API keys do not grant it) or port:N (only on that "
                       "second port, which serves nothing else).",
        "responses": {"200": {"description": "The metrics.", "content": {"text/plain": {"schema": {"type": "string"}}}},
                      "401": {"description": "SLUICE_METRICS=key and no valid metrics key.", "content": PROBLEM,
                              "headers": {"WWW-Authenticate": {"schema": {"type": "string"}}}},
                      "404": {"description": "SLUICE_METRICS=port:N and this is not port N.", "content": PROBLEM}},
    }})
