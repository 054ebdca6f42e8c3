"""What a solver process does with one message: run a kind, report the outcome.

Messages: ``("solve", kind, problem, limits)`` for a problem parsed by the caller, or
``("job", kind, body_json, limits)`` for a job whose body is parsed here again (it was
validated at submission; the stored JSON outlives any in-memory object). Replies:
``("ok", result, solve_seconds)``, ``("error", problem_fields)`` for a
:class:`~service.errors.SluiceError`, or ``("crash", summary)`` for anything else.
While a job runs, ``report`` may send ``("progress", document)`` frames before the
reply (a kind that reports progress: :mod:`service.kinds.progress`).
"""

from __future__ import annotations

import logging
import sys
import traceback
from time import perf_counter

import orjson

from ..errors import SluiceError
from ..kinds import KINDS, progress

log = logging.getLogger("sluice.solver")


def describe(exc: SluiceError) -> dict:
    """The fields of an error's problem document (picklable, no exception object)."""
    return {"status": exc.status, "slug": exc.slug, "title": exc.title, "detail": exc.detail,
            "extra": exc.extra(), "headers": dict(exc.headers)}


def handle(message: tuple, report=None) -> tuple:
    """Run one message in this solver process and build the reply.

    Parameters
    ----------
    message : tuple
        ``(op, kind, payload, limits)``: ``op`` is ``"solve"`` (``payload`` is the
        parsed problem) or ``"job"`` (``payload`` is the body JSON, parsed here).
    report : callable, optional
        Sends a progress document to the parent; used only for jobs, since only a
        job has a reader for progress.

    Returns
    -------
    tuple
        ``("ok", result, solve_seconds)``, ``("error", fields)`` for a
        :class:`~service.errors.SluiceError` (see :func:`describe`), or
        ``("crash", exception class name)`` for anything else, whose trace goes to
        stderr. A failing solve is always a reply, never an exception, so one bad
        problem cannot end the process.
    """
    op, kind_name, payload, limits = message
    try:
        kind = KINDS[kind_name]
        problem = kind.parse(orjson.loads(payload), limits) if op == "job" else payload
        started = perf_counter()
        # Only jobs have someone to read progress (GET /v1/jobs/{id}).
        with progress.reporting(report if op == "job" else None):
            result = kind.solve(problem, limits)
        return ("ok", result, perf_counter() - started)
    except SluiceError as exc:
        return ("error", describe(exc))
    except Exception as exc:  # noqa: BLE001 - reported as a crash; the trace stays in our log
        traceback.print_exc(file=sys.stderr)
        return ("crash", type(exc).__name__)
