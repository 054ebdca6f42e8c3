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
class Settings:
    """Everything configurable. ``from_env`` reads the ``SLUICE_*`` variables."""

    data_dir: str = ".sluice"
    redis_url: str | None = None
    max_body_mb: float = 128.0  # a 1M-arc object-form body is about 65 MB
    max_arcs: int = 5_000_000
    max_nodes: int = 5_000_000
    time_limit: float = 30.0
    api_keys: dict = field(default_factory=dict)
    redis_prefix: str = "sluice:"  # every Redis key starts with it
    cache_mb: float = 512.0  # embedded result cache budget (LRU beyond it)
    cache_ttl: int = 86400  # seconds a Redis result lives after its last use
    cache_item_mb: float = 64.0  # larger results are not cached
    network_memo_mb: float = 256.0  # per-worker memo of decoded stored networks
    store_retry: float = 1.0  # seconds between attempts to reach a store that failed
    max_batch_items: int = 1000  # items in one POST /v1/batch
    max_diagram_nodes: int = 60  # diagrams are for small networks: 413 above these
    max_diagram_arcs: int = 200

    @classmethod
    def from_env(cls) -> "Settings":
        return cls(
            data_dir=os.environ.get("SLUICE_DATA_DIR") or ".sluice",
            redis_url=os.environ.get("SLUICE_REDIS_URL") or None,
            max_body_mb=_float("SLUICE_MAX_BODY_MB", 128.0),
            max_arcs=_int("SLUICE_MAX_ARCS", 5_000_000),
            max_nodes=_int("SLUICE_MAX_NODES", 5_000_000),
            time_limit=_float("SLUICE_TIME_LIMIT", 30.0),
            redis_prefix=os.environ.get("SLUICE_REDIS_PREFIX") or "sluice:",
            cache_mb=_float("SLUICE_CACHE_MB", 512.0),
            cache_ttl=_int("SLUICE_CACHE_TTL", 86400),
            cache_item_mb=_float("SLUICE_CACHE_ITEM_MB", 64.0),
            network_memo_mb=_float("SLUICE_NETWORK_MEMO_MB", 256.0),
            store_retry=_float("SLUICE_STORE_RETRY", 1.0),
            max_batch_items=_int("SLUICE_MAX_BATCH_ITEMS", 1000),
            max_diagram_nodes=_int("SLUICE_MAX_DIAGRAM_NODES", 60),
            max_diagram_arcs=_int("SLUICE_MAX_DIAGRAM_ARCS", 200),
        )

    @property
    def max_body_bytes(self) -> int:
        return int(self.max_body_mb * 1024 * 1024)
