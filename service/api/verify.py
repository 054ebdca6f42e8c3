"""``POST /v1/verify/{kind}``: check a client's plan, for the kinds that declare ``verify``."""

from __future__ import annotations

from time import perf_counter

from flask import Blueprint

from ..errors import NotFound
from ..kinds import KINDS
from .jsonio import json_response, read_json_body
from .solve import limits

bp = Blueprint("verify", __name__, url_prefix="/v1/verify")


def verify_kinds() -> list[str]:
    """The ``{kind}`` of ``/v1/verify/{kind}``: the kinds that declare a plan verifier.

    Returns
    -------
    list of str
        Kind names in registry order.
    """
    return [name for name, kind in KINDS.items() if kind.verify is not None]


@bp.post("/<kind>")
def verify(kind: str):
    """Check a client's flows for a problem: feasibility, value or cost, optimality."""
    plans = KINDS[kind].verify if kind in KINDS else None
    if plans is None:
        raise NotFound(f"plans can be verified for {', '.join(verify_kinds())}; not for {kind!r}")
    started = perf_counter()
    problem = plans.parse(read_json_body(), limits())
    parsed = perf_counter()
    out = plans.check(problem, limits())
    done = perf_counter()
    out["timing_ms"] = {"parse": round((parsed - started) * 1000, 3), "solve": round((done - parsed) * 1000, 3),
                        "total": round((done - started) * 1000, 3)}
    return json_response(out)
