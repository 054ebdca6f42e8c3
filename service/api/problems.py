"""One error handler, one error shape: application/problem+json (RFC 9457)."""

from __future__ import annotations

import logging

from flask import Flask
from werkzeug.exceptions import HTTPException, RequestEntityTooLarge

from ..errors import PROBLEM_BASE, FieldError, InputError, ProblemTooLarge, SluiceError
from .jsonio import json_response, translate_errors

log = logging.getLogger("sluice.api")

PROBLEM_JSON = "application/problem+json"

_HTTP_SLUGS = {404: "not-found", 405: "method-not-allowed", 413: "too-large", 415: "unsupported-media-type"}


def problem_response(status: int, slug: str, title: str, detail: str, extra: dict | None = None, headers=None):
    """A problem+json response (RFC 9457).

    Parameters
    ----------
    status : int
    slug : str
        The end of the ``type`` URI, after :data:`~service.errors.PROBLEM_BASE`.
    title, detail : str
    extra : dict, optional
        Further members of the document.
    headers : optional
        Response headers (``Retry-After``, ``WWW-Authenticate``, ...).
    """
    body = {"type": PROBLEM_BASE + slug, "title": title, "status": status, "detail": detail}
    if extra:
        body.update(extra)
    return json_response(body, status, headers=headers, mimetype=PROBLEM_JSON)


def from_sluice_error(exc: SluiceError):
    """The problem response of a :class:`~service.errors.SluiceError`, with its status and headers.

    The pointers of an error in a DIMACS body become ``/line/<n>``; a 5xx is logged.
    """
    if isinstance(exc, InputError):
        exc = translate_errors(exc)  # a DIMACS body: pointers become /line/<n>
    if exc.status >= 500:
        log.error("request failed: %s", exc.detail)
    return problem_response(exc.status, exc.slug, exc.title, exc.detail, exc.extra(), exc.headers)


def from_http_exception(exc: HTTPException):
    """A werkzeug HTTP error as a problem response (a 405 keeps its ``Allow``).

    A body over Flask's size limit becomes Sluice's own 413 problem.
    """
    if isinstance(exc, RequestEntityTooLarge):
        return from_sluice_error(ProblemTooLarge(FieldError("", "the request body exceeds the size limit")))
    status = exc.code or 500
    slug = _HTTP_SLUGS.get(status, f"http-{status}")
    response = problem_response(status, slug, exc.name, exc.description or exc.name)
    if status == 405 and exc.get_response().headers.get("Allow"):
        response.headers["Allow"] = exc.get_response().headers["Allow"]
    return response


def from_unexpected(exc: Exception):
    """Any other exception: a plain 500 problem, with the traceback in the log only."""
    # The trace goes to the log only; the client gets a plain problem document.
    log.exception("unhandled error")
    return problem_response(500, "internal", "Internal error", "the server failed to answer; the error was logged")


def init_app(app: Flask) -> None:
    """Register the error handlers, so that every error, expected or not, is answered as problem+json."""
    app.register_error_handler(SluiceError, from_sluice_error)
    app.register_error_handler(HTTPException, from_http_exception)
    app.register_error_handler(Exception, from_unexpected)
