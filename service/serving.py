"""The embedded gunicorn defaults used by ``sluice serve`` (and by deploy/gunicorn.conf.py).

gthread workers: each worker process runs a few threads, so a slow or stalled client
holds one thread, not the whole worker. One worker per core: solves are CPU-bound.
"""

from __future__ import annotations

import gc
import os


def default_workers() -> int:
    return max(1, len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1))


def gunicorn_defaults(host: str = "127.0.0.1", port: int = 8000, workers: int | None = None) -> dict:
    time_limit = float(os.environ.get("SLUICE_TIME_LIMIT") or 30)
    return {
        "bind": f"{host}:{port}",
        "workers": workers or default_workers(),
        "worker_class": "gthread",
        "threads": 4,
        # A worker that stops heart-beating for this long is replaced; solves run on
        # worker threads while the main thread keeps beating, so this only catches
        # truly stuck workers. Leave room above the synchronous solve limit.
        "timeout": int(max(60, 3 * time_limit)),
        "graceful_timeout": int(max(30, time_limit + 5)),
        "keepalive": 5,
        # Large bodies arrive over loopback or a LAN in seconds; headers must be small.
        "limit_request_line": 8190,
        "limit_request_fields": 100,
        "accesslog": "-",
        "errorlog": "-",
        "loglevel": os.environ.get("SLUICE_LOG_LEVEL", "info"),
        "post_fork": post_fork,
        "when_ready": when_ready,
    }


def post_fork(server, worker) -> None:
    # Large problems allocate millions of short-lived acyclic objects; fewer
    # cyclic-GC passes keep the decode fast. Reference counting frees them as usual.
    gc.set_threshold(50_000, 20, 20)


def when_ready(server) -> None:
    from .config import Settings

    settings = Settings.from_env()
    if not settings.api_keys:
        server.log.warning("sluice: no API keys configured; the service runs open")
    server.log.info("sluice: ready; data dir %s, redis %s", settings.data_dir,
                    "configured" if settings.redis_url else "not configured")
