"""Shared fixtures: the Flask app and client (as in Flask's tutorial), and a real server."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest
import requests

from service.api import create_app

ROOT = Path(__file__).resolve().parents[1]
SCENARIOS = ROOT / "service" / "scenarios"


@pytest.fixture
def app(tmp_path):
    return create_app({"data_dir": str(tmp_path / "data")})


@pytest.fixture
def client(app):
    return app.test_client()


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class RunningServer:
    """A real `sluice serve` process on a free loopback port."""

    def __init__(self, env: dict | None = None, workers: int = 2, data_dir: str | None = None):
        self.port = free_port()
        self.url = f"http://127.0.0.1:{self.port}"
        full_env = {**os.environ, **(env or {})}
        if data_dir:
            full_env["SLUICE_DATA_DIR"] = data_dir
        # The log goes to a file, not a pipe: nobody reads a pipe while tests run, and a
        # full pipe (64 KB of JSON access lines) would block the server's workers.
        self.log = tempfile.TemporaryFile()
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "service.cli", "serve", "--port", str(self.port), "--workers", str(workers)],
            cwd=ROOT, env=full_env, stdout=subprocess.DEVNULL, stderr=self.log,
        )
        try:
            self._wait_ready()
        except BaseException:
            self.stop()  # never leave an orphan server behind a failed start
            raise

    def _wait_ready(self, timeout: float = 30.0) -> None:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"sluice serve exited: {self.log_tail()}")
            try:
                if requests.get(self.url + "/healthz", timeout=1).status_code == 200:
                    return
            except (requests.ConnectionError, requests.Timeout):
                # A booting worker leaves the connection accepted but unanswered.
                time.sleep(0.1)
        self.stop()
        raise RuntimeError("sluice serve did not become healthy in time")

    def log_tail(self, size: int = 2000) -> str:
        self.log.seek(0)
        return self.log.read().decode(errors="replace")[-size:]

    def stop(self) -> None:
        if self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()


@pytest.fixture(scope="session")
def server(tmp_path_factory):
    srv = RunningServer(data_dir=str(tmp_path_factory.mktemp("server-data")))
    yield srv
    srv.stop()


# -- Redis -------------------------------------------------------------------------
# The Redis tests use the real server on 127.0.0.1:6379 (no fake in its place). When it
# does not answer they skip with the reason, except under CI=true, where a missing
# Redis fails the run (.ci/run starts one first).

REDIS_URL = os.environ.get("SLUICE_TEST_REDIS_URL") or "redis://127.0.0.1:6379/0"


def redis_problem(url: str) -> str | None:
    """None when Redis answers PING at ``url``, else why not."""
    import redis

    try:
        client = redis.Redis.from_url(url, socket_connect_timeout=1, socket_timeout=2)
        client.ping()
        client.close()
    except redis.RedisError as exc:
        return f"{exc.__class__.__name__}: {exc}"
    return None


@pytest.fixture(scope="session")
def redis_url() -> str:
    problem = redis_problem(REDIS_URL)
    if problem:
        message = f"Redis does not answer at {REDIS_URL} ({problem}); run .ci/ensure-redis to start it"
        if os.environ.get("CI") == "true":
            pytest.fail(f"{message}. CI=true: the Redis tests must run, not skip", pytrace=False)
        pytest.skip(message)
    return REDIS_URL
