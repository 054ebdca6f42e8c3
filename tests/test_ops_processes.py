"""Real processes: hard time limits, jobs, a worker killed mid-solve, SIGTERM, restarts.

Every test here runs `sluice serve` (gunicorn with its solver processes) as a child of
the test; nothing is mocked. Reference values come from scipy.sparse.csgraph.maximum_flow.
"""

from __future__ import annotations

import json

import signal
import threading
import time

import pytest
import requests

from tests.conftest import RunningServer, scenario
from tests.opsutil import (alive, columnar_body, gunicorn_workers, layered, poll_job, scipy_max_flow,
                           solver_children, wait_for)
from tests.references import max_flow_of

pytestmark = pytest.mark.server

DEPOTS = scenario("depots-maxflow")
DEPOTS_VALUE = max_flow_of(DEPOTS)  # networkx.maximum_flow_value
JSON = {"Content-Type": "application/json"}
_CACHE: dict = {}


def instance(name: str):
    """(body, scipy reference value) of a slow max-flow instance, built once per session.
    medium: 400k arcs, 0.15-1 s of OR-Tools here; large: 1.6M arcs, about 3-4 s."""
    if name not in _CACHE:
        n, t, h, c = {"medium": lambda: layered(1000, 200), "large": lambda: layered(4000, 200)}[name]()
        # The large one is only ever cancelled: no reference value needed (scipy takes long on it).
        # These tests are about solving: the result cache must not answer them.
        _CACHE[name] = (columnar_body(t, h, c, options={"cache": "bypass"}), scipy_max_flow(n, t, h, c) if name == "medium" else None)
    return _CACHE[name]


def _state(pid: int) -> str | None:
    try:
        return open(f"/proc/{pid}/stat").read().rsplit(")", 1)[1].split()[0]
    except FileNotFoundError:
        return None


def settled(master: int, timeout: float = 60.0) -> None:
    """Wait until every worker has a warm solver process that has finished starting (asleep)."""
    def check():
        workers = gunicorn_workers(master)
        kids = [solver_children(w) for w in workers]
        return workers and all(kids) and all(_state(k) == "S" for ks in kids for k in ks)
    wait_for(check, timeout, 0.1, "warm solver processes")


def busy_solver(master: int, timeout: float = 30.0) -> int:
    """The pid of a solver process that is computing (state R) under this server."""
    def find():
        for worker in gunicorn_workers(master):
            for child in solver_children(worker):
                if _state(child) == "R":
                    return child
        return None
    return wait_for(find, timeout, 0.02, "a busy solver process")


@pytest.fixture(scope="module")
def tight(tmp_path_factory):
    """A server whose synchronous limit is 0.2 s."""
    srv = RunningServer(env={"SLUICE_TIME_LIMIT": "0.2", "SLUICE_RATE_LIMIT": "off", "SLUICE_JOB_LEASE": "2"},
                        data_dir=str(tmp_path_factory.mktemp("tight")))
    yield srv
    srv.stop()


def test_sync_solve_past_the_limit_is_504_and_the_worker_stays(tight):
    # The large instance: the exact max-flow now solves the medium one in 0.15-0.5 s
    # here, sometimes inside the 0.2 s limit.
    body, _ = instance("large")
    workers = sorted(gunicorn_workers(tight.proc.pid))
    started = time.monotonic()
    r = tight.post("/v1/maxflow", data=body, headers=JSON, timeout=60)
    assert r.status_code == 504 and r.headers["Content-Type"] == "application/problem+json"
    doc = r.json()
    assert doc["type"].endswith(":time-limit") and "POST /v1/jobs" in doc["detail"] and "0.2 s" in doc["detail"]
    assert time.monotonic() - started < 10  # killed at the limit (plus the upload), not after the solve
    assert tight.get("/healthz", timeout=5).status_code == 200
    for _ in range(4):  # both workers answer, small solves inline
        assert tight.post("/v1/maxflow", json=DEPOTS, timeout=10).json()["value"] == DEPOTS_VALUE
    assert sorted(gunicorn_workers(tight.proc.pid)) == workers  # no worker was replaced
    metrics = tight.get("/metrics", timeout=5).text
    assert 'sluice_solve_timeouts_total{kind="maxflow"} 1.0' in metrics


def test_a_stored_network_question_past_the_limit_is_the_documented_504(tight):
    """A what-if runs the same bounded solve: past the limit it is a 504 time-limit, which
    the document lists for the what-if routes too (RunningServer checks every answer)."""
    doc = json.loads(instance("large")[0])
    ends = {"source": doc.pop("source"), "sink": doc.pop("sink"), "options": doc.pop("options")}
    assert tight.put("/v1/networks/layered-large", json=doc, timeout=120).status_code == 201
    r = tight.post("/v1/networks/layered-large/maxflow", json=ends, timeout=60)
    assert r.status_code == 504 and r.json()["type"].endswith(":time-limit"), r.text[:300]


def test_the_same_problem_as_a_job_finishes(tight):
    body, reference = instance("medium")
    r = tight.post("/v1/maxflow", data=body, headers={**JSON, "Prefer": "respond-async"}, timeout=60)
    assert r.status_code == 202 and r.headers["Preference-Applied"] == "respond-async"
    doc = poll_job(tight.url, r.headers["Location"], timeout=120)
    assert doc["state"] == "done", doc
    assert doc["result"]["value"] == reference and doc["result"]["certificate"]["checked"] is True
    assert doc["time_limit"] == 600


def test_cancel_kills_the_running_computation(tight):
    body, _ = instance("large")
    r = tight.post("/v1/jobs", data=b'{"kind":"maxflow","problem":' + body + b"}",
                      headers=JSON, timeout=60)
    assert r.status_code == 202
    location = r.headers["Location"]
    poll_job(tight.url, location, states=("running",), timeout=60)
    solver = busy_solver(tight.proc.pid)
    r = tight.delete(location, timeout=10)
    assert r.status_code in (200, 202)
    doc = poll_job(tight.url, location, timeout=10)
    assert doc["state"] == "cancelled" and "result" not in doc
    wait_for(lambda: not alive(solver), 5, 0.05, "the cancelled job's solver process to die")


@pytest.fixture(scope="module")
def single(tmp_path_factory):
    """One gunicorn worker, the default time limit, short job leases."""
    srv = RunningServer(env={"SLUICE_RATE_LIMIT": "off", "SLUICE_JOB_LEASE": "2"}, workers=1,
                        data_dir=str(tmp_path_factory.mktemp("single")))
    yield srv
    srv.stop()


def _replacement(master: int, old: int) -> int:
    return wait_for(lambda: next((w for w in gunicorn_workers(master) if w != old), None), 30, 0.1,
                    "a replacement worker")


def test_kill_9_of_a_worker_during_a_solve(single):
    body, reference = instance("medium")
    settled(single.proc.pid)
    [worker] = gunicorn_workers(single.proc.pid)
    outcome = {}

    def post():
        try:
            outcome["status"] = single.post("/v1/maxflow", data=body, headers=JSON,
                                              timeout=60).status_code
        except requests.RequestException as exc:
            outcome["error"] = exc
    thread = threading.Thread(target=post)
    thread.start()
    solver = busy_solver(single.proc.pid)
    signal_kill(worker)
    thread.join(30)
    assert "error" in outcome  # that request died with its worker...
    _replacement(single.proc.pid, worker)
    wait_for(lambda: not alive(solver), 5, 0.05, "the dead worker's solver process to die with it")
    wait_for(lambda: _healthy(single.url), 30, 0.2, "the new worker")
    # ...and the next requests succeed, small (inline) and large (solver process).
    assert single.post("/v1/maxflow", json=DEPOTS, timeout=10).json()["value"] == DEPOTS_VALUE
    r = single.post("/v1/maxflow", data=body, headers=JSON, timeout=60)
    assert r.status_code == 200 and r.json()["value"] == reference


def test_kill_9_of_a_worker_during_a_job_retries_it(single):
    body, reference = instance("medium")
    r = single.post("/v1/maxflow", data=body, headers={**JSON, "Prefer": "respond-async"}, timeout=60)
    location = r.headers["Location"]
    poll_job(single.url, location, states=("running",), timeout=60)
    [worker] = gunicorn_workers(single.proc.pid)
    signal_kill(worker)
    _replacement(single.proc.pid, worker)
    doc = poll_job(single.url, location, timeout=120)  # lease (2 s) runs out, the job is queued again
    assert doc["state"] == "done" and doc["attempts"] == 2 and doc["result"]["value"] == reference


def test_sigterm_lets_the_request_in_flight_finish(single):
    body, reference = instance("medium")
    settled(single.proc.pid)
    outcome = {}

    def post():
        r = single.post("/v1/maxflow", data=body, headers=JSON, timeout=60)
        outcome["status"], outcome["value"] = r.status_code, r.json().get("value")
    thread = threading.Thread(target=post)
    thread.start()
    busy_solver(single.proc.pid)
    single.proc.send_signal(signal.SIGTERM)
    thread.join(60)
    assert outcome == {"status": 200, "value": reference}
    assert single.proc.wait(timeout=60) == 0


def test_jobs_survive_a_restart(tmp_path):
    data = str(tmp_path / "data")
    first = RunningServer(env={"SLUICE_JOB_WORKERS": "0"}, workers=1, data_dir=data)  # accepts, never runs
    try:
        locations = [first.post("/v1/jobs", json={"kind": "maxflow", "problem": DEPOTS},
                                   timeout=10).headers["Location"] for _ in range(2)]
        assert all(first.get(loc, timeout=5).json()["state"] == "queued" for loc in locations)
    finally:
        first.stop()
    second = RunningServer(workers=1, data_dir=data)
    try:
        for loc in locations:
            doc = poll_job(second.url, loc, timeout=60)
            assert doc["state"] == "done" and doc["result"]["value"] == DEPOTS_VALUE
    finally:
        second.stop()


def _healthy(url: str) -> bool:
    try:
        return requests.get(url + "/healthz", timeout=2).status_code == 200
    except requests.RequestException:
        return False


def signal_kill(pid: int) -> None:
    import os

    os.kill(pid, signal.SIGKILL)
