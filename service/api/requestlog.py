"""Request ids and the JSON access log.

A client's ``X-Request-Id`` (1-128 characters of ``A-Z a-z 0-9 . _ : -``) is kept,
anything else is replaced by a fresh id; either way it is echoed in the response and
on every log line written while the request runs. Headers are never logged.
"""

from __future__ import annotations

import logging
import re
import uuid
from time import perf_counter

from flask import Flask, g, has_request_context, request

from .. import logs
from .auth import current_tenant

ACCESS = logging.getLogger("sluice.access")
SAFE_ID = re.compile(r"^[A-Za-z0-9._:-]{1,128}$")


def request_id() -> str | None:
    """The current request's id (``X-Request-Id``), or None outside a request."""
    return g.get("request_id") if has_request_context() else None


def init_app(app: Flask) -> None:
    """Give each request of ``app`` its id, echoed in ``X-Request-Id``, and write one JSON access line per response.

    Every log line written during a request carries the id too (:data:`service.logs.context_hook`).
    """
    logs.context_hook = request_id  # every JSON log line written in a request carries its id

    @app.before_request
    def _assign_id():
        given = request.headers.get("X-Request-Id", "")
        g.request_id = given if SAFE_ID.match(given) else uuid.uuid4().hex
        g.log_started = perf_counter()

    @app.after_request
    def _log(response):
        rid = g.get("request_id")
        if rid:
            response.headers["X-Request-Id"] = rid
        started = g.get("log_started")
        ACCESS.info("%s %s %s", request.method, request.path, response.status_code, extra={
            "method": request.method, "path": request.path, "status": response.status_code,
            "route": request.url_rule.rule if request.url_rule is not None else None,
            "duration_ms": round((perf_counter() - started) * 1000, 3) if started else None,
            "tenant": current_tenant(), "remote": request.remote_addr,
        })
        return response
