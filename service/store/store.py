"""The store facade the HTTP layer uses: one backend, a breaker, and a memo of networks.

The breaker: when a backend call fails (Redis down, SQLite file unusable), further
calls fail fast for ``retry_interval`` seconds instead of each waiting on a dead
connection; after that the next call tries again, so a Redis that comes back is used
again without a restart. The memo keeps a few decoded stored networks per process,
keyed by their ETag, so repeated what-ifs on one network skip fetching and decoding
it; the ETag is checked against the store on every call, so the memo never serves a
replaced version.
"""

from __future__ import annotations

import logging
import threading
import time
from collections import OrderedDict
from dataclasses import dataclass, field

from ..errors import NotFound
from ..model.arcs import Network
from .base import Backend, NetworkMeta, Preconditions, not_found
from .codec import decode_network, encode_network, network_nbytes
from .errors import StoreUnavailable
from .names import check_tenant

log = logging.getLogger("sluice.store")


@dataclass
class LoadedNetwork:
    """A stored network version, decoded, with its arc-key index built on first use."""

    meta: NetworkMeta
    network: Network
    nbytes: int
    _key_index: dict | None = field(default=None, repr=False)
    _lock: threading.Lock = field(default_factory=threading.Lock, repr=False)

    def key_index(self) -> dict:
        """``{arc key: arc index}`` (built once per process and version)."""
        if self._key_index is None:
            with self._lock:
                if self._key_index is None:
                    keys = self.network.keys or []
                    index = dict(zip(keys, range(len(keys))))
                    index.pop(None, None)
                    self._key_index = index
        return self._key_index


class Store:
    """Results and stored networks over one backend.

    Parameters
    ----------
    backend : Backend
        :class:`~service.store.sqlite_backend.SqliteBackend` or
        :class:`~service.store.redis_backend.RedisBackend`.
    memo_bytes : int
        Budget of the per-process memo of decoded networks (0 disables it).
    retry_interval : float
        Seconds the breaker stays open after a failed call.
    """

    def __init__(self, backend: Backend, *, memo_bytes: int = 256 << 20, retry_interval: float = 1.0):
        self.backend = backend
        self.memo_bytes = memo_bytes
        self.retry_interval = retry_interval
        self._down_until = 0.0
        self._down_reason: str | None = None
        self._lock = threading.Lock()
        self._memo: OrderedDict = OrderedDict()

    @property
    def kind(self) -> str:
        """The backend's name: ``"sqlite"`` or ``"redis"``."""
        return self.backend.kind

    # -- the breaker -------------------------------------------------------------

    def _use(self, fn, *args):
        if self._down_until and time.monotonic() < self._down_until:
            raise StoreUnavailable(f"the {self.kind} store is unavailable ({self._down_reason}); retrying shortly")
        try:
            out = fn(*args)
        except StoreUnavailable as exc:
            self._trip(exc.detail)
            raise
        if self._down_until:
            self._reset()
        return out

    def _trip(self, reason: str) -> None:
        with self._lock:
            if not self._down_until:
                log.warning("store: %s backend unavailable, carrying on without it: %s", self.kind, reason)
            self._down_until = time.monotonic() + self.retry_interval
            self._down_reason = reason

    def _reset(self) -> None:
        with self._lock:
            if self._down_until:
                log.warning("store: %s backend reachable again", self.kind)
            self._down_until = 0.0
            self._down_reason = None

    def health(self) -> dict:
        """Ping the backend (always, breaker or not); ``status`` is ``ok`` or ``unavailable``."""
        try:
            info = self.backend.ping()
        except StoreUnavailable as exc:
            self._trip(exc.detail)
            return {"status": "unavailable", "backend": self.kind, "detail": exc.detail}
        self._reset()
        return {"status": "ok", **info}

    # -- results -----------------------------------------------------------------

    def get_result(self, tenant: str, digest: str) -> bytes | None:
        """The cached result under ``digest``, or ``None``.

        Raises
        ------
        ValueError
            ``tenant`` is not a valid tenant name.
        StoreUnavailable
            The backend failed, or failed less than ``retry_interval`` seconds ago.
        """
        return self._use(self.backend.get_result, check_tenant(tenant), digest)

    def get_result_by_body(self, tenant: str, body_key: str) -> bytes | None:
        """The result a byte-identical earlier request was answered with, if still cached."""
        return self._use(self.backend.get_result_by_body, check_tenant(tenant), body_key)

    def put_result(self, tenant: str, digest: str, value: bytes, body_key: str | None = None) -> bool:
        """Cache a result (and the body alias leading to it); False when it is too large to cache."""
        return self._use(self.backend.put_result, check_tenant(tenant), digest, value, body_key)

    def put_alias(self, tenant: str, body_key: str, digest: str) -> None:
        """Point a raw-body hash at the digest its body normalised to."""
        self._use(self.backend.put_alias, check_tenant(tenant), body_key, digest)

    # -- networks ----------------------------------------------------------------

    def put_network(self, tenant: str, name: str, network: Network, digest: str,
                    pre: Preconditions = Preconditions()) -> tuple[NetworkMeta, bool]:
        """Store a new version of ``name``; returns (metadata, created)."""
        blob = encode_network(network)
        meta, created = self._use(self.backend.put_network, check_tenant(tenant), name, blob, digest,
                                  network.num_nodes, network.num_arcs, pre)
        return meta, created

    def network_meta(self, tenant: str, name: str) -> NetworkMeta:
        """Metadata of the current version of ``name``.

        Raises
        ------
        NotFound
        StoreUnavailable
        """
        meta = self._use(self.backend.head_network, check_tenant(tenant), name)
        if meta is None:
            raise not_found(name)
        return meta

    def load_network(self, tenant: str, name: str) -> LoadedNetwork:
        """The current version of ``name``, decoded (from the memo when its ETag is current).

        Raises
        ------
        NotFound
        StoreUnavailable
        """
        meta = self.network_meta(tenant, name)
        memo_key = (tenant, name)
        with self._lock:
            hit = self._memo.get(memo_key)
            if hit is not None and hit.meta.etag == meta.etag:
                self._memo.move_to_end(memo_key)
                return hit
        got = self._use(self.backend.get_network, tenant, name)
        if got is None:
            raise not_found(name)
        meta, blob = got
        network = decode_network(blob)
        loaded = LoadedNetwork(meta, network, network_nbytes(network))
        self._remember(memo_key, loaded)
        return loaded

    def _remember(self, memo_key, loaded: LoadedNetwork) -> None:
        if loaded.nbytes > self.memo_bytes:
            return
        with self._lock:
            self._memo[memo_key] = loaded
            self._memo.move_to_end(memo_key)
            total = sum(v.nbytes for v in self._memo.values())
            while total > self.memo_bytes and len(self._memo) > 1:
                _, old = self._memo.popitem(last=False)
                total -= old.nbytes

    def delete_network(self, tenant: str, name: str, pre: Preconditions = Preconditions()) -> NetworkMeta:
        """Delete ``name`` and drop it from this process's memo.

        Returns
        -------
        NetworkMeta
            The version that was deleted.

        Raises
        ------
        NotFound
        PreconditionFailed
        StoreUnavailable
        """
        meta = self._use(self.backend.delete_network, check_tenant(tenant), name, pre)
        with self._lock:
            self._memo.pop((tenant, name), None)
        return meta

    def list_networks(self, tenant: str, after: str | None = None, limit: int = 100) -> list[NetworkMeta]:
        """One page of a tenant's stored networks in name order.

        Parameters
        ----------
        tenant : str
        after : str, optional
            Paging cursor: only names sorting after it.
        limit : int

        Returns
        -------
        list of NetworkMeta

        Raises
        ------
        StoreUnavailable
        """
        return self._use(self.backend.list_networks, check_tenant(tenant), after, limit)

    def close(self) -> None:
        """Close the backend."""
        self.backend.close()


__all__ = ["LoadedNetwork", "NotFound", "Store"]
