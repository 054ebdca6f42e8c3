"""Solve endpoints: one route per problem kind, ``POST /v1/<kind>``."""

from __future__ import annotations

from time import perf_counter

from flask import Blueprint, current_app

from ..kinds import KINDS, Kind, Limits
from . import jobs
from .bounded import bounded_solve
from .jsonio import json_response, read_json_body

bp = Blueprint("solve", __name__, url_prefix="/v1")


def limits() -> Limits:
    return current_app.extensions["sluice"].limits


def solve_request(kind: Kind, body) -> tuple[dict, float, float]:
    """Parse and solve one request body; returns (response, parse seconds, solve seconds)."""
    started = perf_counter()
    problem = kind.parse(body, limits())
    parsed = perf_counter()
    result = bounded_solve(kind, problem, limits())
    return result, parsed - started, perf_counter() - parsed


def _make_view(kind: Kind):
    def view():
        if jobs.prefers_async():  # Prefer: respond-async (RFC 7240): 202 and a job
            return jobs.submit(kind, read_json_body())
        started = perf_counter()
        body = read_json_body()
        result, parse_s, solve_s = solve_request(kind, body)
        result["timing_ms"] = {
            "parse": round((perf_counter() - started - solve_s) * 1000, 3),
            "solve": round(solve_s * 1000, 3),
            "total": round((perf_counter() - started) * 1000, 3),
        }
        return json_response(result)

    view.__name__ = kind.name
    view.__doc__ = kind.summary
    return view


for _kind in KINDS.values():
    bp.add_url_rule(f"/{_kind.name}", view_func=_make_view(_kind), methods=["POST"])
