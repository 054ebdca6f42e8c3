"""Background jobs and killable solver processes (no Flask here).

- :mod:`.model`: states, the job record and its public document.
- :mod:`.runner`: solver processes that can be killed at a deadline or on cancel.
- :mod:`.sqlite_backend`: the embedded default, records in ``SLUICE_DATA_DIR``.
- :mod:`.redis_backend`: RQ on Redis, run by ``sluice worker`` on any host.
"""

from __future__ import annotations

import logging
import sqlite3

from ..config import Settings
from ..kinds import Limits
from .model import CANCELLED, DONE, FAILED, FINAL, QUEUED, RUNNING, STATES, JobRecord, JobsDown


def open_jobs(settings: Settings, limits: Limits):
    """The job backend the settings ask for: RQ on Redis when configured, else SQLite."""
    common = dict(limits=limits, lease=settings.job_lease, attempts=settings.job_attempts, ttl=settings.job_ttl)
    if settings.redis_url:
        from .redis_backend import RedisJobs

        return RedisJobs(settings.redis_url, prefix=settings.redis_prefix, queue=settings.job_queue, **common)
    from .sqlite_backend import SqliteJobs

    try:
        # Redis jobs run each in a fresh solver process; embedded ones share a pool.
        return SqliteJobs(settings.data_dir, workers=settings.job_workers,
                          solver_max_rss_mb=settings.solver_max_rss_mb, **common)
    except (OSError, sqlite3.Error) as exc:
        # Like the result store: an unusable data folder degrades the service (jobs
        # answer 503, /readyz says degraded) instead of stopping it from starting.
        logging.getLogger("sluice.jobs").error("job store unavailable: %s", exc)
        return UnavailableJobs(str(exc))


class UnavailableJobs:
    """Stands in for a job store that could not be opened: every call raises JobsDown."""

    on_finish = None

    def __init__(self, reason: str):
        self.reason = reason

    def _down(self, *args, **kwargs):
        raise JobsDown(self.reason)

    submit = get = cancel = _down

    def queue_depth(self) -> int:
        """Zero: a job store that could not be opened holds no queued jobs."""
        return 0

    def health(self) -> str:
        """Always ``"unavailable"``, so ``/readyz`` reports the job store degraded."""
        return "unavailable"

    def start(self) -> None:
        """Do nothing: there are no dispatchers to start (also serves as ``release`` and ``close``)."""
        pass

    release = close = start


__all__ = ["CANCELLED", "DONE", "FAILED", "FINAL", "JobRecord", "QUEUED", "RUNNING", "JobsDown", "STATES",
           "open_jobs"]
