"""What a store backend provides, and the pieces both backends share.

A backend keeps two things per tenant:

results
    The certified answer of a solved problem (its response document as JSON bytes),
    keyed by the problem digest, plus *aliases*: the hash of a raw request body mapped
    to the digest it normalised to, so a byte-identical request is answered without
    being parsed. Results are a cache: they may be evicted at any time.
networks
    Stored networks (the codec's bytes) with a version and an ETag. These are data,
    never evicted; every write is atomic and may be conditional.
"""

from __future__ import annotations

import secrets
import time
from dataclasses import asdict, dataclass
from datetime import datetime, timezone
from typing import Protocol

from ..errors import NotFound, PreconditionFailed


@dataclass(frozen=True)
class NetworkMeta:
    """Metadata of one stored network version."""

    name: str
    version: int
    etag: str  # without quotes
    digest: str
    node_count: int
    arc_count: int
    size: int  # bytes of the stored arrays
    created: float  # epoch seconds of the first version
    updated: float  # epoch seconds of this version

    def as_dict(self) -> dict:
        """The metadata as a response document: ISO 8601 UTC times and a quoted ETag.

        Returns
        -------
        dict
            The fields of this record; ``created`` and ``updated`` as ISO 8601 strings with
            millisecond precision and a ``Z`` suffix, ``etag`` wrapped in double quotes as
            it appears in an ``ETag`` header.
        """
        out = asdict(self)
        out["created"] = _iso(self.created)
        out["updated"] = _iso(self.updated)
        out["etag"] = f'"{self.etag}"'
        return out

    @classmethod
    def from_dict(cls, data: dict) -> "NetworkMeta":
        """Rebuild metadata from its plain field mapping (as the Redis backend stores it).

        Parameters
        ----------
        data : dict
            The dataclass fields by name (epoch-second times, unquoted ETag), as in
            ``meta.__dict__``; not the output of :meth:`as_dict`.

        Returns
        -------
        NetworkMeta
        """
        return cls(**data)


def _iso(epoch: float) -> str:
    return datetime.fromtimestamp(epoch, timezone.utc).isoformat(timespec="milliseconds").replace("+00:00", "Z")


@dataclass(frozen=True)
class Preconditions:
    """HTTP preconditions of a write (RFC 9110 section 13), already parsed.

    ``if_match`` is ``None`` (no header), ``"*"``, or a frozenset of strong ETags
    (unquoted); ``if_none_match`` likewise (only ``"*"`` is meaningful for writes).
    """

    if_match: frozenset | str | None = None
    if_none_match: frozenset | str | None = None

    def check(self, current: NetworkMeta | None, name: str) -> None:
        """Raise :class:`PreconditionFailed` when the write must not happen.

        Evaluated inside the backend's atomic section, against the version that is
        current at that moment, so two writers holding the same ETag cannot both win.
        """
        if self.if_match is not None:
            if current is None:
                raise PreconditionFailed(f"network {name!r} does not exist, so If-Match cannot match")
            if self.if_match != "*" and current.etag not in self.if_match:
                raise PreconditionFailed(
                    f"network {name!r} is at version {current.version} (ETag \"{current.etag}\"); "
                    "If-Match names another version: fetch it again and retry"
                )
        if self.if_none_match is not None and current is not None:
            if self.if_none_match == "*" or current.etag in self.if_none_match:
                raise PreconditionFailed(f"network {name!r} already exists (version {current.version})")


def next_meta(current: NetworkMeta | None, name: str, digest: str, node_count: int, arc_count: int,
              size: int) -> NetworkMeta:
    """Metadata of the version a write creates."""
    now = time.time()
    version = 1 if current is None else current.version + 1
    # The random part keeps ETags unique even when a deleted name is created again.
    etag = f"{version}-{secrets.token_hex(6)}"
    created = now if current is None else current.created
    return NetworkMeta(name, version, etag, digest, node_count, arc_count, size, created, now)


def unchanged(current: NetworkMeta | None, digest: str) -> bool:
    """Whether a write would store the same content again: it keeps its version and ETag."""
    return current is not None and current.digest == digest


def not_found(name: str) -> NotFound:
    """The :class:`~service.errors.NotFound` error for a missing stored network.

    Returned, not raised, so each caller raises it where the absence is found.

    Parameters
    ----------
    name : str
        The network name the caller asked for.

    Returns
    -------
    NotFound
    """
    return NotFound(f"no stored network named {name!r}")


class Backend(Protocol):
    """The operations both backends implement (SQLite and Redis)."""

    kind: str

    def ping(self) -> dict:
        """Prove the backend is usable and describe it, for the health endpoint.

        Returns
        -------
        dict
            Backend facts (``backend`` and its settings or counters).

        Raises
        ------
        StoreUnavailable
            The backend cannot be reached (or, for SQLite, written).
        """

    def get_result(self, tenant: str, digest: str) -> bytes | None:
        """The cached result bytes under ``digest``, or ``None`` when absent or evicted.

        Parameters
        ----------
        tenant : str
        digest : str
            Problem digest, ``sha256:<hex>``.

        Returns
        -------
        bytes or None

        Raises
        ------
        StoreUnavailable
        """

    def put_result(self, tenant: str, digest: str, value: bytes, body_key: str | None = None) -> bool:
        """Cache a result, and the raw-body alias leading to it when ``body_key`` is given.

        Parameters
        ----------
        tenant : str
        digest : str
            Problem digest the result answers.
        value : bytes
            The response document as JSON bytes.
        body_key : str, optional
            Hash of the raw request body, stored as an alias of ``digest``.

        Returns
        -------
        bool
            False when ``value`` is larger than the backend caches (nothing is written).

        Raises
        ------
        StoreUnavailable
        """

    def get_result_by_body(self, tenant: str, body_key: str) -> bytes | None:
        """The cached result a raw-body hash was aliased to, or ``None`` (in one call:
        the alias and the result it leads to, both refreshed as a hit refreshes them).

        Parameters
        ----------
        tenant : str
        body_key : str
            Hash of a raw request body.

        Returns
        -------
        bytes or None

        Raises
        ------
        StoreUnavailable
        """

    def put_alias(self, tenant: str, body_key: str, digest: str) -> None:
        """Alias a raw-body hash to the digest its body normalised to.

        Parameters
        ----------
        tenant : str
        body_key : str
        digest : str

        Raises
        ------
        StoreUnavailable
        """

    def head_network(self, tenant: str, name: str) -> NetworkMeta | None:
        """Metadata of the current version of a stored network, without its arrays.

        Parameters
        ----------
        tenant : str
        name : str

        Returns
        -------
        NetworkMeta or None
            ``None`` when no network has that name.

        Raises
        ------
        StoreUnavailable
        """

    def get_network(self, tenant: str, name: str) -> tuple[NetworkMeta, bytes] | None:
        """The current version of a stored network: its metadata and the codec's bytes.

        Parameters
        ----------
        tenant : str
        name : str

        Returns
        -------
        tuple of (NetworkMeta, bytes), or None
            ``None`` when no network has that name.

        Raises
        ------
        StoreUnavailable
        """

    def put_network(self, tenant: str, name: str, blob: bytes, digest: str, node_count: int, arc_count: int,
                    pre: Preconditions) -> tuple[NetworkMeta, bool]:
        """Write a new version of a network atomically, if the preconditions allow it.

        The preconditions are checked against the version current inside the atomic
        write, so of two writers holding the same ETag only one succeeds. Writing the
        same digest again keeps the current version and ETag.

        Parameters
        ----------
        tenant : str
        name : str
        blob : bytes
            The network encoded by :func:`~service.store.codec.encode_network`.
        digest : str
            Content digest of the network, compared to detect an unchanged write.
        node_count, arc_count : int
            Recorded in the metadata.
        pre : Preconditions
            Parsed ``If-Match`` / ``If-None-Match``.

        Returns
        -------
        meta : NetworkMeta
            The version now current.
        created : bool
            True when the name did not exist before.

        Raises
        ------
        PreconditionFailed
        StoreUnavailable
        """

    def delete_network(self, tenant: str, name: str, pre: Preconditions) -> NetworkMeta:
        """Delete a stored network atomically, if the preconditions allow it.

        Parameters
        ----------
        tenant : str
        name : str
        pre : Preconditions

        Returns
        -------
        NetworkMeta
            The version that was deleted.

        Raises
        ------
        NotFound
            No network has that name.
        PreconditionFailed
        StoreUnavailable
        """

    def list_networks(self, tenant: str, after: str | None, limit: int) -> list[NetworkMeta]:
        """One page of a tenant's stored networks, in name order.

        Parameters
        ----------
        tenant : str
        after : str or None
            Return only names sorting strictly after this one (the paging cursor).
        limit : int
            Most entries returned.

        Returns
        -------
        list of NetworkMeta

        Raises
        ------
        StoreUnavailable
        """

    def close(self) -> None:
        """Release the backend's connections."""
