"""Shared fixtures: the Flask app and client (as in Flask's tutorial), and a real server."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
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
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "service.cli", "serve", "--port", str(self.port), "--workers", str(workers)],
            cwd=ROOT, env=full_env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
        )
        self._wait_ready()

    def _wait_ready(self, timeout: float = 30.0) -> None:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"sluice serve exited: {self.proc.stderr.read().decode()[-2000:]}")
            try:
                if requests.get(self.url + "/healthz", timeout=1).status_code == 200:
                    return
            except (requests.ConnectionError, requests.Timeout):  # a worker may take over 1 s to boot
                time.sleep(0.1)
        self.stop()
        raise RuntimeError("sluice serve did not become healthy in time")

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
