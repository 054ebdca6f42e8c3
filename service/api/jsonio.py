"""JSON in and out with orjson, and the request-body rules of the contract."""

from __future__ import annotations

import gc
from contextlib import contextmanager

import orjson
from flask import Response, g, request
from flask.json.provider import JSONProvider

from ..errors import BadRequest, UnsupportedMediaType
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


def read_json_body():
    """Decode the request body as JSON.

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
    if looks_columnar(raw):
        decoded = decode_columnar(raw)
        if decoded is not None:
            return decoded
    with no_gc():
        try:
            return orjson.loads(raw)
        except orjson.JSONDecodeError as exc:
            raise BadRequest(f"the body is not valid JSON: {exc}") from None
