"""Cached results by digest: ``GET /v1/solutions/{digest}`` with ETag and If-None-Match."""

from __future__ import annotations

import hashlib

from flask import Blueprint, Response, request

from ..errors import NotFound
from ..store import check_digest
from .declare import SVG_MEDIA_TYPE, header_parameter, json_body, ok, operation, path_parameter, problem, problems
from .declare import text_body
from .diagram import DRAWING_SUFFIX, cached_diagram, diagram_kinds
from .storage import get_store, tenant

#: The ``{digest}`` of these paths (what a solve response's ``digest`` holds).
DIGEST = path_parameter("digest", {"type": "string", "pattern": "^sha256:[0-9a-f]{64}$"})

bp = Blueprint("solutions", __name__, url_prefix="/v1/solutions")


@bp.get("/<digest>")
@operation("get_solution", "A cached answer, by the digest its solve response carried.",
           parameters=[DIGEST, header_parameter("If-None-Match")],
           responses={"200": ok("The cached answer (without timing_ms).", json_body({"type": "object"}), headers={
                          "ETag": {"description": "Hash of the cached answer.", "schema": {"type": "string"}}}),
                      "304": ok("Not modified."),
                      "400": problem(400, "The digest is malformed."),
                      "404": problem(404, "Not cached (never solved here, or evicted)."),
                      "503": problem(503)})
def get_solution(digest: str):
    """The cached answer for a problem digest (as the solve returned it, without timing_ms).

    The ETag hashes the stored bytes, so it changes whenever the cached answer does.
    """
    check_digest(digest)
    value = get_store().get_result(tenant(), digest)
    if value is None:
        raise NotFound(f"no cached solution for {digest}: it was never solved here or has been evicted; "
                       "solve the problem again")
    etag = hashlib.sha256(value).hexdigest()[:32]
    headers = {"ETag": f'"{etag}"', "Cache-Control": "no-cache"}
    if request.if_none_match.contains_weak(etag):
        return Response(status=304, headers=headers)
    return Response(value, mimetype="application/json", headers=headers)


@bp.get("/<digest>/diagram.svg")
@operation("draw_cached_solution", "Draw a cached answer of a drawn kind as SVG",
           description="Small solved problems are kept beside their cached answers so they can be drawn by "
                       "digest; a problem above the diagram limits answers 413, an unknown or evicted one 404.",
           parameters=[DIGEST],
           responses={"200": ok("The drawing.", text_body(SVG_MEDIA_TYPE)), **problems(400, 404, 413)})
def get_solution_diagram(digest: str):
    """An SVG drawing of a cached answer: flows, the cut or binding arcs, potentials."""
    check_digest(digest)
    store = get_store()
    value = store.get_result(tenant(), digest)
    record = store.get_result(tenant(), digest + DRAWING_SUFFIX) if value is not None else None
    if value is None or record is None:
        raise NotFound(f"no drawable cached solution for {digest}: solve the problem again "
                       f"(diagrams are kept for answers of {', '.join(diagram_kinds())})")
    return cached_diagram(record, value)
