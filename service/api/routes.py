"""Every blueprint of the service, in one place: the app registers them, and the OpenAPI
document is built from the routes they hold (:func:`service.api.spec.build_spec`)."""

from __future__ import annotations

from flask import Flask

from . import batch, diagram, explorer, jobs, metrics, networks, ops, solutions, solve, verify

#: In the order the document presents them.
BLUEPRINTS = (jobs.bp, metrics.bp, solve.bp, networks.bp, solutions.bp, verify.bp, batch.bp, diagram.bp,
              explorer.bp, ops.bp)


def register(app: Flask) -> None:
    """Register every blueprint on ``app``."""
    for blueprint in BLUEPRINTS:
        app.register_blueprint(blueprint)


def bare_app() -> Flask:
    """A Flask app as the service makes one, before anything is attached: no static
    route (the explorer serves its own files), and no redirect for a trailing slash."""
    app = Flask("service.api", static_folder=None)
    app.url_map.strict_slashes = False
    return app


def route_app() -> Flask:
    """An app with the routes and nothing else (no store, jobs or solver processes): what
    ``sluice spec`` documents without starting the service."""
    app = bare_app()
    register(app)
    return app
