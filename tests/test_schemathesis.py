"""schemathesis against the running service's own OpenAPI document.

Bounded: at most 20 generated cases per operation and phase, fixed seed. Every check
runs except three that do not fit this API, each for a stated reason:

- ``ignored_auth``: the server under test runs open (no keys), as documented;
- ``positive_data_acceptance``: some rules cannot be said in JSON Schema (the sink must
  differ from the source, node ids on arcs must exist), so schema-valid bodies can be
  a correct 422;
- ``use_after_free``: ``DELETE /v1/jobs/{id}`` cancels a job; the cancelled record stays
  readable by design (the contract's ``cancelled`` state).

``not_a_server_error`` is replaced by a stricter check of our own: the server's access log
must show no 500 at all, while a 504 (a generated ``time_limit`` of 0.01 s that a loaded
machine cannot meet) or a 503 (load shed) is a correct answer that depends on the
machine, not on the body. ``status_code_conformance`` still fails any 503 or 504 an
operation does not document.
"""

from __future__ import annotations

import json
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
             "--exclude-checks", "ignored_auth,positive_data_acceptance,use_after_free,not_a_server_error",
             # One worker: with two threads schemathesis sometimes crashed inside CPython 3.11.7
             # ("SystemError: AST constructor recursion depth mismatch" while parsing its own
             # source, a tool error, not a finding), which turned CI red at random.
             "--generation-database", "none", "--workers", "1", "--request-timeout", "30", "--no-color"],
            cwd=tmp_path, stdin=subprocess.DEVNULL, capture_output=True, text=True, timeout=240)
    finally:
        server.stop()
    tail = run.stdout[-20000:]
    assert run.returncode == 0, f"schemathesis found problems:\n{tail}\n{run.stderr[-2000:]}"
    assert "passed" in tail
    answered = access_log(server)
    assert len(answered) > 100, "the access log shows the generated requests"
    errors = [entry for entry in answered if entry[2] >= 500 and entry[2] not in (503, 504)]
    assert not errors, f"server errors: {errors[:20]}"


def access_log(server: RunningServer) -> list[tuple[str, str, int]]:
    """``(method, path, status)`` of every request in the server's JSON access log."""
    server.log.seek(0)
    out = []
    for line in server.log.read().decode(errors="replace").splitlines():
        try:
            record = json.loads(line)
        except ValueError:
            continue  # gunicorn's own lines
        if isinstance(record, dict) and {"method", "path", "status"} <= record.keys():
            out.append((record["method"], record["path"], int(record["status"])))
    return out
