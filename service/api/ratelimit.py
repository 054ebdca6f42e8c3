"""Rate limits per tenant with flask-limiter: 429 problem+json with ``Retry-After``.

One budget per tenant across every ``/v1`` route (``SLUICE_RATE_LIMIT``, e.g.
``600/minute``; ``off`` disables). When the service runs open there are no tenants to
tell apart, so the budget is per client address. Counters live in Redis when
``SLUICE_REDIS_URL`` is set (shared by every worker and host) and in each worker's
memory otherwise (so the embedded limit is per worker process). If Redis stops
answering, the limiter falls back to memory rather than failing requests.
"""

from __future__ import annotations

import math
import time

from flask import Flask, request
from flask_limiter import Limiter, RequestLimit
from flask_limiter.errors import RateLimitExceeded

from ..config import Settings
from .auth import current_tenant
from .problems import problem_response


def _exempt() -> bool:
    return not request.path.startswith("/v1")


def _breach(limit: RequestLimit):
    wait = max(1, math.ceil(limit.window[0] - time.time()))  # reset_at adds a second
    return problem_response(
        429, "rate-limited", "Too many requests",
        f"the limit of {limit.limit} for this tenant is used up; retry in {wait} s",
        headers={"Retry-After": str(wait), "RateLimit-Limit": str(limit.limit.amount),
                 "RateLimit-Remaining": "0"})


def init_app(app: Flask, settings: Settings, keyed: bool) -> Limiter | None:
    """Attach the limiter (call after authentication so the tenant is known)."""
    if settings.rate_limit.strip().lower() in ("off", "0", "none", ""):
        return None

    def key() -> str:
        return f"tenant:{current_tenant()}" if keyed else f"addr:{request.remote_addr}"

    if settings.redis_url:
        storage, options = settings.redis_url, {"socket_connect_timeout": 0.5, "socket_timeout": 0.5}
    else:
        storage, options = "memory://", {}
    limiter = Limiter(
        key_func=key,
        application_limits=[settings.rate_limit],
        application_limits_exempt_when=_exempt,
        storage_uri=storage,
        storage_options=options,
        strategy="moving-window",
        key_prefix=f"{settings.redis_prefix}ratelimit",
        headers_enabled=False,  # Retry-After is set by _breach, rounded up, never 0
        swallow_errors=True,
        in_memory_fallback_enabled=True,
        on_breach=_breach,
    )
    limiter.init_app(app)
    app.register_error_handler(RateLimitExceeded, lambda exc: exc.response or _breach_fallback())
    return limiter


def _breach_fallback():
    return problem_response(429, "rate-limited", "Too many requests", "the rate limit is used up",
                            headers={"Retry-After": "1"})
