"""A bounded load test on loopback with wrk: 64 connections, mixed endpoints, 60 s, with
and without 300 stalled clients alongside; zero 5xx, worker memory stable.

Run: `python -m tests.perf load` (`--quick`: 10 s a phase). Needs wrk (Debian's
package; installed here with apt-get when missing and running as root). Starts its own
`sluice serve` (2 workers, rate limit off) and runs two phases of the same load:

1. plain: two wrk processes at once, 48 connections on the mix below and 16 on small
   solves only (the p99 of small solves comes from those);
2. the same, while 300 clients hold uploads open after one byte of their bodies (a
   client whose upload the service cut with a 408 reconnects and stalls again).

The mix (every solve bypasses the result cache, so every one is solved): 70 % small
max-flow (the depot scenario, inline), 3 % medium max-flow (30k arcs, a solver
process), 12 % invalid bodies (422 by design), 10 % /healthz, 5 % /metrics.
Errors are socket errors, timeouts and statuses other than 200 and 422.

Baseline in the same run: the small solve through the Flask test client in this
process (no HTTP, no gunicorn). Target: the p99 of small solves with 300 stalled
clients within 2x of the p99 without them.
"""

from __future__ import annotations

import json
import os
import selectors
import shutil
import socket
import statistics
import subprocess
import tempfile
import threading
import time
from pathlib import Path

import numpy as np
import orjson

from tests.conftest import scenario
from tests.opsutil import gunicorn_workers, rss_mb
from tests.perf.harness import served, table

DEPOTS = scenario("depots-maxflow")
STALLED = 300

LUA = r"""
local function read(name)
  local f = assert(io.open("%(folder)s/" .. name, "rb"))
  local data = f:read("*a")
  f:close()
  return data
end

local small, medium, invalid = read("small"), read("medium"), read("invalid")
local json = {["Content-Type"] = "application/json"}
local only_small = %(only_small)s
counts = {}

request = function()
  if only_small then return wrk.format("POST", "/v1/maxflow", json, small) end
  local r = math.random(100)
  if r <= 70 then return wrk.format("POST", "/v1/maxflow", json, small)
  elseif r <= 73 then return wrk.format("POST", "/v1/maxflow", json, medium)
  elseif r <= 85 then return wrk.format("POST", "/v1/maxflow", json, invalid)
  elseif r <= 95 then return wrk.format("GET", "/healthz")
  else return wrk.format("GET", "/metrics") end
end

response = function(status, headers, body)
  counts[status] = (counts[status] or 0) + 1
end

local threads = {}
setup = function(thread) table.insert(threads, thread) end

done = function(summary, latency, requests)
  local statuses = {}
  for _, t in ipairs(threads) do
    for status, n in pairs(t:get("counts")) do statuses[status] = (statuses[status] or 0) + n end
  end
  local parts = {}
  for status, n in pairs(statuses) do table.insert(parts, string.format('"%%d": %%d', status, n)) end
  local e = summary.errors
  io.write(string.format('RESULT {"requests": %%d, "seconds": %%f, "p50_ms": %%f, "p99_ms": %%f, ' ..
    '"socket_errors": %%d, "statuses": {%%s}}\n', summary.requests, summary.duration / 1e6,
    latency:percentile(50) / 1000, latency:percentile(99) / 1000,
    e.connect + e.read + e.write + e.timeout, table.concat(parts, ", ")))
end
"""


def ensure_wrk() -> str:
    """Path of wrk, installing Debian's package first when it is missing (as root)."""
    if shutil.which("wrk") is None and os.geteuid() == 0 and shutil.which("apt-get"):
        subprocess.run(["apt-get", "install", "-y", "-qq", "wrk"], check=False, capture_output=True)
        if shutil.which("wrk") is None:
            subprocess.run(["apt-get", "update", "-qq"], check=False, capture_output=True)
            subprocess.run(["apt-get", "install", "-y", "-qq", "wrk"], check=False, capture_output=True)
    path = shutil.which("wrk")
    if path is None:
        raise SystemExit("bench load: wrk is not installed (apt-get install wrk)")
    return path


def medium_body(arcs: int = 30_000) -> bytes:
    rng = np.random.default_rng(7)
    n = arcs // 10
    tail, head = rng.integers(0, n, arcs), rng.integers(0, n, arcs)
    tail[: arcs // 100], head[arcs // 100: arcs // 50] = 0, n - 1
    return orjson.dumps({"source": 0, "sink": n - 1, "options": {"cache": "bypass"},
                         "arcs": {"from": tail, "to": head, "capacity": rng.integers(1, 100, arcs)}},
                        option=orjson.OPT_SERIALIZE_NUMPY)


def write_bodies(folder: Path) -> bytes:
    small = orjson.dumps({**DEPOTS, "options": {"cache": "bypass"}})
    (folder / "small").write_bytes(small)
    (folder / "medium").write_bytes(medium_body())
    (folder / "invalid").write_bytes(json.dumps(
        {"source": "a", "sink": "a", "arcs": [{"from": "a", "to": "b", "capacity": -1}]}).encode())
    return small


def wrk_script(folder: Path, only_small: bool) -> Path:
    path = folder / ("small.lua" if only_small else "mix.lua")
    path.write_text(LUA % {"folder": folder, "only_small": "true" if only_small else "false"})
    return path


def run_wrk(wrk: str, url: str, script: Path, connections: int, threads: int, seconds: int) -> dict:
    out = subprocess.run([wrk, "-t", str(threads), "-c", str(connections), "-d", f"{seconds}s", "--timeout", "10s",
                          "-s", str(script), url], capture_output=True, text=True, timeout=seconds + 60)
    line = next((l for l in out.stdout.splitlines() if l.startswith("RESULT ")), None)
    if line is None:
        raise RuntimeError(f"wrk printed no result: {out.stdout[-1000:]} {out.stderr[-1000:]}")
    result = json.loads(line[len("RESULT "):])
    statuses = {int(k): v for k, v in result["statuses"].items()}
    result["errors"] = result["socket_errors"] + sum(n for s, n in statuses.items() if s not in (200, 422))
    result["statuses"] = statuses
    return result


class StalledClients:
    """``count`` uploads held open after one byte of their bodies; one the service
    closes (its 408) is replaced by a new one, until stopped."""

    def __init__(self, port: int, count: int):
        self.port, self.count = port, count
        self.stop, self.replaced, self.answers = threading.Event(), 0, {}
        self.thread = threading.Thread(target=self._run, daemon=True)

    def _open(self, selector) -> None:
        s = socket.create_connection(("127.0.0.1", self.port), timeout=10)
        s.sendall(b"POST /v1/maxflow HTTP/1.1\r\nHost: bench\r\nContent-Type: application/json\r\n"
                  b"Content-Length: 1000000\r\n\r\n{")
        s.setblocking(False)
        selector.register(s, selectors.EVENT_READ)

    def _run(self) -> None:
        selector = selectors.DefaultSelector()
        for _ in range(self.count):
            self._open(selector)
        while not self.stop.is_set():
            for key, _ in selector.select(timeout=0.5):
                s = key.fileobj
                try:
                    data = s.recv(4096)
                except OSError:
                    data = b""
                status = data[9:12].decode(errors="replace") if data.startswith(b"HTTP/1.1 ") else "closed"
                self.answers[status] = self.answers.get(status, 0) + 1
                selector.unregister(s)
                s.close()
                self.replaced += 1
                self._open(selector)
        for key in list(selector.get_map().values()):
            key.fileobj.close()
        selector.close()

    def __enter__(self):
        self.thread.start()
        time.sleep(1.0)  # every client connected and stalled before the load starts
        return self

    def __exit__(self, *exc):
        self.stop.set()
        self.thread.join()


def phase(wrk: str, url: str, folder: Path, seconds: int) -> tuple[dict, dict]:
    """The mix on 48 connections and small solves on 16, at the same time."""
    results = {}

    def one(name, only_small, connections, threads):
        results[name] = run_wrk(wrk, url, wrk_script(folder, only_small), connections, threads, seconds)

    runners = [threading.Thread(target=one, args=("mix", False, 48, 2)),
               threading.Thread(target=one, args=("small", True, 16, 1))]
    [t.start() for t in runners]
    [t.join() for t in runners]
    return results["mix"], results["small"]


def run(args) -> None:
    seconds = 10 if getattr(args, "quick", False) else int(os.environ.get("SLUICE_BENCH_SECONDS", "60"))
    wrk = ensure_wrk()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        small = write_bodies(folder)

        from service.api import create_app  # in-process floor for the small solve
        client = create_app({"data_dir": str(folder / "floor")}).test_client()
        floor = []
        for _ in range(300):
            t0 = time.perf_counter()
            client.post("/v1/maxflow", data=small, headers={"Content-Type": "application/json"})
            floor.append(time.perf_counter() - t0)

        with served(workers=2, env={"SLUICE_RATE_LIMIT": "off"}, data_dir=str(folder / "data")) as server:
            phase(wrk, server.url, folder, 5)  # warm-up
            workers = gunicorn_workers(server.proc.pid)
            rss_start = {w: rss_mb(w) for w in workers}
            plain = phase(wrk, server.url, folder, seconds)
            with StalledClients(server.port, STALLED) as stalled:
                crowded = phase(wrk, server.url, folder, seconds)
            rss_end = {w: rss_mb(w) for w in workers}
            replaced = set(gunicorn_workers(server.proc.pid)) != set(workers)

    rows = []
    for label, (mix, only) in (("no stalled clients", plain), (f"{STALLED} stalled clients", crowded)):
        for name, r in (("mix, 48 conns", mix), ("small solves, 16 conns", only)):
            rows.append((label, name, r["requests"], f"{r['requests'] / r['seconds']:.0f}", f"{r['p50_ms']:.1f}",
                         f"{r['p99_ms']:.1f}", r["errors"]))
    table(rows, ("phase", "wrk", "requests", "per s", "p50 ms", "p99 ms", "errors"))
    for label, (mix, only) in (("plain", plain), ("stalled", crowded)):
        print(f"statuses, {label}: mix {dict(sorted(mix['statuses'].items()))}, "
              f"small {dict(sorted(only['statuses'].items()))}")
    print(f"stalled clients: {stalled.replaced} uploads cut and replaced during the phase, answers "
          f"{dict(sorted(stalled.answers.items()))}")
    ratio = crowded[1]["p99_ms"] / plain[1]["p99_ms"]
    print(f"small solve p99: {crowded[1]['p99_ms']:.1f} ms with {STALLED} stalled clients vs "
          f"{plain[1]['p99_ms']:.1f} ms without: {ratio:.2f}x (target <= 2)")
    print(f"small solve p50 over HTTP {plain[1]['p50_ms']:.2f} ms vs in-process test client "
          f"{statistics.median(floor) * 1000:.2f} ms")
    for w in workers:
        print(f"worker {w}: RSS {rss_start[w]:.0f} MB after warm-up -> {rss_end.get(w, float('nan')):.0f} MB at end")
    print("workers replaced during the run:", replaced)
    print("targets: zero errors; p99 ratio <= 2; worker RSS growth small (< 10%)")
