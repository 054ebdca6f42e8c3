"""Keep freed memory for the next request instead of handing it back to the kernel.

A large request allocates numpy arrays of tens of megabytes. With glibc's defaults
each comes from fresh pages (an mmap, or heap that is trimmed once the request is
done), so every request pays one page fault per 4 KiB it touches. On this project's
2-core VMs those faults cost more than the work: decoding a 1M-arc object-form body
took 0.7-1.6 s with about 80k faults, and 0.44 s with none once the memory was kept
(measured with ``getrusage``; see the README's performance notes). So every service
process asks glibc, once at start, to serve large blocks from one heap that is never
trimmed: the pages of the largest request stay mapped for the next one.

Trade-off: a worker's resident memory stays at its high-water mark; size container
limits for the largest request. ``SLUICE_RETAIN_MEMORY=off`` keeps glibc's defaults.
On a C library without ``mallopt`` this does nothing.
"""

from __future__ import annotations

import ctypes
import os

# mallopt parameters (glibc's malloc.h)
M_TRIM_THRESHOLD, M_TOP_PAD, M_MMAP_MAX, M_ARENA_MAX = -1, -2, -4, -8

_SETTINGS = (
    (M_ARENA_MAX, 1),  # one heap for all threads: thread arenas would mmap large blocks anew
    (M_MMAP_MAX, 0),  # large blocks from that heap, not a fresh mapping each
    (M_TRIM_THRESHOLD, 2**31 - 1),  # never give the heap back
    (M_TOP_PAD, 64 << 20),  # grow it in large steps
)


def retain_freed_memory() -> bool:
    """Apply the settings above to this process; call it before starting threads.

    Returns
    -------
    bool
        Whether glibc took every setting (False when turned off or not glibc).
    """
    if os.environ.get("SLUICE_RETAIN_MEMORY", "on").strip().lower() in ("off", "0", "false", "no"):
        return False
    try:
        mallopt = ctypes.CDLL("libc.so.6").mallopt
    except (OSError, AttributeError):
        return False
    mallopt.argtypes = (ctypes.c_int, ctypes.c_int)
    return all(mallopt(param, value) == 1 for param, value in _SETTINGS)
