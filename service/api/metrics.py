"""Prometheus metrics, correct across gunicorn workers.

``sluice serve`` (the gunicorn ``on_starting`` hook in :mod:`service.serving`) points
``PROMETHEUS_MULTIPROC_DIR`` at a fresh folder before any worker starts, so every
worker writes its samples to its own files there and ``/metrics`` adds them up
(prometheus-client's multiprocess mode); ``child_exit`` tidies the files of a dead
worker. Without that variable (tests, a bare ``create_app()``) the process registry is
used.

Other parts of the service increment these directly, e.g.
``CACHE_EVENTS.labels("hit").inc()`` in the result cache. Every series whose label
values are known in advance (kinds, engines, cache results, job events) is created at
0 when the app starts, so rates and alerts work before the first event; the HTTP series
(one per route, method and status) appear with their first request.

Who may read ``/metrics`` is ``SLUICE_METRICS``: ``open`` (default), ``key`` (a bearer
token of its own, ``SLUICE_METRICS_KEY``; API keys do not grant it: the figures are
service-wide, not one tenant's) or ``port:N`` (only on a second listening port, N, which
serves nothing else; ``/metrics`` on the main port is then a 404).
"""

from __future__ import annotations

import hashlib
import hmac
import os
from time import perf_counter

from flask import Blueprint, Flask, Response, current_app, g, request
from prometheus_client import CONTENT_TYPE_LATEST, REGISTRY, CollectorRegistry, Counter, Histogram, generate_latest
from prometheus_client.core import GaugeMetricFamily

from ..config import Settings
from ..errors import NotFound, Unauthorized
from ..kinds import KINDS
from .declare import WWW_AUTHENTICATE, ok, operation, problem, text_body

LATENCY_BUCKETS = (0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30, 60, 120)

REQUESTS = Counter("sluice_http_requests_total", "HTTP requests by route template, method and status.",
                   ["route", "method", "status"])
LATENCY = Histogram("sluice_http_request_duration_seconds", "Time to answer an HTTP request, by route template.",
                    ["route", "method"], buckets=LATENCY_BUCKETS)
SOLVE_SECONDS = Histogram("sluice_solve_seconds", "Solver time of synchronous solves, by kind and engine.",
                          ["kind", "engine"], buckets=LATENCY_BUCKETS)
SOLVE_TIMEOUTS = Counter("sluice_solve_timeouts_total",
                         "Synchronous solves stopped at the hard time limit (their process killed).", ["kind"])
CACHE_EVENTS = Counter("sluice_cache_events_total", "Result cache lookups and writes by result "
                       "(hit, miss, stored, bypass, unavailable).", ["result"])
JOB_EVENTS = Counter("sluice_jobs_total", "Jobs by kind and event (submitted, done, failed, cancelled).",
                     ["kind", "event"])

#: The label values known in advance, exported at 0 from start-up.
CACHE_RESULTS = ("hit", "miss", "stored", "bypass", "unavailable")
JOB_EVENT_NAMES = ("submitted", "done", "failed", "cancelled")
ENGINE_KINDS = ("graph", "lp")

bp = Blueprint("metrics", __name__)


class _QueueDepth:
    """Reads the queue depth from the job backend at scrape time (one value per host or cluster)."""

    def __init__(self, jobs):
        self.jobs = jobs

    def collect(self):
        """Yield the ``sluice_job_queue_depth`` gauge, read now; -1 when the backend fails, so the scrape does not."""
        depth = GaugeMetricFamily("sluice_job_queue_depth", "Jobs waiting for a worker (queued state).")
        try:
            value = self.jobs.queue_depth()
        except Exception:  # noqa: BLE001 - a broken backend shows as -1, never a failed scrape
            value = -1
        depth.add_metric([], value)
        yield depth


def _registry() -> CollectorRegistry:
    if os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
        from prometheus_client import multiprocess

        registry = CollectorRegistry()
        multiprocess.MultiProcessCollector(registry)
        return registry
    return REGISTRY


def export_known_series(kinds) -> None:
    """Create every series with known labels at 0 (Prometheus practice: a counter that
    is absent until its first event breaks rates and alerts on it)."""
    for kind in kinds:
        SOLVE_TIMEOUTS.labels(kind)
        for engine in ENGINE_KINDS:
            SOLVE_SECONDS.labels(kind, engine)
        for event in JOB_EVENT_NAMES:
            JOB_EVENTS.labels(kind, event)
    for result in CACHE_RESULTS:
        CACHE_EVENTS.labels(result)


class MetricsAccess:
    """Who may read ``/metrics`` (``SLUICE_METRICS``, ``SLUICE_METRICS_KEY``)."""

    def __init__(self, settings: Settings):
        self.port = settings.metrics_port
        self.key_digest = hashlib.sha256(settings.metrics_key.encode()).digest() \
            if settings.metrics == "key" and settings.metrics_key else None

    def on_metrics_port(self) -> bool:
        """Whether the current request came in on the metrics port (``SLUICE_METRICS=port:N``); False without one."""
        return self.port is not None and request.environ.get("SERVER_PORT") == str(self.port)

    def check(self) -> None:
        """Raise unless the current request may read the metrics."""
        if self.port is not None and not self.on_metrics_port():
            raise NotFound(f"/metrics is served on port {self.port} (SLUICE_METRICS=port:{self.port})")
        if self.key_digest is not None:
            scheme, _, token = request.headers.get("Authorization", "").partition(" ")
            given = hashlib.sha256(token.strip().encode()).digest()
            if scheme.lower() != "bearer" or not hmac.compare_digest(given, self.key_digest):
                raise Unauthorized("/metrics needs Authorization: Bearer <SLUICE_METRICS_KEY>",
                                   headers={"WWW-Authenticate": 'Bearer realm="sluice-metrics"'})


@bp.get("/metrics")
@operation("metrics", "Prometheus metrics (text exposition format), all workers summed.",
           description="Every series whose labels are known in advance (solves, timeouts, the result cache and "
                       "jobs, for every kind, engine, result and event) is there at 0 from start-up; the HTTP "
                       "series appear with each route's first request. Who may read it is the operator's "
                       "choice, SLUICE_METRICS: open (the default), key (Authorization: Bearer with "
                       "SLUICE_METRICS_KEY, a key of its own: API keys do not grant it) or port:N (only on that "
                       "second port, which serves nothing else).",
           responses={"200": ok("The metrics.", text_body("text/plain")),
                      "401": problem(401, "SLUICE_METRICS=key and no valid metrics key.", headers=WWW_AUTHENTICATE),
                      "404": problem(404, "SLUICE_METRICS=port:N and this is not port N.")})
def metrics():
    """Prometheus text exposition of this service's counters and histograms."""
    current_app.extensions["sluice.metrics"].check()
    text = generate_latest(_registry())
    jobs = current_app.extensions.get("sluice.jobs")
    if jobs is not None:
        extra = CollectorRegistry()
        extra.register(_QueueDepth(jobs))
        text += generate_latest(extra)
    return Response(text, mimetype=CONTENT_TYPE_LATEST.split(";")[0], headers={"Content-Type": CONTENT_TYPE_LATEST})


def route_label() -> str:
    """The route label of the current request: its URL rule (e.g. ``/v1/jobs/<job_id>``), or ``unmatched``."""
    # The URL rule, not the path: ids in paths would make one series per job.
    return request.url_rule.rule if request.url_rule is not None else "unmatched"


def init_app(app: Flask, settings: Settings) -> None:
    """Count and time every response of ``app``, and export the series with known labels at 0.

    With ``SLUICE_METRICS=port:N``, every path on port N but ``/metrics`` is a 404.

    Parameters
    ----------
    app : Flask
    settings : Settings
        Who may read ``/metrics`` (kept as ``app.extensions["sluice.metrics"]``).
    """
    access = app.extensions["sluice.metrics"] = MetricsAccess(settings)
    export_known_series(KINDS)

    @app.before_request
    def _start_clock():
        g.started = perf_counter()
        if access.on_metrics_port() and request.path != "/metrics":
            raise NotFound(f"port {access.port} serves /metrics only")

    @app.after_request
    def _count(response):
        route = route_label()
        REQUESTS.labels(route, request.method, str(response.status_code)).inc()
        started = g.get("started")
        if started is not None:
            LATENCY.labels(route, request.method).observe(perf_counter() - started)
        return response


def job_finished(kind: str, state: str, seconds: float) -> None:
    """Count a finished job in ``sluice_jobs_total`` (the job backends' ``on_finish`` hook).

    Parameters
    ----------
    kind : str
    state : str
        The job's final state, the event label.
    seconds : float
        How long the job ran; not recorded.
    """
    JOB_EVENTS.labels(kind, state).inc()
