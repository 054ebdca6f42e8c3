"""The ``sluice`` command: ``sluice serve`` runs the service under gunicorn."""

from __future__ import annotations

import argparse
import sys

from gunicorn.app.base import BaseApplication

from .serving import gunicorn_defaults


class _Server(BaseApplication):
    def __init__(self, options: dict):
        self.options = options
        super().__init__()

    def load_config(self):
        for key, value in self.options.items():
            self.cfg.set(key, value)

    def load(self):
        from .api import create_app

        return create_app()


def _serve(args) -> int:
    _Server(gunicorn_defaults(args.host, args.port, args.workers)).run()
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
    spec = sub.add_parser("spec", help="print the OpenAPI document as YAML")
    spec.set_defaults(func=_spec)
    args = parser.parse_args(argv)
    return args.func(args)


if __name__ == "__main__":
    sys.exit(main())
