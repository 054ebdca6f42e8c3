"""Diagrams over HTTP: ``POST /v1/diagram.svg`` and the record that draws a cached answer.

The drawing itself (layout, routing, labels, SVG) is :mod:`service.drawing`, which
knows nothing of HTTP or of the model; this module turns a parsed problem (or a
kept record of one) into its :class:`~service.drawing.DrawnNetwork` and answers.

Diagrams are for small networks: above ``SLUICE_MAX_DIAGRAM_NODES`` nodes or
``SLUICE_MAX_DIAGRAM_ARCS`` arcs the answer is a 413 problem.
"""

from __future__ import annotations

from dataclasses import replace
from time import perf_counter

import numpy as np
import orjson
from flask import Blueprint, Response, current_app
from marshmallow import RAISE, Schema, fields

from ..drawing import DrawnNetwork, draw
from ..errors import FieldError, InputError, ProblemTooLarge
from ..kinds import KINDS
from ..kinds.nested import under
from ..model.arcs import Network, export_network, read_network
from ..model.columns import number_column
from ..model.schemas import load_envelope
from .bounded import bounded_solve
from .declare import SVG_MEDIA_TYPE, json_body, ok, operation, problems, scenario_json, text_body
from .jsonio import read_json_body

bp = Blueprint("diagram", __name__, url_prefix="/v1")

#: Suffix of the cache entry that keeps a small solved problem drawable by digest.
DRAWING_SUFFIX = ":drawing"


def diagram_kinds() -> list[str]:
    """The kinds that declare a ``drawer``.

    Returns
    -------
    list of str
        Kind names in registry order.
    """
    return [name for name, kind in KINDS.items() if kind.drawer is not None]


class DiagramRequest(Schema):
    class Meta:
        unknown = RAISE

    kind = fields.String(required=True, metadata={"description": "A drawn kind: " + ", ".join(diagram_kinds()) + "."})
    problem = fields.Dict(required=True, metadata={"description": "The request body of POST /v1/{kind}."})


def drawn_network(network: Network, *, supply=None, source: int | None = None,
                  sink: int | None = None) -> DrawnNetwork:
    """The plain form of a normalised network that :mod:`service.drawing` draws."""
    ids = np.asarray(network.nodes.ids).tolist() if network.nodes.kind is int else list(network.nodes.ids)
    capacity = network.capacity.astype(np.float64)
    if network.unlimited is not None:
        capacity[network.unlimited] = np.inf
    return DrawnNetwork(ids, network.tail.astype(np.int64), network.head.astype(np.int64), capacity,
                        lower=_floats(network.lower), cost=_floats(network.cost), keys=network.keys,
                        supply=_floats(supply), source=source, sink=sink)


def _floats(values) -> np.ndarray | None:
    return None if values is None else np.asarray(values, dtype=np.float64)


def drawn_problem(problem) -> DrawnNetwork:
    """A parsed problem of a drawn kind as a :class:`DrawnNetwork`."""
    if hasattr(problem.network, "transit"):
        return drawn_timed(timed_record(problem))
    ends = _ends(problem)
    return drawn_network(problem.network, supply=getattr(problem, "supply", None),
                         source=getattr(ends, "source", None), sink=getattr(ends, "sink", None))


def timed_record(problem) -> dict:
    """A flow-over-time problem as plain JSON values: what its lanes-against-periods
    picture needs (ids, lanes, transit, capacity per period with null for no limit)."""
    net = problem.network
    m, horizon = net.num_arcs, net.horizon
    capacity = np.broadcast_to(np.asarray(net.capacity, dtype=np.float64).reshape(m, -1), (m, horizon)).copy()
    if net.unlimited is not None:
        capacity[np.broadcast_to(net.unlimited.reshape(m, -1), (m, horizon))] = np.nan
    ids = problem.nodes.ids
    return {"ids": np.asarray(ids).tolist() if problem.nodes.kind is int else list(ids),
            "tail": net.tail.tolist(), "head": net.head.tolist(), "transit": net.transit.tolist(),
            "capacity": [[None if np.isnan(c) else c for c in row] for row in capacity.tolist()],
            "keys": problem.keys,
            "source": problem.source, "sink": problem.sink}


def drawn_timed(record: dict) -> DrawnNetwork:
    """The flow-over-time picture of a record made by :func:`timed_record`.

    Each lane is drawn with its largest capacity over the periods and keeps its capacities per
    period; a null capacity (no limit) becomes infinity.
    """
    capacity = np.array([[np.inf if c is None else c for c in row] for row in record["capacity"]],
                        dtype=np.float64).reshape(len(record["tail"]), -1)
    return DrawnNetwork(record["ids"], np.asarray(record["tail"], dtype=np.int64),
                        np.asarray(record["head"], dtype=np.int64),
                        capacity.max(axis=1) if capacity.size else np.zeros(len(record["tail"])),
                        keys=record["keys"], source=record["source"], sink=record["sink"],
                        transit=np.asarray(record["transit"], dtype=np.int64), period_capacity=capacity)


def _ends(problem):
    """What holds the problem's source and sink (an expansion keeps them with its lanes)."""
    return getattr(problem, "lanes", problem)


def render_diagram(kind: str, body: dict, result: dict, *, max_nodes: int = 60, max_arcs: int = 200) -> str:
    """Draw a solved problem from its request body and its response, as SVG.

    Parameters
    ----------
    kind : str
        A kind that declares a ``drawer`` (network pictures: not flows over time, whose
        cached record is drawn by :func:`cached_diagram`).
    body : dict
        The problem's request body (as sent to ``POST /v1/{kind}``, or as kept by
        :func:`drawing_record`).
    result : dict
        The solve response for that body.
    max_nodes, max_arcs : int
        Size limits of a drawing.

    Raises
    ------
    InputError
        A body that does not hold a network.
    ProblemTooLarge
        Above the size limits.
    """
    if not isinstance(body, dict) or "arcs" not in body:
        raise InputError.at("/arcs", "is required")
    network, nodes = read_network(body["arcs"], body.get("nodes"), max_arcs=max_arcs, max_nodes=max_nodes)
    supply = np.zeros(network.num_nodes)
    column = nodes.fields.get("supply")
    if column is not None:
        values = number_column(column.values, column.where).values
        supply[: values.size] = values
    ends = {end: network.nodes.index_of(body[end]) for end in ("source", "sink") if end in body}
    return draw(KINDS[kind].drawer, drawn_network(network, supply=supply, **ends), plain(result))


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

    The result cache keeps answers, not problems; for the kinds that are drawn, a
    small record with the problem's request body (as columns) is kept beside the
    answer: ``{"kind", "body": {"nodes", "arcs", "source"?, "sink"?}}`` (nodes with
    their ``supply`` when the problem has supplies). Problems above the diagram limits
    keep only their size, ``{"kind", "too_large": {"nodes", "arcs"}}``, so the route can
    answer 413 rather than 404. ``None`` for kinds that are not drawn.
    """
    if KINDS[kind_name].drawer is None:
        return None
    network = problem.network
    settings = current_app.extensions["sluice"].settings
    if network.num_nodes > settings.max_diagram_nodes or network.num_arcs > settings.max_diagram_arcs:
        return orjson.dumps({"kind": kind_name, "too_large": {"nodes": network.num_nodes, "arcs": network.num_arcs}})
    if hasattr(network, "transit"):  # flows over time: the drawn form itself (its body has no Network)
        return orjson.dumps({"kind": kind_name, "timed": timed_record(problem)})
    body = export_network(network)
    ids = network.nodes.ids
    for end in ("source", "sink"):
        if getattr(_ends(problem), end, None) is not None:
            body[end] = ids[getattr(_ends(problem), end)]
    supply = getattr(problem, "supply", None)
    if supply is not None:
        body["nodes"] = {"id": list(ids), "supply": np.asarray(supply).tolist()}
    return orjson.dumps({"kind": kind_name, "body": body}, option=orjson.OPT_SERIALIZE_NUMPY)


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
        return svg_response(draw(KINDS[doc["kind"]].drawer, drawn_timed(doc["timed"]), orjson.loads(result)))
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
                      **problems(400, 413, 415, 422, 500, 504)})
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
    response = svg_response(draw(kind.drawer, drawn_problem(problem), plain(result)))
    response.headers["Server-Timing"] = f"total;dur={(perf_counter() - started) * 1000:.1f}"
    return response
