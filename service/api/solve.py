"""Solve endpoints: one route per problem kind, ``POST /v1/<kind>``, behind the result cache."""

from __future__ import annotations

from time import perf_counter

from flask import Blueprint, current_app

from ..kinds import KINDS, Kind, Limits
from . import cache, jobs
from .jsonio import decode_body

bp = Blueprint("solve", __name__, url_prefix="/v1")


def limits() -> Limits:
    return current_app.extensions["sluice"].limits


def _make_view(kind: Kind):
    def view():
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
    return view


for _kind in KINDS.values():
    bp.add_url_rule(f"/{_kind.name}", view_func=_make_view(_kind), methods=["POST"])
