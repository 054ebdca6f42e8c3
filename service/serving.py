"""The embedded gunicorn defaults used by ``sluice serve`` (and by deploy/gunicorn.conf.py).

gunicorn's asyncio worker receives every request whole before a thread runs the app
(:mod:`service.intake`): a slow or stalled client holds a socket, never a thread, and
its body gets a deadline (408). One worker per core: solves are CPU-bound. Each worker
runs the Flask app on ``SLUICE_THREADS`` threads (default 4) plus two for the probes.
Large solves run in killable solver processes (see :mod:`service.api.bounded`), so a
thread never waits past the synchronous time limit.
"""

from __future__ import annotations

import gc
import os
import shutil
import tempfile

from .logs import logging_config
from .memory import RetainCeiling, retain_freed_memory

_METRICS_DIR_OWNED = "SLUICE_METRICS_DIR_OWNED"


def default_workers() -> int:
    """One worker per core this process may run on (its CPU affinity where known), at least 1."""
    return max(1, len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1))


def gunicorn_defaults(host: str = "127.0.0.1", port: int = 8000, workers: int | None = None) -> dict:
    """The gunicorn settings ``sluice serve`` runs with, its server hooks included.

    Parameters
    ----------
    host : str
    port : int
        Where to listen; ``SLUICE_METRICS=port:N`` adds a second bind, ``host:N``.
    workers : int, optional
        Worker processes; :func:`default_workers` when not given.

    Returns
    -------
    dict
        Settings by gunicorn name. The timeouts follow ``SLUICE_TIME_LIMIT``: a worker silent for
        three times it (at least 60 s) is replaced, and on SIGTERM requests in flight get it plus
        5 s (at least 30 s).
    """
    from .config import Settings

    time_limit = float(os.environ.get("SLUICE_TIME_LIMIT") or Settings.time_limit)  # the one default
    level = os.environ.get("SLUICE_LOG_LEVEL", "info")
    bind = [f"{host}:{port}"]
    metrics = os.environ.get("SLUICE_METRICS") or ""
    if metrics.startswith("port:"):  # /metrics on a port of its own (checked by Settings at start-up)
        bind.append(f"{host}:{metrics[5:]}")
    return {
        "bind": bind if len(bind) > 1 else bind[0],
        "workers": workers or default_workers(),
        # The app's threads belong to service.intake; the asyncio worker has none.
        "worker_class": "asgi",
        "threads": 1,
        # Without lifespan events nothing waits on start-up; the app needs none.
        "asgi_lifespan": "off",
        # A worker that stops heart-beating for this long is replaced; solves run on
        # worker threads (or in solver processes) while the main thread keeps beating,
        # so this only catches truly stuck workers. Leave room above the solve limit.
        "timeout": int(max(60, 3 * time_limit)),
        # SIGTERM: requests in flight get this long to finish before the worker exits.
        "graceful_timeout": int(max(30, time_limit + 5)),
        "keepalive": 5,
        # Large bodies arrive over loopback or a LAN in seconds; headers must be small.
        "limit_request_line": 8190,
        "limit_request_fields": 100,
        # The app writes one JSON access line per request (with the request id); gunicorn's
        # own access log would repeat it without the id.
        "accesslog": None,
        "errorlog": "-",
        "loglevel": level,
        # gunicorn >= 24 opens a control socket in $HOME by default: one path for every
        # instance on the host. Sluice does not use it.
        "control_socket_disable": True,
        "logconfig_dict": logging_config(level, os.environ.get("SLUICE_LOG_FORMAT") or "json"),
        "on_starting": on_starting,
        "post_fork": post_fork,
        "post_worker_init": post_worker_init,
        "post_request": post_request,
        "worker_exit": worker_exit,
        "child_exit": child_exit,
        "on_exit": on_exit,
        "when_ready": when_ready,
    }


def asgi_app():
    """The app ``sluice serve`` runs: the Flask app behind the buffering front.

    ``gunicorn -c deploy/gunicorn.conf.py 'service.serving:asgi_app()'`` in a container.
    """
    from .api import create_app
    from .config import Settings
    from .intake import BufferedWSGI, IntakeLimits

    settings = Settings.from_env()
    limits = IntakeLimits(max_body=settings.max_body_bytes, idle_timeout=settings.body_timeout,
                          min_rate=settings.body_min_rate, threads=settings.threads,
                          heavy_slots=max(1, settings.solver_processes), queue_wait=settings.queue_wait)
    return BufferedWSGI(create_app(settings), limits)


def _flask_app(worker):
    front = getattr(worker, "asgi", None) or getattr(worker, "wsgi", None)
    app = getattr(front, "app", front)
    return app if hasattr(app, "extensions") else None


def on_starting(server) -> None:
    """Before any worker exists: a clean folder for the metrics of all workers."""
    folder = os.environ.get("PROMETHEUS_MULTIPROC_DIR")
    if folder:
        os.makedirs(folder, exist_ok=True)
        for name in os.listdir(folder):  # samples of an earlier run would be added in
            if name.endswith(".db"):
                os.unlink(os.path.join(folder, name))
    else:
        folder = tempfile.mkdtemp(prefix="sluice-metrics-")
        os.environ["PROMETHEUS_MULTIPROC_DIR"] = folder
        os.environ[_METRICS_DIR_OWNED] = folder
    server.log.info("sluice: metrics of all workers in %s", folder)


def post_fork(server, worker) -> None:
    """In each new worker, before its threads start: fewer cyclic-GC passes, and freed memory
    retained for reuse (:func:`service.memory.retain_freed_memory`).
    """
    # Large problems allocate millions of short-lived acyclic objects; fewer
    # cyclic-GC passes keep the decode fast. Reference counting frees them as usual.
    gc.set_threshold(50_000, 20, 20)
    # Before the worker starts its threads (see service.memory).
    worker.sluice_retains = retain_freed_memory()


def post_worker_init(worker) -> None:
    """The app is loaded in this worker: warm a solver process, start the job dispatchers."""
    app = _flask_app(worker)
    solver = app.extensions.get("sluice.solver")
    if solver is not None:
        solver.pool.warm(1)
    jobs = app.extensions.get("sluice.jobs")
    if jobs is not None:
        jobs.start()
    state = app.extensions.get("sluice")
    if getattr(worker, "sluice_retains", False) and state is not None and state.settings.worker_retain_mb > 0:
        worker.sluice_memory = RetainCeiling(state.settings.worker_retain_mb)


def post_request(worker, req, environ, resp) -> None:
    """After the response is sent: hand back freed memory above the worker's ceiling."""
    ceiling = getattr(worker, "sluice_memory", None)
    if ceiling is not None:
        ceiling.after_request()


def worker_exit(server, worker) -> None:
    """A worker leaves (SIGTERM, max requests): hand its running jobs back to the queue."""
    app = _flask_app(worker)
    jobs = app.extensions.get("sluice.jobs") if app is not None else None
    if jobs is not None:
        try:
            jobs.release()
        except Exception as exc:  # noqa: BLE001 - the lease takes the jobs back anyway
            server.log.warning("sluice: could not release jobs: %s", exc)
    solver = app.extensions.get("sluice.solver") if app is not None else None
    if solver is not None:
        solver.pool.close()


def child_exit(server, worker) -> None:
    """In the master, after a worker died (even by SIGKILL): drop its live gauge files."""
    if os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
        from prometheus_client import multiprocess

        multiprocess.mark_process_dead(worker.pid)


def on_exit(server) -> None:
    """When the master exits: delete the metrics folder if :func:`on_starting` made it."""
    owned = os.environ.get(_METRICS_DIR_OWNED)
    if owned and owned == os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
        shutil.rmtree(owned, ignore_errors=True)


def when_ready(server) -> None:
    """When the master is ready: log what an operator should know of the configuration.

    A warning when the service runs open, or when ``/metrics`` is open beside API keys; then the
    data folder, Redis, the time limits, threads and the body and queue limits.
    """
    from .config import Settings

    settings = Settings.from_env()
    if not settings.api_keys:
        server.log.warning("sluice: no API keys configured; the service runs open (every request is tenant public)")
    else:
        tenants = sorted({k.tenant for k in settings.api_keys})
        server.log.info("sluice: %d API key(s) for %d tenant(s)", len(settings.api_keys), len(tenants))
        if settings.metrics == "open":
            server.log.warning("sluice: /metrics is open to anyone who can reach the port; "
                               "SLUICE_METRICS=key or port:N restricts it")
    server.log.info("sluice: ready; data dir %s, redis %s, synchronous time limit %g s, job time limit %g s",
                    settings.data_dir, "configured" if settings.redis_url else "not configured",
                    settings.time_limit, settings.job_time_limit)
    server.log.info("sluice: %d threads a worker; a request body may pause %g s and must average %g bytes/s "
                    "(408 otherwise); %g s of waiting for a thread or solver process before a 503",
                    settings.threads, settings.body_timeout, settings.body_min_rate, settings.queue_wait)
