"""Helpers of the operations tests: slow max-flow instances, an outside reference, polling."""

from __future__ import annotations

import os
import time
from pathlib import Path

import numpy as np
import orjson
import requests
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import maximum_flow


def layered(layers: int, width: int, degree: int = 2, seed: int = 0):
    """A layered network (node 0 source, node 1 sink) on which push-relabel is slow:
    ``layers x width`` inner nodes, ``degree`` random arcs from each node to the next
    layer. Invented test data. (1000 x 200 x 2: 400k arcs, about 1 s of OR-Tools here.)"""
    rng = np.random.default_rng(seed)
    base = 2 + np.arange(layers * width).reshape(layers, width)
    tails = [np.zeros(width, np.int64)] + [np.repeat(base[i], degree) for i in range(layers - 1)] + [base[-1]]
    heads = [base[0]] + [base[i + 1][rng.integers(0, width, width * degree)] for i in range(layers - 1)] + \
        [np.ones(width, np.int64)]
    tail, head = np.concatenate(tails), np.concatenate(heads)
    cap = rng.integers(1, 100, tail.size)
    return 2 + layers * width, tail, head, cap


def columnar_body(tail, head, cap, **extra) -> bytes:
    return orjson.dumps({"source": 0, "sink": 1, "arcs": {"from": tail, "to": head, "capacity": cap}, **extra},
                        option=orjson.OPT_SERIALIZE_NUMPY)


def scipy_max_flow(n, tail, head, cap) -> int:
    """Reference value: scipy.sparse.csgraph.maximum_flow (parallel arcs summed by csr_matrix)."""
    keep = tail != head
    graph = csr_matrix((cap[keep].astype(np.int32), (tail[keep], head[keep])), shape=(n, n))
    return int(maximum_flow(graph, 0, 1).flow_value)


def wait_for(predicate, timeout: float = 30.0, every: float = 0.1, what: str = "condition"):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        value = predicate()
        if value:
            return value
        time.sleep(every)
    raise AssertionError(f"timed out after {timeout} s waiting for {what}")


def poll_job(base_url: str, location: str, states=("done", "failed", "cancelled"), timeout: float = 60.0,
             headers: dict | None = None) -> dict:
    def check():
        doc = requests.get(base_url + location, headers=headers, timeout=10).json()
        return doc if doc["state"] in states else None
    return wait_for(check, timeout, 0.1, f"job {location} to reach {states}")


def children(pid: int) -> list[int]:
    out = []
    for task in Path(f"/proc/{pid}/task").iterdir():
        try:
            out += [int(c) for c in (task / "children").read_text().split()]
        except FileNotFoundError:
            pass
    return out


def cmdline(pid: int) -> str:
    try:
        return Path(f"/proc/{pid}/cmdline").read_bytes().replace(b"\0", b" ").decode()
    except FileNotFoundError:
        return ""


def alive(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except FileNotFoundError:
        return False
    return state != "Z"


def solver_children(pid: int) -> list[int]:
    return [c for c in children(pid) if "service.jobs.child" in cmdline(c)]


def gunicorn_workers(master: int) -> list[int]:
    return [c for c in children(master) if alive(c)]


def rss_mb(pid: int) -> float:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1]) / 1024
    return float("nan")


def signal_safe_kill(pid: int, sig) -> None:
    try:
        os.kill(pid, sig)
    except ProcessLookupError:
        pass
