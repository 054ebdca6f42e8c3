"""Solve endpoints: one route per problem kind, ``POST /v1/<kind>``."""

from __future__ import annotations

from time import perf_counter

from flask import Blueprint, current_app

from ..kinds import KINDS, Kind, Limits
from .jsonio import json_response, read_json_body

bp = Blueprint("solve", __name__, url_prefix="/v1")


def limits() -> Limits:
    return current_app.extensions["sluice"].limits


def solve_request(kind: Kind, body) -> tuple[dict, float, float]:
    """Parse and solve one request body; returns (response, parse seconds, solve seconds)."""
    started = perf_counter()
    problem = kind.parse(body, limits())
    parsed = perf_counter()
    result = kind.solve(problem, limits())
    return result, parsed - started, perf_counter() - parsed


def timing(started: float, solve_s: float) -> dict:
    total = perf_counter() - started
    return {"parse": round((total - solve_s) * 1000, 3), "solve": round(solve_s * 1000, 3),
            "total": round(total * 1000, 3)}


def _make_view(kind: Kind):
    def view():
        started = perf_counter()
        # The decoded body of a large object-form request is millions of Python
        # objects; keep it alive until the response is sent so that freeing it does
        # not delay the answer.
        keep = [read_json_body()]
        result, _parse_s, solve_s = solve_request(kind, keep[0])
        result["timing_ms"] = timing(started, solve_s)
        response = json_response(result)
        response.call_on_close(keep.clear)
        return response

    view.__name__ = kind.name
    view.__doc__ = kind.summary
    return view


for _kind in KINDS.values():
    bp.add_url_rule(f"/{_kind.name}", view_func=_make_view(_kind), methods=["POST"])
