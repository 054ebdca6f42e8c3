"""Shared fixtures: the Flask app and client (as in Flask's tutorial), a real server, and
the scenario files.

Every Flask test client the tests make checks each response against
``openapi/openapi.yaml`` (:mod:`tests.contract`); ``spec_session()`` does the same for
requests to a real server.
"""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest
import requests
from flask import Flask

from service.api import create_app
from tests.contract import SpecClient, SpecSession

ROOT = Path(__file__).resolve().parents[1]
SCENARIOS = ROOT / "service" / "scenarios"


def scenario(name: str):
    """A scenario of ``service/scenarios``, a fresh copy on every call.

    ``name`` without a suffix (or ending ``.json``) is a JSON file, decoded; a name
    ending ``.dimacs`` is DIMACS text. :func:`scenario_bytes` gives the file's bytes.
    """
    if name.endswith(".dimacs"):
        return (SCENARIOS / name).read_text()
    return json.loads(scenario_bytes(name))


def scenario_bytes(name: str) -> bytes:
    """The bytes of a scenario file (``.json`` added when ``name`` has no suffix)."""
    path = SCENARIOS / name
    return (path if path.suffix in (".json", ".dimacs") else path.with_name(path.name + ".json")).read_bytes()


@pytest.fixture(autouse=True, scope="session")
def _responses_follow_the_spec():
    """Every app's test client checks its responses against the OpenAPI document."""
    before = Flask.test_client_class
    Flask.test_client_class = SpecClient
    yield
    Flask.test_client_class = before


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
    """A real `sluice serve` process on a free loopback port (``command``: another
    ``sluice`` to run, e.g. a fresh install's ``bin/sluice``)."""

    def __init__(self, env: dict | None = None, workers: int = 2, data_dir: str | None = None,
                 command: list[str] | None = None, cwd: Path = ROOT):
        self.port = free_port()
        self.url = f"http://127.0.0.1:{self.port}"
        full_env = {**os.environ, **(env or {})}
        if data_dir:
            full_env["SLUICE_DATA_DIR"] = data_dir
        # The log goes to a file, not a pipe: nobody reads a pipe while tests run, and a
        # full pipe (64 KB of JSON access lines) would block the server's workers.
        self.log = tempfile.TemporaryFile()
        self.proc = subprocess.Popen(
            [*(command or [sys.executable, "-m", "service.cli"]), "serve", "--port", str(self.port),
             "--workers", str(workers)],
            cwd=cwd, env=full_env, stdout=subprocess.DEVNULL, stderr=self.log,
        )
        try:
            self._wait_ready()
        except BaseException:
            self.stop()  # never leave an orphan server behind a failed start
            raise

    def _wait_ready(self, timeout: float = 60.0) -> None:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"sluice serve exited: {self.log_tail()}")
            try:
                if requests.get(self.url + "/healthz", timeout=5).status_code == 200:
                    return
            except (requests.ConnectionError, requests.Timeout):
                # A booting worker leaves the connection accepted but unanswered.
                time.sleep(0.1)
        self.stop()
        raise RuntimeError("sluice serve did not become healthy in time")

    def request(self, method: str, path: str, **kwargs) -> requests.Response:
        """``requests.request`` to ``path`` on this server, the response checked against
        the OpenAPI document (tests.contract). A new connection each time: servers
        restart and workers are killed in these tests."""
        with SpecSession() as session:
            return session.request(method, self.url + path, **kwargs)

    def get(self, path: str, **kwargs) -> requests.Response:
        return self.request("GET", path, **kwargs)

    def post(self, path: str, **kwargs) -> requests.Response:
        return self.request("POST", path, **kwargs)

    def put(self, path: str, **kwargs) -> requests.Response:
        return self.request("PUT", path, **kwargs)

    def delete(self, path: str, **kwargs) -> requests.Response:
        return self.request("DELETE", path, **kwargs)

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


@pytest.fixture
def redis_prefix(redis_url):
    """A key prefix of this test alone (others share the server); its keys are deleted after."""
    import uuid

    import redis

    prefix = f"sluice-test:{uuid.uuid4().hex[:12]}:"
    yield prefix
    client = redis.Redis.from_url(redis_url)
    keys = list(client.scan_iter(match=prefix + "*", count=1000))
    for i in range(0, len(keys), 500):
        client.unlink(*keys[i:i + 500])
    client.close()


@pytest.fixture(params=["sqlite", pytest.param("redis", marks=pytest.mark.redis)])
def store_config(request, tmp_path) -> dict:
    """Settings overrides for each backend: the embedded SQLite store, then the real Redis."""
    config = {"data_dir": str(tmp_path / "data")}
    if request.param == "redis":
        config.update(redis_url=request.getfixturevalue("redis_url"),
                      redis_prefix=request.getfixturevalue("redis_prefix"))
    return config


@pytest.fixture
def store_app(store_config):
    return create_app(store_config)


@pytest.fixture
def store_client(store_app):
    return store_app.test_client()


class PrivateRedis:
    """A redis-server of this test alone on a free port, to stop and start at will
    (the shared one on 6379 stays up for everyone else)."""

    def __init__(self, tmp: Path):
        import shutil

        self.binary = shutil.which("redis-server")
        self.port = free_port()
        self.dir = tmp
        self.url = f"redis://127.0.0.1:{self.port}/0"
        self.proc = None

    def start(self) -> None:
        self.proc = subprocess.Popen(
            [self.binary, "--port", str(self.port), "--bind", "127.0.0.1", "--save", "", "--appendonly", "no",
             "--dir", str(self.dir)],
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
        )
        deadline = time.monotonic() + 10
        while redis_problem(self.url) and time.monotonic() < deadline:
            time.sleep(0.05)
        if redis_problem(self.url):
            raise RuntimeError("private redis-server did not start")

    def stop(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.kill()
            self.proc.wait()
        self.proc = None


@pytest.fixture
def private_redis(tmp_path, redis_url):
    import shutil

    if shutil.which("redis-server") is None:
        if os.environ.get("CI") == "true":
            pytest.fail("redis-server is not installed; CI=true requires it", pytrace=False)
        pytest.skip("redis-server is not installed")
    server = PrivateRedis(tmp_path)
    server.start()
    yield server
    server.stop()
