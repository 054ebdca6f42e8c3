"""API keys, rate limits, size limits, request ids, metrics and jobs through the Flask test client.

The jobs here really run: the app's dispatcher thread starts a solver process
(``python -m service.jobs.child``), as it does under gunicorn.
"""

from __future__ import annotations

import logging

import pytest
from prometheus_client.parser import text_string_to_metric_families

from service.api import create_app
from service.config import parse_api_keys
from service.kinds import KINDS
from tests.conftest import scenario
from tests.http import finished_job, pointers
from tests.references import max_flow_of

DEPOTS = scenario("depots-maxflow")
KEYS = "acme:acme-key-0001,bolt:bolt-key-0002,bolt:bolt-read-0003:read"
ACME = {"Authorization": "Bearer acme-key-0001"}
BOLT = {"Authorization": "Bearer bolt-key-0002"}
BOLT_READ = {"Authorization": "Bearer bolt-read-0003"}


@pytest.fixture
def keyed(tmp_path):
    app = create_app({"data_dir": str(tmp_path), "api_keys": parse_api_keys(KEYS), "rate_limit": "off"})
    return app.test_client()


# -- API keys ----------------------------------------------------------------------------

def test_no_key_is_401_with_a_bearer_challenge(keyed):
    r = keyed.post("/v1/maxflow", json=DEPOTS)
    assert r.status_code == 401 and r.mimetype == "application/problem+json"
    assert r.headers["WWW-Authenticate"] == 'Bearer realm="sluice"'
    assert r.get_json()["type"].endswith(":unauthorized")


def test_unknown_key_and_other_schemes_are_401(keyed):
    r = keyed.post("/v1/maxflow", json=DEPOTS, headers={"Authorization": "Bearer acme-key-0002"})
    assert r.status_code == 401 and 'error="invalid_token"' in r.headers["WWW-Authenticate"]
    r = keyed.post("/v1/maxflow", json=DEPOTS, headers={"Authorization": "Basic YWNtZTprZXk="})
    assert r.status_code == 401 and 'error="invalid_request"' in r.headers["WWW-Authenticate"]


def test_valid_key_solves_and_ops_routes_stay_open(keyed):
    r = keyed.post("/v1/maxflow", json=DEPOTS, headers=ACME)
    assert r.status_code == 200 and r.get_json()["value"] == max_flow_of(DEPOTS)
    assert keyed.get("/healthz").status_code == 200 and keyed.get("/readyz").status_code == 200


def test_read_only_key_cannot_write(keyed):
    r = keyed.post("/v1/maxflow", json=DEPOTS, headers=BOLT_READ)
    assert r.status_code == 403 and 'error="insufficient_scope"' in r.headers["WWW-Authenticate"]
    assert keyed.get("/v1/jobs/" + "0" * 32, headers=BOLT_READ).status_code == 404  # reading is allowed


def test_keys_are_never_logged(keyed, caplog):
    caplog.set_level(logging.INFO, logger="sluice")
    keyed.post("/v1/maxflow", json=DEPOTS, headers=ACME)
    keyed.post("/v1/maxflow", json=DEPOTS, headers={"Authorization": "Bearer not-a-key-999"})
    assert any(getattr(r, "status", None) == 401 for r in caplog.records)  # the requests were logged...
    assert "acme-key-0001" not in caplog.text and "not-a-key-999" not in caplog.text  # ...without keys
    assert any(getattr(r, "tenant", None) == "acme" for r in caplog.records)


def test_key_parsing():
    keys = parse_api_keys("a:12345678\n# comment\n\nb:abcdefgh:read, c:ABCDEFGH")
    assert [(k.tenant, k.scope) for k in keys] == [("a", "full"), ("b", "read"), ("c", "full")]
    assert "12345678" not in repr(keys)
    with pytest.raises(ValueError) as err:
        parse_api_keys("a:12345678,secretonly")
    assert "entry 2" in str(err.value) and "secretonly" not in str(err.value)
    with pytest.raises(ValueError):
        parse_api_keys("a:short")


def test_keys_file(tmp_path, monkeypatch):
    from service.config import Settings

    path = tmp_path / "keys"
    path.write_text("acme:from-file-key-1\n")
    monkeypatch.setenv("SLUICE_API_KEYS", "bolt:from-env-key-2")
    monkeypatch.setenv("SLUICE_API_KEYS_FILE", str(path))
    assert sorted(k.tenant for k in Settings.from_env().api_keys) == ["acme", "bolt"]


# -- rate limits ----------------------------------------------------------------------

def test_rate_limit_is_per_tenant_with_retry_after(tmp_path):
    app = create_app({"data_dir": str(tmp_path), "api_keys": parse_api_keys(KEYS), "rate_limit": "3/minute"})
    c = app.test_client()
    assert [c.post("/v1/maxflow", json=DEPOTS, headers=ACME).status_code for _ in range(3)] == [200] * 3
    r = c.post("/v1/maxflow", json=DEPOTS, headers=ACME)
    assert r.status_code == 429 and r.mimetype == "application/problem+json"
    assert r.get_json()["type"].endswith(":rate-limited")
    assert 1 <= int(r.headers["Retry-After"]) <= 60
    assert c.post("/v1/maxflow", json=DEPOTS, headers=BOLT).status_code == 200  # another tenant's budget
    assert c.get("/healthz").status_code == 200  # operations routes are not limited


# -- size limits, request ids ---------------------------------------------------------

def test_size_limits_are_413_with_pointers(tmp_path):
    c = create_app({"data_dir": str(tmp_path), "max_arcs": 5, "max_body_mb": 0.001}).test_client()
    r = c.post("/v1/maxflow", json=DEPOTS)
    assert r.status_code == 413 and r.get_json()["errors"][0]["pointer"] == "/arcs"
    r = c.post("/v1/maxflow", data=b'{"x": "' + b"y" * 2000 + b'"}', content_type="application/json")
    assert r.status_code == 413 and r.get_json()["type"].endswith(":too-large")


def test_limits_reach_the_kinds(tmp_path):
    app = create_app({"data_dir": str(tmp_path), "max_commodities": 7, "max_batch_items": 9})
    limits = app.extensions["sluice"].limits
    assert limits.max_commodities == 7 and app.extensions["sluice"].settings.max_batch_items == 9


def test_request_id_is_echoed_or_made(client):
    r = client.get("/healthz", headers={"X-Request-Id": "order-42.a"})
    assert r.headers["X-Request-Id"] == "order-42.a"
    r = client.get("/healthz", headers={"X-Request-Id": "bad id\x01"})
    assert r.headers["X-Request-Id"] != "bad id\x01" and len(r.headers["X-Request-Id"]) == 32


# -- metrics --------------------------------------------------------------------------

def _samples(text: str) -> dict:
    return {(s.name, tuple(sorted(s.labels.items()))): s.value
            for fam in text_string_to_metric_families(text) for s in fam.samples}


def test_metrics_count_requests_by_route_and_status(client):
    before = _samples(client.get("/metrics").get_data(as_text=True))
    client.post("/v1/maxflow", json=DEPOTS)
    client.post("/v1/maxflow", json={"source": "a"})
    after = _samples(client.get("/metrics").get_data(as_text=True))

    def delta(name, **labels):
        key = (name, tuple(sorted(labels.items())))
        return after.get(key, 0) - before.get(key, 0)
    assert delta("sluice_http_requests_total", route="/v1/maxflow", method="POST", status="200") == 1
    assert delta("sluice_http_requests_total", route="/v1/maxflow", method="POST", status="422") == 1
    assert delta("sluice_solve_seconds_count", kind="maxflow", engine="graph") == 1
    assert ("sluice_job_queue_depth", ()) in after


# -- jobs and the solver pool ---------------------------------------------------------


def test_job_lifecycle_and_tenant_isolation(keyed):
    r = keyed.post("/v1/jobs", json={"kind": "maxflow", "problem": DEPOTS}, headers=ACME)
    assert r.status_code == 202 and r.headers["Location"].startswith("/v1/jobs/")
    job = r.get_json()
    assert job["state"] == "queued" and r.headers["Location"] == f"/v1/jobs/{job['id']}"
    assert keyed.get(r.headers["Location"], headers=BOLT).status_code == 404  # another tenant sees nothing
    assert keyed.delete(r.headers["Location"], headers=BOLT).status_code == 404
    doc = finished_job(keyed, r.headers["Location"], ACME)
    assert doc["state"] == "done" and doc["attempts"] == 1
    assert doc["result"]["value"] == max_flow_of(DEPOTS) and doc["result"]["certificate"]["checked"] is True
    assert keyed.delete(r.headers["Location"], headers=ACME).status_code == 409  # finished: nothing to cancel


def test_job_is_validated_at_submission(client):
    r = client.post("/v1/jobs", json={"kind": "maxflow", "problem": {**DEPOTS, "sink": {"x": 1}}})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/problem/sink"
    r = client.post("/v1/jobs", json={"kind": "teleport", "problem": {}, "extra": 1})
    assert r.status_code == 422 and set(pointers(r)) == {"/kind", "/extra"}
    assert client.get("/v1/jobs/not-an-id").status_code == 404


def test_prefer_respond_async_on_a_solve_endpoint(client):
    r = client.post("/v1/maxflow", json=DEPOTS, headers={"Prefer": "wait=5, respond-async"})
    assert r.status_code == 202 and r.headers["Preference-Applied"] == "respond-async"
    assert finished_job(client, r.headers["Location"])["result"]["value"] == max_flow_of(DEPOTS)
    r = client.post("/v1/maxflow", json={**DEPOTS, "arcs": 3}, headers={"Prefer": "respond-async"})
    assert r.status_code == 422  # validated before it is queued


def test_pooled_solve_equals_inline_solve(tmp_path):
    inline = create_app({"data_dir": str(tmp_path / "a")}).test_client().post("/v1/maxflow", json=DEPOTS)
    pooled_app = create_app({"data_dir": str(tmp_path / "b"), "inline_max_arcs": 0})
    pooled = pooled_app.test_client().post("/v1/maxflow", json=DEPOTS)
    a, b = inline.get_json(), pooled.get_json()
    assert pooled.status_code == 200 and b["value"] == a["value"] == max_flow_of(DEPOTS)
    assert b["flows"] == a["flows"] and b["cut"] == a["cut"] and b["digest"] == a["digest"]
    assert pooled_app.extensions["sluice.solver"].pool.pids()  # it really ran in a solver process
    pooled_app.extensions["sluice.solver"].pool.close()


@pytest.mark.parametrize("name", sorted(KINDS))
def test_every_kind_answers_the_same_in_a_solver_process(tmp_path, name):
    # The solver process gets the problem without the arcs' key labels
    # (Kind.for_solver_process): no kind's answer may depend on them.
    body = scenario(KINDS[name].example)
    if "arcs" in body and isinstance(body["arcs"], list):
        assert any("key" in arc for arc in body["arcs"]), "the scenario should label its lanes"
    inline = create_app({"data_dir": str(tmp_path / "a")}).test_client().post(f"/v1/{name}", json=body)
    pooled_app = create_app({"data_dir": str(tmp_path / "b"), "inline_max_arcs": 0})
    pooled = pooled_app.test_client().post(f"/v1/{name}", json=body)
    assert inline.status_code == pooled.status_code == 200, pooled.get_json()
    a, b = inline.get_json(), pooled.get_json()
    a.pop("timing_ms"), b.pop("timing_ms")
    assert a == b
    assert pooled_app.extensions["sluice.solver"].pool.pids()
    pooled_app.extensions["sluice.solver"].pool.close()
