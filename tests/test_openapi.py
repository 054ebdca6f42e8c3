"""The committed OpenAPI document matches the code and is a valid OpenAPI 3.1 document."""

import os
import subprocess
import sys
from pathlib import Path

import pytest
import yaml
from openapi_spec_validator import validate

from service.api.declare import ok, operation, path_parameter, problems
from service.api.routes import route_app
from service.api.spec import UndeclaredRoute, build_spec, openapi_path

COMMITTED = Path(__file__).resolve().parents[1] / "openapi" / "openapi.yaml"


def test_committed_spec_matches_generated():
    committed = yaml.safe_load(COMMITTED.read_text())
    assert committed == build_spec(), "openapi/openapi.yaml is stale: run `make spec` and commit it"


def test_spec_is_valid_openapi():
    validate(build_spec())


def test_served_spec_is_the_generated_one(client):
    r = client.get("/openapi.json")
    assert r.status_code == 200
    assert r.get_json() == build_spec()


def _routed(app) -> set[tuple[str, str]]:
    """(OpenAPI path, method) of every route of ``app``."""
    return {(openapi_path(rule.rule), method.lower()) for rule in app.url_map.iter_rules() for method in rule.methods - {"HEAD", "OPTIONS"}}


def _documented(document: dict) -> set[tuple[str, str]]:
    return {(path, method) for path, item in document["paths"].items() for method in item if method != "parameters"}


def test_every_route_is_documented_and_every_documented_operation_routed(app):
    committed = yaml.safe_load(COMMITTED.read_text())
    routed, documented = _routed(app), _documented(committed)
    assert routed - documented == set(), "routes without an entry in openapi/openapi.yaml"
    assert documented - routed == set(), "documented operations that no route of the app answers"
    # The document sees the app's routes, not a list of its own: the route-only app that
    # `sluice spec` uses has the same routes as the service.
    assert _routed(route_app()) == routed


def test_a_route_without_a_declared_operation_fails_the_build():
    app = route_app()
    app.add_url_rule("/v1/undeclared", "undeclared", lambda: "", methods=["POST"])
    with pytest.raises(UndeclaredRoute, match=r"/v1/undeclared \(undeclared\)"):
        build_spec(app)


def test_a_declared_route_appears_with_its_declaration():
    app = route_app()
    view = operation("probe_it", "A probe.", parameters=[path_parameter("part", {"type": "string"})],
                     responses={"200": ok("Probed."), **problems(404)})(lambda part: "")
    app.add_url_rule("/v1/probe/<part>", "probe", view, methods=["PUT"])
    entry = build_spec(app)["paths"]["/v1/probe/{part}"]["put"]
    assert entry["operationId"] == "probe_it"
    assert entry["responses"]["404"]["description"] == "Not found."
    # Under /v1, so keys and rate limits apply: 401, 429, and 403 for a write.
    assert {"401", "403", "429"} <= set(entry["responses"]) and entry["security"] == [{"bearer": []}, {}]


def test_no_route_is_left_undocumented(app):
    # Flask's static route would be one: the app makes none (static_folder=None).
    assert "static" not in {rule.endpoint for rule in app.url_map.iter_rules()}


def test_operation_ids_are_unique():
    ids = [op["operationId"] for item in build_spec()["paths"].values() for m, op in item.items() if m != "parameters"]
    assert len(ids) == len(set(ids))


def test_stored_mincostflow_what_if_documents_supplies():
    # The service requires supplies for a stored min-cost question; a client generated
    # from the document must be able to send them.
    schemas = build_spec()["components"]["schemas"]
    assert {"supplies", "changes", "options"} <= set(schemas["MincostflowWhatIfRequest"]["properties"])


def test_sluice_spec_loads_no_gunicorn_and_writes_no_files(tmp_path):
    script = ("import sys\nfrom service.cli import main\nmain(['spec'])\n"
              "loaded = [m for m in ('gunicorn', 'redis', 'rq') if m in sys.modules]\n"
              "sys.stderr.write(repr(loaded))\n")
    env = {k: v for k, v in os.environ.items() if not k.startswith("SLUICE_")}
    done = subprocess.run([sys.executable, "-c", script], cwd=tmp_path, env={**env, "SLUICE_REDIS_URL": ""},
                          capture_output=True, text=True, timeout=120, check=True)
    assert done.stderr.strip().splitlines()[-1] == "[]"
    assert yaml.safe_load(done.stdout) == yaml.safe_load(COMMITTED.read_text())
    assert list(tmp_path.iterdir()) == []


def test_every_documented_503_problem_says_when_to_retry():
    # Every 503 problem the service answers carries Retry-After (errors.Unavailable,
    # store.StoreUnavailable; sent as tests/test_store_processes.py and
    # tests/test_cache_api.py check), so the document says so wherever it lists one.
    for path, item in build_spec()["paths"].items():
        for method, op in item.items():
            response = op["responses"].get("503", {}) if method != "parameters" else {}
            if "application/problem+json" in response.get("content", {}):
                assert "Retry-After" in response.get("headers", {}), (path, method)


def test_a_dimacs_route_says_so_in_its_415():
    paths = build_spec()["paths"]
    for path, method in [("/v1/maxflow", "post"), ("/v1/mincostflow", "post"), ("/v1/networks/{name}", "put")]:
        assert "text/x-dimacs" in paths[path][method]["requestBody"]["content"]
        assert "text/x-dimacs" in paths[path][method]["responses"]["415"]["description"]
    assert "dimacs" not in paths["/v1/lp"]["post"]["responses"]["415"]["description"]
