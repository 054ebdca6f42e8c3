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
