"""The ``sluice`` command: ``sluice serve`` runs the service under gunicorn,
``sluice worker`` runs background jobs from Redis, ``sluice spec`` prints the OpenAPI document."""

from __future__ import annotations

import argparse
import sys

from gunicorn.app.base import BaseApplication

from .serving import asgi_app, gunicorn_defaults


class _Server(BaseApplication):
    def __init__(self, options: dict):
        self.options = options
        super().__init__()

    def load_config(self):
        for key, value in self.options.items():
            if key in self.cfg.settings:  # older gunicorn lacks some settings (control socket)
                self.cfg.set(key, value)

    def load(self):
        return asgi_app()


def _settings_or_exit():
    from .config import Settings

    try:
        return Settings.from_env()
    except (ValueError, OSError) as exc:
        print(f"sluice: bad configuration: {exc}", file=sys.stderr)
        sys.exit(2)


def _backends_or_exit(settings) -> None:
    """Refuse to start, with the install command, when a configured backend's package is
    missing (an install made without dependencies): never a 500 at the first job."""
    if settings.redis_url:
        import importlib.util

        missing = [name for name in ("redis", "rq") if importlib.util.find_spec(name) is None]
        if missing:
            print(f"sluice: SLUICE_REDIS_URL is set but {' and '.join(missing)} is not installed; "
                  f"run: pip install 'redis>=5.0' 'rq>=1.16'", file=sys.stderr)
            sys.exit(2)


def _serve(args) -> int:
    _backends_or_exit(_settings_or_exit())
    _Server(gunicorn_defaults(args.host, args.port, args.workers)).run()
    return 0


def _worker(args) -> int:
    """Run an RQ worker on the job queue (needs SLUICE_REDIS_URL)."""
    from . import logs

    settings = _settings_or_exit()
    if not settings.redis_url:
        print("sluice worker: set SLUICE_REDIS_URL (jobs run in the API process without Redis)", file=sys.stderr)
        return 2
    _backends_or_exit(settings)
    logs.configure()
    from rq import Queue, Worker

    from .jobs.redis_backend import connect

    connection = connect(settings.redis_url)
    queue = Queue(args.queue or settings.job_queue, connection=connection)
    # The work horse renews each job's own lease (SLUICE_JOB_LEASE); RQ's monitoring
    # interval only bounds how late RQ itself notices a lost horse.
    worker = Worker([queue], connection=connection, job_monitoring_interval=max(1, int(settings.job_lease // 3)))
    worker.work(burst=args.burst, logging_level=(args.log_level or "INFO").upper(), with_scheduler=False)
    return 0


def _spec(args) -> int:
    from .api.spec import spec_yaml

    sys.stdout.write(spec_yaml())
    return 0


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="sluice", description="Network-flow optimisation over HTTP.")
    sub = parser.add_subparsers(dest="command", required=True)
    serve = sub.add_parser("serve", help="run the HTTP service under gunicorn")
    serve.add_argument("--host", default="127.0.0.1")
    serve.add_argument("--port", type=int, default=8000)
    serve.add_argument("--workers", type=int, default=None, help="default: one per core")
    serve.set_defaults(func=_serve)
    worker = sub.add_parser("worker", help="run queued jobs from Redis (SLUICE_REDIS_URL)")
    worker.add_argument("--queue", default=None, help="RQ queue name (default SLUICE_JOB_QUEUE or 'sluice')")
    worker.add_argument("--burst", action="store_true", help="exit when the queue is empty")
    worker.add_argument("--log-level", default=None)
    worker.set_defaults(func=_worker)
    spec = sub.add_parser("spec", help="print the OpenAPI document as YAML")
    spec.set_defaults(func=_spec)
    args = parser.parse_args(argv)
    return args.func(args)


if __name__ == "__main__":
    sys.exit(main())
