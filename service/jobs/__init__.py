"""Background jobs and killable solver processes (no Flask here).

- :mod:`.model`: states, the job record and its public document.
- :mod:`.runner`: solver processes that can be killed at a deadline or on cancel.
- :mod:`.sqlite_backend`: the embedded default, records in ``SLUICE_DATA_DIR``.
- :mod:`.redis_backend`: RQ on Redis, run by ``sluice worker`` on any host.
"""

from __future__ import annotations

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

    return SqliteJobs(settings.data_dir, workers=settings.job_workers, **common)


__all__ = ["CANCELLED", "DONE", "FAILED", "FINAL", "JobRecord", "QUEUED", "RUNNING", "JobsDown", "STATES",
           "open_jobs"]
