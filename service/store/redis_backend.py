"""The shared store: Redis, when ``SLUICE_REDIS_URL`` is set, so many hosts share it.

Keys (``P`` is the configured prefix, default ``sluice:``; tenants and names never
contain ``:``)::

    P{tenant}:r:{digest}   result bytes                      TTL (sliding: reset on a hit)
    P{tenant}:b:{sha256}   raw-body hash -> digest           TTL (same as its result)
    P{tenant}:n:{name}     hash {meta: JSON, blob: bytes}    no TTL
    P{tenant}:ni           sorted set of network names       no TTL (for paged listing)

Eviction policy: results and body aliases carry a TTL and are the only keys Redis may
evict; stored networks carry none. Run Redis with a ``maxmemory`` and
``maxmemory-policy volatile-lru`` (or ``volatile-lfu`` / ``volatile-ttl``): under memory
pressure Redis then drops the least recently used *results* and never a stored
network. An ``allkeys-*`` policy could evict networks, so the service logs a warning
when it sees one. Under ``noeviction`` a full Redis refuses writes: result writes are
skipped (logged), network writes answer 503.

Network writes are optimistic transactions (``WATCH`` the key, check the
precondition, ``MULTI``/``EXEC``): when another writer commits first, ``EXEC`` fails
and the precondition is evaluated again against the new version, so of two writers
holding the same ETag exactly one wins. A client killed half-way through sends no
``EXEC``, and Redis discards the queued commands.
"""

from __future__ import annotations

import logging

import orjson
import redis
from redis.backoff import NoBackoff
from redis.exceptions import RedisError, ResponseError, WatchError
from redis.retry import Retry

from ..errors import Conflict
from .base import NetworkMeta, Preconditions, next_meta, not_found, unchanged
from .errors import StoreUnavailable

log = logging.getLogger("sluice.store")

#: Bounded retries of an optimistic write that keeps losing the race (then 409).
MAX_WRITE_ATTEMPTS = 50

#: A repeated body's cached result in one round trip: the alias (``KEYS[1]``) names the
#: digest, and the result key is the tenant's result prefix (``ARGV[2]``) plus that digest.
#: GETEX resets both TTLs, as two separate reads would.
RESULT_BY_BODY = """
local digest = redis.call('GETEX', KEYS[1], 'EX', ARGV[1])
if not digest then return false end
return redis.call('GETEX', ARGV[2] .. digest, 'EX', ARGV[1])
"""


class RedisBackend:
    """Results and networks in Redis.

    Parameters
    ----------
    url : str
        ``redis://host:port/db``.
    prefix : str
        Prepended to every key, so several deployments (or test runs) share one Redis.
    ttl : int
        Seconds a result (and its body alias) lives after it was last used.
    max_item_bytes : int
        Results larger than this are not cached.
    """

    kind = "redis"

    def __init__(self, url: str, *, prefix: str = "sluice:", ttl: int = 86400, max_item_bytes: int = 64 << 20,
                 connect_timeout: float = 0.5, socket_timeout: float = 5.0):
        self.url = url
        self.prefix = prefix
        self.ttl = int(ttl)
        self.max_item_bytes = int(max_item_bytes)
        # One quick attempt per call: the store facade's breaker spaces out retries
        # while Redis is down, so a request never stalls on back-off.
        self.client = redis.Redis.from_url(
            url, socket_connect_timeout=connect_timeout, socket_timeout=socket_timeout,
            retry=Retry(NoBackoff(), 1), health_check_interval=15,
        )
        self._policy_checked = False
        self._result_by_body = self.client.register_script(RESULT_BY_BODY)

    def _key(self, tenant: str, kind: str, name: str = "") -> str:
        return f"{self.prefix}{tenant}:{kind}:{name}" if name else f"{self.prefix}{tenant}:{kind}"

    def _call(self, what: str, fn, *args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except RedisError as exc:
            if isinstance(exc, ResponseError) and "OOM" in str(exc):
                raise StoreUnavailable(f"Redis is full and refuses writes ({what})") from None
            raise StoreUnavailable(f"Redis could not {what}: {exc.__class__.__name__}: {exc}") from None

    def close(self) -> None:
        """Close the Redis client's connection pool."""
        self.client.close()

    def ping(self) -> dict:
        """Ping Redis and report the settings that matter for eviction.

        The first time the policy can be read, a warning is logged when it is
        ``allkeys-*``, under which Redis may evict stored networks, not only results.

        Returns
        -------
        dict
            ``backend``, ``prefix``, ``result_ttl`` and, when Redis allows ``CONFIG GET``,
            ``maxmemory_policy``.

        Raises
        ------
        StoreUnavailable
        """
        self._call("answer a ping", self.client.ping)
        out = {"backend": "redis", "prefix": self.prefix, "result_ttl": self.ttl}
        policy = self._eviction_policy()
        if policy:
            out["maxmemory_policy"] = policy
        return out

    def _eviction_policy(self) -> str | None:
        try:
            policy = self.client.config_get("maxmemory-policy").get("maxmemory-policy")
        except RedisError:  # CONFIG is often disabled on managed Redis
            return None
        policy = policy.decode() if isinstance(policy, bytes) else policy
        if not self._policy_checked:
            self._policy_checked = True
            if policy and policy.startswith("allkeys"):
                log.warning("redis maxmemory-policy is %s: stored networks may be evicted; "
                            "use volatile-lru so only cached results are", policy)
        return policy

    # -- results -----------------------------------------------------------------

    def get_result(self, tenant: str, digest: str) -> bytes | None:
        """The cached result under ``digest``, or ``None``; a hit restarts its TTL.

        Raises
        ------
        StoreUnavailable
        """
        # GETEX resets the TTL: a result that keeps being asked for stays (sliding TTL).
        return self._call("read a result", self.client.getex, self._key(tenant, "r", digest), ex=self.ttl)

    def put_result(self, tenant: str, digest: str, value: bytes, body_key: str | None = None) -> bool:
        """Cache a result (and its body alias) with the TTL, in one transaction.

        Returns
        -------
        bool
            False, writing nothing, when ``value`` exceeds ``max_item_bytes``.

        Raises
        ------
        StoreUnavailable
            Redis is unreachable, or full under ``noeviction``.
        """
        if len(value) > self.max_item_bytes:
            return False
        pipe = self.client.pipeline(transaction=True)
        pipe.set(self._key(tenant, "r", digest), value, ex=self.ttl)
        if body_key is not None:
            pipe.set(self._key(tenant, "b", body_key), digest, ex=self.ttl)
        self._call("store a result", pipe.execute)
        return True

    def get_result_by_body(self, tenant: str, body_key: str) -> bytes | None:
        """The cached result a raw-body hash points at, or ``None``, in one round trip
        (:data:`RESULT_BY_BODY`); a hit restarts the TTLs of both the alias and the result.

        Raises
        ------
        StoreUnavailable
        """
        return self._call("read a result by its body", self._result_by_body,
                          keys=[self._key(tenant, "b", body_key)], args=[self.ttl, self._key(tenant, "r") + ":"])

    def put_alias(self, tenant: str, body_key: str, digest: str) -> None:
        """Alias a raw-body hash to a digest, with the result TTL.

        Raises
        ------
        StoreUnavailable
        """
        self._call("store a body alias", self.client.set, self._key(tenant, "b", body_key), digest, ex=self.ttl)

    # -- networks ----------------------------------------------------------------

    @staticmethod
    def _meta(raw: bytes | None) -> NetworkMeta | None:
        return None if raw is None else NetworkMeta.from_dict(orjson.loads(raw))

    def head_network(self, tenant: str, name: str) -> NetworkMeta | None:
        """Metadata of the current version of ``name`` (the ``meta`` field only), or ``None``.

        Raises
        ------
        StoreUnavailable
        """
        return self._meta(self._call("read a network", self.client.hget, self._key(tenant, "n", name), "meta"))

    def get_network(self, tenant: str, name: str) -> tuple[NetworkMeta, bytes] | None:
        """Metadata and codec bytes of the current version of ``name``, or ``None``.

        Both fields are read in one ``HMGET``, so they always belong to the same version.

        Raises
        ------
        StoreUnavailable
        """
        meta, blob = self._call("read a network", self.client.hmget, self._key(tenant, "n", name), ["meta", "blob"])
        if meta is None:
            return None
        return self._meta(meta), blob

    def put_network(self, tenant: str, name: str, blob: bytes, digest: str, node_count: int, arc_count: int,
                    pre: Preconditions) -> tuple[NetworkMeta, bool]:
        """Write a new version of ``name`` in an optimistic transaction.

        See :meth:`Backend.put_network <service.store.base.Backend.put_network>`.

        Returns
        -------
        meta : NetworkMeta
        created : bool

        Raises
        ------
        PreconditionFailed
        Conflict
            Other writers kept winning the race for ``MAX_WRITE_ATTEMPTS`` attempts.
        StoreUnavailable
        """
        key = self._key(tenant, "n", name)

        def write(pipe, current):
            """Queue the write of the next version (nothing when the content is unchanged)."""
            if unchanged(current, digest):
                return current
            meta = next_meta(current, name, digest, node_count, arc_count, len(blob))
            pipe.hset(key, mapping={"meta": orjson.dumps(meta.__dict__), "blob": blob})
            pipe.zadd(self._key(tenant, "ni"), {name: 0})
            return meta

        meta, current = self._optimistic("store a network", key, name, pre, write)
        return meta, current is None

    def delete_network(self, tenant: str, name: str, pre: Preconditions) -> NetworkMeta:
        """Delete ``name`` and its listing entry in an optimistic transaction.

        Returns
        -------
        NetworkMeta
            The version that was deleted.

        Raises
        ------
        NotFound
        PreconditionFailed
        Conflict
            Other writers kept winning the race for ``MAX_WRITE_ATTEMPTS`` attempts.
        StoreUnavailable
        """
        key = self._key(tenant, "n", name)

        def remove(pipe, current):
            """Queue the removal of the network hash and its name in the listing set."""
            pipe.delete(key)
            pipe.zrem(self._key(tenant, "ni"), name)
            return current

        _, current = self._optimistic("delete a network", key, name, pre, remove, must_exist=True)
        return current

    def _optimistic(self, what: str, key: str, name: str, pre: Preconditions, action, *, must_exist=False):
        """WATCH key; check the precondition on the current version; MULTI action EXEC; retry on a lost race."""
        def attempt():
            """Run the watch-check-execute loop, retrying when ``EXEC`` loses a race."""
            with self.client.pipeline(transaction=True) as pipe:
                for _ in range(MAX_WRITE_ATTEMPTS):
                    try:
                        pipe.watch(key)
                        current = self._meta(pipe.hget(key, "meta"))
                        if current is None and must_exist:
                            raise not_found(name)
                        pre.check(current, name)
                        pipe.multi()
                        out = action(pipe, current)
                        pipe.execute()
                        return out, current
                    except WatchError:
                        continue
                    finally:
                        pipe.reset()
            raise Conflict(f"network {name!r} is being written by others too often; retry")

        return self._call(what, attempt)

    def list_networks(self, tenant: str, after: str | None, limit: int) -> list[NetworkMeta]:
        """One page of a tenant's networks in name order, from the sorted set of names.

        Names whose hash vanished between the two reads (a concurrent delete) are left out.

        Raises
        ------
        StoreUnavailable
        """
        start = f"({after}" if after else "-"
        names = self._call("list networks", self.client.zrangebylex, self._key(tenant, "ni"), start, "+", 0, limit)
        if not names:
            return []
        pipe = self.client.pipeline(transaction=False)
        for n in names:
            pipe.hget(self._key(tenant, "n", n.decode()), "meta")
        metas = self._call("list networks", pipe.execute)
        return [m for m in map(self._meta, metas) if m is not None]
