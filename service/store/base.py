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
        out = asdict(self)
        out["created"] = _iso(self.created)
        out["updated"] = _iso(self.updated)
        out["etag"] = f'"{self.etag}"'
        return out

    @classmethod
    def from_dict(cls, data: dict) -> "NetworkMeta":
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
    return NotFound(f"no stored network named {name!r}")


class Backend(Protocol):
    """The operations both backends implement (SQLite and Redis)."""

    kind: str

    def ping(self) -> dict: ...

    def get_result(self, tenant: str, digest: str) -> bytes | None: ...

    def put_result(self, tenant: str, digest: str, value: bytes, body_key: str | None = None) -> bool: ...

    def get_alias(self, tenant: str, body_key: str) -> str | None: ...

    def put_alias(self, tenant: str, body_key: str, digest: str) -> None: ...

    def head_network(self, tenant: str, name: str) -> NetworkMeta | None: ...

    def get_network(self, tenant: str, name: str) -> tuple[NetworkMeta, bytes] | None: ...

    def put_network(self, tenant: str, name: str, blob: bytes, digest: str, node_count: int, arc_count: int,
                    pre: Preconditions) -> tuple[NetworkMeta, bool]: ...

    def delete_network(self, tenant: str, name: str, pre: Preconditions) -> NetworkMeta: ...

    def list_networks(self, tenant: str, after: str | None, limit: int) -> list[NetworkMeta]: ...

    def close(self) -> None: ...
