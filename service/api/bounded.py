"""Synchronous solves under a hard time limit.

Policy: a problem whose size (its kind's measure of the work: arcs for max-flow and
min-cost flow, arcs x commodities for multi-commodity flow, nonzeros plus columns for
an LP, allowed pairs for an assignment) is at most ``SLUICE_INLINE_MAX_ARCS`` (default
20,000) is solved inline on the request thread: such solves take milliseconds, and the
IPC of a solver process would cost more than the solve. A larger problem (or one whose
size a kind does not report) goes to this worker's pool of warm solver processes. Either
way the solve has one :class:`~service.deadline.Deadline`, made here once per solve:
``min(options.time_limit, SLUICE_TIME_LIMIT)`` from its start (a batch makes one for all
its items and gives each what is left, :mod:`service.api.batch`). The kinds and
solvers read what is left of it; a solver process is killed at it (plus a short grace
for the kinds that stop themselves at it and answer ``time_limit``); past it the
process is killed (the OR-Tools solvers cannot be interrupted), the client gets 504 ``time-limit`` with a hint
to submit a job instead, and a fresh process takes its place. The gunicorn worker
itself never blocks past the deadline, so it stays healthy, and never holds a large
solve's memory: a solver process that grew past ``SLUICE_SOLVER_MAX_RSS_MB`` is replaced
after its solve (see :class:`~service.jobs.runner.SolverPool`).

Admission: a solve that finds every solver process of its worker busy waits at most
``SLUICE_QUEUE_WAIT`` seconds (default 2) for one, then gets 503 with ``Retry-After``:
overload is shed, not queued behind solves that may each take the whole time limit.
"""

from __future__ import annotations

import logging
from time import perf_counter

from flask import Flask, current_app

from ..config import Settings
from ..deadline import Deadline
from ..errors import SolveTimeout, Unavailable
from ..kinds import Kind
from ..kinds.base import budget_seconds, stop_grace
from ..jobs.runner import Cancelled, ChildLost, DeadlineExceeded, SolverPool, unpack
from .metrics import SOLVE_SECONDS, SOLVE_TIMEOUTS

log = logging.getLogger("sluice.solve")
EXTENSION = "sluice.solver"


def problem_size(kind: Kind, problem) -> int | None:
    """The work of a parsed problem by its kind's measure (:attr:`Kind.size`: arcs,
    flow variables, LP nonzeros and columns, assignment pairs); None when the kind
    declares none (it goes to a solver process)."""
    size = None if kind.size is None else kind.size(problem)
    return size if isinstance(size, int) else None


class BoundedSolver:
    """Per API process: inline small solves, pooled killable solves for the rest."""

    def __init__(self, settings: Settings):
        self.inline_max_arcs = settings.inline_max_arcs
        self.time_limit = settings.time_limit
        self.job_time_limit = settings.job_time_limit
        self.queue_wait = settings.queue_wait
        self.pool = SolverPool(settings.solver_processes, max_rss_mb=settings.solver_max_rss_mb)

    def deadline(self, problem) -> Deadline:
        """A synchronous solve's time budget, from now: ``min(options.time_limit,
        SLUICE_TIME_LIMIT)``."""
        return Deadline.after(budget_seconds(problem.options, self.time_limit))

    def solve(self, kind: Kind, problem, deadline: Deadline | None = None) -> dict:
        """Solve ``problem`` on this thread when it is small, else in a pooled solver process killed at the deadline.

        Small means a size (:func:`problem_size`) of at most ``inline_max_arcs``; a problem whose kind
        declares no size always goes to a solver process.

        Parameters
        ----------
        kind : Kind
        problem
            The problem as the kind parsed it.
        deadline : Deadline, optional
            The time budget; None makes this solve's own (:meth:`deadline`).

        Returns
        -------
        dict
            The kind's response document; the solver time is observed in ``sluice_solve_seconds``.

        Raises
        ------
        SolveTimeout
            504: the solve ran past the deadline and its process was stopped.
        Unavailable
            503: every solver process stayed busy (waited for at most ``queue_wait``), or the
            process stopped unexpectedly.
        """
        if deadline is None:
            deadline = self.deadline(problem)
        size = problem_size(kind, problem)
        if size is not None and size <= self.inline_max_arcs:
            started = perf_counter()
            result = kind.solve(problem, deadline)
            self._observe(kind, result, perf_counter() - started)
            return result
        grace = stop_grace(kind, deadline.seconds)
        try:
            shipped = problem if kind.for_solver_process is None else kind.for_solver_process(problem)
            reply = self.pool.run(("solve", kind.name, shipped, None), deadline=deadline, grace=grace,
                                  wait=min(deadline.remaining() + grace, self.queue_wait))
        except DeadlineExceeded:
            SOLVE_TIMEOUTS.labels(kind.name).inc()
            raise SolveTimeout(
                f"the solve did not finish within its time limit of {deadline.seconds:g} s and was stopped; "
                "submit it as "
                f"a job (POST /v1/jobs, or this request with the header Prefer: respond-async), whose limit is "
                f"{self.job_time_limit:g} s") from None
        except TimeoutError:
            raise Unavailable(f"every solver process of this worker stayed busy for {self.queue_wait:g} s; "
                              "retry, or submit a job", retry_after=retry_after(self.queue_wait)) from None
        except (ChildLost, Cancelled) as exc:
            log.error("solver process lost: %s", exc)
            raise Unavailable("the solver process stopped unexpectedly; retry", retry_after=1) from None
        result, solve_seconds = unpack(reply)
        self._observe(kind, result, solve_seconds)
        return result

    @staticmethod
    def _observe(kind: Kind, result: dict, seconds: float) -> None:
        engine = result.get("engine") if isinstance(result, dict) else None
        SOLVE_SECONDS.labels(kind.name, (engine or {}).get("kind", "none")).observe(seconds)


def retry_after(wait: float) -> int:
    """Seconds a shed request is told to wait: about as long as it waited, at least 1."""
    return max(1, round(wait))


def init_app(app: Flask, settings: Settings) -> BoundedSolver:
    """Make this app's :class:`BoundedSolver`, kept in ``app.extensions`` for :func:`bounded_solve`."""
    solver = BoundedSolver(settings)
    app.extensions[EXTENSION] = solver
    return solver


def bounded_solve(kind: Kind, problem, deadline: Deadline | None = None) -> dict:
    """Solve within the hard limit (see the module doc); use it wherever a request solves.

    ``deadline``: the request's time budget when the caller made one (a batch, for all
    its items); None: this solve's own, made now (:meth:`BoundedSolver.deadline`)."""
    return current_app.extensions[EXTENSION].solve(kind, problem, deadline)
