"""JSON in and out with orjson, and the request-body rules of the contract."""

from __future__ import annotations

import gc
import queue
import threading
import zlib
from contextlib import contextmanager

import orjson
from blake3 import blake3
from flask import Response, current_app, g, has_request_context, request
from flask.json.provider import JSONProvider

from ..errors import BadRequest, FieldError, ProblemTooLarge, UnsupportedMediaType
from ..intake import BODY_FINGERPRINT, BODY_STEPS, HASH_FROM
from ..model.dimacs import MEDIA_TYPE, parse_dimacs
from ..model.dimacs_write import to_dimacs
from ..model.fastarcs import decode_arcs_body
from ..model.fastjson import decode_columnar, looks_columnar

DUMP_OPTIONS = orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_NON_STR_KEYS


class OrjsonProvider(JSONProvider):
    """Flask JSON provider backed by orjson (numpy arrays serialise directly)."""

    def dumps(self, obj, **kwargs) -> str:
        """``obj`` as JSON text by orjson (numpy arrays, non-string keys); Flask's keyword options are ignored."""
        return orjson.dumps(obj, option=DUMP_OPTIONS).decode()

    def loads(self, s, **kwargs):
        """The value of JSON text or bytes, by orjson; keyword options are ignored."""
        return orjson.loads(s)

    def response(self, *args, **kwargs) -> Response:
        """A JSON response, as :func:`flask.jsonify` takes its values.

        One positional value is serialised as is, several as an array, keyword values as an object.
        """
        obj = args[0] if len(args) == 1 else (args or kwargs)
        return Response(orjson.dumps(obj, option=DUMP_OPTIONS), mimetype="application/json")


def json_response(obj, status: int = 200, *, headers: dict | None = None,
                  mimetype: str = "application/json") -> Response:
    """``obj`` serialised by orjson (numpy arrays directly) as a Flask response.

    Parameters
    ----------
    obj
        Any value orjson serialises with :data:`DUMP_OPTIONS`.
    status : int
    headers : dict, optional
    mimetype : str
        ``application/problem+json`` for a problem document, for instance.
    """
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


#: Bodies from this size on are hashed while they arrive (when the cache asks for the hash).
HASH_WHILE_READING = HASH_FROM
_READ_STEP = 1 << 20


class _ReceivedBody:
    """The request body as it arrived: its steps (joined on first use) and, when it was
    hashed on the way in, its fingerprint."""

    def __init__(self, steps: list[bytes], fingerprint: bytes | None = None):
        self.steps, self._fingerprint, self._raw = steps, fingerprint, None

    def raw(self) -> bytes:
        """The whole body as one bytes object, joined on the first call (the steps then hold only it)."""
        if self._raw is None:
            self._raw = self.steps[0] if len(self.steps) == 1 else b"".join(self.steps)
            self.steps = [self._raw]
        return self._raw

    def fingerprint(self) -> bytes:
        """The body's :func:`body_fingerprint`: the one taken while it arrived, else computed now."""
        if self._fingerprint is None:
            # Step by step: a cache hit never needs the steps joined (a copy of the body).
            self._fingerprint = body_fingerprint(*self.steps)
        return self._fingerprint


def raw_body() -> bytes:
    """The request body, read once per request (later calls return the same bytes)."""
    return _received(hashing=False).raw()


def raw_body_fingerprint() -> bytes:
    """:func:`body_fingerprint` of the request body (read once, as :func:`raw_body`).

    A large body not read yet is hashed on a helper thread while it arrives (BLAKE3
    releases the GIL), and a cache hit never joins its steps into one bytes object: at
    7.2 MB the hash after the read cost 1.3 ms of a 4-5 ms hit in the server.
    """
    return _received(hashing=True).fingerprint()


def _received(hashing: bool) -> _ReceivedBody:
    body = g.get("_sluice_body")
    if body is None:
        body = g._sluice_body = _receive(hashing)
    return body


#: Content codings a request body may use (RFC 9110 section 8.4); x-gzip is gzip.
GZIP_CODINGS = frozenset({"gzip", "x-gzip"})


def content_coding() -> str:
    """``identity`` or ``gzip``: the request body's Content-Encoding.

    Raises
    ------
    UnsupportedMediaType
        Any other coding, or more than one (a 415 that lists what is accepted).
    """
    codings = [c.strip().lower() for c in request.headers.get("Content-Encoding", "").split(",") if c.strip()]
    codings = [c for c in codings if c != "identity"]
    if not codings:
        return "identity"
    if len(codings) == 1 and codings[0] in GZIP_CODINGS:
        return "gzip"
    raise UnsupportedMediaType(f"the body's Content-Encoding {', '.join(codings)!r} is not supported; "
                               "send it as gzip or uncompressed", headers={"Accept-Encoding": "gzip"})


def _receive(hashing: bool) -> _ReceivedBody:
    coding = content_coding()
    hashing = hashing and coding == "identity"  # a gzip body is hashed once decoded
    steps = request.environ.get(BODY_STEPS)
    if steps is not None:  # received whole by the worker's front (service.intake)
        body = _ReceivedBody(steps, request.environ.get(BODY_FINGERPRINT) if hashing else None)
    else:
        body = _read_input(hashing)
    return _ReceivedBody(_gunzip(body.steps)) if coding == "gzip" else body


def _read_input(hashing: bool) -> _ReceivedBody:
    length = request.content_length
    if length is None:  # chunked: werkzeug enforces MAX_CONTENT_LENGTH while reading
        return _ReceivedBody([request.get_data(cache=False)])
    stream = request.environ["wsgi.input"]
    if hashing and length >= HASH_WHILE_READING:
        steps, fingerprint = _read_hashing(stream, length)
    else:
        # One read of the announced length lets the server recv() in large chunks
        # instead of werkzeug's small ones (the length was checked against the limit).
        steps, fingerprint = _read_steps(stream, length, length), None
    got = sum(map(len, steps))
    if got < length:
        raise BadRequest(f"the body ended after {got} of {length} bytes")
    return _ReceivedBody(steps, fingerprint)


def _gunzip(steps: list[bytes]) -> list[bytes]:
    """The decoded body, inflated step by step so that it never outgrows the body limit:
    a small body that inflates past it is refused as soon as it does (a 413)."""
    limit = request.max_content_length
    inflate, out, size = zlib.decompressobj(wbits=16 + zlib.MAX_WBITS), [], 0
    try:
        for data in steps:
            while data:
                piece = inflate.decompress(data, _READ_STEP)
                size += len(piece)
                if limit is not None and size > limit:
                    raise ProblemTooLarge(FieldError("", f"the gzip body inflates past the limit of {limit} bytes"))
                out.append(piece)
                data = inflate.unconsumed_tail
        out.append(inflate.flush())
    except zlib.error as exc:
        raise BadRequest(f"the body is not valid gzip: {exc}") from None
    if not inflate.eof:
        raise BadRequest("the gzip body ended before its end marker")
    if inflate.unused_data:
        raise BadRequest("the gzip body has bytes after its end marker")
    return [piece for piece in out if piece]


def _read_steps(stream, length: int, step: int, on_step=None) -> list[bytes]:
    """Up to ``length`` bytes in reads of at most ``step``, fewer only when the input
    ends first (an input may hand out less than asked per read; gunicorn's does not)."""
    steps, left = [], length
    while left and (chunk := stream.read(min(step, left))):
        steps.append(chunk)
        left -= len(chunk)
        if on_step is not None:
            on_step(chunk)
    return steps


def _read_hashing(stream, length: int) -> tuple[list[bytes], bytes]:
    """Read in steps; a helper thread hashes each step while the next one arrives."""
    hasher, todo = blake3(), queue.SimpleQueue()

    def hash_steps() -> None:
        """On the helper thread: feed each step put on the queue to the hasher, until None."""
        while (step := todo.get()) is not None:
            hasher.update(step)

    helper = threading.Thread(target=hash_steps, name="sluice-body-hash", daemon=True)
    helper.start()
    try:
        steps = _read_steps(stream, length, _READ_STEP, todo.put)
    finally:
        todo.put(None)
        helper.join()
    return steps, hasher.digest()


def body_fingerprint(*parts: bytes) -> bytes:
    """The BLAKE3 hash of a body (32 bytes) given in one or more parts, the result cache's
    key for a repeated body.

    A cryptographic hash, so two bodies never share a key in practice, and several
    times faster than sha256: a 7.2 MB body took 1.1 ms here against 4.0 ms, most of
    a cache hit's server time. One thread on purpose: BLAKE3's multithreaded mode uses
    a thread pool that a forked child (the solver processes) would inherit broken.
    """
    hasher = blake3()
    for part in parts:
        hasher.update(part)
    return hasher.digest()


def read_json_body(arc_columns: bool = False):
    """Decode the request body as JSON.

    Parameters
    ----------
    arc_columns : bool
        Whether a large ``arcs`` member may arrive as the model's typed columns,
        decoded straight from the bytes (:func:`~service.model.fastarcs.decode_arcs_body`:
        an :class:`~service.model.arccolumns.ArcColumns`) instead of JSON values. Only
        callers that hand ``arcs`` to :func:`~service.model.arcs.read_network` and
        never re-serialise the body ask for it.

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

def _read_text() -> str:
    raw = raw_body()
    if not raw:
        raise BadRequest("the request body is empty; send a DIMACS file")
    charset = (request.mimetype_params.get("charset") or "utf-8").lower()
    try:
        return raw.decode(charset)
    except (LookupError, UnicodeDecodeError) as exc:
        raise BadRequest(f"the body is not valid {charset} text: {exc}") from None


def decode_body(dimacs: str | None = None, arc_columns: bool = False):
    """Decode the request body by its media type: JSON, or a DIMACS text file.

    Parameters
    ----------
    dimacs : {"max", "min", "network"}, optional
        The DIMACS body the endpoint also takes: a solve endpoint's format
        (:attr:`~service.kinds.base.Kind.dimacs`: the file's ``p`` line must match),
        ``"network"`` (a stored network: either format, nodes and arcs only), or None
        (JSON only).
    arc_columns : bool
        Passed to :func:`read_json_body`.

    Returns
    -------
    dict
        The request dict the JSON endpoint takes. For a DIMACS body, any later
        :class:`~service.errors.InputError` of this request has its JSON Pointers
        turned into ``/line/<n>`` pointers by the error handler.

    Raises
    ------
    UnsupportedMediaType
        Neither JSON nor ``text/x-dimacs`` (or DIMACS where the endpoint takes JSON only).
    BadRequest, InputError
        As :func:`read_json_body`; DIMACS errors name the line.
    """

    mimetype = request.mimetype or ""
    takes_text = dimacs is not None
    if mimetype == MEDIA_TYPE and takes_text:
        limits = current_app.extensions["sluice"].limits
        doc = parse_dimacs(_read_text(), max_arcs=limits.max_arcs, max_nodes=limits.max_nodes)
        body = doc.request(dimacs)
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

    See :func:`service.model.dimacs_write.to_dimacs`; ``source``/``sink`` are node indices.
    """
    text = to_dimacs(network, fmt, source=source, sink=sink, supply=supply, title=title)
    return Response(text, mimetype=MEDIA_TYPE)
