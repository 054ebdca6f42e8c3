"""The asyncio front (`sluice serve`) against gunicorn's threaded worker running the same
Flask app, taking turns in one run: a cache hit of a 7.2 MB body and a small solve.

Run: `python -m tests.perf front` (`--quick`: fewer rounds). Both servers have one
worker; the threaded one is `gunicorn -k gthread --threads 4 'service.api:create_app()'`
with the embedded defaults otherwise (what `sluice serve` ran before service.intake).
Reported per request: the wall-time median and the worker's CPU time (from /proc, the
figure a loaded machine disturbs least). Target: the hit no slower than the threaded
worker's.
"""

from __future__ import annotations

import os
import statistics
import subprocess
import sys
import tempfile
import time

import orjson
import requests

from tests.conftest import ROOT, RunningServer, free_port, scenario
from tests.opsutil import gunicorn_workers
from tests.perf.bench_store import depot_body
from tests.perf.harness import table

JSON = {"Content-Type": "application/json", "Accept-Encoding": "identity"}
THREADED_CONFIG = """
from service.serving import gunicorn_defaults
globals().update(gunicorn_defaults(port={port}, workers=1))
worker_class, threads = "gthread", 4
"""


def cpu_seconds(pid: int) -> float:
    fields = open(f"/proc/{pid}/stat").read().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


class ThreadedServer(RunningServer):
    """The same app under gunicorn's gthread worker."""

    def __init__(self, data_dir: str):
        self.port = free_port()
        self.url = f"http://127.0.0.1:{self.port}"
        self.config = tempfile.NamedTemporaryFile("w", suffix=".py", delete=False)
        self.config.write(THREADED_CONFIG.format(port=self.port))
        self.config.close()
        self.log = tempfile.TemporaryFile()
        env = {**os.environ, "SLUICE_RATE_LIMIT": "off", "SLUICE_DATA_DIR": data_dir}
        self.proc = subprocess.Popen([sys.executable, "-m", "gunicorn", "-c", self.config.name,
                                      "service.api:create_app()"], cwd=ROOT, env=env,
                                     stdout=subprocess.DEVNULL, stderr=self.log)
        try:
            self._wait_ready()
        except BaseException:
            self.stop()
            raise

    def stop(self) -> None:
        super().stop()
        os.unlink(self.config.name)


def measure(server, body: bytes, count: int, expect_status: str | None) -> tuple[float, float]:
    """(median wall seconds, worker CPU seconds per request) over ``count`` posts."""
    session = requests.Session()
    [worker] = gunicorn_workers(server.proc.pid)
    walls, c0 = [], cpu_seconds(worker)
    for _ in range(count):
        t0 = time.perf_counter()
        r = session.post(server.url + "/v1/maxflow", data=body, headers=JSON, timeout=60)
        walls.append(time.perf_counter() - t0)
        assert r.status_code == 200 and (expect_status is None or r.headers["Cache-Status"] == expect_status)
    return statistics.median(walls), (cpu_seconds(worker) - c0) / count


def run(args) -> None:
    rounds = 3 if args.quick else 6
    hit_body = orjson.dumps(depot_body(100_000, 1000))
    small = orjson.dumps({**scenario("depots-maxflow"), "options": {"cache": "bypass"}})
    results = {}
    with tempfile.TemporaryDirectory() as a, tempfile.TemporaryDirectory() as b:
        servers = {"asyncio front": RunningServer(env={"SLUICE_RATE_LIMIT": "off"}, workers=1, data_dir=a),
                   "threaded worker": ThreadedServer(b)}
        try:
            for server in servers.values():
                measure(server, hit_body, 1, None)  # stores the answer: the next posts are hits
            for _ in range(rounds):
                for name, server in servers.items():  # taking turns: the same passing load on both
                    for case, body, count, status in (("hit, 7.2 MB body", hit_body, 10, "sluice; hit"),
                                                      ("small solve", small, 200, None)):
                        results.setdefault((case, name), []).append(measure(server, body, count, status))
        finally:
            for server in servers.values():
                server.stop()
    rows = []
    for (case, name), values in sorted(results.items()):
        walls, cpus = zip(*values)
        rows.append((case, name, f"{statistics.median(walls) * 1000:.2f}", f"{statistics.median(cpus) * 1000:.2f}"))
    table(rows, ("request", "server", "wall median ms", "worker CPU ms"))
