"""Problems are sized by their work, not their arcs; memory goes back after large solves.

A multi-commodity body of 2,000 arcs and 1,000 commodities is 150-180 KB, and an LP of
2M columns: sized by its arcs it ran inline on the request thread, and the worker grew
from about 110 MB to 1.7-2.3 GB and kept it, past the hard time limit. Sized by its flow
variables it runs in a killable solver process.
"""

from __future__ import annotations

import json
import os
import random
import threading
import time

import pytest

from service.api import create_app
from service.api.bounded import problem_size
from service.jobs.runner import SolverPool, unpack
from service.kinds import KINDS, Limits
from tests.conftest import RunningServer, scenario


def multicommodity_body(arcs: int, commodities: int, nodes: int = 200, seed: int = 7) -> dict:
    """Invented lanes: a ring of wide lanes (every sink reachable) and random narrow ones."""
    rng = random.Random(seed)
    ring = [{"from": i, "to": (i + 1) % nodes, "capacity": 10**6, "cost": 50} for i in range(nodes)]
    lanes = [{"from": i % nodes, "to": (i * 7 + 1 + i // nodes) % nodes, "capacity": rng.randint(50, 500),
              "cost": rng.randint(1, 9)} for i in range(arcs)]
    lanes = [a for a in lanes if a["from"] != a["to"]]
    goods = []
    for k in range(commodities):
        s = rng.randrange(nodes)
        goods.append({"id": k, "source": s, "sink": (s + rng.randrange(1, nodes)) % nodes, "demand": rng.randint(1, 5)})
    return {"arcs": (ring + lanes)[:arcs], "commodities": goods}


def parsed(name: str, body=None):
    kind = KINDS[name]
    return kind.parse(body if body is not None else scenario(kind.example), Limits())


def size(name: str, problem) -> int | None:
    return problem_size(KINDS[name], problem)


def test_every_kind_reports_the_work_of_its_problem():
    mc = parsed("multicommodity")
    assert size("multicommodity", mc) == mc.network.num_arcs * len(mc.commodity_ids) == 13 * 4
    assert size("maxflow", parsed("maxflow")) == 9 and size("mincostflow", parsed("mincostflow")) == 9
    lp = parsed("lp")
    assert size("lp", lp) == lp.model.matrix.nnz + len(lp.model.variables) == 9 + 3
    assignment = parsed("assignment")
    assert size("assignment", assignment) == assignment.cost.size
    big = parsed("multicommodity", multicommodity_body(2000, 1000))
    assert size("multicommodity", big) == 2_000_000  # 2M flow variables, not 2,000 arcs


def test_the_inline_threshold_counts_flow_variables(tmp_path):
    body = multicommodity_body(20, 10, nodes=8)  # 20 arcs, 200 flow variables
    app = create_app({"data_dir": str(tmp_path / "a"), "inline_max_arcs": 100})
    try:
        assert app.test_client().post("/v1/multicommodity", json=body).status_code == 200
        assert app.extensions["sluice.solver"].pool.pids()  # above 100: solved in a solver process
    finally:
        app.extensions["sluice.solver"].pool.close()
    app = create_app({"data_dir": str(tmp_path / "b"), "inline_max_arcs": 200})
    assert app.test_client().post("/v1/multicommodity", json=body).status_code == 200
    assert not app.extensions["sluice.solver"].pool.pids()  # at most 200: inline, no process started


def test_work_above_the_configured_limits_is_a_413_naming_the_limit(tmp_path):
    client = create_app({"data_dir": str(tmp_path), "max_arcs": 10_000}).test_client()
    r = client.post("/v1/multicommodity", json=multicommodity_body(200, 51))
    assert r.status_code == 413
    assert r.get_json()["errors"] == [{"pointer": "/commodities", "detail": "51 commodities x 200 arcs exceed the "
                                                                           "limit of 10000 flow variables"}]
    assert client.post("/v1/multicommodity", json=multicommodity_body(200, 50)).status_code == 200
    costs = [[1] * 101 for _ in range(100)]
    r = client.post("/v1/assignment", json={"agents": list(range(100)), "tasks": list(range(101)), "costs": costs})
    assert r.status_code == 413 and "the limit is 10000" in r.get_json()["detail"]
    n = 10_001
    lp = {"objective": {"sense": "min", "terms": {}}, "variables": {"name": [f"x{i}" for i in range(n)]}}
    r = client.post("/v1/lp", json=lp)
    assert r.status_code == 413 and "the limit is 10000" in r.get_json()["detail"]


def test_a_solver_process_past_its_memory_ceiling_is_replaced_after_its_solve():
    problem = parsed("multicommodity", multicommodity_body(2000, 60))
    message = ("solve", "multicommodity", problem, None)
    for ceiling, replaced in ((None, False), (1, True)):  # 1 MB: every process is past it
        pool = SolverPool(1, max_rss_mb=ceiling)
        try:
            first, _ = unpack(pool.run(message, wait=120))
            pids = pool.pids()
            second, _ = unpack(pool.run(message, wait=120))
            assert first["status"] == second["status"] == "optimal"
            assert pool.replaced == (2 if replaced else 0)
            if replaced:
                assert not set(pids) & set(pool.pids())
            else:
                assert pool.pids() == pids
        finally:
            pool.close()


# --- a real server, its worker's memory read from /proc ------------------------------

def _children(pid: int) -> list[int]:
    out = []
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                with open(f"/proc/{entry}/stat", "rb") as f:
                    if int(f.read().rsplit(b")", 1)[1].split()[1]) == pid:
                        out.append(int(entry))
            except (OSError, ValueError, IndexError):
                pass
    return out


def _rss_mb(pid: int) -> float:
    with open(f"/proc/{pid}/statm", "rb") as f:
        return int(f.read().split()[1]) * os.sysconf("SC_PAGE_SIZE") / (1 << 20)


def _is_solver(pid: int) -> bool:
    with open(f"/proc/{pid}/cmdline", "rb") as f:
        return b"service.jobs.child" in f.read()


class PeakWatch:
    """The largest resident size of a process while a block runs (sampled every 20 ms)."""

    def __init__(self, pid: int):
        self.pid, self.peak, self._stop = pid, _rss_mb(pid), threading.Event()

    def _run(self):
        while not self._stop.wait(0.02):
            self.peak = max(self.peak, _rss_mb(self.pid))

    def __enter__(self):
        self._thread = threading.Thread(target=self._run, daemon=True)
        self._thread.start()
        return self

    def __exit__(self, *exc):
        self._stop.set()
        self._thread.join()


@pytest.mark.server
@pytest.mark.skipif(not os.path.exists("/proc/self/statm"), reason="reads memory from /proc")
def test_a_small_body_with_a_large_lp_stays_out_of_the_worker(tmp_path):
    env = {"SLUICE_RATE_LIMIT": "off", "SLUICE_SOLVER_MAX_RSS_MB": "400", "SLUICE_SOLVER_PROCESSES": "1"}
    server = RunningServer(env=env, workers=1, data_dir=str(tmp_path / "data"))
    try:
        [worker] = [p for p in _children(server.proc.pid) if not _is_solver(p)]
        server.post("/v1/multicommodity", json=multicommodity_body(20, 2, nodes=8), timeout=60)
        time.sleep(0.5)
        baseline = _rss_mb(worker)
        huge = multicommodity_body(2000, 1000)
        huge["options"] = {"time_limit": 5}
        raw = json.dumps(huge)
        assert len(raw) < 200_000
        with PeakWatch(worker) as watch:
            started = time.monotonic()
            r = server.post("/v1/multicommodity", data=raw, timeout=120,
                              headers={"Content-Type": "application/json"})
            took = time.monotonic() - started
        # Solved within the limit, or stopped at it (5 s + GLOP's grace of 2.5 s; the
        # rest is the machine's load): never a solve on the request thread past it.
        assert r.status_code in (200, 504), r.text[:300]
        assert took < 25, took
        assert watch.peak < baseline + 200, (baseline, watch.peak)
        solvers = [p for p in _children(worker) if _is_solver(p)]
        assert all(_rss_mb(p) < 400 for p in solvers)  # the grown one was killed or replaced
        # A solve that grows its process past SLUICE_SOLVER_MAX_RSS_MB (400) is answered,
        # then the process is replaced by a fresh one.
        before = set(solvers)
        with PeakWatch(worker) as watch:
            r = server.post("/v1/multicommodity", json=multicommodity_body(2000, 300), timeout=120)
        assert r.status_code in (200, 504), r.text[:300]
        assert watch.peak < baseline + 200, (baseline, watch.peak)
        deadline = time.monotonic() + 30
        while time.monotonic() < deadline and (set(_children(worker)) & before or not _children(worker)):
            time.sleep(0.2)
        after = [p for p in _children(worker) if _is_solver(p)]
        assert after and not set(after) & before
        assert all(_rss_mb(p) < 400 for p in after)
    finally:
        server.stop()


@pytest.mark.server
@pytest.mark.skipif(not os.path.exists("/proc/self/statm"), reason="reads memory from /proc")
@pytest.mark.parametrize("retain_mb", [16, 1024])
def test_a_worker_keeps_at_most_its_retain_ceiling_after_a_large_request(tmp_path, retain_mb):
    env = {"SLUICE_RATE_LIMIT": "off", "SLUICE_WORKER_RETAIN_MB": str(retain_mb)}
    server = RunningServer(env=env, workers=1, data_dir=str(tmp_path / "data"))
    try:
        [worker] = [p for p in _children(server.proc.pid) if not _is_solver(p)]
        n = 300_000
        rng = random.Random(3)
        body = {"source": 0, "sink": 1, "options": {"cache": "bypass"},
                "arcs": [{"from": rng.randrange(n // 10), "to": rng.randrange(n // 10), "capacity": rng.randint(1, 99),
                          "key": f"lane-{i}"} for i in range(n)]}
        raw = json.dumps(body).encode()
        server.post("/v1/maxflow", json={"source": 0, "sink": 1, "arcs": [{"from": 0, "to": 1}]})
        time.sleep(0.5)
        baseline = _rss_mb(worker)
        with PeakWatch(worker) as watch:
            r = server.post("/v1/maxflow", data=raw, timeout=120,
                              headers={"Content-Type": "application/json"})
            time.sleep(0.5)  # post_request runs once the response is sent
        assert r.status_code == 200, r.text[:300]
        grew, kept = watch.peak - baseline, _rss_mb(worker) - baseline
        print(f"worker: baseline {baseline:.0f} MB, grew {grew:.0f} MB, kept {kept:.0f} MB (retain {retain_mb} MB)")
        assert grew > 60, grew  # the request did need the memory...
        if retain_mb == 16:
            assert kept < 16 + 16, (grew, kept)  # ...and gave it back (16 MB of slack: the allocator's own)
        else:
            assert kept > grew / 2, (grew, kept)  # ...and keeps it for the next one
    finally:
        server.stop()
