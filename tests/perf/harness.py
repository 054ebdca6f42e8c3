"""Timing helpers shared by the benchmarks."""

from __future__ import annotations

import gc
import statistics
import time
from contextlib import contextmanager

import orjson
import requests

from service.memory import retain_freed_memory
from tests.conftest import RunningServer

# The in-process baselines run under the same allocator settings as the service's
# processes (service/memory.py), so that neither side's ratio gains from page faults
# the other one pays.
retain_freed_memory()


def best_of(fn, repeat: int = 3) -> float:
    """Best wall time of `repeat` calls, in seconds (the least disturbed run on a noisy host)."""
    times = []
    for _ in range(repeat):
        gc.collect()
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def best_of_pair(baseline, measured, repeat: int = 3) -> tuple[float, float]:
    """Best wall times of two functions run alternately, in seconds.

    Taking turns puts both sides under the same passing load, so a burst on a shared
    host cannot flatter (or sink) the ratio between them the way two separate series
    can.
    """
    times: tuple[list, list] = ([], [])
    for _ in range(repeat):
        for fn, out in ((baseline, times[0]), (measured, times[1])):
            gc.collect()
            t0 = time.perf_counter()
            fn()
            out.append(time.perf_counter() - t0)
    return min(times[0]), min(times[1])


def median_of(fn, repeat: int = 5) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


@contextmanager
def served(workers: int = 1, env: dict | None = None, data_dir: str | None = None):
    # Benchmarks measure the service, not its rate limiter (600/minute by default).
    server = RunningServer(env={"SLUICE_RATE_LIMIT": "off", **(env or {})}, workers=workers, data_dir=data_dir)
    try:
        yield server
    finally:
        server.stop()


def post_json(session: requests.Session, url: str, body: bytes, expect: int = 200) -> dict:
    r = session.post(url, data=body, headers={"Content-Type": "application/json"}, timeout=600)
    if r.status_code != expect:
        raise RuntimeError(f"{url}: {r.status_code} {r.text[:500]}")
    return orjson.loads(r.content)


def table(rows: list[tuple], header: tuple) -> None:
    widths = [max(len(str(x)) for x in col) for col in zip(header, *rows)]
    for row in [header, tuple("-" * w for w in widths), *rows]:
        print("  ".join(str(x).ljust(w) for x, w in zip(row, widths)), flush=True)
