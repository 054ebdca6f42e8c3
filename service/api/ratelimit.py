"""Rate limits per tenant with flask-limiter: 429 problem+json with ``Retry-After``.

One budget per tenant across every ``/v1`` route. ``SLUICE_RATE_LIMIT`` (e.g.
``600/minute``, ``20/second;600/minute``, or ``off``) sets it for every tenant; unset, it
is 600/minute per tenant when API keys are configured and none when the service runs
open (its one anonymous tenant is its only client). ``SLUICE_TENANT_RATE_LIMITS``
gives single tenants their own: ``acme=100/second bulk=off``. When the service runs
open and a limit is set, the budget is per client address. Counters live in Redis when
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

from ..config import KEYED_RATE_LIMIT, Settings
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


def _is_off(limit: str) -> bool:
    return limit.strip().lower() in ("off", "0", "none", "")


def init_app(app: Flask, settings: Settings, keyed: bool) -> Limiter | None:
    """Attach the limiter (call after authentication so the tenant is known)."""
    default = settings.rate_limit.strip() or (KEYED_RATE_LIMIT if keyed else "off")
    own = dict(settings.tenant_rate_limits) if keyed else {}
    if _is_off(default) and all(map(_is_off, own.values())):
        return None

    def limit() -> str:
        """The current tenant's limit (its own, else the default), or "" when it has none."""
        value = own.get(current_tenant(), default)
        return "" if _is_off(value) else value  # "" = no limit for this tenant

    def exempt() -> bool:
        """Whether the current request is outside every limit: not under ``/v1``, or a tenant without one."""
        return _exempt() or not limit()

    def key() -> str:
        """Whose budget the current request uses: its tenant with API keys, else its client address."""
        return f"tenant:{current_tenant()}" if keyed else f"addr:{request.remote_addr}"

    if settings.redis_url:
        storage, options = settings.redis_url, {"socket_connect_timeout": 0.5, "socket_timeout": 0.5}
    else:
        storage, options = "memory://", {}
    limiter = Limiter(
        key_func=key,
        application_limits=[limit],
        application_limits_exempt_when=exempt,
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
