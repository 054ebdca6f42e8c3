"""Stored networks as bytes: the normalised numpy arrays, not the JSON they came from.

A what-if on a stored network must not re-parse or re-validate what did not change,
so a network is stored exactly as :func:`service.model.arcs.build_network` left it:
one raw little-endian array per arc field (the bytes ``numpy.ndarray.tobytes`` gives)
and the node ids and arc keys as JSON lists. Decoding maps the arrays straight onto
the stored bytes with ``numpy.frombuffer``: no copy, and the arrays are read-only, so
a what-if cannot change the stored network by accident.

Layout::

    b"SLUICENET1\\n" | u32 header length | header (JSON) | sections, 8-byte aligned

The header lists each section's name, format, dtype, length and offset, plus a CRC-32
of the payload, checked on decode.
"""

from __future__ import annotations

import struct
import zlib

import numpy as np
import orjson

from ..errors import SluiceError
from ..model.arcs import Network
from ..model.digest import problem_digest
from ..model.ids import NodeIndex

MAGIC = b"SLUICENET1\n"
_LEN = struct.Struct("<I")
_ARRAYS = ("tail", "head", "capacity", "unlimited", "cost", "lower")


class CorruptNetwork(SluiceError):
    """Stored bytes that do not decode to a network (a bug or a damaged store)."""

    slug = "store-corrupt"
    title = "A stored network is damaged"


def _pad(n: int) -> int:
    return (-n) % 8


def encode_network(network: Network) -> bytes:
    """Serialise a normalised network.

    Parameters
    ----------
    network : Network
        As built by :func:`service.model.arcs.build_network`.

    Returns
    -------
    bytes
        Decoded by :func:`decode_network`.
    """
    sections: list[tuple[dict, bytes]] = []
    for name in _ARRAYS:
        arr = getattr(network, name)
        if arr is None:
            continue
        arr = np.ascontiguousarray(arr)
        data = arr.astype(arr.dtype.newbyteorder("<"), copy=False).tobytes()
        sections.append(({"name": name, "format": "array", "dtype": arr.dtype.newbyteorder("<").str,
                          "count": int(arr.size)}, data))
    if network.nodes.kind is int:
        ids = np.asarray(network.nodes.ids, dtype="<i8")
        sections.append(({"name": "ids", "format": "array", "dtype": "<i8", "count": int(ids.size)}, ids.tobytes()))
    else:
        sections.append(({"name": "ids", "format": "json"}, orjson.dumps(network.nodes.ids)))
    if network.keys is not None:
        sections.append(({"name": "keys", "format": "json"}, orjson.dumps(network.keys)))
    if network.extra is not None:
        sections.append(({"name": "extra", "format": "json"}, orjson.dumps(network.extra)))
    offset = 0
    chunks = []
    for meta, data in sections:
        meta["offset"] = offset
        meta["nbytes"] = len(data)
        chunks.append(data)
        pad = _pad(len(data))
        if pad:
            chunks.append(b"\0" * pad)
        offset += len(data) + pad
    payload = b"".join(chunks)
    header = orjson.dumps({
        "node_kind": "int" if network.nodes.kind is int else "str",
        "num_arcs": network.num_arcs,
        "num_nodes": network.num_nodes,
        "crc32": zlib.crc32(payload),
        "sections": [meta for meta, _ in sections],
    })
    start = len(MAGIC) + _LEN.size + len(header)
    return b"".join([MAGIC, _LEN.pack(len(header)), header, b"\0" * _pad(start), payload])


def decode_network(blob: bytes, *, verify: bool = True) -> Network:
    """Rebuild a :class:`Network` from :func:`encode_network` bytes.

    The arrays are read-only views of ``blob``.

    Raises
    ------
    CorruptNetwork
        When the bytes are not a stored network or fail their CRC-32.
    """
    try:
        if not blob.startswith(MAGIC):
            raise ValueError("bad magic")
        (hlen,) = _LEN.unpack_from(blob, len(MAGIC))
        hstart = len(MAGIC) + _LEN.size
        header = orjson.loads(blob[hstart:hstart + hlen])
        base = hstart + hlen + _pad(hstart + hlen)
        view = memoryview(blob)
        if verify and zlib.crc32(view[base:]) != header["crc32"]:
            raise ValueError("CRC-32 mismatch")
        parts = {}
        for s in header["sections"]:
            start = base + s["offset"]
            if s["format"] == "array":
                parts[s["name"]] = np.frombuffer(blob, dtype=np.dtype(s["dtype"]), count=s["count"], offset=start)
            else:
                parts[s["name"]] = orjson.loads(view[start:start + s["nbytes"]])
    except (ValueError, KeyError, TypeError, struct.error, orjson.JSONDecodeError) as exc:
        raise CorruptNetwork(f"a stored network does not decode: {exc}") from None
    if header["node_kind"] == "int":
        nodes = NodeIndex(parts["ids"].tolist(), int)
    else:
        nodes = NodeIndex(parts["ids"], str)
    return Network(nodes, parts["tail"], parts["head"], parts["capacity"], parts.get("unlimited"),
                   parts.get("cost"), parts.get("lower"), parts.get("keys"), parts.get("extra"))


def network_nbytes(network: Network) -> int:
    """Rough in-memory size of a decoded network, for the in-process memo's budget."""
    total = sum(getattr(network, n).nbytes for n in _ARRAYS if getattr(network, n) is not None)
    # A short Python str costs about 60 bytes; ids and keys dominate for string ids.
    total += 64 * len(network.nodes) + (64 * len(network.keys) if network.keys is not None else 0)
    if network.extra is not None:
        total += 32 * sum(map(len, (*network.extra["arcs"].values(), *network.extra["nodes"].values())))
    return total


def network_digest(network: Network) -> str:
    """Content hash of a stored network (ids, arrays and keys), ``sha256:<hex>``."""
    parts = (network.nodes.ids, network.tail, network.head, network.capacity, network.unlimited, network.cost,
             network.lower, network.keys)
    # The optional columns enter only when present: older networks keep their digests.
    return problem_digest("network", *parts, *(() if network.extra is None else (network.extra,)))
