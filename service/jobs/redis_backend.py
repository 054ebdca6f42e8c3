"""Jobs on Redis with RQ: any host runs ``sluice worker`` to take them.

Keys (all under ``SLUICE_REDIS_PREFIX``): ``job:{id}`` a hash with the record,
``job:{id}:body`` the problem JSON, ``job:{id}:result`` the answer JSON and
``job:{id}:lease`` a key with a short expiry that the worker renews while the job runs.
RQ carries the job id to a worker (queue ``SLUICE_JOB_QUEUE``); RQ forks a work horse
per job, and the horse runs the solve in a killable solver process of its own (the
solvers hold the GIL, so neither RQ's alarm nor a thread could stop them).

A worker host that dies stops renewing the lease: a running job whose lease key is
gone is reported (and recorded) as failed by the next read.
"""

from __future__ import annotations

import dataclasses
import logging
import time

import orjson
import redis

from ..kinds import Limits
from .execute import Progress, execute, lease_keeper
from .model import CANCELLED, FAILED, FINAL, QUEUED, RUNNING, JobRecord, JobsDown, new_job_id, worker_lost
from .runner import SolverProcess

log = logging.getLogger("sluice.jobs")

PERFORM = "service.jobs.redis_backend.perform"


def connect(url: str) -> redis.Redis:
    """A Redis client with short timeouts, so an outage is a quick 503, never a hung request.

    Parameters
    ----------
    url : str
        ``redis://host:port/db``.

    Returns
    -------
    redis.Redis
    """
    # Short timeouts: a Redis outage must turn into a quick 503, never a hung request.
    return redis.Redis.from_url(url, socket_connect_timeout=1.0, socket_timeout=3.0, health_check_interval=10)


def _f(value) -> float | None:
    return None if value in (None, b"") else float(value)


class RedisJobs:
    """Job records in Redis; execution by RQ workers (``sluice worker``)."""

    def __init__(self, url: str | None = None, *, prefix: str = "sluice:", queue: str = "sluice",
                 limits: Limits = Limits(), lease: float = 15.0, attempts: int = 2, ttl: int = 7 * 86400,
                 connection: redis.Redis | None = None):
        self.redis = connection if connection is not None else connect(url)
        self.prefix, self.queue_name, self.limits = prefix, queue, limits
        self.lease, self.max_attempts, self.ttl = lease, attempts, ttl
        self.on_finish = None

    def _key(self, job_id: str, part: str = "") -> str:
        return f"{self.prefix}job:{job_id}{part}"

    def _queue(self):
        from rq import Queue

        return Queue(self.queue_name, connection=self.redis)

    # -- API side ---------------------------------------------------------------------
    def submit(self, tenant: str, kind: str, body: bytes, time_limit: float) -> JobRecord:
        """Record a queued job and its body, then enqueue it for an RQ worker.

        Parameters
        ----------
        tenant : str
        kind : str
            Name of the problem kind (a key of ``service.kinds.KINDS``).
        body : bytes
            The validated request body as JSON; the worker parses it again.
        time_limit : float
            Seconds the job may run.

        Returns
        -------
        JobRecord
            The new record, in state ``queued``.

        Raises
        ------
        JobsDown
            Redis did not answer.
        """
        job_id, now = new_job_id(), time.time()
        record = JobRecord(job_id, tenant, kind, QUEUED, now, time_limit)
        try:
            pipe = self.redis.pipeline()
            pipe.hset(self._key(job_id), mapping={"tenant": tenant, "kind": kind, "state": QUEUED, "created": now,
                                                  "time_limit": time_limit, "attempts": 0, "cancel": 0})
            pipe.set(self._key(job_id, ":body"), body)
            pipe.execute()
            self._enqueue(job_id, 0, time_limit)
        except redis.RedisError as exc:
            raise JobsDown(str(exc)) from None
        return record

    def _enqueue(self, job_id: str, attempt: int, time_limit: float) -> None:
        self._queue().enqueue_call(
            PERFORM, args=(job_id, self.prefix, dataclasses.asdict(self.limits), self.lease, self.ttl),
            job_id=f"{job_id}-{attempt}", timeout=int(time_limit) + 120, result_ttl=600, failure_ttl=self.ttl,
            description=f"sluice job {job_id}")

    def _load(self, job_id: str) -> JobRecord | None:
        h = self.redis.hgetall(self._key(job_id))
        if not h:
            return None
        s = {k.decode(): v.decode() for k, v in h.items()}
        record = JobRecord(job_id, s["tenant"], s["kind"], s["state"], float(s["created"]), float(s["time_limit"]),
                           started=_f(s.get("started")), finished=_f(s.get("finished")),
                           attempts=int(s.get("attempts", 0)), cancel_requested=s.get("cancel") == "1",
                           error=orjson.loads(s["error"]) if s.get("error") else None,
                           progress=orjson.loads(s["progress"]) if s.get("progress") else None)
        if record.state == RUNNING and not self.redis.exists(self._key(job_id, ":lease")):
            record = self._lost(record)
        return record

    def _lost(self, record: JobRecord) -> JobRecord:
        """The worker of a running job stopped renewing its lease: fail it (once)."""
        error = worker_lost(record.attempts)
        state = CANCELLED if record.cancel_requested else FAILED
        if self._transition(record.id, (RUNNING,), state, {"finished": time.time(),
                                                          "error": orjson.dumps(error).decode()}):
            self._expire(record.id)
            log.warning("job %s: worker lost, marked %s", record.id, state)
        return self._load(record.id) or record

    def get(self, tenant: str, job_id: str) -> JobRecord | None:
        """The record of a job of this tenant, with its result once it is done.

        A running job whose lease key has expired is marked failed (or cancelled, if a
        cancel was asked) by this read: its worker is gone.

        Parameters
        ----------
        tenant : str
        job_id : str

        Returns
        -------
        JobRecord or None
            ``None`` when no job has that id, or it belongs to another tenant.

        Raises
        ------
        JobsDown
            Redis did not answer.
        """
        try:
            record = self._load(job_id)
            if record is None or record.tenant != tenant:
                return None
            if record.state == "done":
                record.result = self.redis.get(self._key(job_id, ":result"))
            return record
        except redis.RedisError as exc:
            raise JobsDown(str(exc)) from None

    def cancel(self, tenant: str, job_id: str) -> JobRecord | None:
        """Cancel a job: a queued one at once, a running one through its cancel flag.

        A queued job moves to ``cancelled`` and its RQ job is dropped. For a running job
        the flag is set; its worker reads it at the next heartbeat and kills the solve.

        Parameters
        ----------
        tenant : str
        job_id : str

        Returns
        -------
        JobRecord or None
            The record after the request, or ``None`` when the tenant has no such job.

        Raises
        ------
        JobsDown
            Redis did not answer.
        """
        try:
            record = self._load(job_id)
            if record is None or record.tenant != tenant:
                return None
            if record.state not in FINAL:
                self.redis.hset(self._key(job_id), "cancel", 1)
                if self._transition(job_id, (QUEUED,), CANCELLED, {"finished": time.time()}):
                    self._expire(job_id)
                    self._drop_rq_job(job_id, record.attempts)
            return self.get(tenant, job_id)
        except redis.RedisError as exc:
            raise JobsDown(str(exc)) from None

    def _drop_rq_job(self, job_id: str, attempt: int) -> None:
        from rq.exceptions import InvalidJobOperation, NoSuchJobError
        from rq.job import Job

        try:
            Job.fetch(f"{job_id}-{attempt}", connection=self.redis).cancel()
        except (NoSuchJobError, InvalidJobOperation):
            pass  # a worker took it already: it sees the cancel flag and stops

    def queue_depth(self) -> int:
        """Jobs waiting in the RQ queue, or -1 when Redis does not answer."""
        try:
            return self._queue().count
        except redis.RedisError:
            return -1

    def health(self) -> str:
        """``"ok"`` when Redis answers a ping, else ``"unavailable"`` (logged)."""
        try:
            self.redis.ping()
            return "ok"
        except redis.RedisError as exc:
            log.warning("redis (jobs) unavailable: %s", exc)
            return "unavailable"

    def start(self) -> None:
        """Nothing runs in the API process: ``sluice worker`` does the work."""

    def release(self) -> None:
        """Do nothing: jobs run in ``sluice worker`` processes, not in the API process."""
        pass

    def close(self) -> None:
        """Close the Redis client's connections."""
        self.redis.close()

    # -- shared -----------------------------------------------------------------------
    def _transition(self, job_id: str, from_states: tuple, to_state: str, fields: dict, also=None) -> bool:
        """Move the record to ``to_state`` if it is in one of ``from_states`` (atomically).

        ``also(pipe)``, when given, queues more commands into the same MULTI.
        """
        key = self._key(job_id)
        with self.redis.pipeline() as pipe:
            while True:
                try:
                    pipe.watch(key)
                    state = pipe.hget(key, "state")
                    if state is None or state.decode() not in from_states:
                        pipe.unwatch()
                        return False
                    pipe.multi()
                    pipe.hset(key, mapping={"state": to_state, **fields})
                    if also is not None:
                        also(pipe)
                    pipe.execute()
                    return True
                except redis.WatchError:
                    continue

    def _expire(self, job_id: str) -> None:
        pipe = self.redis.pipeline()
        pipe.delete(self._key(job_id, ":body"), self._key(job_id, ":lease"))
        pipe.expire(self._key(job_id), self.ttl)
        pipe.expire(self._key(job_id, ":result"), self.ttl)
        pipe.execute()

    # -- worker side (inside an RQ work horse) ------------------------------------------
    def run(self, job_id: str) -> str:
        """Claim and run one job; returns its final state (or why it did not run)."""
        lease_key = self._key(job_id, ":lease")

        def claim(pipe) -> None:
            """Queue the lease key and the attempt count into the MULTI that marks the job running."""
            # In the same MULTI as the move to running: a reader that saw "running" with
            # no lease would take the worker for lost and fail the job.
            pipe.set(lease_key, 1, px=int(self.lease * 1000))
            pipe.hincrby(self._key(job_id), "attempts", 1)

        if not self._transition(job_id, (QUEUED,), RUNNING, {"started": time.time()}, also=claim):
            return "not queued"
        h = self.redis.hmget(self._key(job_id), "kind", "time_limit", "attempts")
        kind, time_limit, attempts = h[0].decode(), float(h[1]), int(h[2])
        body = self.redis.get(self._key(job_id, ":body"))

        def renew() -> bool:
            """Extend the lease key by another ``lease`` seconds.

            Returns
            -------
            bool
                Always True: this backend does not detect a lease that was taken back.
            """
            self.redis.set(lease_key, 1, px=int(self.lease * 1000))
            return True

        progress = Progress()

        def tick() -> bool:
            """Heartbeat: store the latest progress report, and tell whether a cancel was asked.

            Returns
            -------
            bool
                True when the job's cancel flag is set, which kills the solve.
            """
            report = progress.pending()
            if report is not None:
                self.redis.hset(self._key(job_id), "progress", report)
            return self.redis.hget(self._key(job_id), "cancel") == b"1"

        started = time.monotonic()
        with lease_keeper(renew, self.lease / 3):
            proc = SolverProcess()
            try:
                state, result, error = execute(proc.run, kind, body, self.limits, time_limit, tick, progress)
            finally:
                proc.kill()
        if result is not None:
            self.redis.set(self._key(job_id, ":result"), result)
        fields = {"finished": time.time(), **({"error": orjson.dumps(error).decode()} if error else {})}
        self._transition(job_id, (RUNNING,), state, fields)
        self._expire(job_id)
        log.info("job %s %s after %.3f s (attempt %d)", job_id, state, time.monotonic() - started, attempts)
        return state


def perform(job_id: str, prefix: str, limits: dict, lease: float, ttl: int) -> str:
    """The RQ job function (runs in the work horse)."""
    from rq import get_current_job

    known = {f.name for f in dataclasses.fields(Limits)}  # a job queued by an older version may carry more
    backend = RedisJobs(prefix=prefix, limits=Limits(**{k: v for k, v in limits.items() if k in known}),
                        lease=lease, ttl=ttl,
                        connection=get_current_job().connection)
    return backend.run(job_id)
