"""Keep freed memory for the next request instead of handing it back to the kernel.

A large request allocates numpy arrays of tens of megabytes. With glibc's defaults
each comes from fresh pages (an mmap, or heap that is trimmed once the request is
done), so every request pays one page fault per 4 KiB it touches. On this project's
2-core VMs those faults cost more than the work: decoding a 1M-arc object-form body
took 0.7-1.6 s with about 80k faults, and 0.44 s with none once the memory was kept
(measured with ``getrusage``; see the README's performance notes). So every service
process asks glibc, once at start, to serve large blocks from one heap that is never
trimmed: the pages of the largest request stay mapped for the next one.

Trade-off: memory freed by a request stays with the process. Bounded: a worker trims
what it keeps above ``SLUICE_WORKER_RETAIN_MB`` after each request
(:class:`RetainCeiling`), and a solver process past ``SLUICE_SOLVER_MAX_RSS_MB`` after a
solve is replaced (:class:`service.jobs.runner.SolverPool`). ``SLUICE_RETAIN_MEMORY=off``
keeps glibc's defaults. On a C library without ``mallopt`` this does nothing.
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


_PAGE = os.sysconf("SC_PAGE_SIZE") if hasattr(os, "sysconf") else 4096


def resident_bytes(pid: int | str = "self") -> int | None:
    """A process's resident memory, this one's by default (None where ``/proc`` cannot tell)."""
    try:
        with open(f"/proc/{pid}/statm", "rb") as f:
            return int(f.read().split()[1]) * _PAGE
    except (OSError, ValueError, IndexError):
        return None


class RetainCeiling:
    """Bound what a worker keeps: at most ``retain_mb`` of freed memory above its live set.

    Keeping freed pages is what makes the next large request fast (module doc), but a
    worker that once decoded a 5M-arc body would otherwise hold that memory for good.
    After each request (:meth:`after_request`, gunicorn's ``post_request`` hook) a
    worker whose resident memory is more than ``retain_mb`` above its floor (its size
    when it became ready, or after its last trim) hands its free pages back with
    ``malloc_trim``. The floor becomes what remains (never below the first size), so a
    large live set (the network memo, a request in flight) does not make every request
    trim. The default (256 MB, ``SLUICE_WORKER_RETAIN_MB``) keeps the pages of a 1M-arc
    request: a worker grew by 85-170 MB for one in the max-flow benchmark.
    """

    def __init__(self, retain_mb: float):
        self.retain = int(retain_mb * (1 << 20))
        self.baseline = self.floor = resident_bytes()
        self.trims = 0
        try:
            self._trim = ctypes.CDLL("libc.so.6").malloc_trim
            self._trim.argtypes = (ctypes.c_size_t,)
        except (OSError, AttributeError):
            self._trim = None

    def after_request(self) -> bool:
        """Trim when above the ceiling; whether it did."""
        if self._trim is None or self.floor is None:
            return False
        rss = resident_bytes()
        if rss is None or rss <= self.floor + self.retain:
            return False
        self._trim(0)
        self.trims += 1
        self.floor = max(self.baseline, resident_bytes() or rss)
        return True
