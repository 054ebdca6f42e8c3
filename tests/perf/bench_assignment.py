"""Assignment: a dense 1000 x 1000 matrix against SciPy in-process; 10 x 10 dispatch throughput.

* dense: scipy.optimize.linear_sum_assignment in-process against the service's solve
  (in-process, and end to end over HTTP with duals and certificate).
* dispatch: requests per second of POST /v1/assignment with a 10 x 10 matrix against
  GET /healthz on the same server, both with wrk (32 connections, a few seconds,
  loopback). Target (issue 3): at least 0.5x.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import tempfile

import numpy as np
import orjson
import requests
from scipy.optimize import linear_sum_assignment

from service.solvers.assignment import solve_assignment
from tests.perf.harness import best_of, post_json, served, table

WRK_SECONDS = 5


def dense_matrix(n: int, seed: int = 0) -> np.ndarray:
    return np.random.default_rng(seed).integers(0, 1000, (n, n)).astype(np.int64)


def dispatch_body(seed: int = 1) -> bytes:
    costs = np.random.default_rng(seed).integers(1, 90, (10, 10))
    return orjson.dumps({"agents": [f"van-{i}" for i in range(10)], "tasks": [f"drop-{j}" for j in range(10)],
                         "costs": costs.tolist()})


def wrk(url: str, body: bytes | None = None) -> float:
    """Requests per second reported by wrk (2 threads, 32 connections)."""
    cmd = ["wrk", "-t2", "-c32", f"-d{WRK_SECONDS}s", url]
    with tempfile.NamedTemporaryFile("w", suffix=".lua") as script:
        if body is not None:
            script.write('wrk.method = "POST"\nwrk.headers["Content-Type"] = "application/json"\n'
                         f"wrk.body = {orjson.dumps(body.decode()).decode()}\n")
            script.flush()
            cmd[1:1] = ["-s", script.name]
        out = subprocess.run(cmd, capture_output=True, text=True, timeout=WRK_SECONDS + 30).stdout
    if "Non-2xx" in out:
        raise RuntimeError(f"wrk saw errors:\n{out}")
    return float(re.search(r"Requests/sec:\s+([\d.]+)", out).group(1))


def run(args) -> None:
    n = 300 if args.quick else 1000
    matrix = dense_matrix(n)
    rows_idx = np.repeat(np.arange(n, dtype=np.int32), n)
    cols_idx = np.tile(np.arange(n, dtype=np.int32), n)
    scipy_s = best_of(lambda: linear_sum_assignment(matrix), 3)
    ours = []
    inproc_s = best_of(lambda: ours.append(solve_assignment(n, n, rows_idx, cols_idx, matrix.ravel(), dense=True)),
                       3)
    r, c = linear_sum_assignment(matrix)
    assert ours[-1][0].total == matrix[r, c].sum()
    body = orjson.dumps({"agents": list(range(n)), "tasks": list(range(n)), "costs": matrix,
                         "options": {"cache": "bypass"}}, option=orjson.OPT_SERIALIZE_NUMPY)
    with served(workers=1) as server:
        session = requests.Session()
        e2e_s = best_of(lambda: post_json(session, server.url + "/v1/assignment", body), 3)
    print(f"dense {n} x {n} assignment (service with duals + certificate) vs SciPy in-process")
    table([(f"{n}x{n}", f"{scipy_s * 1000:.0f}", f"{inproc_s * 1000:.0f}", f"{e2e_s * 1000:.0f}",
            f"{inproc_s / scipy_s:.2f}x", f"{e2e_s / scipy_s:.2f}x", ours[-1][0].engine["solver"])],
          ("matrix", "scipy ms", "service in-process ms", "HTTP e2e ms", "in-proc/scipy", "e2e/scipy", "solver"))

    if shutil.which("wrk") is None:
        print("\n10x10 dispatch throughput: wrk is not installed (Debian package 'wrk'); skipped")
        return
    with served() as server:  # the default worker count: one per core
        body = dispatch_body()
        check = requests.post(server.url + "/v1/assignment", data=body,
                              headers={"Content-Type": "application/json"}, timeout=10)
        assert check.status_code == 200 and check.json()["certificate"]["checked"]
        wrk(server.url + "/healthz")  # warm-up
        health = wrk(server.url + "/healthz")
        dispatch = wrk(server.url + "/v1/assignment", body)
    print(f"\n10x10 assignment throughput with wrk (-t2 -c32 -d{WRK_SECONDS}s, loopback, wrk on the same 2 cores)")
    table([(f"{health:.0f}", f"{dispatch:.0f}", f"{dispatch / health:.2f}x")],
          ("GET /healthz req/s", "POST /v1/assignment 10x10 req/s", "ratio"))
    print("(shared 2-core machine: figures are noisy)")
