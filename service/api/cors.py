"""Cross-origin calls from browser pages (the Fetch standard's CORS protocol).

Only the origins in ``SLUICE_CORS_ORIGINS`` (comma-separated; default none) get CORS
headers; ``*`` allows any origin. A preflight (``OPTIONS`` with
``Access-Control-Request-Method``) is answered 204 before authentication, since a
browser sends it without the page's ``Authorization`` header. Actual responses,
errors included, carry ``Access-Control-Allow-Origin`` for an allowed origin and
expose the headers a client reads. ``Authorization`` is an allowed request header, so
a page sends its bearer key; credentials mode is allowed too (explicit origins only,
as the standard requires).
"""

from __future__ import annotations

from flask import Flask, Response, request

ALLOWED_METHODS = "GET, HEAD, POST, PUT, PATCH, DELETE, OPTIONS"
ALLOWED_HEADERS = ("Authorization, Content-Type, Content-Encoding, If-Match, If-None-Match, Prefer, "
                   "X-Request-Id")
EXPOSED_HEADERS = ("ETag, Cache-Status, Location, Retry-After, X-Request-Id, RateLimit-Limit, "
                   "RateLimit-Remaining, Content-Encoding")
MAX_AGE = "600"


def init_app(app: Flask, origins: tuple[str, ...]) -> None:
    """Attach the CORS hooks (call before authentication); nothing when no origin is configured."""
    if not origins:
        return
    any_origin = "*" in origins
    allowed = frozenset(origins)

    def allow(response: Response, origin: str) -> None:
        """Let ``origin`` read ``response``: ``*`` when any origin is allowed, else the origin itself
        with credentials allowed and ``Vary: Origin`` (the standard forbids ``*`` with credentials).
        """
        if any_origin:
            response.headers["Access-Control-Allow-Origin"] = "*"
        else:
            response.headers["Access-Control-Allow-Origin"] = origin
            response.headers["Access-Control-Allow-Credentials"] = "true"
            response.vary.add("Origin")

    def origin_allowed() -> str | None:
        """The request's ``Origin`` when it is an allowed one, else None (no ``Origin`` header, or another origin)."""
        origin = request.headers.get("Origin")
        return origin if origin and (any_origin or origin in allowed) else None

    @app.before_request
    def preflight():
        """Answer a CORS preflight 204 before authentication (a browser sends it without ``Authorization``).

        An allowed origin gets the allowed methods, request headers and max age; any other origin a
        bare 204 that grants nothing. Any other request passes on (None).
        """
        if request.method != "OPTIONS" or "Access-Control-Request-Method" not in request.headers:
            return None
        response = Response(status=204)
        origin = origin_allowed()
        if origin is not None:
            allow(response, origin)
            response.headers["Access-Control-Allow-Methods"] = ALLOWED_METHODS
            response.headers["Access-Control-Allow-Headers"] = ALLOWED_HEADERS
            response.headers["Access-Control-Max-Age"] = MAX_AGE
        response.vary.add("Origin")
        return response

    @app.after_request
    def expose(response: Response) -> Response:
        """Add the CORS headers to an actual response (errors included) for an allowed origin.

        ``Vary: Origin`` is set whenever the answer depends on the origin: unless every origin is allowed.
        """
        origin = origin_allowed()
        if origin is not None and "Access-Control-Allow-Origin" not in response.headers:
            allow(response, origin)
            response.headers["Access-Control-Expose-Headers"] = EXPOSED_HEADERS
        elif not any_origin:
            response.vary.add("Origin")
        return response
