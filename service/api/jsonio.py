"""JSON in and out with orjson, and the request-body rules of the contract."""

from __future__ import annotations

import gc
import hashlib
import os
import threading
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager

import orjson
from flask import Response, current_app, g, has_request_context, request
from flask.json.provider import JSONProvider

from ..errors import BadRequest, UnsupportedMediaType
from .fastarcs import decode_arcs_body
from .fastjson import decode_columnar, looks_columnar

DUMP_OPTIONS = orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_NON_STR_KEYS


class OrjsonProvider(JSONProvider):
    """Flask JSON provider backed by orjson (numpy arrays serialise directly)."""

    def dumps(self, obj, **kwargs) -> str:
        return orjson.dumps(obj, option=DUMP_OPTIONS).decode()

    def loads(self, s, **kwargs):
        return orjson.loads(s)

    def response(self, *args, **kwargs) -> Response:
        obj = args[0] if len(args) == 1 else (args or kwargs)
        return Response(orjson.dumps(obj, option=DUMP_OPTIONS), mimetype="application/json")


def json_response(obj, status: int = 200, *, headers: dict | None = None,
                  mimetype: str = "application/json") -> Response:
    return Response(orjson.dumps(obj, option=DUMP_OPTIONS), status=status, headers=headers, mimetype=mimetype)


def _is_json(mimetype: str) -> bool:
    return mimetype == "application/json" or (mimetype.startswith("application/") and mimetype.endswith("+json"))


@contextmanager
def no_gc():
    """Pause the cyclic GC while decoding: a large payload allocates millions of
    acyclic objects, and repeated generation-2 scans over them cost more than the
    decode itself. Reference counting still frees everything as usual."""
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


def raw_body() -> bytes:
    """The request body, read once per request (later calls return the same bytes)."""
    raw = g.get("_sluice_raw_body")
    if raw is not None:
        return raw
    parts = g.pop("_sluice_raw_parts", None)
    if parts is not None:  # read by raw_body_fingerprint, joined only when needed
        raw = g._sluice_raw_body = b"".join(parts)
        return raw
    length = request.content_length
    if length is None:  # chunked: werkzeug enforces MAX_CONTENT_LENGTH while reading
        raw = request.get_data(cache=False)
    else:
        # One read of the announced length lets the server recv() in large chunks
        # instead of werkzeug's small ones (the length was checked against the limit).
        raw = request.environ["wsgi.input"].read(length)
        if len(raw) < length:
            raise BadRequest(f"the body ended after {len(raw)} of {length} bytes")
    g._sluice_raw_body = raw
    return raw


#: The body fingerprint hashes the body in steps of this size, so that a large body's
#: steps can be hashed on two threads at once.
FINGERPRINT_STEP = 1 << 20
_hash_pool: tuple[int, ThreadPoolExecutor] | None = None
_hash_pool_lock = threading.Lock()


def body_fingerprint(raw: bytes) -> bytes:
    """sha256 over the sha256 digests of the body's 1 MiB steps (32 bytes).

    As collision-resistant as sha256 itself (the steps have a fixed size, so the list
    of digests determines the body). The steps of a large body are hashed on two
    threads (hashlib releases the GIL): a 7 MB body took 4 ms in one sha256, most of a
    10 ms cache hit.
    """
    view = memoryview(raw)
    steps = [view[i:i + FINGERPRINT_STEP] for i in range(0, len(raw), FINGERPRINT_STEP)] or [view]
    if len(steps) == 1:
        digests = [hashlib.sha256(steps[0]).digest()]
    else:
        digests = list(_hashers().map(_sha256, steps))
    return hashlib.sha256(b"".join(digests)).digest()


def raw_body_fingerprint() -> bytes | None:
    """:func:`body_fingerprint` of the request body (read once, as :func:`raw_body`);
    None for an empty body.

    A large body not yet read is hashed while it arrives: each step is handed to the
    hashing threads as soon as it is received. Its steps are joined into one bytes
    object only when :func:`raw_body` asks, which a cache hit never does (the copy
    cost 1.4 ms of a 7 MB hit in-process).
    """
    length = request.content_length
    if g.get("_sluice_raw_body") is not None or length is None or length <= FINGERPRINT_STEP:
        raw = raw_body()
        return body_fingerprint(raw) if raw else None
    stream, pool, parts, pending, left = request.environ["wsgi.input"], _hashers(), [], [], length
    aligned = True  # every read so far was one whole step of the fingerprint
    while left:
        step = stream.read(min(FINGERPRINT_STEP, left))
        if not step:
            break
        parts.append(step)
        left -= len(step)
        if aligned and (len(step) == FINGERPRINT_STEP or not left):
            pending.append(pool.submit(_sha256, step))
        else:  # a short read (a trickling input): hash the whole body once it is here
            aligned = False
    if left:
        raise BadRequest(f"the body ended after {length - left} of {length} bytes")
    g._sluice_raw_parts = parts
    if not aligned:
        return body_fingerprint(raw_body())
    return hashlib.sha256(b"".join(f.result() for f in pending)).digest()


def _sha256(data) -> bytes:
    return hashlib.sha256(data).digest()


def _hashers() -> ThreadPoolExecutor:
    """This process's two hashing threads (made on first use, again after a fork)."""
    global _hash_pool
    with _hash_pool_lock:
        if _hash_pool is None or _hash_pool[0] != os.getpid():
            _hash_pool = (os.getpid(), ThreadPoolExecutor(2, thread_name_prefix="sluice-body-hash"))
        return _hash_pool[1]


def read_json_body(arc_columns: bool = False):
    """Decode the request body as JSON.

    Parameters
    ----------
    arc_columns : bool
        Whether a large ``arcs`` member may arrive as columns decoded straight from
        the bytes (:func:`~service.api.fastarcs.decode_arcs_body`: an
        :class:`~service.model.arcs.ObjectArcs`, or columns with interned string ids)
        instead of lists. Only callers that hand ``arcs`` to
        :func:`~service.model.arcs.read_network` and never re-serialise the body ask
        for it.

    Raises
    ------
    UnsupportedMediaType
        Content-Type is not ``application/json`` (or ``application/*+json``).
    BadRequest
        Invalid JSON, invalid UTF-8, NaN/Infinity literals, nesting too deep.
    """
    if not _is_json(request.mimetype or ""):
        raise UnsupportedMediaType(
            f"send the problem as application/json (got {request.mimetype or 'no Content-Type'})"
        )
    raw = raw_body()
    if not raw:
        raise BadRequest("the request body is empty; send a JSON object")
    if arc_columns:
        decoded = decode_arcs_body(raw)
        if decoded is not None:
            return decoded
    if looks_columnar(raw):  # what the scanner leaves aside, or a caller that keeps lists
        decoded = decode_columnar(raw)
        if decoded is not None:
            return decoded
    with no_gc():
        try:
            return orjson.loads(raw)
        except orjson.JSONDecodeError as exc:
            raise BadRequest(f"the body is not valid JSON: {exc}") from None


# --- bodies in other formats ------------------------------------------------------

#: Kinds whose solve endpoint also takes a DIMACS text body (the ``p`` line must match).
DIMACS_KINDS = {"maxflow": "max", "mincostflow": "min"}


def _read_text() -> str:
    raw = raw_body()
    if not raw:
        raise BadRequest("the request body is empty; send a DIMACS file")
    charset = (request.mimetype_params.get("charset") or "utf-8").lower()
    try:
        return raw.decode(charset)
    except (LookupError, UnicodeDecodeError) as exc:
        raise BadRequest(f"the body is not valid {charset} text: {exc}") from None


def decode_body(purpose: str | None = None, arc_columns: bool = False):
    """Decode the request body by its media type: JSON, or a DIMACS text file.

    Parameters
    ----------
    purpose : str, optional
        ``"maxflow"`` or ``"mincostflow"`` (a solve endpoint: a DIMACS file must be
        ``p max`` or ``p min`` respectively), ``"network"`` (a stored network: either
        format, nodes and arcs only), or another kind name (JSON only).

    Returns
    -------
    dict
        The request dict the JSON endpoint takes. For a DIMACS body, any later
        :class:`~service.errors.InputError` of this request has its JSON Pointers
        turned into ``/line/<n>`` pointers by the error handler.

    Raises
    ------
    UnsupportedMediaType
        Neither JSON nor ``text/x-dimacs`` (or DIMACS where the purpose takes JSON only).
    BadRequest, InputError
        As :func:`read_json_body`; DIMACS errors name the line.
    """
    from ..model.dimacs import MEDIA_TYPE, parse_dimacs

    mimetype = request.mimetype or ""
    takes_text = purpose in DIMACS_KINDS or purpose == "network"
    if mimetype == MEDIA_TYPE and takes_text:
        limits = current_app.extensions["sluice"].limits
        doc = parse_dimacs(_read_text(), max_arcs=limits.max_arcs, max_nodes=limits.max_nodes)
        body = doc.request(purpose)
        g.sluice_translate_errors = doc.translate
        return body
    if not _is_json(mimetype) and takes_text:
        raise UnsupportedMediaType(f"send the problem as application/json or {MEDIA_TYPE} "
                                   f"(got {mimetype or 'no Content-Type'})")
    return read_json_body(arc_columns)


def translate_errors(exc):
    """An input error of a text body, with line pointers (unchanged for JSON bodies)."""
    translate = g.get("sluice_translate_errors") if has_request_context() else None
    return translate(exc) if translate is not None else exc


def dimacs_response(network, fmt: str, *, source=None, sink=None, supply=None, title=None) -> Response:
    """A network as a DIMACS file (for ``GET /v1/networks/{name}`` with ``Accept: text/x-dimacs``).

    See :func:`service.model.dimacs.to_dimacs`; ``source``/``sink`` are node indices.
    """
    from ..model.dimacs import MEDIA_TYPE, to_dimacs

    text = to_dimacs(network, fmt, source=source, sink=sink, supply=supply, title=title)
    return Response(text, mimetype=MEDIA_TYPE)
