"""The result cache in front of every solve.

The store it reads and writes is :mod:`service.api.storage`'s. Cache keys are problem
digests, which already cover the normalised data, the answer-changing options and the
solver version. ``options.cache``:

``use`` (default)
    Answer from the cache when the digest is there, else solve and store.
``refresh``
    Solve again and overwrite the cached result.
``bypass``
    Solve without reading or writing the cache.

Every solve response says what happened in a ``Cache-Status`` header (RFC 9211):

====================================================  =======================================
``sluice; hit``                                        answered from the cache
``sluice; fwd=miss; stored``                           solved, result stored
``sluice; fwd=request; stored``                        ``refresh``: solved again, stored
``sluice; fwd=request; detail=bypass``                 ``bypass``: solved, not stored
``sluice; fwd=miss; detail=too-large``                 solved; too large to cache
``sluice; fwd=bypass; detail=store-unavailable``       the store is down: solved, not cached
``sluice; fwd=miss; detail=not-final``                 solved, but the status is not a final
                                                       answer (e.g. a time limit): not cached
====================================================  =======================================

The fast path: a byte-identical body (same endpoint, same bytes) is answered from the
hash of the raw body (BLAKE3), mapped to the digest it normalised to, without decoding or
parsing it. Such an alias is only recorded for requests whose ``options.cache`` was
``use``, so a body that asks for ``refresh`` or ``bypass`` never takes the fast path.
"""

from __future__ import annotations

import hashlib
import logging
from time import perf_counter

import orjson
from flask import Response, current_app, request

from ..kinds import Kind, Limits
from ..store import Store, StoreUnavailable
from .bounded import bounded_solve
from .diagram import DRAWING_SUFFIX, drawing_record
from .encoding import mark_stable_start
from .jsonio import DUMP_OPTIONS, _is_json, raw_body, raw_body_fingerprint
from .metrics import CACHE_EVENTS
from .storage import get_store, tenant

log = logging.getLogger("sluice.cache")

HIT = "sluice; hit"
STORED = "sluice; fwd=miss; stored"
REFRESHED = "sluice; fwd=request; stored"
BYPASSED = "sluice; fwd=request; detail=bypass"
TOO_LARGE = "sluice; fwd=miss; detail=too-large"
UNAVAILABLE = "sluice; fwd=bypass; detail=store-unavailable"
NOT_FINAL = "sluice; fwd=miss; detail=not-final"

#: The metrics label of each Cache-Status.
_EVENT = {HIT: "hit", STORED: "stored", REFRESHED: "stored", BYPASSED: "bypass", TOO_LARGE: "miss",
          UNAVAILABLE: "unavailable", NOT_FINAL: "miss"}

#: Only answers that another solve would repeat are cached; an answer cut short by a
#: time limit would be wrong to serve to a request that allows more time.
FINAL_STATUSES = frozenset({"optimal", "infeasible", "unbounded"})


def _limits() -> Limits:
    return current_app.extensions["sluice"].limits


def body_key(kind: Kind) -> str | None:
    """sha256 of the endpoint, the limits and the raw body's BLAKE3 hash; None when the body is not JSON.

    The limits are part of the key because a body accepted under one limit may be
    refused under another (hosts sharing one Redis may differ).
    """
    if not _is_json(request.mimetype or ""):
        return None
    if not request.content_length and not raw_body():
        return None
    limits = _limits()
    h = hashlib.sha256(f"{kind.name}|{limits.max_arcs}|{limits.max_nodes}|".encode())
    h.update(raw_body_fingerprint())  # reads the body once: read_json_body decodes the same bytes
    return h.hexdigest()


def body_hit(key: str | None, started: float) -> Response | None:
    """The cached answer to a byte-identical earlier body, or None."""
    if key is None:
        return None
    try:
        cached = get_store().get_result_by_body(tenant(), key)
    except StoreUnavailable as exc:
        log.debug("cache skipped: %s", exc.detail)
        return None
    if cached is None:
        return None
    return respond(cached, HIT, _timing(started, perf_counter(), 0.0), memo_key=key)


def answer(kind: Kind, problem, *, started: float, key: str | None = None, extra: dict | None = None) -> Response:
    """Answer a parsed problem from the cache or by solving it, per ``options.cache``.

    Parameters
    ----------
    kind : Kind
    problem
        With ``digest`` and ``options``.
    started : float
        ``perf_counter()`` when the request arrived, for ``timing_ms``.
    key : str, optional
        The raw-body key, recorded as an alias of the digest after a ``use`` miss.
    extra : dict, optional
        Members added to the response (not to the cached result).
    """
    mode = problem.options.get("cache") or "use"
    store = get_store()
    who = tenant()
    available = True
    if mode == "use":
        try:
            cached = store.get_result(who, problem.digest)
        except StoreUnavailable as exc:
            # The store logs the outage once (and its end); each skipped request at debug.
            log.debug("cache skipped for %s: %s", problem.digest, exc.detail)
            cached, available = None, False
        if cached is not None:
            if key is not None:
                _quietly(store.put_alias, who, key, problem.digest)
            return respond(cached, HIT, _timing(started, perf_counter(), 0.0), extra, memo_key=problem.digest)
    t0 = perf_counter()
    result = bounded_solve(kind, problem)
    solved = perf_counter()
    payload = orjson.dumps(result, option=DUMP_OPTIONS)
    status = BYPASSED if mode == "bypass" else UNAVAILABLE
    if mode != "bypass" and result.get("status") not in FINAL_STATUSES:
        status = NOT_FINAL
    elif mode != "bypass" and available:
        try:
            stored = store.put_result(who, problem.digest, payload, key if mode == "use" else None)
            if stored:
                _keep_drawing(store, who, kind, problem)
            status = (STORED if mode == "use" else REFRESHED) if stored else TOO_LARGE
        except StoreUnavailable as exc:
            log.debug("result not cached for %s: %s", problem.digest, exc.detail)
            status = UNAVAILABLE
    return respond(payload, status, _timing(started, t0, solved - t0), extra)


def _keep_drawing(store: Store, who: str, kind: Kind, problem) -> None:
    """Keep a small problem beside its answer so the answer can be drawn by digest."""
    record = drawing_record(kind.name, problem)
    if record is not None:
        _quietly(store.put_result, who, problem.digest + DRAWING_SUFFIX, record, None)


def _quietly(fn, *args) -> None:
    try:
        fn(*args)
    except StoreUnavailable as exc:
        log.debug("cache skipped: %s", exc.detail)


def stage_timing(started: float, parsed: float, done: float) -> dict:
    """``timing_ms`` of a request read by ``parsed`` and answered by ``done`` (``perf_counter()`` instants)."""
    return {"parse": round((parsed - started) * 1000, 3), "solve": round((done - parsed) * 1000, 3),
            "total": round((done - started) * 1000, 3)}


def _timing(started: float, solve_started: float, solve_s: float) -> dict:
    now = perf_counter()
    return {
        "parse": round((solve_started - started) * 1000, 3),
        "solve": round(solve_s * 1000, 3),
        "total": round((now - started) * 1000, 3),
    }


def respond(payload: bytes, cache_status: str, timing: dict, extra: dict | None = None, *,
            memo_key: str | None = None) -> Response:
    """A solve response from a result's JSON bytes, with members appended (no re-encoding).

    The cached bytes are the result without ``timing_ms``; appending members to the
    serialised object costs one copy instead of a decode and an encode. ``memo_key``
    (a hit's digest or body key) tells the gzip step that the response starts with
    the same bytes every time it is asked for, so it compresses only the rest.
    """
    tail = b"".join(b',"' + name.encode() + b'":' + orjson.dumps(value, option=DUMP_OPTIONS)
                    for name, value in {**(extra or {}), "timing_ms": timing}.items())
    if payload == b"{}":
        tail = tail[1:]
    CACHE_EVENTS.labels(_EVENT.get(cache_status, "miss")).inc()
    response = Response(payload[:-1] + tail + b"}", mimetype="application/json",
                        headers={"Cache-Status": cache_status})
    if memo_key is not None:
        mark_stable_start(response, memo_key, len(payload) - 1)
    return response
