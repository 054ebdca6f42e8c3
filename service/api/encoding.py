"""Compressed responses (RFC 9110 section 8.4): gzip when the client accepts it.

A response of at least ``SLUICE_GZIP_MIN_BYTES`` (default 4096) in a textual media type
is gzip-compressed when ``Accept-Encoding`` allows gzip, and says ``Vary:
Accept-Encoding`` whether compressed or not. A compressed representation is another
representation, so its strong ETag gets its own suffix (``"abc-gzip"``, RFC 9110
section 8.8.3); the suffix is taken off the tags of ``If-Match`` and ``If-None-Match``
before the views compare them, so a tag from either representation matches the same
version. Level 1: on JSON it keeps most of level 6's savings at several times the
speed (a response is compressed on the request's thread).

A cached answer is the same bytes on every hit but for its last members (``timing_ms``),
so the result cache marks how much of a response stays the same (:func:`mark_stable_start`)
and the compressor's state after that part is kept (:class:`StableStarts`): a hit then
compresses only the few bytes after it. deflate's output does not depend on how its input
is split between calls, so the bytes sent are the same as compressing the whole response.

Request bodies in gzip are decoded in :mod:`service.api.jsonio`.
"""

from __future__ import annotations

import threading
import zlib
from collections import OrderedDict

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


def _packer():
    return zlib.compressobj(LEVEL, zlib.DEFLATED, 16 + zlib.MAX_WBITS)


def _gzip(data: bytes) -> bytes:
    packer = _packer()
    return packer.compress(data) + packer.flush()


class StableStarts:
    """Compressor states after the stable start of responses, least recently used out.

    Parameters
    ----------
    budget : int
        Bytes kept at most: each entry costs its start, its compressed form and about
        300 KB of deflate state.
    """

    STATE_BYTES = 300 << 10

    def __init__(self, budget: int = 16 << 20):
        self.budget, self.size = budget, 0
        self._entries: OrderedDict[str, tuple[bytes, object, bytes]] = OrderedDict()
        self._lock = threading.Lock()

    @classmethod
    def _cost(cls, start: bytes, packed: bytes) -> int:
        return len(start) + len(packed) + cls.STATE_BYTES

    def gzip(self, data: bytes, key: str, stable: int) -> bytes:
        """``_gzip(data)``, from the kept state after ``data[:stable]`` when it is the same."""
        with self._lock:
            entry = self._entries.get(key)
            if entry is not None:
                self._entries.move_to_end(key)
        # (startswith: a memcmp; a refreshed answer is another start)
        if entry is None or len(entry[0]) != stable or not data.startswith(entry[0]):
            packer, start = _packer(), data[:stable]
            entry = (start, packer, packer.compress(start))
            self._keep(key, entry)
        packer = entry[1].copy()
        return entry[2] + packer.compress(memoryview(data)[stable:]) + packer.flush()

    def _keep(self, key: str, entry: tuple) -> None:
        cost = self._cost(entry[0], entry[2])
        if cost > self.budget // 4:
            return
        with self._lock:
            old = self._entries.pop(key, None)
            if old is not None:
                self.size -= self._cost(old[0], old[2])
            self._entries[key] = entry
            self.size += cost
            while self.size > self.budget:
                _, dropped = self._entries.popitem(last=False)
                self.size -= self._cost(dropped[0], dropped[2])


def mark_stable_start(response: Response, key: str, stable: int) -> None:
    """Say that ``response``'s first ``stable`` bytes recur under ``key`` (e.g. a cached answer)."""
    response.sluice_stable_start = (key, stable)


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
    """Attach response compression to ``app`` (see the module doc).

    Before each request the ``-gzip`` suffix is taken off the tags of ``If-Match`` and
    ``If-None-Match``; after it, :func:`compress` runs.

    Parameters
    ----------
    app : Flask
    min_bytes : int
        The smallest response body compressed (``SLUICE_GZIP_MIN_BYTES``).
    """
    app.before_request(_strip_suffix_from_preconditions)
    starts = app.extensions["sluice.gzip_starts"] = StableStarts()

    @app.after_request
    def compress(response: Response) -> Response:
        """Gzip a textual response of at least ``min_bytes`` when the client accepts gzip, and suffix its strong ETag.

        A response of that size says ``Vary: Accept-Encoding`` whether compressed or not. One with a
        stable start (:func:`mark_stable_start`) reuses the kept compressor state after it. A 304 to
        a request that sent a gzip tag carries the tag with its suffix.
        """
        if response.status_code == 304 and request.environ.get("sluice.gzip_tags"):
            _tag_for_gzip(response)  # the client holds the gzip representation
            return response
        if not _compressible(response) or response.calculate_content_length() < min_bytes:
            return response
        response.vary.add("Accept-Encoding")
        if not _accepts_gzip():
            return response
        stable = getattr(response, "sluice_stable_start", None)
        data = response.get_data()
        response.set_data(_gzip(data) if stable is None else starts.gzip(data, *stable))
        response.headers["Content-Encoding"] = "gzip"
        _tag_for_gzip(response)
        return response
