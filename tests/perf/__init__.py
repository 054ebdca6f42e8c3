"""On-demand benchmarks: `python -m tests.perf [name ...]` (never collected by pytest)."""
