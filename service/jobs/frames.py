"""Length-prefixed pickle frames between an API process and its solver processes.

Both ends are this program on the same host, started by the parent itself, so pickle
(with protocol 5 for numpy arrays) is safe here; nothing from a client is unpickled.
"""

from __future__ import annotations

import pickle
import struct

HEADER = struct.Struct(">Q")


def write_frame(stream, obj) -> None:
    data = pickle.dumps(obj, protocol=5)
    stream.write(HEADER.pack(len(data)))
    stream.write(data)
    stream.flush()


def _read_exact(stream, n: int) -> bytes | None:
    chunks, left = [], n
    while left:
        chunk = stream.read(left)
        if not chunk:
            return None
        chunks.append(chunk)
        left -= len(chunk)
    return b"".join(chunks)


def read_frame(stream):
    """The next object, or ``None`` at end of stream."""
    header = _read_exact(stream, HEADER.size)
    if header is None:
        return None
    data = _read_exact(stream, HEADER.unpack(header)[0])
    return None if data is None else pickle.loads(data)
