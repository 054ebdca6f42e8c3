"""Structured logs: one JSON object per line, with the request id when there is one.

Fields: ``ts`` (RFC 3339, UTC), ``level``, ``logger``, ``msg`` and, when set,
``request_id``, ``tenant``, ``method``, ``path``, ``route``, ``status``,
``duration_ms``, ``remote``. Request headers are never logged (they may carry keys).
Control characters from request data never reach a log line raw: JSON escapes them,
and the text format (``SLUICE_LOG_FORMAT=text``) writes them out as escapes.
"""

from __future__ import annotations

import logging
import os
import re
from datetime import datetime, timezone

import orjson

EXTRA_FIELDS = ("request_id", "tenant", "method", "path", "route", "status", "duration_ms", "remote", "job_id",
                "pid")


#: Set by the HTTP layer: returns the current request id (or None) for every record.
context_hook = None


class JsonFormatter(logging.Formatter):
    """Format a record as a JSON line."""

    def format(self, record: logging.LogRecord) -> str:
        """The record as one JSON object on one line.

        A record without a ``request_id`` of its own gets the current one from
        :data:`context_hook` (set by the HTTP layer), so every line a request causes
        carries its id.

        Parameters
        ----------
        record : logging.LogRecord

        Returns
        -------
        str
            ``ts``, ``level``, ``logger``, ``msg``, each of ``EXTRA_FIELDS`` that is set,
            and ``exc`` (the formatted trace) when the record carries an exception.
        """
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


#: Characters that would break a text log line or hide what follows: C0 and C1
#: controls, DEL and the Unicode line and paragraph separators.
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029]")


def escape_controls(text: str) -> str:
    """``text`` with control characters written as ``\\xNN`` / ``\\uNNNN`` (as Python's repr does)."""
    return _CONTROL.sub(lambda m: repr(m.group())[1:-1], text)


class TextFormatter(logging.Formatter):
    """The plain-text format, one line per record: messages may quote request data
    (a node id, an unknown field's name), so their control characters are escaped.
    An exception's trace still follows on its own lines."""

    def formatMessage(self, record: logging.LogRecord) -> str:
        """The formatted line with its control characters escaped (see :func:`escape_controls`).

        Overrides ``formatMessage`` rather than ``format`` so the exception trace that
        ``logging.Formatter.format`` appends keeps its own line breaks.
        """
        return escape_controls(super().formatMessage(record))


def logging_config(level: str = "info", fmt: str = "json") -> dict:
    """A ``logging.config.dictConfig`` document for gunicorn's ``logconfig_dict``."""
    formatter = {"()": "service.logs.JsonFormatter"} if fmt == "json" else {
        "()": "service.logs.TextFormatter", "fmt": "%(asctime)s %(levelname)s %(name)s %(message)s"}
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
