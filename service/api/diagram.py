"""Diagrams over HTTP: ``POST /v1/diagram.svg`` and the record that draws a cached answer.

The drawing itself (layout, routing, labels, SVG) is :mod:`service.drawing`, which
knows nothing of HTTP or of the model; how a kind's problem (or a kept record of
one) becomes a :class:`~service.drawing.DrawnNetwork` is the kind's own declaration
(:attr:`service.kinds.base.Kind.picture`, :mod:`service.kinds.picture`). This module
asks it and answers.

Diagrams are for small networks: above ``SLUICE_MAX_DIAGRAM_NODES`` nodes or
``SLUICE_MAX_DIAGRAM_ARCS`` arcs the answer is a 413 problem.
"""

from __future__ import annotations

from dataclasses import replace
from time import perf_counter

import orjson
from flask import Blueprint, Response, current_app
from marshmallow import RAISE, Schema, fields

from ..drawing import draw
from ..errors import FieldError, InputError, ProblemTooLarge
from ..kinds import KINDS
from ..kinds.nested import under
from ..kinds.picture import drawn_body, drawn_timed
from ..model.schemas import load_envelope
from .bounded import bounded_solve
from .declare import SVG_MEDIA_TYPE, json_body, ok, operation, problems, scenario_json, text_body
from .jsonio import read_json_body

bp = Blueprint("diagram", __name__, url_prefix="/v1")

#: Suffix of the cache entry that keeps a small solved problem drawable by digest.
DRAWING_SUFFIX = ":drawing"


def diagram_kinds() -> list[str]:
    """The kinds that declare a ``picture``.

    Returns
    -------
    list of str
        Kind names in registry order.
    """
    return [name for name, kind in KINDS.items() if kind.picture is not None]


class DiagramRequest(Schema):
    class Meta:
        unknown = RAISE

    kind = fields.String(required=True, metadata={"description": "A drawn kind: " + ", ".join(diagram_kinds()) + "."})
    problem = fields.Dict(required=True, metadata={"description": "The request body of POST /v1/{kind}."})


def render_diagram(kind: str, body: dict, result: dict, *, max_nodes: int = 60, max_arcs: int = 200) -> str:
    """Draw a solved problem from its request body and its response, as SVG.

    Parameters
    ----------
    kind : str
        A kind that declares a network ``picture`` (not flows over time, whose cached
        record is drawn by :func:`cached_diagram`).
    body : dict
        The problem's request body (as sent to ``POST /v1/{kind}``, or as kept by
        :func:`drawing_record`).
    result : dict
        The solve response for that body.
    max_nodes, max_arcs : int
        Size limits of a drawing.

    Returns
    -------
    str
        The SVG document.

    Raises
    ------
    InputError
        A body that does not hold a network.
    ProblemTooLarge
        Above the size limits.
    """
    drawn = drawn_body(body, max_nodes=max_nodes, max_arcs=max_arcs)
    return draw(KINDS[kind].picture.drawer, drawn, plain(result))


def plain(result: dict) -> dict:
    """The answer as a client sees it (JSON values, ids as sent), whether it comes fresh
    from a solver (numpy arrays) or from the result cache."""
    return orjson.loads(orjson.dumps(result, option=orjson.OPT_SERIALIZE_NUMPY))


def svg_response(svg: str) -> Response:
    """An SVG drawing as a 200 response with ``Cache-Control: no-store``."""
    return Response(svg, mimetype=SVG_MEDIA_TYPE, headers={"Cache-Control": "no-store"})


def _check_drawn(kind: str) -> None:
    if kind not in diagram_kinds():
        raise InputError.at("/kind", f"diagrams are drawn for {' and '.join(diagram_kinds())}")


def solution_diagram(kind: str, problem_body: dict, result: dict) -> Response:
    """The diagram of an already solved problem, as a Flask response.

    For ``GET /v1/solutions/{digest}/diagram.svg``: pass the cached solution's kind,
    its request body and its response document. Raises ``ProblemTooLarge`` (413) above
    the diagram size limits and ``InputError`` (422) for a kind that is not drawn.
    """
    _check_drawn(kind)
    settings = current_app.extensions["sluice"].settings
    return svg_response(render_diagram(kind, problem_body, result, max_nodes=settings.max_diagram_nodes,
                                       max_arcs=settings.max_diagram_arcs))


def drawing_record(kind_name: str, problem) -> bytes | None:
    """What ``GET /v1/solutions/{digest}/diagram.svg`` needs to draw a cached answer later.

    The result cache keeps answers, not problems; for the kinds that are drawn, a small
    record is kept beside the answer: ``{"kind", ...}`` joined with what the kind's
    :attr:`~service.kinds.base.Kind.picture` keeps (``"body"``: the request body as
    columns, or ``"timed"``: a flow over time's drawn form; :mod:`service.kinds.picture`).
    Problems above the diagram limits keep only their size,
    ``{"kind", "too_large": {"nodes", "arcs"}}``, so the route can answer 413 rather
    than 404.

    Parameters
    ----------
    kind_name : str
        The problem's kind.
    problem : Problem
        The parsed problem (its ``network`` gives the size).

    Returns
    -------
    bytes or None
        The record as JSON; ``None`` for kinds that are not drawn.
    """
    picture = KINDS[kind_name].picture
    if picture is None:
        return None
    network = problem.network
    settings = current_app.extensions["sluice"].settings
    if network.num_nodes > settings.max_diagram_nodes or network.num_arcs > settings.max_diagram_arcs:
        return orjson.dumps({"kind": kind_name, "too_large": {"nodes": network.num_nodes, "arcs": network.num_arcs}})
    return orjson.dumps({"kind": kind_name, **picture.record(problem)}, option=orjson.OPT_SERIALIZE_NUMPY)


def cached_diagram(record: bytes, result: bytes) -> Response:
    """The SVG of a cached answer from its drawing record (see :func:`drawing_record`)."""
    doc = orjson.loads(record)
    if "too_large" in doc:
        size = doc["too_large"]
        settings = current_app.extensions["sluice"].settings
        raise ProblemTooLarge(FieldError("", f"the problem has {size['nodes']} nodes and {size['arcs']} arcs; "
                                             f"diagrams are drawn for at most {settings.max_diagram_nodes} nodes "
                                             f"and {settings.max_diagram_arcs} arcs"))
    if "timed" in doc:
        return svg_response(draw(KINDS[doc["kind"]].picture.drawer, drawn_timed(doc["timed"]), orjson.loads(result)))
    return solution_diagram(doc["kind"], doc["body"], orjson.loads(result))


def _parse_drawable(kind, body, state):
    """The problem, parsed once, within the diagram size limits (a 413 before any solve)."""
    settings = state.settings
    limits = replace(state.limits, max_arcs=min(state.limits.max_arcs, settings.max_diagram_arcs),
                     max_nodes=min(state.limits.max_nodes, settings.max_diagram_nodes))
    try:
        return kind.parse(body, limits)
    except ProblemTooLarge as exc:
        setting = {"/arcs": "SLUICE_MAX_DIAGRAM_ARCS", "/nodes": "SLUICE_MAX_DIAGRAM_NODES"}
        raise ProblemTooLarge([FieldError(e.pointer, f"{e.detail} for a diagram "
                                                     f"({setting.get(e.pointer, 'the diagram limits')})")
                               for e in exc.errors]) from None


@bp.post("/diagram.svg")
@operation("draw_solution",
           f"Solve a small problem ({', '.join(diagram_kinds())}) and draw the answer as SVG",
           request=json_body("DiagramRequest", {"kind": "maxflow", "problem": scenario_json("depots-maxflow.json")}),
           schemas={"DiagramRequest": DiagramRequest},
           responses={"200": ok("The drawing.", text_body(SVG_MEDIA_TYPE)),
                      # a solve, not a plan check: the standard 504 wording is the check's
                      **problems(400, 413, 415, 422, 500, 504,
                                 texts={504: "The solve exceeded the synchronous time limit and was stopped."})})
def diagram():
    """Solve a small problem and draw the answer as SVG."""
    state = current_app.extensions["sluice"]
    envelope = load_envelope(DiagramRequest(), read_json_body())
    kind_name = envelope["kind"]
    _check_drawn(kind_name)
    kind = KINDS[kind_name]
    started = perf_counter()
    with under("/problem"):
        problem = _parse_drawable(kind, envelope["problem"], state)
        result = bounded_solve(kind, problem)
    response = svg_response(draw(kind.picture.drawer, kind.picture.drawn(problem), plain(result)))
    response.headers["Server-Timing"] = f"total;dur={(perf_counter() - started) * 1000:.1f}"
    return response
