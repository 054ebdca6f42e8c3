"""``POST /v1/verify/maxflow`` and ``POST /v1/verify/mincostflow``: check a client's plan."""

from __future__ import annotations

from time import perf_counter

from flask import Blueprint, current_app

from ..deadline import Deadline
from ..errors import NotFound
from ..kinds import KINDS
from ..kinds import verify as verify_kind
from .jsonio import json_response, read_json_body
from .solve import limits

bp = Blueprint("verify", __name__, url_prefix="/v1/verify")


def verify_kinds() -> list[str]:
    """The ``{kind}`` of ``/v1/verify/{kind}``: the kinds declared ``verifiable``."""
    return [name for name, kind in KINDS.items() if kind.verifiable]


@bp.post("/<kind>")
def verify(kind: str):
    """Check a client's flows for a problem: feasibility, value or cost, optimality."""
    checked = verify_kinds()
    if kind not in checked:
        raise NotFound(f"plans can be verified for {', '.join(checked)}; not for {kind!r}")
    started = perf_counter()
    problem = verify_kind.parse(kind, read_json_body(), limits(), KINDS)
    parsed = perf_counter()
    out = verify_kind.check(problem, Deadline.after(current_app.extensions["sluice"].settings.time_limit))
    done = perf_counter()
    out["timing_ms"] = {"parse": round((parsed - started) * 1000, 3), "solve": round((done - parsed) * 1000, 3),
                        "total": round((done - started) * 1000, 3)}
    return json_response(out)
