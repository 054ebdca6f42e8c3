"""Result cache and stored networks, on an embedded SQLite file or on Redis.

No Flask here: the HTTP layer (``service.api.storage``, ``service.api.networks``) wraps it.

>>> from service.store import open_store
>>> store = open_store(data_dir="/tmp/sluice-doc")   # doctest: +SKIP
"""

from __future__ import annotations

from .base import NetworkMeta, Preconditions
from .codec import CorruptNetwork, decode_network, encode_network, network_digest
from .errors import InvalidParameter, StoreUnavailable
from .names import DEFAULT_TENANT, check_digest, check_name
from .store import LoadedNetwork, Store


def open_store(*, data_dir: str = ".sluice", redis_url: str | None = None, redis_prefix: str = "sluice:",
               cache_bytes: int = 512 << 20, cache_ttl: int = 86400, max_item_bytes: int = 64 << 20,
               memo_bytes: int = 256 << 20, retry_interval: float = 1.0) -> Store:
    """Open the store the settings ask for: Redis when ``redis_url`` is given, else SQLite.

    Parameters
    ----------
    data_dir : str
        Folder of the embedded SQLite store.
    redis_url : str, optional
        ``redis://host:port/db``; when set, Redis holds results and networks.
    redis_prefix : str
        Prefix of every Redis key.
    cache_bytes : int
        Size budget of the embedded result cache (LRU eviction beyond it).
    cache_ttl : int
        Seconds a Redis result lives after its last use.
    max_item_bytes : int
        Larger results are not cached.
    memo_bytes : int
        Per-process memo of decoded networks.
    retry_interval : float
        Seconds between attempts to reach a backend that failed.

    Returns
    -------
    Store
    """
    if redis_url:
        from .redis_backend import RedisBackend

        backend = RedisBackend(redis_url, prefix=redis_prefix, ttl=cache_ttl, max_item_bytes=max_item_bytes)
    else:
        from .sqlite_backend import SqliteBackend

        backend = SqliteBackend(data_dir, max_bytes=cache_bytes, max_item_bytes=min(max_item_bytes, cache_bytes // 4))
    return Store(backend, memo_bytes=memo_bytes, retry_interval=retry_interval)


__all__ = [
    "CorruptNetwork", "DEFAULT_TENANT", "InvalidParameter", "LoadedNetwork", "NetworkMeta", "Preconditions",
    "Store", "StoreUnavailable", "check_digest", "check_name", "decode_network", "encode_network",
    "network_digest", "open_store",
]
