"""service.memory: freed blocks are kept for reuse (fewer page faults), in real processes."""

import os
import subprocess
import sys

import pytest

PROBE = r"""
import resource, sys, threading
from service.memory import retain_freed_memory
took = retain_freed_memory()
faults = []
def work():
    for _ in range(3):
        before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
        # 50 MB written then freed. A bytes object, as for request bodies and their
        # translations: numpy asks for huge pages on its own large arrays, which
        # fault far less whatever malloc does.
        block = b"x" * (50 << 20)
        del block
        faults.append(resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before)
t = threading.Thread(target=work)  # requests run on worker threads
t.start(); t.join()
print(took, *faults)
"""


def probe(setting: str) -> tuple[bool, list[int]]:
    env = {**os.environ, "SLUICE_RETAIN_MEMORY": setting}
    out = subprocess.run([sys.executable, "-c", PROBE], env=env, capture_output=True, text=True, check=True,
                         cwd=os.path.dirname(os.path.dirname(__file__))).stdout.split()
    return out[0] == "True", [int(x) for x in out[1:]]


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="mallopt is glibc's")
def test_a_second_large_block_reuses_the_first_ones_pages():
    took, faults = probe("on")
    assert took
    pages = (50 << 20) // 4096
    assert faults[0] >= pages // 2  # the first time, the pages are new
    assert max(faults[1:]) < pages // 10  # afterwards the same pages serve again


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="mallopt is glibc's")
def test_off_keeps_the_c_librarys_defaults():
    took, faults = probe("off")
    assert not took
    pages = (50 << 20) // 4096
    assert min(faults) >= pages // 2  # glibc maps (and faults in) every large block anew


CEILING_PROBE = r"""
import sys
from service.memory import RetainCeiling, resident_bytes, retain_freed_memory
assert retain_freed_memory()
ceiling = RetainCeiling(float(sys.argv[1]))
base = resident_bytes()
block = bytearray(300 << 20)  # written: zero-filled, every page touched
del block
kept = resident_bytes()
trimmed = ceiling.after_request()
print(base >> 20, kept >> 20, resident_bytes() >> 20, trimmed, ceiling.after_request())
"""


def ceiling_probe(retain_mb: float) -> list:
    out = subprocess.run([sys.executable, "-c", CEILING_PROBE, str(retain_mb)], capture_output=True, text=True,
                         check=True, cwd=os.path.dirname(os.path.dirname(__file__))).stdout.split()
    return [int(x) for x in out[:3]] + [x == "True" for x in out[3:]]


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="malloc_trim and /proc are glibc's and Linux's")
def test_memory_above_the_retain_ceiling_goes_back_after_a_request():
    base, kept, after, trimmed, again = ceiling_probe(64)
    assert kept > base + 250  # freed, but kept for the next request (retain_freed_memory)
    assert trimmed and after < base + 64  # above the ceiling: handed back
    assert not again  # nothing left above it: the next request does not trim again
    base, kept, after, trimmed, _ = ceiling_probe(512)
    assert not trimmed and after > base + 250  # below the ceiling: kept for reuse
