"""Settings from the environment, with safe defaults."""

from __future__ import annotations

import os
from dataclasses import dataclass, field


def _int(name: str, default: int) -> int:
    raw = os.environ.get(name)
    return default if raw in (None, "") else int(raw)


def _float(name: str, default: float) -> float:
    raw = os.environ.get(name)
    return default if raw in (None, "") else float(raw)


@dataclass(frozen=True)
class ApiKey:
    """One configured key: the tenant it belongs to and its scope (``full`` or ``read``)."""

    tenant: str
    key: str = field(repr=False)  # never shown in logs or reprs
    scope: str = "full"


def parse_api_keys(text: str, source: str = "SLUICE_API_KEYS") -> tuple[ApiKey, ...]:
    """Parse ``tenant:key[:scope]`` entries separated by commas or new lines.

    Blank lines and lines starting with ``#`` are skipped. ``scope`` is ``full``
    (default) or ``read`` (GET only). The tenant must be a name the store can hold
    (1-64 characters of ``a-z 0-9 _ -``, see :func:`service.store.names.check_tenant`):
    refused here, at start-up, rather than a 500 on each of that tenant's requests.
    Names are not mapped (``ACME`` to ``acme``): two entries could then share a
    tenant's data unawares. A malformed entry raises ``ValueError`` naming its position
    (entry and line), never its text (it may hold a key).
    """
    from .store.names import check_tenant

    keys = []
    entries = [(line_number, e.strip()) for line_number, line in enumerate(text.splitlines(), start=1)
               for e in line.split(",")]
    for number, (line, entry) in enumerate(entries, start=1):
        if not entry or entry.startswith("#"):
            continue
        where = f"{source}: entry {number} (line {line})"
        parts = entry.split(":")
        if len(parts) not in (2, 3) or not parts[0] or len(parts[1]) < 8:
            raise ValueError(f"{where} is not tenant:key[:scope] with a key of 8+ characters")
        scope = parts[2] if len(parts) == 3 else "full"
        if scope not in ("full", "read"):
            raise ValueError(f"{where} has scope {scope!r}; use full or read")
        try:
            check_tenant(parts[0])
        except ValueError:
            raise ValueError(f"{where} has a tenant name the store cannot hold: use 1-64 characters of lower-case "
                             "a-z, digits, '_' and '-', starting with a letter or digit") from None
        keys.append(ApiKey(parts[0], parts[1], scope))
    return tuple(keys)


#: The per-tenant limit when API keys are configured and SLUICE_RATE_LIMIT is not set.
KEYED_RATE_LIMIT = "600/minute"


def parse_tenant_rate_limits(text: str) -> tuple[tuple[str, str], ...]:
    """Parse ``tenant=limit`` entries separated by spaces or new lines.

    ``limit`` is a rate such as ``100/second`` (several joined by ``;``, e.g.
    ``20/second;600/minute``) or ``off``. Lines starting with ``#`` are skipped.
    """
    entries = []
    for line in text.splitlines():
        if line.strip().startswith("#"):
            continue
        for entry in line.split():
            tenant, sep, limit = entry.partition("=")
            if not sep or not tenant or not _is_rate(limit):
                raise ValueError(f"SLUICE_TENANT_RATE_LIMITS: {entry!r} is not tenant=limit (e.g. acme=100/second)")
            entries.append((tenant, limit))
    return tuple(entries)


def _is_rate(text: str) -> bool:
    from limits import parse_many  # flask-limiter's own parser: what it accepts, nothing else

    if text.lower() == "off":
        return True
    try:
        return bool(parse_many(text))
    except ValueError:
        return False


def parse_origins(text: str) -> tuple[str, ...]:
    """``scheme://host[:port]`` origins separated by commas (``*`` allows any origin)."""
    origins = tuple(o.strip().rstrip("/") for o in text.split(",") if o.strip())
    for origin in origins:
        if origin != "*" and ("://" not in origin or origin.count("/") > 2):
            raise ValueError(f"SLUICE_CORS_ORIGINS: {origin!r} is not an origin such as https://app.example")
    return origins


def _api_keys_from_env() -> tuple[ApiKey, ...]:
    keys = parse_api_keys(os.environ.get("SLUICE_API_KEYS") or "")
    path = os.environ.get("SLUICE_API_KEYS_FILE")
    if path:
        with open(path, encoding="utf-8") as f:
            keys += parse_api_keys(f.read(), "SLUICE_API_KEYS_FILE")
    return keys


def check_metrics_access(mode: str, key: str | None) -> None:
    """``SLUICE_METRICS``: ``open`` (default), ``key`` (``SLUICE_METRICS_KEY`` as a bearer
    token) or ``port:N`` (``/metrics`` only on port N). Raises ``ValueError`` saying why."""
    if mode == "key":
        if not key or len(key) < 8:
            raise ValueError("SLUICE_METRICS=key needs SLUICE_METRICS_KEY of 8+ characters")
    elif mode.startswith("port:"):
        port = mode[5:]
        if not port.isdigit() or not 0 < int(port) < 65536:
            raise ValueError(f"SLUICE_METRICS={mode}: the port must be a number from 1 to 65535")
    elif mode != "open":
        raise ValueError(f"SLUICE_METRICS={mode}: use open, key or port:N")


def _metrics_from_env() -> dict:
    mode = (os.environ.get("SLUICE_METRICS") or "open").strip()
    key = os.environ.get("SLUICE_METRICS_KEY") or None
    check_metrics_access(mode, key)
    return {"metrics": mode, "metrics_key": key}


@dataclass(frozen=True)
class Settings:
    """Everything configurable. ``from_env`` reads the ``SLUICE_*`` variables."""

    data_dir: str = ".sluice"
    redis_url: str | None = None
    redis_prefix: str = "sluice:"  # every Redis key starts with it
    max_body_mb: float = 128.0  # a 1M-arc object-form body is about 65 MB
    max_arcs: int = 5_000_000
    max_nodes: int = 5_000_000
    max_commodities: int = 1_000
    #: Flows over time: horizon x (arcs + nodes), the size of the time-expanded network.
    #: 5M is about four times a 10,000-lane network over 100 periods (a few seconds, a few
    #: hundred MB); larger ones are refused with a 413 naming ``horizon``.
    max_expanded: int = 5_000_000
    max_batch_items: int = 1000  # items in one POST /v1/batch
    time_limit: float = 30.0  # seconds, a synchronous solve (hard: the solving process is killed)
    api_keys: tuple = ()  # of ApiKey
    # "" = none when the service runs open, 600/minute per tenant with keys; "off" = none.
    rate_limit: str = ""
    tenant_rate_limits: tuple = ()  # of (tenant, limit): SLUICE_TENANT_RATE_LIMITS
    cors_origins: tuple = ()  # origins a browser page may call from (SLUICE_CORS_ORIGINS)
    threads: int = 4  # per worker process, running the app (the probes have two more)
    body_timeout: float = 10.0  # seconds a body may pause; also the grace before body_min_rate
    body_min_rate: float = 1024.0  # bytes/s a body must average (408 below it)
    queue_wait: float = 2.0  # seconds a request may wait for a thread or a solver process (503 past it)
    gzip_min_bytes: int = 4096  # smaller responses are not compressed
    # Synchronous solves of problems larger than this (arcs, or the kind's size: flow
    # variables, LP nonzeros + columns, assignment pairs) run in a killable solver
    # process under the hard time limit; smaller ones inline (milliseconds).
    inline_max_arcs: int = 20_000
    solver_processes: int = 2  # per API worker process, for synchronous solves
    # A pooled solver process whose resident memory is above this after a solve is
    # replaced by a fresh one (a 1M-arc min-cost flow leaves one at about 220 MB);
    # 0 keeps them whatever they hold.
    solver_max_rss_mb: float = 1024.0
    # A worker keeps at most this much freed memory for its next request (above what it
    # holds live); the rest goes back to the system after the request (service.memory).
    worker_retain_mb: float = 256.0
    job_time_limit: float = 600.0  # seconds, one job
    job_workers: int = 1  # embedded backend: jobs run at once per API worker process
    job_lease: float = 15.0  # seconds without a heartbeat before a running job is taken back
    job_attempts: int = 2  # a job whose worker died is retried until it ran this many times
    job_ttl: int = 7 * 86400  # seconds a finished job's record (and result) is kept
    job_queue: str = "sluice"  # RQ queue name (Redis backend)
    log_format: str = "json"  # or "text"
    cache_mb: float = 512.0  # embedded result cache budget (LRU beyond it)
    cache_ttl: int = 86400  # seconds a Redis result lives after its last use
    cache_item_mb: float = 64.0  # larger results are not cached
    network_memo_mb: float = 256.0  # per-worker memo of decoded stored networks
    store_retry: float = 1.0  # seconds between attempts to reach a store that failed
    max_diagram_nodes: int = 60  # diagrams are for small networks: 413 above these
    max_diagram_arcs: int = 200
    metrics: str = "open"  # who may read /metrics: "open", "key" (metrics_key) or "port:N"
    metrics_key: str | None = field(default=None, repr=False)  # never shown in logs or reprs

    @classmethod
    def from_env(cls) -> "Settings":
        """The settings from the ``SLUICE_*`` variables; an unset one keeps its default
        above (the one place defaults are written)."""
        return cls(
            data_dir=os.environ.get("SLUICE_DATA_DIR") or cls.data_dir,
            redis_url=os.environ.get("SLUICE_REDIS_URL") or None,
            redis_prefix=os.environ.get("SLUICE_REDIS_PREFIX") or cls.redis_prefix,
            max_body_mb=_float("SLUICE_MAX_BODY_MB", cls.max_body_mb),
            max_arcs=_int("SLUICE_MAX_ARCS", cls.max_arcs),
            max_nodes=_int("SLUICE_MAX_NODES", cls.max_nodes),
            max_commodities=_int("SLUICE_MAX_COMMODITIES", cls.max_commodities),
            max_expanded=_int("SLUICE_MAX_EXPANDED", cls.max_expanded),
            max_batch_items=_int("SLUICE_MAX_BATCH_ITEMS", cls.max_batch_items),
            time_limit=_float("SLUICE_TIME_LIMIT", cls.time_limit),
            api_keys=_api_keys_from_env(),
            rate_limit=os.environ.get("SLUICE_RATE_LIMIT") or cls.rate_limit,
            tenant_rate_limits=parse_tenant_rate_limits(os.environ.get("SLUICE_TENANT_RATE_LIMITS") or ""),
            cors_origins=parse_origins(os.environ.get("SLUICE_CORS_ORIGINS") or ""),
            threads=_int("SLUICE_THREADS", cls.threads),
            body_timeout=_float("SLUICE_BODY_TIMEOUT", cls.body_timeout),
            body_min_rate=_float("SLUICE_BODY_MIN_RATE", cls.body_min_rate),
            queue_wait=_float("SLUICE_QUEUE_WAIT", cls.queue_wait),
            gzip_min_bytes=_int("SLUICE_GZIP_MIN_BYTES", cls.gzip_min_bytes),
            inline_max_arcs=_int("SLUICE_INLINE_MAX_ARCS", cls.inline_max_arcs),
            solver_processes=_int("SLUICE_SOLVER_PROCESSES", cls.solver_processes),
            solver_max_rss_mb=_float("SLUICE_SOLVER_MAX_RSS_MB", cls.solver_max_rss_mb),
            worker_retain_mb=_float("SLUICE_WORKER_RETAIN_MB", cls.worker_retain_mb),
            job_time_limit=_float("SLUICE_JOB_TIME_LIMIT", cls.job_time_limit),
            job_workers=_int("SLUICE_JOB_WORKERS", cls.job_workers),
            job_lease=_float("SLUICE_JOB_LEASE", cls.job_lease),
            job_attempts=_int("SLUICE_JOB_ATTEMPTS", cls.job_attempts),
            job_ttl=_int("SLUICE_JOB_TTL", cls.job_ttl),
            job_queue=os.environ.get("SLUICE_JOB_QUEUE") or cls.job_queue,
            log_format=os.environ.get("SLUICE_LOG_FORMAT") or cls.log_format,
            cache_mb=_float("SLUICE_CACHE_MB", cls.cache_mb),
            cache_ttl=_int("SLUICE_CACHE_TTL", cls.cache_ttl),
            cache_item_mb=_float("SLUICE_CACHE_ITEM_MB", cls.cache_item_mb),
            network_memo_mb=_float("SLUICE_NETWORK_MEMO_MB", cls.network_memo_mb),
            store_retry=_float("SLUICE_STORE_RETRY", cls.store_retry),
            max_diagram_nodes=_int("SLUICE_MAX_DIAGRAM_NODES", cls.max_diagram_nodes),
            max_diagram_arcs=_int("SLUICE_MAX_DIAGRAM_ARCS", cls.max_diagram_arcs),
            **_metrics_from_env(),
        )

    @property
    def metrics_port(self) -> int | None:
        """The port of its own that ``/metrics`` is served on (``SLUICE_METRICS=port:N``)."""
        return int(self.metrics[5:]) if self.metrics.startswith("port:") else None

    @property
    def max_body_bytes(self) -> int:
        """The body size limit in bytes (``max_body_mb`` in MiB)."""
        return int(self.max_body_mb * 1024 * 1024)
