"""schemathesis against the running service's own OpenAPI document.

Bounded: at most 20 generated cases per operation and phase, fixed seed. Every check
runs except three that do not fit this API, each for a stated reason:

- ``ignored_auth``: the server under test runs open (no keys), as documented;
- ``positive_data_acceptance``: some rules cannot be said in JSON Schema (the sink must
  differ from the source, node ids on arcs must exist), so schema-valid bodies can be
  a correct 422;
- ``use_after_free``: ``DELETE /v1/jobs/{id}`` cancels a job; the cancelled record stays
  readable by design (the contract's ``cancelled`` state).
"""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from tests.conftest import RunningServer

pytestmark = pytest.mark.server


def test_no_5xx_and_no_response_breaks_the_spec(tmp_path):
    exe = Path(sys.executable).with_name("schemathesis")
    if not exe.exists() and shutil.which("schemathesis") is None:
        pytest.fail("schemathesis is not installed (it is in the test extra of pyproject.toml)")
    server = RunningServer(env={"SLUICE_RATE_LIMIT": "off"}, data_dir=str(tmp_path / "data"))
    try:
        run = subprocess.run(
            [str(exe if exe.exists() else "schemathesis"), "run", server.url + "/openapi.json",
             "--max-examples", "20", "--seed", "20261201", "--checks", "all",
             "--exclude-checks", "ignored_auth,positive_data_acceptance,use_after_free",
             # One worker: with two threads schemathesis sometimes crashed inside CPython 3.11.7
             # ("SystemError: AST constructor recursion depth mismatch" while parsing its own
             # source, a tool error, not a finding), which turned CI red at random.
             "--generation-database", "none", "--workers", "1", "--request-timeout", "30", "--no-color"],
            cwd=tmp_path, stdin=subprocess.DEVNULL, capture_output=True, text=True, timeout=240)
    finally:
        server.stop()
    tail = run.stdout[-20000:]
    assert run.returncode == 0, f"schemathesis found problems:\n{tail}\n{run.stderr[-2000:]}"
    assert "passed" in tail and "Server error" not in tail
