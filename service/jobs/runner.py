"""Killable solver processes: the only way to put a hard limit on an OR-Tools solve.

The OR-Tools graph solvers hold the GIL and cannot be interrupted, so a solve that must
stop at a deadline (or on cancel) runs in a child process that is killed with SIGKILL
when it overruns. :class:`SolverPool` keeps a few such children warm per API process
(start-up costs about a second: numpy and OR-Tools are imported once per child).

Children are started with ``subprocess`` (fork + exec, safe in a threaded server) from
one long-lived spawner thread: ``PR_SET_PDEATHSIG`` fires when the *thread* that
forked a child ends, so that thread must outlive every child.
"""

from __future__ import annotations

import fcntl
import logging
import os
import select
import subprocess
import sys
import threading
import time
from concurrent.futures import Future
from queue import Queue

from ..errors import SluiceError
from ..memory import resident_bytes
from .frames import read_frame, write_frame

log = logging.getLogger("sluice.runner")

START_TIMEOUT = 120.0  # seconds for a child to import its libraries (slow on a loaded host)
#: Bytes a pipe to or from a child holds. With the Linux default (64 KB) a 16 MB
#: problem costs each side hundreds of wake-ups; 1 MB (the default ceiling for an
#: unprivileged process, /proc/sys/fs/pipe-max-size) about halved the time of a
#: 16 MB + 8 MB round trip on a 2-CPU host (33-52 ms -> 16-22 ms).
PIPE_SIZE = 1 << 20


class DeadlineExceeded(Exception):
    """The child did not answer in time and was killed."""


class Cancelled(Exception):
    """The caller asked to stop; the child was killed."""


class ChildLost(Exception):
    """The child died (killed from outside, out of memory) before it answered."""


class RemoteError(SluiceError):
    """A :class:`SluiceError` raised in a solver process, rebuilt from its fields."""

    def __init__(self, fields: dict):
        super().__init__(fields["detail"], headers=fields.get("headers"))
        self.status, self.slug, self.title = fields["status"], fields["slug"], fields["title"]
        self._extra = fields.get("extra") or {}

    def extra(self) -> dict:
        """The problem members the child's error carried beyond type/title/status/detail."""
        return self._extra


def _grow_pipe(fd: int) -> None:
    try:
        fcntl.fcntl(fd, fcntl.F_SETPIPE_SZ, PIPE_SIZE)
    except (AttributeError, OSError) as exc:  # not Linux, or over the user's pipe quota: slower, still correct
        log.debug("pipe size stays at the default: %s", exc)


def _child_env() -> dict:
    env = dict(os.environ)
    env.pop("PROMETHEUS_MULTIPROC_DIR", None)  # children never write metrics
    return env


class SolverProcess:
    """One child running :mod:`service.jobs.child`."""

    def __init__(self):
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "service.jobs.child", str(os.getpid())],
            stdin=subprocess.PIPE, stdout=subprocess.PIPE, env=_child_env(), close_fds=True, bufsize=0,
        )
        self.pid = self.proc.pid
        _grow_pipe(self.proc.stdin.fileno())
        _grow_pipe(self.proc.stdout.fileno())
        ready = self._wait(time.monotonic() + START_TIMEOUT, None, 0.5)
        if not (isinstance(ready, tuple) and ready[0] == "ready"):
            self.kill()
            raise ChildLost(f"solver process {self.pid} did not start")

    @property
    def alive(self) -> bool:
        """Whether the child process is still running."""
        return self.proc.poll() is None

    def rss_mb(self) -> float | None:
        """Resident memory of the child in MiB (None where ``/proc`` cannot tell)."""
        rss = resident_bytes(self.pid)
        return None if rss is None else rss / (1 << 20)

    def kill(self) -> None:
        """Kill the child (SIGKILL) if it runs, reap it, and close its pipes.

        Safe to call more than once.
        """
        if self.proc.poll() is None:
            self.proc.kill()
        self.proc.wait()
        for stream in (self.proc.stdin, self.proc.stdout):
            try:
                stream.close()
            except OSError:
                pass

    def _wait(self, deadline: float | None, on_tick, tick: float, on_progress=None):
        # Frames go through the descriptors (see frames); the unbuffered file objects
        # only own them, and fileno() refuses once kill() has closed them.
        fd = self.proc.stdout.fileno()
        while True:
            left = None if deadline is None else deadline - time.monotonic()
            if left is not None and left <= 0:
                self.kill()
                raise DeadlineExceeded()
            ready, _, _ = select.select([fd], [], [], tick if left is None else min(tick, left))
            if ready:
                reply = read_frame(fd)
                if reply is None:
                    self.kill()
                    raise ChildLost(f"solver process {self.pid} exited with {self.proc.returncode}")
                if isinstance(reply, tuple) and reply and reply[0] == "progress":
                    if on_progress is not None:
                        on_progress(reply[1])
                    continue
                return reply
            if on_tick is not None and on_tick():
                self.kill()
                raise Cancelled()

    def run(self, message: tuple, *, deadline: float | None = None, on_tick=None, tick: float = 0.25,
            on_progress=None, budget: float | None = None):
        """Send one message and wait for the reply.

        Parameters
        ----------
        message : tuple
            See :mod:`service.jobs.work`.
        deadline : float, optional
            ``time.monotonic()`` value after which the child is killed (or ``budget``:
            seconds from now).
        on_tick : callable, optional
            Called every ``tick`` seconds while waiting (heartbeats); a true return
            value cancels: the child is killed.
        on_progress : callable, optional
            Called with each progress document the child reports before its reply.

        Returns
        -------
        tuple
            The child's reply.

        Raises
        ------
        DeadlineExceeded, Cancelled, ChildLost
            In each case the child is dead afterwards.
        """
        if budget is not None:
            deadline = time.monotonic() + budget
        try:
            write_frame(self.proc.stdin.fileno(), message)
        except (OSError, ValueError):  # the child has gone (ValueError: it was killed here before)
            self.kill()
            raise ChildLost(f"solver process {self.pid} exited with {self.proc.returncode}") from None
        return self._wait(deadline, on_tick, tick, on_progress)


class _Spawner:
    """One daemon thread that starts every child of this process (see module doc)."""

    _instance: "_Spawner | None" = None
    _lock = threading.Lock()

    def __init__(self):
        self.pid = os.getpid()
        self.requests: Queue = Queue()
        threading.Thread(target=self._loop, name="sluice-spawner", daemon=True).start()

    @classmethod
    def get(cls) -> "_Spawner":
        """The spawner of this process, started on first use and again after a fork.

        A forked process does not inherit the parent's spawner thread, so a spawner
        created before the fork is replaced, not used.
        """
        with cls._lock:
            if cls._instance is None or cls._instance.pid != os.getpid():  # new after a fork
                cls._instance = cls()
            return cls._instance

    def _loop(self) -> None:
        while True:
            future = self.requests.get()
            try:
                future.set_result(SolverProcess())
            except BaseException as exc:  # noqa: BLE001 - handed to the waiting caller
                future.set_exception(exc)

    def spawn(self) -> Future:
        """Ask the spawner thread for a new child.

        Returns
        -------
        concurrent.futures.Future
            Resolves to a ready :class:`SolverProcess`, or to the error that stopped it
            from starting.
        """
        future: Future = Future()
        self.requests.put(future)
        return future


class SolverPool:
    """Up to ``size`` warm solver processes shared by the threads of one API process.

    A child keeps the memory of its largest solve for the next one (see
    :mod:`service.memory`); one whose resident memory is above ``max_rss_mb`` after a
    solve is replaced by a fresh child instead of going back to the pool, so a single
    huge problem does not hold gigabytes for the life of the worker.
    """

    def __init__(self, size: int, max_rss_mb: float | None = None):
        self.size = max(1, size)
        self.max_rss_mb = max_rss_mb or None
        self.replaced = 0  # children retired for their memory (tests, logs)
        self._slots = threading.BoundedSemaphore(self.size)
        self._idle: list[SolverProcess] = []
        self._starting: list[Future] = []
        self._lock = threading.Lock()
        self._closed = False

    def warm(self, count: int = 1) -> None:
        """Start children in the background so the first request does not wait."""
        with self._lock:
            for _ in range(max(0, min(count, self.size) - len(self._idle) - len(self._starting))):
                self._starting.append(_Spawner.get().spawn())

    def _take(self) -> SolverProcess:
        with self._lock:
            while self._idle:
                proc = self._idle.pop()
                if proc.alive:
                    return proc
            future = self._starting.pop(0) if self._starting else None
        if future is None:
            future = _Spawner.get().spawn()
        return future.result(timeout=START_TIMEOUT)

    def _give(self, proc: SolverProcess) -> None:
        with self._lock:
            if self._closed:
                proc.kill()
            else:
                self._idle.append(proc)

    def run(self, message: tuple, *, deadline: float | None = None, on_tick=None, wait: float = 30.0,
            on_progress=None, budget: float | None = None):
        """Run one message on a pooled child (see :meth:`SolverProcess.run`).

        ``budget`` (seconds), instead of ``deadline``, starts counting once a child is
        ready: a job's time limit does not pay for starting its solver process.

        Raises
        ------
        TimeoutError
            No child became free within ``wait`` seconds.
        """
        if not self._slots.acquire(timeout=wait):
            raise TimeoutError("every solver process is busy")
        try:
            proc = self._take()
            try:
                reply = proc.run(message, deadline=deadline, on_tick=on_tick, on_progress=on_progress, budget=budget)
            except (DeadlineExceeded, Cancelled, ChildLost):
                self.warm(1)  # a fresh child replaces the killed one, off the request path
                raise
            if self._grown(proc):
                proc.kill()
                self.warm(1)
            else:
                self._give(proc)
            return reply
        finally:
            self._slots.release()

    def _grown(self, proc: SolverProcess) -> bool:
        if self.max_rss_mb is None:
            return False
        rss = proc.rss_mb()
        if rss is None or rss <= self.max_rss_mb:
            return False
        self.replaced += 1
        log.info("solver process %d holds %.0f MB after its solve (ceiling %g MB): replaced by a fresh one",
                 proc.pid, rss, self.max_rss_mb)
        return True

    def pids(self) -> list[int]:
        """Process ids of the idle children (not those running a solve)."""
        with self._lock:
            return [p.pid for p in self._idle]

    def close(self) -> None:
        """Stop the pool: kill the idle children now, and each busy one when it is given back."""
        with self._lock:
            self._closed = True
            idle, self._idle = self._idle, []
        for proc in idle:
            proc.kill()


def unpack(reply: tuple):
    """``(result, solve_seconds)`` from a reply; raises what the child raised."""
    if reply[0] == "ok":
        return reply[1], reply[2]
    if reply[0] == "error":
        raise RemoteError(reply[1])
    raise ChildLost(f"the solver process failed ({reply[1]})")
