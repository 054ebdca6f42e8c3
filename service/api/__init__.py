"""The HTTP layer: the Flask application factory and its blueprints."""

from __future__ import annotations

import logging
from dataclasses import dataclass

from flask import Flask, request

from ..config import Settings
from ..errors import FieldError, ProblemTooLarge, Unavailable
from ..intake import PROBE_PATHS, QUEUED, SHED
from ..kinds import Limits
from . import auth, bounded, cors, encoding, jobs, metrics, problems, ratelimit, requestlog, routes, storage
from .jsonio import OrjsonProvider, content_coding
from .spec import build_spec

log = logging.getLogger("sluice")


@dataclass
class SluiceState:
    """What the app keeps in ``app.extensions["sluice"]``."""

    settings: Settings
    limits: Limits
    spec: dict


def _enforce_body_limit():
    # Refuse from Content-Length alone, before a byte of the body is read.
    limit = request.max_content_length
    if request.content_length is not None and limit is not None and request.content_length > limit:
        raise ProblemTooLarge(FieldError("", f"the body has {request.content_length} bytes; the limit is {limit}"))
    if request.content_length or request.headers.get("Transfer-Encoding"):
        content_coding()  # an unknown Content-Encoding is a 415 whatever the endpoint


def _shed_late(queue_wait: float):
    def shed():
        """Refuse (503) a request the intake front marked as shed, or one that waited longer than
        ``queue_wait`` for a thread (the probes excepted), before its body is decoded.

        Raises
        ------
        Unavailable
            With a ``Retry-After`` of about ``queue_wait``.
        """
        # service.intake says how long the request waited for a thread (past the
        # admission wait it would only add to the queue's length), or that it found
        # every slot for large bodies busy: either way it is refused, undecoded.
        if request.environ.get(SHED):
            raise Unavailable(f"the service is overloaded: every slot for large problems stayed busy for "
                              f"{queue_wait:g} s; retry, or submit a job", retry_after=bounded.retry_after(queue_wait))
        waited = request.environ.get(QUEUED, 0.0)
        if waited > queue_wait and request.path not in PROBE_PATHS:
            raise Unavailable(f"the service is overloaded: this request waited {waited:.1f} s for a thread; retry",
                              retry_after=bounded.retry_after(queue_wait))
    return shed


def create_app(config: Settings | dict | None = None) -> Flask:
    """Build the Sluice WSGI application.

    Parameters
    ----------
    config : Settings or dict, optional
        Settings to use; a dict overrides fields of ``Settings.from_env()``.
    """
    settings = config if isinstance(config, Settings) else Settings.from_env()
    if isinstance(config, dict):
        settings = Settings(**{**settings.__dict__, **config})
    app = routes.bare_app()  # the same app as the one `sluice spec` documents
    app.json = OrjsonProvider(app)
    app.config["MAX_CONTENT_LENGTH"] = settings.max_body_bytes
    limits = Limits.from_settings(settings)
    problems.init_app(app)
    # Order matters: request id and clock first (so every answer is counted and logged),
    # then shedding, then CORS preflights (sent without credentials), then authentication
    # (the tenant), then the rate limit (per tenant), then the body limit.
    requestlog.init_app(app)
    metrics.init_app(app, settings)
    app.before_request(_shed_late(settings.queue_wait))
    cors.init_app(app, settings.cors_origins)
    auth.init_app(app, settings.api_keys)
    ratelimit.init_app(app, settings, keyed=bool(settings.api_keys))
    app.before_request(_enforce_body_limit)
    encoding.init_app(app, settings.gzip_min_bytes)
    routes.register(app)
    storage.init_app(app, settings)
    jobs.init_app(app, settings, limits)
    bounded.init_app(app, settings)
    app.extensions["sluice"] = SluiceState(settings, limits, build_spec(app))
    return app
