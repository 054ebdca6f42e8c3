"""Jobs on Redis with RQ: `sluice serve` and `sluice worker` against a real Redis.

The shared Redis (127.0.0.1:6379) serves the job tests, each run under its own key
prefix and RQ queue. The outage test starts a private redis-server on a free port and
stops that one (never the shared server).
"""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import uuid

import pytest
import redis

from tests.conftest import ROOT, RunningServer, free_port, scenario
from tests.opsutil import alive, children, poll_job, wait_for
from tests.test_ops_processes import busy_solver, instance
from tests.references import max_flow_of

pytestmark = [pytest.mark.redis, pytest.mark.server]

DEPOTS = scenario("depots-maxflow")
ACME = {"Authorization": "Bearer acme-key-0001"}
BOLT = {"Authorization": "Bearer bolt-key-0002"}
JSON = {"Content-Type": "application/json"}


def start_worker(env: dict) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "service.cli", "worker"], cwd=ROOT, env={**os.environ, **env},
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)


def stop(proc: subprocess.Popen) -> None:
    if proc.poll() is None:
        proc.terminate()
        try:
            proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()


@pytest.fixture(scope="module")
def cluster(redis_url, tmp_path_factory):
    """A server and one worker on the shared Redis, under a prefix and queue of their own."""
    tag = uuid.uuid4().hex[:10]
    env = {"SLUICE_REDIS_URL": redis_url, "SLUICE_REDIS_PREFIX": f"sluice-test:{tag}:",
           "SLUICE_JOB_QUEUE": f"sluice-test-{tag}", "SLUICE_JOB_LEASE": "2", "SLUICE_RATE_LIMIT": "off",
           "SLUICE_API_KEYS": "acme:acme-key-0001,bolt:bolt-key-0002"}
    worker = start_worker(env)
    server = RunningServer(env=env, data_dir=str(tmp_path_factory.mktemp("redis-data")))
    yield server, worker, env
    server.stop()
    stop(worker)
    client = redis.Redis.from_url(redis_url)
    keys = list(client.scan_iter(match=f"sluice-test:{tag}:*")) + list(client.scan_iter(match=f"*sluice-test-{tag}*"))
    if keys:
        client.unlink(*keys)
    client.close()


def test_job_runs_on_a_worker_and_stays_with_its_tenant(cluster):
    server, worker, _ = cluster
    r = server.post("/v1/jobs", json={"kind": "maxflow", "problem": DEPOTS}, headers=ACME, timeout=10)
    assert r.status_code == 202
    location = r.headers["Location"]
    assert server.get(location, headers=BOLT, timeout=5).status_code == 404
    doc = poll_job(server.url, location, headers=ACME, timeout=60)
    assert doc["state"] == "done" and doc["result"]["value"] == max_flow_of(DEPOTS)
    assert server.get("/readyz", timeout=10).json()["checks"]["redis"] == "ok"
    assert "sluice_job_queue_depth 0.0" in server.get("/metrics", timeout=5).text


def test_cancel_stops_the_worker_computation(cluster):
    server, worker, _ = cluster
    body, _ = instance("large")
    r = server.post("/v1/jobs", data=b'{"kind":"maxflow","problem":' + body + b"}",
                      headers={**JSON, **ACME}, timeout=60)
    location = r.headers["Location"]
    poll_job(server.url, location, states=("running",), headers=ACME, timeout=60)
    solver = busy_solver(worker.pid)  # worker -> work horse -> solver process
    assert server.delete(location, headers=ACME, timeout=10).status_code in (200, 202)
    assert poll_job(server.url, location, headers=ACME, timeout=15)["state"] == "cancelled"
    wait_for(lambda: not alive(solver), 5, 0.05, "the solver process to die")


def test_a_worker_killed_mid_job_leaves_it_failed(cluster):
    server, worker, _ = cluster
    body, _ = instance("medium")
    r = server.post("/v1/maxflow", data=body, headers={**JSON, **ACME, "Prefer": "respond-async"},
                      timeout=60)
    location = r.headers["Location"]
    poll_job(server.url, location, states=("running",), headers=ACME, timeout=60)
    horses = children(worker.pid)
    for pid in [worker.pid, *horses]:  # the whole worker host is lost: worker and work horse
        os.kill(pid, signal.SIGKILL)
    worker.wait()
    doc = poll_job(server.url, location, headers=ACME, timeout=20)  # lease of 2 s runs out
    assert doc["state"] == "failed" and doc["error"]["type"].endswith(":worker-lost")


@pytest.fixture
def private_redis(tmp_path):
    binary = shutil.which("redis-server")
    if binary is None:
        if os.environ.get("CI") == "true":
            pytest.fail("redis-server is not installed (.ci/ensure-redis installs it)")
        pytest.skip("redis-server is not installed; run .ci/ensure-redis")
    port = free_port()
    proc = subprocess.Popen([binary, "--port", str(port), "--bind", "127.0.0.1", "--save", "", "--appendonly", "no",
                             "--dir", str(tmp_path)], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    url = f"redis://127.0.0.1:{port}/0"
    client = redis.Redis.from_url(url, socket_connect_timeout=0.5)

    def up():
        try:
            return client.ping()
        except redis.RedisError:
            return False
    wait_for(up, 10, 0.1, "the private redis-server")
    yield proc, url
    stop(proc)


def test_synchronous_solves_keep_answering_when_redis_stops(private_redis, tmp_path):
    proc, url = private_redis
    server = RunningServer(env={"SLUICE_REDIS_URL": url, "SLUICE_RATE_LIMIT": "1000/minute"},
                           data_dir=str(tmp_path / "data"))
    try:
        value = max_flow_of(DEPOTS)
        assert server.post("/v1/maxflow", json=DEPOTS, timeout=10).json()["value"] == value
        assert server.post("/v1/jobs", json={"kind": "maxflow", "problem": DEPOTS},
                             timeout=10).status_code == 202
        stop(proc)  # our own redis-server, not the shared one
        for _ in range(6):
            r = server.post("/v1/maxflow", json=DEPOTS, timeout=10)
            assert r.status_code == 200 and r.json()["value"] == value
        r = server.post("/v1/jobs", json={"kind": "maxflow", "problem": DEPOTS}, timeout=10)
        assert r.status_code == 503 and int(r.headers["Retry-After"]) >= 1
        ready = server.get("/readyz", timeout=10)
        assert ready.status_code == 200 and ready.json()["status"] == "degraded"
        assert server.get("/metrics", timeout=10).status_code == 200
    finally:
        server.stop()
