"""The committed OpenAPI document matches the code and is a valid OpenAPI 3.1 document."""

from pathlib import Path

import yaml
from openapi_spec_validator import validate

from service.api.spec import build_spec

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


def test_every_route_is_documented(app):
    documented = set(build_spec()["paths"])
    routed = {str(rule) for rule in app.url_map.iter_rules() if rule.endpoint != "static"}
    flask_style = {p.replace("{", "<").replace("}", ">") for p in documented}
    missing = {r for r in routed if r not in flask_style and not any(
        r.replace("<", "{").replace(">", "}").split(":")[-1] == d for d in documented)}
    assert not missing, f"routes without a spec entry: {sorted(missing)}"
