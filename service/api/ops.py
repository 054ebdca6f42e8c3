"""Operations: liveness, readiness, the OpenAPI document."""

from __future__ import annotations

import numpy as np
from flask import Blueprint, current_app
from marshmallow import Schema, fields

from ..solvers import Graph, maximum_flow
from .declare import json_body, ok, operation
from .storage import get_store
from .jsonio import json_response

bp = Blueprint("ops", __name__)


class HealthSchema(Schema):
    status = fields.String(metadata={"description": "ok (healthz); ready, degraded or not ready (readyz)."})
    checks = fields.Dict(metadata={"description": "Each dependency: ok, or why not."})
    store = fields.Dict(metadata={"description": "readyz: the result store's backend and usage."})


_HEALTH = json_body(HealthSchema)


@bp.get("/healthz")
@operation("healthz", "The process is up.", responses={"200": ok("Up.", _HEALTH)})
def healthz():
    """The process is up."""
    return json_response({"status": "ok"})


def _tiny_solve_ok() -> bool:
    tail = np.array([0, 1], dtype=np.int32)
    head = np.array([1, 2], dtype=np.int32)
    solution, _ = maximum_flow(Graph(3, tail, head, np.array([2, 1], dtype=np.int64)), 0, 2)
    return solution.value == 1


def _job_checks() -> dict:
    jobs = current_app.extensions.get("sluice.jobs")
    if jobs is None:
        return {}
    name = "redis" if current_app.extensions["sluice"].settings.redis_url else "jobs_store"
    return {name: jobs.health()}


@bp.get("/readyz")
@operation("readyz", "The store and solvers are usable.",
           responses={"200": ok("Ready.", _HEALTH), "503": ok("Not ready.", _HEALTH)})
def readyz():
    """The solvers answer a tiny problem correctly; the store and the job store answer.

    Only a failed solver makes the instance unready (503). A store, job store or Redis
    that does not answer makes it ``degraded`` (200): synchronous solves still answer
    (without the cache), so the instance stays in rotation, while stored networks,
    cached solutions and jobs answer 503 until it is back.
    """
    store = get_store().health()
    checks = {"solver": "ok" if _tiny_solve_ok() else "failed", "store": store["status"], **_job_checks()}
    if checks["solver"] != "ok":
        status, code = "not ready", 503
    elif any(v != "ok" for v in checks.values()):
        status, code = "degraded", 200
    else:
        status, code = "ready", 200
    return json_response({"status": status, "checks": checks, "store": store},
                         code, headers=None if code == 200 else {"Retry-After": "5"})


@bp.get("/openapi.json")
@operation("openapi", "This document.",
           responses={"200": ok("The OpenAPI document.", json_body({"type": "object"}))})
def openapi_json():
    """This service's OpenAPI document."""
    return json_response(current_app.extensions["sluice"].spec)
