"""The README's scale-out guide, from its own install command, on one machine.

A fresh virtual environment gets a plain ``pip install .`` of a copy of this checkout
(no extras, no test tools: what the README tells an operator to run). From that
install: two ``sluice serve`` on one Redis (a key prefix and queue of this test alone)
and one ``sluice worker``. A network stored through one instance is served by the
other, a result cached by one is a hit on the other, and a job submitted to one is read,
done by the worker, from the other.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import uuid
from pathlib import Path

import pytest
import redis

from tests.conftest import ROOT, RunningServer, scenario
from tests.opsutil import poll_job
from tests.test_redis_ops import stop

pytestmark = [pytest.mark.redis, pytest.mark.server]

README = (ROOT / "README.md").read_text()
DEPOTS = scenario("depots-maxflow")
JSON = {"Content-Type": "application/json"}


def scale_out_block() -> str:
    """The command block of the README's "Many hosts (Redis)" section."""
    section = README.split("### Many hosts (Redis)", 1)[1].split("\n### ", 1)[0]
    return section.split("```sh\n", 1)[1].split("```", 1)[0]


def test_the_readme_guide_is_what_this_test_runs():
    block = scale_out_block()
    assert "python3 -m venv /opt/sluice && /opt/sluice/bin/pip install ." in block
    assert "SLUICE_REDIS_URL=" in block
    assert "/opt/sluice/bin/sluice serve" in block and "/opt/sluice/bin/sluice worker" in block


def test_the_plain_install_needs_no_extra_for_the_redis_backends():
    """pyproject's runtime dependencies carry what SLUICE_REDIS_URL makes the service import."""
    import tomllib

    deps = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["dependencies"]
    names = {d.split(">")[0].split("=")[0].split("[")[0].strip().lower() for d in deps}
    assert {"redis", "rq"} <= names


def test_a_missing_backend_package_stops_the_start_with_the_install_command(tmp_path):
    """An install made without dependencies (rq absent) is refused at start-up, never a
    500 at the first job."""
    code = "import sys; sys.modules['rq'] = None; from service.cli import main; sys.exit(main(['serve']))"
    for command in ("serve", "worker"):
        run = subprocess.run([sys.executable, "-c", code.replace("'serve'", repr(command))], cwd=ROOT,
                             env={**os.environ, "SLUICE_REDIS_URL": "redis://127.0.0.1:6379/0",
                                  "SLUICE_DATA_DIR": str(tmp_path)},
                             capture_output=True, text=True, timeout=60)
        assert run.returncode == 2, run.stderr
        assert "rq is not installed" in run.stderr and "pip install 'redis>=5.0' 'rq>=1.16'" in run.stderr


@pytest.fixture(scope="module")
def plain_install(tmp_path_factory) -> Path:
    """``python3 -m venv DIR && DIR/bin/pip install .`` in a copy of this checkout."""
    base = tmp_path_factory.mktemp("plain-install")
    source = base / "sluice"
    shutil.copytree(ROOT, source, ignore=shutil.ignore_patterns(
        ".git", ".venv", ".sluice", "build", "dist", "*.egg-info", "__pycache__", "*.so", ".pytest_cache",
        ".hypothesis"))
    venv = base / "venv"
    subprocess.run([sys.executable, "-m", "venv", str(venv)], check=True, timeout=120)
    install = subprocess.run([str(venv / "bin" / "pip"), "install", "--quiet", "."], cwd=source,
                             capture_output=True, text=True, timeout=900)
    assert install.returncode == 0, install.stderr[-3000:]
    return venv


def test_the_plain_install_is_plain(plain_install):
    """No test tool came with it: the servers below run on the runtime dependencies alone."""
    python = str(plain_install / "bin" / "python")
    probe = "import importlib.util as u; print([m for m in ('pytest', 'networkx', 'selenium') if u.find_spec(m)])"
    assert subprocess.run([python, "-c", probe], capture_output=True, text=True).stdout.strip() == "[]"


@pytest.fixture
def cluster(plain_install, redis_url, tmp_path):
    tag = uuid.uuid4().hex[:10]
    prefix, queue = f"sluice-test:{tag}:", f"sluice-test-{tag}"
    env = {"SLUICE_REDIS_URL": redis_url, "SLUICE_REDIS_PREFIX": prefix, "SLUICE_JOB_QUEUE": queue,
           "SLUICE_RATE_LIMIT": "off"}
    sluice = str(plain_install / "bin" / "sluice")
    worker = subprocess.Popen([sluice, "worker"], cwd=tmp_path, env={**os.environ, **env},
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    servers = []
    try:
        for name in ("a", "b"):
            servers.append(RunningServer(env=env, workers=1, data_dir=str(tmp_path / name), command=[sluice],
                                         cwd=tmp_path))
        yield servers
    finally:
        for server in servers:
            server.stop()
        stop(worker)
        client = redis.Redis.from_url(redis_url)
        keys = list(client.scan_iter(match=f"{prefix}*")) + list(client.scan_iter(match=f"*{queue}*"))
        for i in range(0, len(keys), 500):
            client.unlink(*keys[i:i + 500])
        client.close()


def test_two_instances_and_a_worker_share_networks_results_and_jobs(cluster):
    a, b = cluster
    # A network stored on one instance is served by the other.
    stored = a.put("/v1/networks/depots-north", json={"arcs": DEPOTS["arcs"]}, timeout=30)
    assert stored.status_code == 201, stored.text
    meta = b.get("/v1/networks/depots-north", timeout=30)
    assert meta.status_code == 200 and meta.json()["etag"] == stored.json()["etag"]
    what_if = b.post("/v1/networks/depots-north/maxflow", timeout=30, json={
        "source": "dc-brackenford", "sink": "store-quillmouth", "changes": [{"key": "lane-07", "closed": True}]})
    assert what_if.status_code == 200 and what_if.json()["network"]["name"] == "depots-north"
    # Closing lane-07 leaves lane-08 (60) as the only way into the store.
    assert what_if.json()["value"] == 60

    # A result cached by one instance is a hit on the other.
    first = a.post("/v1/maxflow", json=DEPOTS, timeout=30)
    assert first.status_code == 200 and first.headers["Cache-Status"] == "sluice; fwd=miss; stored"
    again = b.post("/v1/maxflow", json=DEPOTS, timeout=30)
    assert again.headers["Cache-Status"] == "sluice; hit" and again.json()["value"] == first.json()["value"] == 160
    assert b.get("/v1/solutions/" + first.json()["digest"], timeout=30).status_code == 200

    # A job submitted to one instance is run by the worker and read from the other.
    submitted = a.post("/v1/jobs", json={"kind": "maxflow", "problem": DEPOTS}, timeout=30)
    assert submitted.status_code == 202, submitted.text
    doc = poll_job(b.url, submitted.headers["Location"], timeout=120)
    assert doc["state"] == "done" and doc["result"]["value"] == 160
