"""The one time budget of a solve: a :class:`Deadline`, made once and passed down.

The HTTP layer makes it once per synchronous request, ``min(options.time_limit,
SLUICE_TIME_LIMIT)`` seconds from the start of the solve (:mod:`service.api.bounded`);
the job runner makes it once per job, the job's limit (at most
``SLUICE_JOB_TIME_LIMIT``) from the moment its solver process is ready
(:mod:`service.jobs.runner`). The kinds and the solvers only read what is left of it.

The instant is a ``time.monotonic()`` value. On Linux that clock (``CLOCK_MONOTONIC``)
is one clock for the whole host since boot, so a deadline pickled to a solver process
on the same host means the same instant there; it means nothing on another host (jobs
store their limit in seconds, never a deadline).

A room of its own, importing nothing of the service, so that every room that solves
(solvers, kinds, jobs, api) can take it.
"""

from __future__ import annotations

import time
from dataclasses import dataclass


@dataclass(frozen=True)
class Deadline:
    """The instant a solve must be done by.

    Attributes
    ----------
    at : float
        The ``time.monotonic()`` instant.
    seconds : float
        The budget it was made with, for the answers that name the time limit
        ("did not finish within its time limit of 30 s").
    """

    at: float
    seconds: float

    @classmethod
    def after(cls, seconds: float) -> "Deadline":
        """The deadline ``seconds`` from now."""
        seconds = float(seconds)
        return cls(time.monotonic() + seconds, seconds)

    def remaining(self) -> float:
        """Seconds left, never below zero."""
        return max(0.0, self.at - time.monotonic())

    def expired(self) -> bool:
        """True once the instant has passed."""
        return time.monotonic() >= self.at

    def within(self, seconds: float | None) -> "Deadline":
        """The earlier of this deadline and ``seconds`` from now (a batch item's own
        ``time_limit`` inside the batch's), as a budget of what is left from now.
        ``None``: what is left of this one."""
        now = time.monotonic()
        at = self.at if seconds is None else min(self.at, now + float(seconds))
        return Deadline(at, max(0.0, at - now))


def remaining(deadline: Deadline | None) -> float | None:
    """Seconds left of ``deadline``; ``None`` (no limit) for no deadline: for the
    solvers, which in-process callers (tests, benchmarks) may call without one."""
    return None if deadline is None else deadline.remaining()


def expired(deadline: Deadline | None) -> bool:
    """Whether ``deadline`` has passed; never for no deadline."""
    return deadline is not None and deadline.expired()
