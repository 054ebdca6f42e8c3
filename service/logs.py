"""Structured logs: one JSON object per line, with the request id when there is one.

Fields: ``ts`` (RFC 3339, UTC), ``level``, ``logger``, ``msg`` and, when set,
``request_id``, ``tenant``, ``method``, ``path``, ``route``, ``status``,
``duration_ms``, ``remote``. Request headers are never logged (they may carry keys).
"""

from __future__ import annotations

import logging
import os
from datetime import datetime, timezone

import orjson

EXTRA_FIELDS = ("request_id", "tenant", "method", "path", "route", "status", "duration_ms", "remote", "job_id",
                "pid")


#: Set by the HTTP layer: returns the current request id (or None) for every record.
context_hook = None


class JsonFormatter(logging.Formatter):
    """Format a record as a JSON line."""

    def format(self, record: logging.LogRecord) -> str:
        if getattr(record, "request_id", None) is None and context_hook is not None:
            record.request_id = context_hook()
        doc = {
            "ts": datetime.fromtimestamp(record.created, timezone.utc).isoformat(timespec="milliseconds")
            .replace("+00:00", "Z"),
            "level": record.levelname.lower(),
            "logger": record.name,
            "msg": record.getMessage(),
        }
        for name in EXTRA_FIELDS:
            value = getattr(record, name, None)
            if value is not None:
                doc[name] = value
        if record.exc_info:
            doc["exc"] = self.formatException(record.exc_info)
        return orjson.dumps(doc, default=str).decode()


def logging_config(level: str = "info", fmt: str = "json") -> dict:
    """A ``logging.config.dictConfig`` document for gunicorn's ``logconfig_dict``."""
    formatter = {"()": "service.logs.JsonFormatter"} if fmt == "json" else {
        "format": "%(asctime)s %(levelname)s %(name)s %(message)s"}
    handler = {"class": "logging.StreamHandler", "formatter": "main", "stream": "ext://sys.stderr"}
    level = level.upper()
    return {
        "version": 1,
        "disable_existing_loggers": False,
        "formatters": {"main": formatter},
        "handlers": {"main": handler},
        "root": {"level": "WARNING", "handlers": ["main"]},
        "loggers": {
            "gunicorn.error": {"level": level, "handlers": ["main"], "propagate": False},
            "gunicorn.access": {"level": "CRITICAL", "handlers": [], "propagate": False},
            "sluice": {"level": level, "handlers": ["main"], "propagate": False},
            "rq": {"level": level, "handlers": ["main"], "propagate": False},
        },
    }


def configure(level: str | None = None, fmt: str | None = None) -> None:
    """Apply :func:`logging_config` in a process gunicorn does not configure (``sluice worker``)."""
    import logging.config

    logging.config.dictConfig(logging_config(level or os.environ.get("SLUICE_LOG_LEVEL", "info"),
                                             fmt or os.environ.get("SLUICE_LOG_FORMAT", "json")))
