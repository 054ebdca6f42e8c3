"""``POST /v1/verify/{kind}``: check a client's plan, for the kinds that declare ``verify``."""

from __future__ import annotations

from time import perf_counter

from flask import Blueprint, current_app

from ..deadline import Deadline
from ..errors import NotFound
from ..kinds import KINDS
from ..kinds.verify import VerifyRequest, VerifyResponse
from .cache import stage_timing
from .declare import json_body, ok, operation, path_parameter, problems, scenario_json
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
@operation("verify_plan",
           "Check a client's flows: feasibility, value or cost, optimality with an improving path or cycle",
           parameters=[path_parameter("kind", {"type": "string", "enum": verify_kinds()})],
           request=json_body("VerifyRequest", scenario_json("verify-depots-maxflow.json")),
           schemas={"VerifyRequest": VerifyRequest, "VerifyResponse": VerifyResponse},
           responses={"200": ok("The verdict (an infeasible plan is still a 200).", json_body("VerifyResponse")),
                      **problems(400, 404, 413, 415, 422, 500, 504)})
def verify(kind: str):
    """Check a client's flows for a problem: feasibility, value or cost, optimality."""
    plans = KINDS[kind].verify if kind in KINDS else None
    if plans is None:
        raise NotFound(f"plans can be verified for {', '.join(verify_kinds())}; not for {kind!r}")
    started = perf_counter()
    problem = plans.parse(read_json_body(), limits())
    parsed = perf_counter()
    out = plans.check(problem, Deadline.after(current_app.extensions["sluice"].settings.time_limit))
    done = perf_counter()
    out["timing_ms"] = stage_timing(started, parsed, done)
    return json_response(out)
