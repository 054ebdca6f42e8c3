"""The job model: states, the record every backend keeps, the public document.

States (the contract's names)::

    queued ──> running ──> done
      │           ├──────> failed     (error, time limit, worker lost too often)
      │           └──────> cancelled  (DELETE while running: the process is killed)
      └──────────────────> cancelled  (DELETE while queued)

A running job whose worker stops renewing its lease goes back to ``queued`` while it
has attempts left, else to ``failed``: no job stays ``running`` forever.
"""

from __future__ import annotations

import re
import secrets
from dataclasses import dataclass, field
from datetime import datetime, timezone

import orjson

QUEUED, RUNNING, DONE, FAILED, CANCELLED = "queued", "running", "done", "failed", "cancelled"
STATES = (QUEUED, RUNNING, DONE, FAILED, CANCELLED)
FINAL = frozenset({DONE, FAILED, CANCELLED})

JOB_ID = re.compile(r"^[0-9a-f]{32}$")
PROBLEM_BASE = "urn:sluice:problem:"
DUMP_OPTIONS = orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_NON_STR_KEYS


class JobsDown(Exception):
    """The job backend (Redis) did not answer."""


def new_job_id() -> str:
    """128 random bits as 32 hex digits: unguessable, so ids leak nothing across tenants."""
    return secrets.token_hex(16)


def problem_doc(status: int, slug: str, title: str, detail: str, extra: dict | None = None) -> dict:
    """An RFC 9457 problem object, stored as a failed job's ``error``."""
    return {"type": PROBLEM_BASE + slug, "title": title, "status": status, "detail": detail, **(extra or {})}


def worker_lost(attempts: int) -> dict:
    """The error document of a job whose worker stopped renewing its lease.

    Parameters
    ----------
    attempts : int
        Times the job was started, quoted in the detail.

    Returns
    -------
    dict
        A 500 ``worker-lost`` problem object.
    """
    return problem_doc(500, "worker-lost", "The worker running the job was lost",
                       f"the process running this job stopped answering ({attempts} attempt(s)); submit it again")


def time_limit_error(seconds: float) -> dict:
    """The error document of a job killed at its time limit.

    Parameters
    ----------
    seconds : float
        The job's time limit, quoted in the detail.

    Returns
    -------
    dict
        A 504 ``time-limit`` problem object.
    """
    return problem_doc(504, "time-limit", "The job exceeded its time limit",
                       f"the job did not finish within its limit of {seconds:g} s")


def _iso(ts: float | None) -> str | None:
    if ts is None:
        return None
    return datetime.fromtimestamp(ts, timezone.utc).isoformat(timespec="milliseconds").replace("+00:00", "Z")


@dataclass
class JobRecord:
    """What a backend knows about one job."""

    id: str
    tenant: str
    kind: str
    state: str
    created: float
    time_limit: float
    started: float | None = None
    finished: float | None = None
    attempts: int = 0
    cancel_requested: bool = False
    result: bytes | None = field(default=None, repr=False)  # JSON of the solve response
    error: dict | None = None
    progress: dict | None = None  # the latest report of a running solve that reports one

    def document(self) -> dict:
        """The public JSON document of ``GET /v1/jobs/{id}``."""
        doc = {"id": self.id, "kind": self.kind, "state": self.state, "created_at": _iso(self.created),
               "started_at": _iso(self.started), "finished_at": _iso(self.finished),
               "attempts": self.attempts, "time_limit": self.time_limit}
        if self.cancel_requested and self.state not in FINAL:
            doc["cancel_requested"] = True
        if self.state == RUNNING and self.progress is not None:
            doc["progress"] = self.progress
        if self.state == DONE and self.result is not None:
            doc["result"] = orjson.loads(self.result)
        if self.error is not None:
            doc["error"] = self.error
        return doc
