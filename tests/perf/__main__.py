"""Run the benchmarks: `python -m tests.perf` runs all, `python -m tests.perf maxflow` one.

Each module `tests/perf/bench_<name>.py` defines `run(args) -> None` and prints its own
table of timings and ratios against in-process baselines measured in the same run.
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil

import tests.perf as perf


def main() -> None:
    names = sorted(m.name[len("bench_"):] for m in pkgutil.iter_modules(perf.__path__) if m.name.startswith("bench_"))
    parser = argparse.ArgumentParser(prog="python -m tests.perf")
    parser.add_argument("names", nargs="*", choices=names + [[]], help="benchmarks to run (default: all)")
    parser.add_argument("--quick", action="store_true", help="smaller sizes, for a smoke run")
    args = parser.parse_args()
    for name in args.names or names:
        print(f"\n=== {name} ===", flush=True)
        importlib.import_module(f"tests.perf.bench_{name}").run(args)


if __name__ == "__main__":
    main()
