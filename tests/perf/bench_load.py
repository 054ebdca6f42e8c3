"""A bounded load test on loopback: mixed endpoints for 60 s, zero 5xx, worker memory stable.

Run: `python -m tests.perf load` (`--quick`: 15 s). Starts its own `sluice serve` (2
workers) and drives it from 8 client threads with requests (no load tool needed):

- 60 % small max-flow (the depot scenario, solved inline),
- 10 % medium max-flow (30k arcs, over the inline threshold: a solver process),
- 10 % jobs (submit a small problem, poll it to the end),
- 10 % invalid bodies (422), 5 % /healthz, 5 % /metrics.

Baseline in the same run: the same small solve through the Flask test client in this
process (no HTTP, no gunicorn), so the table shows what HTTP and the server add.
Memory: RSS of every gunicorn worker after a warm-up and at the end.
"""

from __future__ import annotations

import json
import os
import random
import statistics
import threading
import time
from collections import Counter, defaultdict

import numpy as np
import orjson
import requests

from tests.conftest import SCENARIOS
from tests.opsutil import gunicorn_workers, rss_mb
from tests.perf.harness import served, table

DEPOTS = (SCENARIOS / "depots-maxflow.json").read_bytes()
JSON = {"Content-Type": "application/json"}


def medium_body(arcs: int = 30_000) -> bytes:
    rng = np.random.default_rng(7)
    n = arcs // 10
    tail, head = rng.integers(0, n, arcs), rng.integers(0, n, arcs)
    tail[: arcs // 100], head[arcs // 100: arcs // 50] = 0, n - 1
    return orjson.dumps({"source": 0, "sink": n - 1, "arcs": {"from": tail, "to": head,
                                                                  "capacity": rng.integers(1, 100, arcs)}},
                        option=orjson.OPT_SERIALIZE_NUMPY)


def run(args) -> None:
    seconds = 15 if getattr(args, "quick", False) else int(os.environ.get("SLUICE_BENCH_SECONDS", "60"))
    medium = medium_body()
    bad = json.dumps({"source": "a", "sink": "a", "arcs": [{"from": "a", "to": "b", "capacity": -1}]}).encode()
    job = json.dumps({"kind": "maxflow", "problem": json.loads(DEPOTS)}).encode()
    stats: dict[str, list] = defaultdict(list)
    statuses: Counter = Counter()
    lock = threading.Lock()

    from service.api import create_app  # in-process floor for the small solve
    client = create_app({"data_dir": "/tmp/sluice-bench-floor"}).test_client()
    floor = []
    for _ in range(300):
        t0 = time.perf_counter()
        client.post("/v1/maxflow", data=DEPOTS, headers=JSON)
        floor.append(time.perf_counter() - t0)

    with served(workers=2, env={"SLUICE_RATE_LIMIT": "off"}) as server:
        url = server.url

        def one(session: requests.Session, name: str) -> int:
            if name == "small":
                return session.post(url + "/v1/maxflow", data=DEPOTS, headers=JSON, timeout=30).status_code
            if name == "medium":
                return session.post(url + "/v1/maxflow", data=medium, headers=JSON, timeout=30).status_code
            if name == "invalid":
                return session.post(url + "/v1/maxflow", data=bad, headers=JSON, timeout=30).status_code
            if name == "healthz":
                return session.get(url + "/healthz", timeout=30).status_code
            if name == "metrics":
                return session.get(url + "/metrics", timeout=30).status_code
            r = session.post(url + "/v1/jobs", data=job, headers=JSON, timeout=30)
            if r.status_code != 202:
                return r.status_code
            for _ in range(600):
                doc = session.get(url + r.headers["Location"], timeout=30)
                if doc.status_code != 200 or doc.json()["state"] in ("done", "failed", "cancelled"):
                    return doc.status_code if doc.json().get("state") == "done" else 599
                time.sleep(0.05)
            return 598

        mix = ["small"] * 12 + ["medium"] * 2 + ["job"] * 2 + ["invalid"] * 2 + ["healthz", "metrics"]

        def client_loop(seed: int, until: float):
            rnd = random.Random(seed)
            with requests.Session() as session:
                while time.monotonic() < until:
                    name = rnd.choice(mix)
                    t0 = time.perf_counter()
                    try:
                        status = one(session, name)
                    except requests.RequestException:
                        status = 0
                    with lock:
                        stats[name].append(time.perf_counter() - t0)
                        statuses[(name, status)] += 1

        warm_until = time.monotonic() + 5
        threads = [threading.Thread(target=client_loop, args=(i, warm_until)) for i in range(8)]
        [t.start() for t in threads]
        [t.join() for t in threads]
        workers = gunicorn_workers(server.proc.pid)
        rss_start = {w: rss_mb(w) for w in workers}
        stats.clear()
        statuses.clear()
        until = time.monotonic() + seconds
        started = time.monotonic()
        threads = [threading.Thread(target=client_loop, args=(100 + i, until)) for i in range(8)]
        series = {w: [] for w in workers}  # RSS every 10 s: growth that levels off vs keeps going

        def sample():
            while time.monotonic() < until:
                for w in workers:
                    series[w].append(rss_mb(w))
                time.sleep(10)
        threads.append(threading.Thread(target=sample))
        [t.start() for t in threads]
        [t.join() for t in threads]
        elapsed = time.monotonic() - started
        rss_end = {w: rss_mb(w) for w in workers}
        replaced = set(gunicorn_workers(server.proc.pid)) != set(workers)

    rows = []
    for name, times in sorted(stats.items()):
        times = sorted(times)
        rows.append((name, len(times), f"{len(times) / elapsed:.1f}", f"{statistics.median(times) * 1000:.1f}",
                     f"{times[int(0.99 * (len(times) - 1))] * 1000:.1f}"))
    table(rows, ("request", "count", "per s", "p50 ms", "p99 ms"))
    total = sum(len(t) for t in stats.values())
    fivexx = sum(n for (name, status), n in statuses.items() if status >= 500 or status == 0)
    print(f"{total} requests in {elapsed:.0f} s ({total / elapsed:.0f}/s) from 8 clients; 5xx or failed: {fivexx}")
    print("statuses:", dict(sorted((f"{k[0]}:{k[1]}", v) for k, v in statuses.items())))
    small_p50 = statistics.median(stats["small"]) if stats["small"] else float("nan")
    print(f"small solve: HTTP p50 {small_p50 * 1000:.2f} ms vs in-process test client "
          f"{statistics.median(floor) * 1000:.2f} ms ({small_p50 / statistics.median(floor):.1f}x)")
    for w in workers:
        print(f"worker {w}: RSS {rss_start[w]:.0f} MB after warm-up -> {rss_end.get(w, float('nan')):.0f} MB at end")
    for w, values in series.items():
        print(f"worker {w}: RSS every 10 s: {' '.join(f'{v:.0f}' for v in values)} MB")
    print("workers replaced during the run:", replaced)
    print("targets: zero 5xx; worker RSS growth small (< 10%) over the run")
