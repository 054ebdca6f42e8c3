"""The embedded store: one SQLite file (standard library) in ``SLUICE_DATA_DIR``.

Why SQLite in WAL mode: every gunicorn worker on the host opens the same file; readers
never wait for the writer, writers queue on SQLite's lock (``busy_timeout``), and a
transaction is all-or-nothing even when its process is killed half-way through (the
write-ahead log is replayed or discarded on the next open). ``synchronous=NORMAL``
keeps commits off the fsync path; with WAL that can only lose the last commits on an
operating-system crash or power cut, never corrupt the file.

Results are a cache under a size budget, evicted least-recently-used; stored networks
are never evicted. The result bytes are counted by triggers in one ``stats`` row, in
the same transactions as the rows themselves, so the count survives crashes too.
"""

from __future__ import annotations

import logging
import os
import sqlite3
import threading
import time
from contextlib import contextmanager
from pathlib import Path

from .base import NetworkMeta, Preconditions, next_meta, not_found, unchanged
from .errors import StoreUnavailable
from .sqlite_schema import create_schema

log = logging.getLogger("sluice.store")

FILE_NAME = "sluice.db"
_META_COLUMNS = "name, version, etag, digest, node_count, arc_count, size, created, updated"


class SqliteBackend:
    """Results and networks in one SQLite database file.

    Parameters
    ----------
    data_dir : str
        Folder of the database (created when missing).
    max_bytes : int
        Budget for result bytes; beyond it the least recently used results go.
    max_item_bytes : int, optional
        Results larger than this are not cached (default: a quarter of the budget).
    touch_interval : float
        A hit updates its last-used time only when that is older than this many
        seconds, so a hot entry does not cost a write per read (LRU to that grain).
    busy_timeout : float
        Seconds a writer waits for another process's write lock.
    """

    kind = "sqlite"

    def __init__(self, data_dir: str, *, max_bytes: int, max_item_bytes: int | None = None,
                 touch_interval: float = 1.0, busy_timeout: float = 15.0):
        self.path = str(Path(data_dir) / FILE_NAME)
        self.data_dir = data_dir
        self.max_bytes = int(max_bytes)
        self.max_item_bytes = int(max_item_bytes if max_item_bytes is not None else max_bytes // 4)
        self.touch_interval = touch_interval
        self.busy_timeout = busy_timeout
        self._local = threading.local()
        self._schema_ready = False

    # -- connections -------------------------------------------------------------

    def _connect(self) -> sqlite3.Connection:
        Path(self.data_dir).mkdir(parents=True, exist_ok=True)
        conn = sqlite3.connect(self.path, timeout=self.busy_timeout, isolation_level=None, check_same_thread=False)
        conn.execute("PRAGMA journal_mode=WAL")
        conn.execute("PRAGMA synchronous=NORMAL")
        # Big network blobs pass through the WAL; keep the file from staying huge.
        conn.execute("PRAGMA journal_size_limit=67108864")
        if not self._schema_ready:
            with _transaction(conn):
                create_schema(conn)
            self._schema_ready = True
        return conn

    def _conn(self) -> sqlite3.Connection:
        # One connection per thread and process: sqlite3 connections must not cross a fork.
        local = self._local
        if getattr(local, "conn", None) is None or local.pid != os.getpid():
            local.conn = self._connect()
            local.pid = os.getpid()
        return local.conn

    @contextmanager
    def _guard(self, what: str):
        try:
            yield
        except (sqlite3.Error, OSError) as exc:
            log.warning("sqlite store: %s failed: %s", what, exc)
            self._drop_connection()
            raise StoreUnavailable(f"the embedded store could not {what}: {exc}") from None

    def _drop_connection(self) -> None:
        conn = getattr(self._local, "conn", None)
        self._local.conn = None
        if conn is not None:
            try:
                conn.close()
            except sqlite3.Error:
                pass

    def close(self) -> None:
        """Close the calling thread's connection (other threads' connections are not touched)."""
        self._drop_connection()

    def ping(self) -> dict:
        """Read the result counters and prove the file is writable.

        Returns
        -------
        dict
            ``backend``, ``result_bytes``, ``results`` and ``budget_bytes``.

        Raises
        ------
        StoreUnavailable
        """
        with self._guard("answer a health check"):
            conn = self._conn()
            nbytes, entries = conn.execute("SELECT bytes, entries FROM stats WHERE id = 1").fetchone()
            self._check_writable(conn)
        return {"backend": "sqlite", "result_bytes": nbytes, "results": entries, "budget_bytes": self.max_bytes}

    def _check_writable(self, conn: sqlite3.Connection) -> None:
        # Taking the write lock for a moment proves the file and its WAL are writable;
        # a lock held by another writer proves the same, so "busy" counts as healthy.
        conn.execute("PRAGMA busy_timeout = 1000")
        try:
            conn.execute("BEGIN IMMEDIATE")
            conn.execute("ROLLBACK")
        except sqlite3.OperationalError as exc:
            if "locked" not in str(exc) and "busy" not in str(exc):
                raise
        finally:
            conn.execute(f"PRAGMA busy_timeout = {int(self.busy_timeout * 1000)}")

    # -- results -----------------------------------------------------------------

    def get_result(self, tenant: str, digest: str) -> bytes | None:
        """The cached result under ``digest``, or ``None``.

        A hit refreshes its last-used time (at most once per ``touch_interval``), which
        is what the least-recently-used eviction orders by.

        Raises
        ------
        StoreUnavailable
        """
        with self._guard("read a result"):
            conn = self._conn()
            row = conn.execute("SELECT id, used, value FROM results WHERE tenant = ? AND digest = ?",
                               (tenant, digest)).fetchone()
            return self._touched(conn, row)

    def get_result_by_body(self, tenant: str, body_key: str) -> bytes | None:
        """The cached result a raw-body hash points at, or ``None``, in one query; a hit
        refreshes the result's last-used time as :meth:`get_result` does.

        Raises
        ------
        StoreUnavailable
        """
        with self._guard("read a result by its body"):
            conn = self._conn()
            # The alias leads to the result (a trigger removes an alias with its result).
            row = conn.execute("SELECT r.id, r.used, r.value FROM aliases AS a JOIN results AS r "
                               "ON r.tenant = a.tenant AND r.digest = a.digest WHERE a.tenant = ? AND a.body = ?",
                               (tenant, body_key)).fetchone()
            return self._touched(conn, row)

    def _touched(self, conn, row) -> bytes | None:
        """The value of an ``(id, used, value)`` row, its use time refreshed now and then (for the LRU)."""
        if row is None:
            return None
        now = time.time()
        if now - row[1] >= self.touch_interval:
            conn.execute("UPDATE results SET used = ? WHERE id = ?", (now, row[0]))
        return row[2]

    def put_result(self, tenant: str, digest: str, value: bytes, body_key: str | None = None) -> bool:
        """Cache a result (and its body alias), then evict old results beyond the budget.

        Returns
        -------
        bool
            False, writing nothing, when ``value`` exceeds ``max_item_bytes``.

        Raises
        ------
        StoreUnavailable
        """
        if len(value) > self.max_item_bytes:
            return False
        with self._guard("store a result"):
            conn = self._conn()
            now = time.time()
            with _transaction(conn):
                conn.execute(
                    "INSERT INTO results (tenant, digest, size, created, used, value) VALUES (?, ?, ?, ?, ?, ?) "
                    "ON CONFLICT (tenant, digest) DO UPDATE SET size = excluded.size, used = excluded.used, "
                    "value = excluded.value",
                    (tenant, digest, len(value), now, now, value),
                )
                if body_key is not None:
                    conn.execute("INSERT OR REPLACE INTO aliases (tenant, body, digest) VALUES (?, ?, ?)",
                                 (tenant, body_key, digest))
                self._evict(conn, tenant, digest)
        return True

    def _evict(self, conn: sqlite3.Connection, tenant: str, keep: str) -> None:
        (total,) = conn.execute("SELECT bytes FROM stats WHERE id = 1").fetchone()
        if total <= self.max_bytes:
            return
        # Down to 90% of the budget, so the next few puts do not evict again.
        target = int(self.max_bytes * 0.9)
        while total > target:
            rows = conn.execute(
                "SELECT id, size FROM results WHERE NOT (tenant = ? AND digest = ?) ORDER BY used LIMIT 256",
                (tenant, keep),
            ).fetchall()
            if not rows:
                return
            doomed = []
            for rid, size in rows:
                doomed.append(rid)
                total -= size
                if total <= target:
                    break
            conn.execute(f"DELETE FROM results WHERE id IN ({','.join('?' * len(doomed))})", doomed)

    def put_alias(self, tenant: str, body_key: str, digest: str) -> None:
        """Alias a raw-body hash to a digest, only while that result is still cached.

        Raises
        ------
        StoreUnavailable
        """
        with self._guard("store a body alias"):
            conn = self._conn()
            with _transaction(conn):
                # Only while the result exists: the alias dies with it (trigger).
                conn.execute("INSERT OR REPLACE INTO aliases (tenant, body, digest) SELECT ?, ?, ? "
                             "WHERE EXISTS (SELECT 1 FROM results WHERE tenant = ? AND digest = ?)",
                             (tenant, body_key, digest, tenant, digest))

    # -- networks ----------------------------------------------------------------

    def head_network(self, tenant: str, name: str) -> NetworkMeta | None:
        """Metadata of the current version of ``name``, or ``None``.

        Raises
        ------
        StoreUnavailable
        """
        with self._guard("read a network"):
            return self._head(self._conn(), tenant, name)

    @staticmethod
    def _head(conn, tenant: str, name: str) -> NetworkMeta | None:
        row = conn.execute(f"SELECT {_META_COLUMNS} FROM networks WHERE tenant = ? AND name = ?",
                           (tenant, name)).fetchone()
        return None if row is None else NetworkMeta(*row)

    def get_network(self, tenant: str, name: str) -> tuple[NetworkMeta, bytes] | None:
        """Metadata and codec bytes of the current version of ``name``, or ``None``.

        Raises
        ------
        StoreUnavailable
        """
        with self._guard("read a network"):
            row = self._conn().execute(f"SELECT {_META_COLUMNS}, blob FROM networks WHERE tenant = ? AND name = ?",
                                       (tenant, name)).fetchone()
            return None if row is None else (NetworkMeta(*row[:-1]), row[-1])

    def put_network(self, tenant: str, name: str, blob: bytes, digest: str, node_count: int, arc_count: int,
                    pre: Preconditions) -> tuple[NetworkMeta, bool]:
        """Write a new version of ``name`` in one ``BEGIN IMMEDIATE`` transaction.

        See :meth:`Backend.put_network <service.store.base.Backend.put_network>`.

        Returns
        -------
        meta : NetworkMeta
        created : bool

        Raises
        ------
        PreconditionFailed
        StoreUnavailable
        """
        with self._guard("store a network"):
            conn = self._conn()
            # BEGIN IMMEDIATE takes the write lock before reading the current version:
            # the precondition is checked against the version this write replaces.
            with _transaction(conn):
                current = self._head(conn, tenant, name)
                pre.check(current, name)
                if unchanged(current, digest):
                    return current, False
                meta = next_meta(current, name, digest, node_count, arc_count, len(blob))
                conn.execute(
                    "INSERT INTO networks (tenant, name, version, etag, digest, node_count, arc_count, size, "
                    "created, updated, blob) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?) "
                    "ON CONFLICT (tenant, name) DO UPDATE SET version = excluded.version, etag = excluded.etag, "
                    "digest = excluded.digest, node_count = excluded.node_count, arc_count = excluded.arc_count, "
                    "size = excluded.size, updated = excluded.updated, blob = excluded.blob",
                    (tenant, name, meta.version, meta.etag, meta.digest, meta.node_count, meta.arc_count,
                     meta.size, meta.created, meta.updated, blob),
                )
        return meta, current is None

    def delete_network(self, tenant: str, name: str, pre: Preconditions) -> NetworkMeta:
        """Delete ``name`` in one transaction, if the preconditions allow it.

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
        with self._guard("delete a network"):
            conn = self._conn()
            with _transaction(conn):
                current = self._head(conn, tenant, name)
                if current is None:
                    raise not_found(name)
                pre.check(current, name)
                conn.execute("DELETE FROM networks WHERE tenant = ? AND name = ?", (tenant, name))
        return current

    def list_networks(self, tenant: str, after: str | None, limit: int) -> list[NetworkMeta]:
        """One page of a tenant's networks in name order, after the cursor ``after``.

        Raises
        ------
        StoreUnavailable
        """
        with self._guard("list networks"):
            rows = self._conn().execute(
                f"SELECT {_META_COLUMNS} FROM networks WHERE tenant = ? AND name > ? ORDER BY name LIMIT ?",
                (tenant, after or "", limit),
            ).fetchall()
        return [NetworkMeta(*r) for r in rows]


@contextmanager
def _transaction(conn: sqlite3.Connection):
    """BEGIN IMMEDIATE ... COMMIT, rolled back on any exception (including 412s)."""
    conn.execute("BEGIN IMMEDIATE")
    try:
        yield
    except BaseException:
        conn.execute("ROLLBACK")
        raise
    conn.execute("COMMIT")
