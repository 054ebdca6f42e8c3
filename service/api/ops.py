"""Operations: liveness, readiness, the OpenAPI document."""

from __future__ import annotations

import numpy as np
from flask import Blueprint, current_app

from ..solvers import maximum_flow
from .jsonio import json_response

bp = Blueprint("ops", __name__)


@bp.get("/healthz")
def healthz():
    """The process is up."""
    return json_response({"status": "ok"})


def _tiny_solve_ok() -> bool:
    tail = np.array([0, 1], dtype=np.int32)
    head = np.array([1, 2], dtype=np.int32)
    solution, _ = maximum_flow(3, tail, head, np.array([2, 1], dtype=np.int64), None, 0, 2)
    return solution.value == 1


@bp.get("/readyz")
def readyz():
    """The solvers answer a tiny problem correctly."""
    checks = {"solver": "ok" if _tiny_solve_ok() else "failed"}
    ready = all(v == "ok" for v in checks.values())
    return json_response({"status": "ready" if ready else "not ready", "checks": checks},
                         200 if ready else 503, headers=None if ready else {"Retry-After": "5"})


@bp.get("/openapi.json")
def openapi_json():
    """This service's OpenAPI document."""
    return json_response(current_app.extensions["sluice"].spec)
