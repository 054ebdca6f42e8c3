"""The store as a Flask extension: opened once per app, reached from any request.

``init_app`` opens the store the settings ask for (SQLite in ``SLUICE_DATA_DIR``, or
Redis at ``SLUICE_REDIS_URL``) and keeps it in ``app.extensions``; :func:`get_store`
and :func:`tenant` are what a route needs to read or write its tenant's entries. The
result cache in front of the solves is :mod:`service.api.cache`.
"""

from __future__ import annotations

from flask import Flask, current_app, g

from ..config import Settings
from ..store import DEFAULT_TENANT, Store, open_store

EXTENSION = "sluice.store"


def init_app(app: Flask, settings: Settings) -> Store:
    """Open the store for ``settings`` and attach it to ``app``.

    Parameters
    ----------
    app : Flask
    settings : Settings
        ``data_dir`` or ``redis_url`` choose the backend; the cache and memo sizes,
        the result time-to-live and the retry interval configure it.

    Returns
    -------
    Store
        The store now in ``app.extensions``.
    """
    store = open_store(
        data_dir=settings.data_dir,
        redis_url=settings.redis_url,
        redis_prefix=settings.redis_prefix,
        cache_bytes=int(settings.cache_mb * (1 << 20)),
        cache_ttl=settings.cache_ttl,
        max_item_bytes=int(settings.cache_item_mb * (1 << 20)),
        memo_bytes=int(settings.network_memo_mb * (1 << 20)),
        retry_interval=settings.store_retry,
    )
    app.extensions[EXTENSION] = store
    return store


def get_store() -> Store:
    """The store of the current app."""
    return current_app.extensions[EXTENSION]


def tenant() -> str:
    """The tenant of this request (set by authentication once API keys exist)."""
    return g.get("tenant", DEFAULT_TENANT)
