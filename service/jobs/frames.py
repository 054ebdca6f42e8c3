"""Frames between an API process and its solver processes, over pipes.

Both ends are this program on the same host, started by the parent itself, so pickle
is safe here; nothing from a client is unpickled.

A frame is a header (pickle length, number of buffers), the buffers' sizes, a pickle
(protocol 5) and the pickle's out-of-band buffers: the memory of the numpy arrays in
the message. The buffers go from the arrays to the pipe with ``writev`` and from the
pipe into their own new buffers with ``readv``, so a large array is copied once into
the pipe and once out of it, never concatenated into one big ``bytes`` first or
joined from 64 KB chunks afterwards. Each array gets its own buffer (aligned by the
allocator, freed on its own) and keeps its writeable flag.
"""

from __future__ import annotations

import os
import pickle
import struct

HEADER = struct.Struct(">QQ")  # pickle bytes, out-of-band buffers
_SIZE = struct.Struct(">Q")
_IOV_MAX = max(16, min(1024, os.sysconf("SC_IOV_MAX") if hasattr(os, "sysconf") else 1024))


def write_frame(fd: int, obj) -> None:
    """Write ``obj`` as one frame to the file descriptor ``fd`` (blocking).

    Raises
    ------
    OSError
        ``BrokenPipeError`` when the reader has gone.
    """
    buffers: list = []
    data = pickle.dumps(obj, protocol=5, buffer_callback=buffers.append)
    raws = [b.raw() for b in buffers]
    head = HEADER.pack(len(data), len(raws)) + struct.pack(f">{len(raws)}Q", *(r.nbytes for r in raws))
    _write_all(fd, [head, data, *raws])


def read_frame(fd: int):
    """The next object from the file descriptor ``fd``, or ``None`` at end of stream."""
    head = bytearray(HEADER.size)
    if not _read_into(fd, [head]):
        return None
    size, count = HEADER.unpack(head)
    sizes = bytearray(count * _SIZE.size)
    if not _read_into(fd, [sizes]):
        return None
    data = bytearray(size)
    buffers = [bytearray(n) for (n,) in _SIZE.iter_unpack(sizes)]
    if not _read_into(fd, [data, *buffers]):
        return None
    return pickle.loads(data, buffers=buffers)


def _write_all(fd: int, chunks: list) -> None:
    views = [v for v in (memoryview(c).cast("B") for c in chunks) if v.nbytes]
    while views:
        done = os.writev(fd, views[:_IOV_MAX])
        views = _advance(views, done)


def _read_into(fd: int, targets: list) -> bool:
    """Fill every target buffer from ``fd``; false at end of stream."""
    views = [v for v in (memoryview(t).cast("B") for t in targets) if v.nbytes]
    while views:
        done = os.readv(fd, views[:_IOV_MAX])
        if done == 0:
            return False
        views = _advance(views, done)
    return True


def _advance(views: list, done: int) -> list:
    """The views still to transfer after ``done`` bytes went through."""
    i = 0
    while i < len(views) and done >= views[i].nbytes:
        done -= views[i].nbytes
        i += 1
    rest = views[i:]
    if done:
        rest[0] = rest[0][done:]
    return rest
