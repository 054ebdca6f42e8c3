"""Run one job in a killable solver process and turn the outcome into a final state."""

from __future__ import annotations

import logging
import threading
from contextlib import contextmanager
import orjson

from ..kinds import KINDS, Limits
from ..kinds.base import stop_grace
from .model import CANCELLED, DONE, DUMP_OPTIONS, FAILED, problem_doc, time_limit_error
from .runner import Cancelled, ChildLost, DeadlineExceeded, RemoteError, unpack

log = logging.getLogger("sluice.jobs")


def execute(run, kind: str, body: bytes, limits: Limits, time_limit: float, on_tick=None, on_progress=None):
    """Run a job through ``run`` (a :meth:`SolverPool.run` or :meth:`SolverProcess.run`).

    Parameters
    ----------
    run : callable
        ``run(message, budget=..., grace=..., on_tick=..., on_progress=...) -> reply``
        (:meth:`SolverPool.run`, or a :meth:`SolverProcess.run` already started).
    time_limit : float
        Seconds for the whole job (parse and solve) from the moment its solver process
        is ready: the runner makes the job's deadline from it then and sends it with the
        job. The process is killed at the deadline, or, for a kind that stops itself at
        it, after a grace to answer (:func:`~service.kinds.base.stop_grace`).
    on_tick : callable, optional
        Heartbeat, called every quarter second; returning true cancels the job.
    on_progress : callable, optional
        Called with each progress document the solve reports (see :class:`Progress`).

    Returns
    -------
    (state, result_json or None, error document or None)
    """
    grace = stop_grace(KINDS.get(kind), time_limit)
    try:
        result, _ = unpack(run(("job", kind, body, limits), budget=time_limit, grace=grace, on_tick=on_tick,
                               on_progress=on_progress))
    except DeadlineExceeded:
        return FAILED, None, time_limit_error(time_limit)
    except Cancelled:
        return CANCELLED, None, None
    except ChildLost as exc:
        log.error("job solver process lost: %s", exc)
        return FAILED, None, problem_doc(500, "solver-failure", "The solver failed",
                                         "the solver process ended without an answer; the error was logged")
    except RemoteError as exc:
        return FAILED, None, problem_doc(exc.status, exc.slug, exc.title, exc.detail, exc.extra())
    return DONE, orjson.dumps(result, option=DUMP_OPTIONS), None


class Progress:
    """The latest progress report of a running job, written to the job record at most
    once per heartbeat (reports can come faster than a store write is worth)."""

    def __init__(self):
        self.latest: dict | None = None
        self.written: dict | None = None

    def __call__(self, document: dict) -> None:
        self.latest = document

    def pending(self) -> bytes | None:
        """The report to write now as JSON, or None when nothing new came."""
        if self.latest is None or self.latest is self.written:
            return None
        self.written = self.latest
        return orjson.dumps(self.written, option=DUMP_OPTIONS)


@contextmanager
def lease_keeper(renew, every: float):
    """Call ``renew()`` every ``every`` seconds on a thread until the block ends.

    A thread, not the wait loop, so the lease is also renewed while a solver process
    starts (a second or more on a loaded host). The solve itself runs in another
    process, so this thread never waits for the GIL. Yields a :class:`threading.Event`
    set when ``renew`` returns false (the lease was taken away).
    """
    stop, lost = threading.Event(), threading.Event()

    def loop():
        """Renew until stopped; a false ``renew()`` sets ``lost`` and ends the thread."""
        while not stop.wait(every):
            try:
                if not renew():
                    lost.set()
                    return
            except Exception as exc:  # noqa: BLE001 - a missed renewal is retried next time
                log.warning("lease renewal failed: %s", exc)

    thread = threading.Thread(target=loop, name="sluice-lease", daemon=True)
    thread.start()
    try:
        yield lost
    finally:
        stop.set()
        thread.join(5)
