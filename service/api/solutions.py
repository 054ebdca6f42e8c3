"""Cached results by digest: ``GET /v1/solutions/{digest}`` with ETag and If-None-Match."""

from __future__ import annotations

import hashlib

from flask import Blueprint, Response, request

from ..errors import NotFound
from ..store import check_digest
from .diagram import DRAWING_SUFFIX, cached_diagram
from .storage import get_store, tenant

bp = Blueprint("solutions", __name__, url_prefix="/v1/solutions")


@bp.get("/<digest>")
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
def get_solution_diagram(digest: str):
    """An SVG drawing of a cached answer: flows, the cut or binding arcs, potentials."""
    check_digest(digest)
    store = get_store()
    value = store.get_result(tenant(), digest)
    record = store.get_result(tenant(), digest + DRAWING_SUFFIX) if value is not None else None
    if value is None or record is None:
        raise NotFound(f"no drawable cached solution for {digest}: solve the problem again "
                       "(diagrams are kept for max-flow and min-cost flow answers)")
    return cached_diagram(record, value)
