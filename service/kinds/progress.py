"""Progress of a running solve: where a kind reports it, and who listens.

A job's solver process sets a reporter around ``kind.solve`` (:mod:`service.jobs.work`);
a kind whose solver reports progress (whole-unit multi-commodity flow: the incumbent,
the bound and the gap) passes :func:`reporter` to it. Outside a job there is no
reporter and nothing is sent. Reports are small JSON-ready dicts.
"""

from __future__ import annotations

from contextlib import contextmanager
from contextvars import ContextVar
from typing import Callable

Reporter = Callable[[dict], None]

_current: ContextVar[Reporter | None] = ContextVar("sluice_progress", default=None)


@contextmanager
def reporting(report: Reporter | None):
    """Make ``report`` the reporter of solves run inside the block.

    Parameters
    ----------
    report : callable or None
        Called with each progress report (a JSON-ready dict); ``None``: nobody listens.

    Yields
    ------
    None
    """
    token = _current.set(report)
    try:
        yield
    finally:
        _current.reset(token)


def reporter() -> Reporter | None:
    """The reporter of the solve running now, or None."""
    return _current.get()
