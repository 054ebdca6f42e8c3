"""/metrics: every labelled series with known labels is there at 0 from start-up, and
who may read it is configurable (SLUICE_METRICS=open|key|port:N, SLUICE_METRICS_KEY)."""

from __future__ import annotations

import re

import pytest
import requests

from service.api import create_app
from service.api.metrics import CACHE_RESULTS, ENGINE_KINDS, JOB_EVENT_NAMES
from service.config import Settings, check_metrics_access
from service.kinds import KINDS
from tests.conftest import RunningServer, free_port
from tests.contract import unchecked_client

METRICS_KEY = "scrape-key-0001"
API_KEYS = "acme:acme-key-0001"


def expected_zero_series() -> set[str]:
    """The series the service promises at 0 before any solve, cache lookup or job."""
    names = {f'sluice_cache_events_total{{result="{r}"}}' for r in CACHE_RESULTS}
    for kind in KINDS:
        names.add(f'sluice_solve_timeouts_total{{kind="{kind}"}}')
        names |= {f'sluice_jobs_total{{event="{e}",kind="{kind}"}}' for e in JOB_EVENT_NAMES}
        names |= {f'sluice_solve_seconds_count{{engine="{e}",kind="{kind}"}}' for e in ENGINE_KINDS}
    return names


def samples(text: str) -> dict[str, float]:
    out = {}
    for line in text.splitlines():
        if line and not line.startswith("#"):
            name, value = line.rsplit(" ", 1)
            out[name] = float(value)
    return out


def test_kinds_are_known():
    assert {"maxflow", "mincostflow", "assignment", "lp", "multicommodity"} <= set(KINDS)


@pytest.mark.parametrize("mode, key, problem", [
    ("open", None, None), ("key", METRICS_KEY, None), ("port:9100", None, None),
    ("key", None, "SLUICE_METRICS_KEY"), ("key", "short", "8\\+ characters"), ("port:0", None, "port must"),
    ("port:x", None, "port must"), ("closed", None, "use open, key or port:N"),
])
def test_the_setting_is_checked(mode, key, problem):
    if problem is None:
        check_metrics_access(mode, key)
    else:
        with pytest.raises(ValueError, match=problem):
            check_metrics_access(mode, key)


def test_a_bad_setting_stops_the_start(monkeypatch):
    monkeypatch.setenv("SLUICE_METRICS", "key")
    monkeypatch.delenv("SLUICE_METRICS_KEY", raising=False)
    with pytest.raises(ValueError, match="SLUICE_METRICS_KEY"):
        Settings.from_env()


def test_open_by_default_even_with_api_keys(tmp_path, monkeypatch):
    monkeypatch.setenv("SLUICE_API_KEYS", API_KEYS)
    settings = Settings.from_env()
    assert settings.api_keys and settings.metrics == "open"
    client = create_app({"data_dir": str(tmp_path), "api_keys": settings.api_keys}).test_client()
    r = client.get("/metrics")
    assert r.status_code == 200 and "sluice_cache_events_total" in r.get_data(as_text=True)


def test_key_mode_needs_the_metrics_key_and_no_api_key_will_do(tmp_path, monkeypatch):
    monkeypatch.setenv("SLUICE_API_KEYS", API_KEYS)
    client = create_app({"data_dir": str(tmp_path), "api_keys": Settings.from_env().api_keys,
                         "metrics": "key", "metrics_key": METRICS_KEY}).test_client()
    assert client.get("/metrics").status_code == 401
    denied = client.get("/metrics", headers={"Authorization": "Bearer acme-key-0001"})
    assert denied.status_code == 401 and denied.headers["WWW-Authenticate"].startswith("Bearer")
    assert denied.mimetype == "application/problem+json" and "SLUICE_METRICS_KEY" in denied.get_json()["detail"]
    ok = client.get("/metrics", headers={"Authorization": f"Bearer {METRICS_KEY}"})
    assert ok.status_code == 200 and "sluice_solve_timeouts_total" in ok.get_data(as_text=True)
    # The metrics key is not an API key.
    assert client.get("/v1/networks", headers={"Authorization": f"Bearer {METRICS_KEY}"}).status_code == 401


def test_port_mode_serves_metrics_on_that_port_only(tmp_path):
    app = create_app({"data_dir": str(tmp_path), "metrics": "port:9100"})
    client = app.test_client()
    assert client.get("/metrics").status_code == 404
    on_port = {"SERVER_PORT": "9100"}
    assert client.get("/metrics", environ_overrides=on_port).status_code == 200
    # The metrics port is not the API the OpenAPI document describes: its 404 goes unchecked.
    assert unchecked_client(app).get("/healthz", environ_overrides=on_port).status_code == 404
    assert client.get("/healthz").status_code == 200


@pytest.mark.server
def test_real_server_exports_every_known_series_at_zero_before_any_solve(tmp_path):
    """A real `sluice serve` (two gunicorn workers, prometheus-client's multiprocess mode),
    /metrics on a port of its own, read before any request but the readiness probe."""
    port = free_port()
    server = RunningServer(env={"SLUICE_METRICS": f"port:{port}", "SLUICE_API_KEYS": API_KEYS},
                           data_dir=str(tmp_path / "data"))
    try:
        metrics_url = f"http://127.0.0.1:{port}/metrics"
        r = requests.get(metrics_url, timeout=10)
        assert r.status_code == 200 and r.headers["Content-Type"].startswith("text/plain")
        got = samples(r.text)
        missing = expected_zero_series() - set(got)
        assert not missing, f"series missing before any event: {sorted(missing)[:5]}"
        assert all(got[name] == 0.0 for name in expected_zero_series())
        assert "# TYPE sluice_solve_timeouts_total counter" in r.text
        # The main port keeps /metrics closed; the metrics port serves nothing else.
        assert requests.get(server.url + "/metrics", timeout=10).status_code == 404
        assert requests.get(f"http://127.0.0.1:{port}/v1/scenarios", timeout=10).status_code == 404
        # A real event moves its own series off 0 (summed over the workers).
        body = {"source": "a", "sink": "b", "arcs": [{"from": "a", "to": "b", "capacity": 3}]}
        solved = requests.post(server.url + "/v1/maxflow", json=body,
                               headers={"Authorization": "Bearer acme-key-0001"}, timeout=10)
        assert solved.status_code == 200
        after = samples(requests.get(metrics_url, timeout=10).text)
        assert after['sluice_cache_events_total{result="stored"}'] == 1.0
        assert after['sluice_solve_seconds_count{engine="graph",kind="maxflow"}'] == 1.0
        assert after['sluice_solve_timeouts_total{kind="maxflow"}'] == 0.0
        assert re.search(r"sluice: /metrics", server.log_tail(20000)) is None  # not open: no warning
    finally:
        server.stop()


@pytest.mark.server
def test_real_server_warns_when_metrics_stay_open_beside_api_keys(tmp_path):
    server = RunningServer(env={"SLUICE_API_KEYS": API_KEYS}, data_dir=str(tmp_path / "data"), workers=1)
    try:
        assert requests.get(server.url + "/metrics", timeout=10).status_code == 200
    finally:
        server.stop()
    assert "/metrics is open" in server.log_tail(20000)
