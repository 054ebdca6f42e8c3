"""Compressed responses (RFC 9110 section 8.4): gzip when the client accepts it.

A response of at least ``SLUICE_GZIP_MIN_BYTES`` (default 4096) in a textual media type
is gzip-compressed when ``Accept-Encoding`` allows gzip, and says ``Vary:
Accept-Encoding`` whether compressed or not. A compressed representation is another
representation, so its strong ETag gets its own suffix (``"abc-gzip"``, RFC 9110
section 8.8.3); the suffix is taken off the tags of ``If-Match`` and ``If-None-Match``
before the views compare them, so a tag from either representation matches the same
version. Level 1: on JSON it keeps most of level 6's savings at several times the
speed (a response is compressed on the request's thread).

Request bodies in gzip are decoded in :mod:`service.api.jsonio`.
"""

from __future__ import annotations

import zlib

from flask import Flask, request
from flask.wrappers import Response

GZIP_SUFFIX = "-gzip"
LEVEL = 1
_TEXTUAL = ("application/json", "application/problem+json", "application/yaml", "text/", "image/svg+xml",
            "application/javascript", "application/x-ndjson")


def _accepts_gzip() -> bool:
    return request.accept_encodings["gzip"] > 0  # "*" counts too


def _compressible(response: Response) -> bool:
    mimetype = response.mimetype or ""
    return (not response.direct_passthrough and not response.is_streamed
            and "Content-Encoding" not in response.headers
            and response.status_code not in (204, 206, 304) and mimetype.startswith(_TEXTUAL))


def _gzip(data: bytes) -> bytes:
    packer = zlib.compressobj(LEVEL, zlib.DEFLATED, 16 + zlib.MAX_WBITS)
    return packer.compress(data) + packer.flush()


def _tag_for_gzip(response: Response) -> None:
    tag, weak = response.get_etag()
    if tag and not weak and not tag.endswith(GZIP_SUFFIX):
        response.set_etag(tag + GZIP_SUFFIX)


def _strip_suffix_from_preconditions() -> None:
    environ = request.environ
    for name in ("HTTP_IF_MATCH", "HTTP_IF_NONE_MATCH"):
        value = environ.get(name)
        if value and GZIP_SUFFIX + '"' in value:
            environ[name] = value.replace(GZIP_SUFFIX + '"', '"')
            environ["sluice.gzip_tags"] = True


def init_app(app: Flask, min_bytes: int) -> None:
    app.before_request(_strip_suffix_from_preconditions)

    @app.after_request
    def compress(response: Response) -> Response:
        if response.status_code == 304 and request.environ.get("sluice.gzip_tags"):
            _tag_for_gzip(response)  # the client holds the gzip representation
            return response
        if not _compressible(response) or response.calculate_content_length() < min_bytes:
            return response
        response.vary.add("Accept-Encoding")
        if not _accepts_gzip():
            return response
        response.set_data(_gzip(response.get_data()))
        response.headers["Content-Encoding"] = "gzip"
        _tag_for_gzip(response)
        return response
