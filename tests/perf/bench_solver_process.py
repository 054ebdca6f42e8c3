"""What the killable solver process costs: the same parsed max-flow problem solved inline
and through a warm :class:`~service.jobs.runner.SolverPool`, interleaved, in one process.

Overhead = pooled wall time minus the child's own solve time (which it reports): sending
the problem, receiving the result, pickling both. No HTTP, so it is far less noisy than
the difference of two HTTP rows in ``tests.perf maxflow``.
Run: `python -m tests.perf solver_process` (add --quick for 100k arcs only).
"""

from __future__ import annotations

import gc
import statistics
import time

import numpy as np

from service.deadline import Deadline
from service.model.fastjson import decode_columnar
from service.jobs.runner import SolverPool, unpack
from service.kinds import KINDS, Limits
from tests.perf.bench_maxflow import bodies, random_network
from tests.perf.harness import table

REPEAT = 9


def run(args) -> None:
    kind, limits = KINDS["maxflow"], Limits()
    pool = SolverPool(1)
    rows = []
    try:
        for m in [100_000] if args.quick else [100_000, 1_000_000]:
            # Parsed as the API parses a columnar body, so the arrays have the same types.
            problem = kind.parse(decode_columnar(bodies(*random_network(m))["columns/int ids"]), limits)
            message = ("solve", kind.name, problem, None)
            want = kind.solve(problem, Deadline.after(600))
            got, _ = unpack(pool.run(message, deadline=Deadline.after(600)))  # warm the child
            assert np.array_equal(got["flows"], want["flows"])
            inline, pooled, overhead = [], [], []
            for _ in range(REPEAT):
                gc.collect()
                t0 = time.perf_counter()
                kind.solve(problem, Deadline.after(600))
                inline.append(time.perf_counter() - t0)
                gc.collect()
                t0 = time.perf_counter()
                _, child_s = unpack(pool.run(message, deadline=Deadline.after(600)))
                pooled.append(time.perf_counter() - t0)
                overhead.append(pooled[-1] - child_s)
            med = statistics.median
            rows.append((f"{m:,}", f"{med(inline) * 1000:.0f}", f"{med(pooled) * 1000:.0f}",
                         f"{med(overhead) * 1000:.1f}", f"{min(overhead) * 1000:.1f}-{max(overhead) * 1000:.1f}",
                         f"{med(pooled) / med(inline):.2f}x"))
    finally:
        pool.close()
    table(rows, ("arcs", "inline ms", "pooled ms", "overhead ms", "overhead range", "pooled / inline"))
    print(f"medians of {REPEAT} interleaved runs; overhead = pooled wall time - the child's solve time")


if __name__ == "__main__":
    import argparse

    run(argparse.Namespace(quick=False))
