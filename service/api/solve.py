"""Solve endpoints: one route per problem kind, ``POST /v1/<kind>``, behind the result cache,
and ``GET /v1/kinds``, what each registered kind can do."""

from __future__ import annotations

from time import perf_counter

from flask import Blueprint, current_app
from marshmallow import Schema, fields

from ..kinds import KINDS, Kind, Limits
from ..model.dimacs import MEDIA_TYPE as DIMACS_MEDIA_TYPE
from . import cache, jobs
from .declare import CACHE_STATUS, DIMACS_BODY_TEXT, SOLVE_BODY_TEXT, json_body, kind_title, ok, operation, problem
from .declare import SOLVE_TIMEOUT_TEXT, problems, scenario_json, scenario_text, text_body
from .jsonio import decode_body, json_response

bp = Blueprint("solve", __name__, url_prefix="/v1")


class CapabilitiesSchema(Schema):
    what_if = fields.Boolean(metadata={"description": "POST /v1/networks/{name}/{kind} asks it of a stored network."})
    dimacs = fields.String(allow_none=True, metadata={
        "description": "The DIMACS format (max or min) POST /v1/{kind} also takes as text/x-dimacs; null: JSON only."})
    diagram = fields.Boolean(metadata={"description": "POST /v1/diagram.svg draws its answers."})
    verify = fields.Boolean(metadata={"description": "POST /v1/verify/{kind} checks a client's plan."})
    jobs = fields.Boolean(metadata={"description": "POST /v1/jobs takes it (and Prefer: respond-async)."})
    batch = fields.Boolean(metadata={"description": "POST /v1/batch takes it as an item kind."})


class KindSchema(Schema):
    name = fields.String(metadata={"description": "The kind, also the path segment of POST /v1/{kind}."})
    summary = fields.String()
    endpoint = fields.String(metadata={"description": "Where to POST a problem of the kind."})
    example = fields.String(metadata={"description": "Name of its example under GET /v1/scenarios/{name}."})
    capabilities = fields.Nested(CapabilitiesSchema)


class KindListSchema(Schema):
    kinds = fields.List(fields.Nested(KindSchema))


def limits() -> Limits:
    """The size limits of this app, which every parsed problem must keep to."""
    return current_app.extensions["sluice"].limits


#: The example of a DIMACS body, by ``p`` format (the max-flow one is a served scenario).
DIMACS_EXAMPLES = {"max": scenario_text("depots-maxflow.dimacs"),
                   "min": "c two depots, two stores\np min 4 4\nn 1 30\nn 2 20\nn 3 -25\nn 4 -25\n"
                          "a 1 3 0 40 4\na 1 4 0 40 6\na 2 3 0 40 5\na 2 4 0 40 3\n"}


def dimacs_content(kind: Kind) -> dict:
    """The ``text/x-dimacs`` entry of the request body of a kind that takes DIMACS (else nothing)."""
    if kind.dimacs is None:
        return {}
    return text_body(DIMACS_MEDIA_TYPE, f"A DIMACS 'p {kind.dimacs}' file; errors point at /line/<n>.",
                     DIMACS_EXAMPLES[kind.dimacs])


def solve_operation(kind: Kind):
    """``POST /v1/{kind}``, from the kind's declaration: its schemas, example and DIMACS format."""
    title = kind_title(kind.name)
    return operation(
        f"solve_{kind.name}", kind.summary, parameters=[jobs.PREFER_PARAM],
        request={**json_body(f"{title}Request", scenario_json(kind.example)), **dimacs_content(kind)},
        schemas={f"{title}Request": kind.request_schema, f"{title}Response": kind.response_schema, **jobs.JOB_SCHEMAS},
        responses={
            "200": ok("Solved (status says optimal, infeasible or unbounded).", json_body(f"{title}Response"),
                      headers=CACHE_STATUS),
            **problems(400, 413, 415, 422, 500, texts={**SOLVE_BODY_TEXT, **(DIMACS_BODY_TEXT if kind.dimacs else {})}),
            "202": jobs.ACCEPTED,
            "503": problem(503, "Solver processes busy, or (with Prefer) the job queue is down."),
            "504": problem(504, SOLVE_TIMEOUT_TEXT),
        })


def _make_view(kind: Kind):
    def view():
        """Answer ``POST /v1/{kind}``: 200 with the answer (cached when the same body was seen before), or
        202 with a job under ``Prefer: respond-async``; errors are problem+json (:func:`solve_operation`).

        ``_make_view`` replaces this docstring with the kind's summary.
        """
        if jobs.prefers_async():  # Prefer: respond-async (RFC 7240): 202 and a job
            return jobs.submit(kind, decode_body(kind.dimacs))
        started = perf_counter()
        # A byte-identical body seen before is answered before it is even decoded.
        key = cache.body_key(kind)
        hit = cache.body_hit(key, started)
        if hit is not None:
            return hit
        # The decoded body of a large object-form request is millions of Python
        # objects; keep it alive until the response is sent so that freeing it does
        # not delay the answer.
        keep = [decode_body(kind.dimacs, arc_columns=True)]
        problem = kind.parse(keep[0], limits())
        response = cache.answer(kind, problem, started=started, key=key)
        response.call_on_close(keep.clear)
        return response

    view.__name__ = kind.name
    view.__doc__ = kind.summary
    return solve_operation(kind)(view)


@bp.get("/kinds")
@operation("list_kinds", "The problem kinds this service solves, and what each can do",
           responses={"200": ok("Name, summary, endpoint, example and capabilities of each kind.",
                                json_body("KindList"))},
           schemas={"KindList": KindListSchema})
def list_kinds():
    """What each registered kind can do, as its :class:`~service.kinds.base.Kind` declares it."""
    return json_response({"kinds": [
        {"name": kind.name, "summary": kind.summary, "endpoint": f"/v1/{kind.name}",
         "example": kind.example.removesuffix(".json"), "capabilities": kind.capabilities()}
        for kind in KINDS.values()]})


for _kind in KINDS.values():
    bp.add_url_rule(f"/{_kind.name}", view_func=_make_view(_kind), methods=["POST"])
