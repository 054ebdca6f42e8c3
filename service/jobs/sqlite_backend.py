"""Embedded jobs: records in ``SLUICE_DATA_DIR/jobs.sqlite3`` (WAL), run by local pools.

Every API worker process runs ``job_workers`` dispatcher threads. A dispatcher claims
the oldest queued job in one ``UPDATE ... RETURNING`` (SQLite serialises writers, so two
processes never claim the same job), runs it in a killable solver process, and renews
the job's lease while it waits. Records live in the file, so queued and finished jobs
survive a restart; a job whose lease ran out (its process was killed) is queued again
while it has attempts left, else marked failed.
"""

from __future__ import annotations

import logging
import os
import socket
import sqlite3
import threading
import time

import orjson

from ..kinds import Limits
from .execute import Progress, execute, lease_keeper
from .model import CANCELLED, FAILED, FINAL, QUEUED, RUNNING, JobRecord, new_job_id, worker_lost
from .runner import SolverPool

log = logging.getLogger("sluice.jobs")

SCHEMA = """
CREATE TABLE IF NOT EXISTS jobs (
    id TEXT PRIMARY KEY,
    tenant TEXT NOT NULL,
    kind TEXT NOT NULL,
    state TEXT NOT NULL,
    body BLOB,
    result BLOB,
    error TEXT,
    created REAL NOT NULL,
    started REAL,
    finished REAL,
    attempts INTEGER NOT NULL DEFAULT 0,
    time_limit REAL NOT NULL,
    cancel INTEGER NOT NULL DEFAULT 0,
    owner TEXT,
    lease_until REAL,
    progress TEXT
);
CREATE INDEX IF NOT EXISTS jobs_by_state ON jobs (state, created);
"""

COLUMNS = ("id, tenant, kind, state, result, error, created, started, finished, attempts, time_limit, cancel, "
           "progress")


def _record(row) -> JobRecord:
    return JobRecord(id=row[0], tenant=row[1], kind=row[2], state=row[3], result=row[4],
                     error=orjson.loads(row[5]) if row[5] else None, created=row[6], started=row[7],
                     finished=row[8], attempts=row[9], time_limit=row[10], cancel_requested=bool(row[11]),
                     progress=orjson.loads(row[12]) if row[12] else None)


class SqliteJobs:
    """Job records in SQLite and the dispatchers of this process."""

    def __init__(self, data_dir: str, *, limits: Limits, workers: int = 1, lease: float = 15.0,
                 attempts: int = 2, ttl: int = 7 * 86400, solver_max_rss_mb: float | None = None):
        os.makedirs(data_dir, exist_ok=True)
        self.path = os.path.join(data_dir, "jobs.sqlite3")
        self.limits, self.workers, self.lease, self.max_attempts, self.ttl = limits, workers, lease, attempts, ttl
        self._local = threading.local()
        self._wake = threading.Event()
        self._stop = threading.Event()
        self._threads: list[threading.Thread] = []
        self._pool: SolverPool | None = None
        self.solver_max_rss_mb = solver_max_rss_mb
        self._owners: set[str] = set()
        self._lease_db: dict[str, sqlite3.Connection] = {}
        self._last_reap = 0.0
        self.on_finish = None  # callable(kind, state, seconds): metrics hook of the API layer
        with self._db() as db:
            db.executescript(SCHEMA)
            # A jobs file written before progress reports existed gets the column.
            if "progress" not in {row[1] for row in db.execute("PRAGMA table_info(jobs)")}:
                db.execute("ALTER TABLE jobs ADD COLUMN progress TEXT")

    # -- storage ----------------------------------------------------------------------
    def _connect(self) -> sqlite3.Connection:
        db = sqlite3.connect(self.path, timeout=10.0, isolation_level=None, check_same_thread=False)
        db.execute("PRAGMA journal_mode=WAL")
        db.execute("PRAGMA synchronous=NORMAL")
        return db

    def _db(self) -> sqlite3.Connection:
        db = getattr(self._local, "db", None)
        if db is None or getattr(self._local, "pid", None) != os.getpid():
            db = self._connect()
            self._local.db, self._local.pid = db, os.getpid()
        return db

    def submit(self, tenant: str, kind: str, body: bytes, time_limit: float) -> JobRecord:
        """Insert a queued job and wake this process's dispatchers.

        Parameters
        ----------
        tenant : str
        kind : str
            Name of the problem kind (a key of ``service.kinds.KINDS``).
        body : bytes
            The validated request body as JSON; the dispatcher parses it again.
        time_limit : float
            Seconds the job may run.

        Returns
        -------
        JobRecord
            The new record, in state ``queued``.
        """
        job_id, now = new_job_id(), time.time()
        self._db().execute(
            "INSERT INTO jobs (id, tenant, kind, state, body, created, time_limit) VALUES (?, ?, ?, ?, ?, ?, ?)",
            (job_id, tenant, kind, QUEUED, body, now, time_limit))
        self._wake.set()
        return JobRecord(job_id, tenant, kind, QUEUED, now, time_limit)

    def get(self, tenant: str, job_id: str) -> JobRecord | None:
        """The record of a job of this tenant, or ``None``.

        Reading first takes back jobs whose lease ran out (throttled to once per second,
        or per quarter lease if that is shorter), so a job whose worker was killed is not
        reported ``running`` for long.

        Parameters
        ----------
        tenant : str
        job_id : str

        Returns
        -------
        JobRecord or None
            ``None`` when no job has that id, or it belongs to another tenant.
        """
        self._reap()
        row = self._db().execute(f"SELECT {COLUMNS} FROM jobs WHERE id = ? AND tenant = ?",
                                 (job_id, tenant)).fetchone()
        return _record(row) if row else None

    def cancel(self, tenant: str, job_id: str) -> JobRecord | None:
        """Cancel a queued job at once; ask the dispatcher of a running one to kill it."""
        db = self._db()
        db.execute("UPDATE jobs SET state = ?, finished = ?, cancel = 1, body = NULL "
                   "WHERE id = ? AND tenant = ? AND state = ?", (CANCELLED, time.time(), job_id, tenant, QUEUED))
        db.execute("UPDATE jobs SET cancel = 1 WHERE id = ? AND tenant = ? AND state = ?",
                   (job_id, tenant, RUNNING))
        return self.get(tenant, job_id)

    def queue_depth(self) -> int:
        """Jobs in state ``queued`` in the file (all processes sharing it)."""
        return self._db().execute("SELECT COUNT(*) FROM jobs WHERE state = ?", (QUEUED,)).fetchone()[0]

    def health(self) -> str:
        """``"ok"`` when the jobs file answers a query, else ``"failed"`` (logged)."""
        try:
            self._db().execute("SELECT COUNT(*) FROM jobs WHERE state = ?", (RUNNING,)).fetchone()
            return "ok"
        except sqlite3.Error as exc:
            log.error("jobs store failed: %s", exc)
            return "failed"

    def _reap(self, force: bool = False) -> None:
        """Take back running jobs whose lease ran out; forget old finished ones."""
        now = time.time()
        if not force and now - self._last_reap < min(1.0, self.lease / 4):
            return
        self._last_reap = now
        db = self._db()
        db.execute("UPDATE jobs SET state = ?, finished = ?, body = NULL "
                   "WHERE state = ? AND lease_until < ? AND cancel = 1", (CANCELLED, now, RUNNING, now))
        db.execute("UPDATE jobs SET state = ?, owner = NULL, lease_until = NULL "
                   "WHERE state = ? AND lease_until < ? AND attempts < ?", (QUEUED, RUNNING, now, self.max_attempts))
        for job_id, attempts in db.execute("SELECT id, attempts FROM jobs WHERE state = ? AND lease_until < ?",
                                           (RUNNING, now)).fetchall():
            db.execute("UPDATE jobs SET state = ?, error = ?, finished = ?, body = NULL WHERE id = ? AND state = ?",
                       (FAILED, orjson.dumps(worker_lost(attempts)), now, job_id, RUNNING))
        db.execute("DELETE FROM jobs WHERE finished < ? AND state IN (?, ?, ?)", (now - self.ttl, *FINAL))

    # -- dispatchers ------------------------------------------------------------------
    def start(self) -> None:
        """Start this process's dispatcher threads (once per process)."""
        if self._threads or self.workers <= 0:
            return
        self._pool = SolverPool(self.workers, max_rss_mb=self.solver_max_rss_mb)
        for i in range(self.workers):
            owner = f"{socket.gethostname()}:{os.getpid()}:{i}:{new_job_id()[:8]}"
            self._owners.add(owner)
            t = threading.Thread(target=self._dispatch, args=(owner,), name=f"sluice-jobs-{i}", daemon=True)
            t.start()
            self._threads.append(t)

    def _claim(self, owner: str):
        now = time.time()
        return self._db().execute(
            "UPDATE jobs SET state = ?, owner = ?, attempts = attempts + 1, started = ?, lease_until = ? "
            "WHERE id = (SELECT id FROM jobs WHERE state = ? ORDER BY created LIMIT 1) AND state = ? "
            "RETURNING id, kind, body, time_limit",
            (RUNNING, owner, now, now + self.lease, QUEUED, QUEUED)).fetchone()

    def _dispatch(self, owner: str) -> None:
        # The lease thread of each job uses this one connection (one lease thread at a time
        # per dispatcher), instead of opening a connection per job.
        self._lease_db[owner] = self._connect()
        while not self._stop.is_set():
            try:
                self._reap()
                job = self._claim(owner)
            except sqlite3.Error as exc:
                log.error("jobs dispatcher: %s", exc)
                job = None
            if job is None:
                self._wake.wait(0.5)
                self._wake.clear()
                continue
            self._run(owner, *job)

    def _run(self, owner: str, job_id: str, kind: str, body: bytes, time_limit: float) -> None:
        started = time.monotonic()

        def renew() -> bool:
            """Extend the lease, if this dispatcher still owns the running job.

            Returns
            -------
            bool
                False when the job is no longer this dispatcher's running job (its lease
                ran out and it was taken back), which stops the solve.
            """
            return bool(self._lease_db[owner].execute(
                "UPDATE jobs SET lease_until = ? WHERE id = ? AND owner = ? AND state = ?",
                (time.time() + self.lease, job_id, owner, RUNNING)).rowcount)

        progress = Progress()
        with lease_keeper(renew, self.lease / 3) as lost:
            def tick() -> bool:
                """Heartbeat: store the latest progress report, and tell whether to stop.

                Returns
                -------
                bool
                    True when the job was cancelled or its lease was lost.
                """
                report = progress.pending()
                if report is not None:
                    self._db().execute("UPDATE jobs SET progress = ? WHERE id = ? AND state = ?",
                                       (report, job_id, RUNNING))
                # Stop when cancelled, or when the lease was taken back (someone else runs it).
                row = self._db().execute("SELECT cancel FROM jobs WHERE id = ?", (job_id,)).fetchone()
                return lost.is_set() or bool(row and row[0])

            state, result, error = execute(self._pool.run, kind, body, self.limits, time_limit, tick, progress)
        self._db().execute(
            "UPDATE jobs SET state = ?, result = ?, error = ?, finished = ?, body = NULL, lease_until = NULL "
            "WHERE id = ? AND owner = ? AND state = ?",
            (state, result, orjson.dumps(error) if error else None, time.time(), job_id, owner, RUNNING))
        log.info("job %s %s after %.3f s", job_id, state, time.monotonic() - started)
        if self.on_finish:
            self.on_finish(kind, state, time.monotonic() - started)

    def release(self) -> None:
        """On shutdown: hand this process's running jobs back to the queue at once."""
        self._stop.set()
        if self._owners:
            marks = ",".join("?" * len(self._owners))
            self._db().execute(
                f"UPDATE jobs SET state = ?, owner = NULL, lease_until = NULL, attempts = MAX(attempts - 1, 0) "
                f"WHERE state = ? AND cancel = 0 AND owner IN ({marks})", (QUEUED, RUNNING, *self._owners))
        if self._pool:
            self._pool.close()

    def close(self) -> None:
        """Same as :meth:`release`."""
        self.release()
