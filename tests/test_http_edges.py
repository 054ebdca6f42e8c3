"""HTTP behaviour in the app itself (Flask test client): content codings both ways,
ETags of compressed answers, CORS headers, rate limits by tenant, shedding, the
declared examples, and re-sent networks."""

from __future__ import annotations

import gzip
import subprocess
import sys
import tomllib

import orjson
import pytest

from service.api import create_app
from service.api.explorer import EXAMPLES
from service.config import parse_api_keys, parse_origins, parse_tenant_rate_limits
from service.intake import QUEUED, SHED
from tests.conftest import ROOT, SCENARIOS, scenario_bytes

DEPOTS = scenario_bytes("depots-maxflow")
JSON = {"Content-Type": "application/json"}


def big_network() -> bytes:
    arcs = [{"from": f"site-{i}", "to": f"site-{i + 1}", "capacity": 5 + i % 7} for i in range(400)]
    return orjson.dumps({"arcs": arcs})


# -- request bodies in gzip ------------------------------------------------------------

def test_a_gzip_body_is_solved_as_the_plain_one(client):
    plain = client.post("/v1/maxflow", data=DEPOTS, headers=JSON).get_json()
    packed = client.post("/v1/maxflow", data=gzip.compress(DEPOTS), headers={**JSON, "Content-Encoding": "gzip"})
    assert packed.status_code == 200
    assert packed.get_json()["value"] == plain["value"] == 160 and packed.get_json()["digest"] == plain["digest"]


@pytest.mark.parametrize("coding", ["br", "deflate", "gzip, gzip", "compress"])
def test_an_unknown_or_stacked_coding_is_415(client, coding):
    r = client.post("/v1/maxflow", data=DEPOTS, headers={**JSON, "Content-Encoding": coding})
    assert r.status_code == 415 and r.headers["Accept-Encoding"] == "gzip"
    assert r.get_json()["type"].endswith("unsupported-media-type") and coding.split(",")[0] in r.get_json()["detail"]


def test_broken_gzip_is_400(client):
    r = client.post("/v1/maxflow", data=gzip.compress(DEPOTS)[:-12], headers={**JSON, "Content-Encoding": "gzip"})
    assert r.status_code == 400 and "gzip" in r.get_json()["detail"]
    r = client.post("/v1/maxflow", data=DEPOTS, headers={**JSON, "Content-Encoding": "gzip"})
    assert r.status_code == 400 and "not valid gzip" in r.get_json()["detail"]


def test_the_limit_applies_to_the_decoded_size(tmp_path):
    client = create_app({"data_dir": str(tmp_path), "max_body_mb": 1.0}).test_client()
    bomb = gzip.compress(b" " * (8 << 20))
    assert len(bomb) < (1 << 20)
    r = client.post("/v1/maxflow", data=bomb, headers={**JSON, "Content-Encoding": "gzip"})
    assert r.status_code == 413 and "1048576" in r.get_json()["detail"]


# -- compressed responses --------------------------------------------------------------

def test_large_answers_are_gzipped_for_clients_that_accept_it(client):
    spec = client.get("/openapi.json", headers={"Accept-Encoding": "gzip"})
    assert spec.headers["Content-Encoding"] == "gzip" and "Accept-Encoding" in spec.headers["Vary"]
    assert orjson.loads(gzip.decompress(spec.data)) == client.get("/openapi.json").get_json()
    plain = client.get("/openapi.json", headers={"Accept-Encoding": "identity"})
    assert "Content-Encoding" not in plain.headers and "Accept-Encoding" in plain.headers["Vary"]
    refused = client.get("/openapi.json", headers={"Accept-Encoding": "gzip;q=0, identity"})
    assert "Content-Encoding" not in refused.headers
    small = client.get("/healthz", headers={"Accept-Encoding": "gzip"})
    assert "Content-Encoding" not in small.headers  # a few bytes: not worth it


def test_a_gzipped_version_has_its_own_etag_and_both_match_the_version(client):
    put = client.put("/v1/networks/lanes", data=big_network(), headers=JSON)
    assert put.status_code == 201
    tag = put.headers["ETag"]
    got = client.get("/v1/networks/lanes?include=arcs", headers={"Accept-Encoding": "gzip"})
    assert got.headers["Content-Encoding"] == "gzip"
    zipped = got.headers["ETag"]
    assert zipped == tag[:-1] + '-gzip"' and zipped != tag  # another representation, another strong tag
    again = client.get("/v1/networks/lanes?include=arcs", headers={"Accept-Encoding": "gzip", "If-None-Match": zipped})
    assert again.status_code == 304 and again.headers["ETag"] == zipped
    plain = client.get("/v1/networks/lanes?include=arcs", headers={"If-None-Match": tag})
    assert plain.status_code == 304 and plain.headers["ETag"] == tag
    # A write conditioned on the gzip representation's tag names the same version.
    changed = big_network().replace(b'"capacity":5', b'"capacity":6', 1)
    assert client.put("/v1/networks/lanes", data=changed, headers={**JSON, "If-Match": zipped}).status_code == 200
    assert client.put("/v1/networks/lanes", data=changed, headers={**JSON, "If-Match": zipped}).status_code == 412


# -- re-sent networks --------------------------------------------------------------------

def test_resending_an_identical_network_keeps_its_version_and_etag(store_client):
    body = big_network()
    first = store_client.put("/v1/networks/same", data=body, headers=JSON)
    again = store_client.put("/v1/networks/same", data=body, headers=JSON)
    assert first.status_code == 201 and again.status_code == 200
    assert again.headers["ETag"] == first.headers["ETag"]
    assert again.get_json()["version"] == first.get_json()["version"] == 1
    changed = store_client.put("/v1/networks/same", data=body.replace(b'"capacity":5', b'"capacity":9', 1),
                               headers=JSON)
    assert changed.get_json()["version"] == 2 and changed.headers["ETag"] != first.headers["ETag"]


# -- CORS --------------------------------------------------------------------------------

ORIGIN = "https://dispatch.example"


@pytest.fixture
def cors_client(tmp_path):
    keys = parse_api_keys("acme:acme-key-0001")
    return create_app({"data_dir": str(tmp_path), "api_keys": keys, "cors_origins": (ORIGIN,)}).test_client()


def test_a_preflight_from_a_configured_origin_is_allowed_without_credentials(cors_client):
    r = cors_client.options("/v1/maxflow", headers={"Origin": ORIGIN, "Access-Control-Request-Method": "POST",
                                                    "Access-Control-Request-Headers": "authorization, content-type"})
    assert r.status_code == 204
    assert r.headers["Access-Control-Allow-Origin"] == ORIGIN
    allowed = {h.strip().lower() for h in r.headers["Access-Control-Allow-Headers"].split(",")}
    assert {"authorization", "content-type", "content-encoding", "if-match"} <= allowed
    assert "POST" in r.headers["Access-Control-Allow-Methods"] and "Origin" in r.headers["Vary"]


def test_answers_to_a_configured_origin_expose_the_headers_clients_read(cors_client):
    r = cors_client.post("/v1/maxflow", data=DEPOTS,
                         headers={**JSON, "Origin": ORIGIN, "Authorization": "Bearer acme-key-0001"})
    assert r.status_code == 200 and r.headers["Access-Control-Allow-Origin"] == ORIGIN
    exposed = {h.strip() for h in r.headers["Access-Control-Expose-Headers"].split(",")}
    assert {"ETag", "Cache-Status", "Location", "Retry-After", "X-Request-Id"} <= exposed
    denied = cors_client.post("/v1/maxflow", data=DEPOTS, headers={**JSON, "Origin": ORIGIN})
    assert denied.status_code == 401 and denied.headers["Access-Control-Allow-Origin"] == ORIGIN  # readable


def test_other_origins_and_the_default_get_no_cors_headers(cors_client, client):
    r = cors_client.options("/v1/maxflow", headers={"Origin": "https://evil.example",
                                                    "Access-Control-Request-Method": "POST"})
    assert "Access-Control-Allow-Origin" not in r.headers
    r = client.post("/v1/maxflow", data=DEPOTS, headers={**JSON, "Origin": ORIGIN})
    assert "Access-Control-Allow-Origin" not in r.headers  # SLUICE_CORS_ORIGINS unset: none


def test_origins_are_checked_at_start_up():
    assert parse_origins("https://a.example, http://127.0.0.1:8080/") == ("https://a.example",
                                                                           "http://127.0.0.1:8080")
    with pytest.raises(ValueError, match="not an origin"):
        parse_origins("a.example")


# -- rate limits -------------------------------------------------------------------------

def test_an_open_service_has_no_rate_limit_by_default(client):
    assert all(client.post("/v1/maxflow", data=DEPOTS, headers=JSON).status_code == 200 for _ in range(40))


def test_an_open_service_can_set_one(tmp_path):
    client = create_app({"data_dir": str(tmp_path), "rate_limit": "3/minute"}).test_client()
    codes = [client.post("/v1/maxflow", data=DEPOTS, headers=JSON).status_code for _ in range(5)]
    assert codes == [200, 200, 200, 429, 429]


def test_tenants_can_have_their_own_limits(tmp_path):
    keys = parse_api_keys("acme:acme-key-0001,tiny:tiny-key-0001,bulk:bulk-key-0001")
    client = create_app({"data_dir": str(tmp_path), "api_keys": keys, "rate_limit": "5/minute",
                         "tenant_rate_limits": parse_tenant_rate_limits("tiny=2/minute\nbulk=off")}).test_client()

    def codes(key: str, n: int) -> list[int]:
        return [client.post("/v1/maxflow", data=DEPOTS, headers={**JSON, "Authorization": f"Bearer {key}"})
                .status_code for _ in range(n)]

    assert codes("tiny-key-0001", 3) == [200, 200, 429]
    assert codes("acme-key-0001", 6) == [200] * 5 + [429]
    assert codes("bulk-key-0001", 20) == [200] * 20
    r = client.post("/v1/maxflow", data=DEPOTS, headers={**JSON, "Authorization": "Bearer tiny-key-0001"})
    assert int(r.headers["Retry-After"]) >= 1


def test_keyed_tenants_get_600_a_minute_without_configuration(tmp_path):
    keys = parse_api_keys("acme:acme-key-0001")
    client = create_app({"data_dir": str(tmp_path), "api_keys": keys}).test_client()
    headers = {"Authorization": "Bearer acme-key-0001"}
    codes = [client.get("/v1/networks", headers=headers).status_code for _ in range(601)]
    assert codes[:600] == [200] * 600 and codes[600] == 429


def test_tenant_limit_entries_are_checked():
    assert parse_tenant_rate_limits("a=1/second  b=20/second;600/minute\n# c=off") == (
        ("a", "1/second"), ("b", "20/second;600/minute"))
    with pytest.raises(ValueError, match="tenant=limit"):
        parse_tenant_rate_limits("acme:100/second")


# -- shedding ----------------------------------------------------------------------------

def test_a_request_that_waited_too_long_for_a_thread_is_503(tmp_path):
    client = create_app({"data_dir": str(tmp_path), "queue_wait": 0.5}).test_client()
    late = client.post("/v1/maxflow", data=DEPOTS, headers=JSON, environ_overrides={QUEUED: 0.8})
    assert late.status_code == 503 and int(late.headers["Retry-After"]) >= 1
    assert client.get("/healthz", environ_overrides={QUEUED: 5.0}).status_code == 200  # probes never shed
    assert client.post("/v1/maxflow", data=DEPOTS, headers=JSON, environ_overrides={QUEUED: 0.1}).status_code == 200
    shed = client.post("/v1/maxflow", data=b"not even json", headers=JSON, environ_overrides={SHED: True})
    assert shed.status_code == 503 and "large problems" in shed.get_json()["detail"]  # refused undecoded
    assert shed.headers["Retry-After"] == "1" and shed.headers["X-Request-Id"]


def test_a_solve_that_finds_every_solver_process_busy_is_503(tmp_path):
    app = create_app({"data_dir": str(tmp_path), "queue_wait": 0.2, "inline_max_arcs": 0, "solver_processes": 1})
    pool = app.extensions["sluice.solver"].pool
    assert pool._slots.acquire(timeout=1)  # the one slot is taken, as by a long solve
    try:
        r = app.test_client().post("/v1/maxflow", data=DEPOTS, headers=JSON)
    finally:
        pool._slots.release()
        pool.close()
    assert r.status_code == 503 and r.headers["Retry-After"] == "1" and "busy" in r.get_json()["detail"]


# -- what a new user trips on --------------------------------------------------------------

def test_files_a_user_writes_into_scenarios_are_not_served(client):
    stray = SCENARIOS / "my-notes-maxflow.json"
    stray.write_text('{"secret": true}')
    try:
        listed = {s["name"] for s in client.get("/v1/scenarios").get_json()["scenarios"]}
        assert "my-notes-maxflow" not in listed and "depots-maxflow" in listed
        assert client.get("/v1/scenarios/my-notes-maxflow").status_code == 404
    finally:
        stray.unlink()


def test_every_committed_scenario_is_declared():
    tracked = subprocess.run(["git", "ls-files", "service/scenarios"], cwd=ROOT, capture_output=True, text=True)
    files = {line.rsplit("/", 1)[-1] for line in tracked.stdout.split()} if tracked.returncode == 0 else set()
    files = files or {p.name for p in SCENARIOS.iterdir() if p.suffix in (".json", ".dimacs")}
    assert files == set(EXAMPLES)


def test_requests_is_not_a_runtime_dependency(tmp_path):
    project = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
    assert not any(d.startswith("requests") for d in project["dependencies"])
    code = ("import sys, service.cli, service.serving, service.intake\n"
            "from service.serving import asgi_app\n"
            "asgi_app()\n"
            "assert 'requests' not in sys.modules, 'requests was imported'\n")
    run = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=120,
                         env={"SLUICE_DATA_DIR": str(tmp_path), "PATH": "/usr/bin:/bin"})
    assert run.returncode == 0, run.stderr[-2000:]


def test_a_bad_tenant_rate_is_refused_at_start_up():
    with pytest.raises(ValueError, match="acme=fast"):
        parse_tenant_rate_limits("acme=fast")
