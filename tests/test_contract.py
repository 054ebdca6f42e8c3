"""The OpenAPI document takes what the routes take, and the response checks can fail.

Every test client checks its responses against ``openapi/openapi.yaml`` and, for a
success, the body it sent against the documented request schema (tests/contract.py).
Here: every example the service ships (scenarios, the document's own examples, the
what-if questions a client would ask of each scenario's network) is a body its route
answers with 200 *and* one its documented request schema takes; and the checks
themselves refuse what they should, so that they cannot pass by accident.
"""

from __future__ import annotations

import pytest
from flask import Flask

from service.api import create_app
from service.kinds import KINDS
from tests.conftest import SCENARIOS, scenario
from tests.contract import (ContractBroken, SpecRequest, as_stored_question, check_accepted_body, check_request_body,
                            document, what_if_request_schema)
from tests.http import post

DOCUMENT = document()


def route_of(name: str) -> tuple[str, str]:
    """The route a scenario file is written for, and its content type (from its name:
    ``<words>-<kind>``, ``batch-*``, ``verify-*-<kind>``, ``.dimacs``)."""
    stem, _, suffix = name.partition(".")
    words = stem.split("-")
    content_type = "text/x-dimacs" if suffix == "dimacs" else "application/json"
    if words[0] == "batch":
        return "/v1/batch", content_type
    kind = next(w for w in reversed(words) if w in KINDS)
    return (f"/v1/verify/{kind}" if words[0] == "verify" else f"/v1/{kind}"), content_type


SCENARIO_FILES = sorted(p.name for p in SCENARIOS.iterdir() if p.suffix in (".json", ".dimacs"))


@pytest.mark.parametrize("name", SCENARIO_FILES)
def test_every_scenario_is_taken_by_its_route_and_by_its_documented_schema(client, name):
    path, content_type = route_of(name)
    body = scenario(name)
    check_request_body("post", path, body, content_type)
    r = post(client, path, body, content_type)
    assert r.status_code == 200, r.get_data(as_text=True)[:1000]


def test_every_kind_has_a_scenario():
    assert {route_of(n)[0] for n in SCENARIO_FILES} >= {f"/v1/{kind}" for kind in KINDS}


def concrete(path: str, operation: dict) -> str:
    """``path`` with each path parameter set to its first documented value (or a name)."""
    for parameter in operation.get("parameters", []):
        if parameter.get("in") == "path":
            value = parameter.get("schema", {}).get("enum", ["example"])[0]
            path = path.replace("{" + parameter["name"] + "}", value)
    return path


def documented_examples():
    for path, item in DOCUMENT["paths"].items():
        for method, operation in item.items():
            if method == "parameters":
                continue
            for content_type, media in operation.get("requestBody", {}).get("content", {}).items():
                if "example" in media:
                    yield pytest.param(method, concrete(path, operation), content_type, media["example"],
                                       id=f"{method} {path}")


@pytest.mark.parametrize("method, path, content_type, example", list(documented_examples()))
def test_the_documents_own_examples_follow_its_schemas(method, path, content_type, example):
    check_request_body(method, path, example, content_type)


def what_if_questions():
    """For each kind a stored network answers: the network of its scenario and the
    question it asks, as a client splits them (tests.contract.as_stored_question)."""
    for name, kind in sorted(KINDS.items()):
        if what_if_request_schema(name) is not None:
            network, question = as_stored_question(name, scenario(kind.example))
            yield pytest.param(name, network, question, id=name)


@pytest.mark.parametrize("name, network, question", list(what_if_questions()))
def test_what_if_questions_are_taken_by_the_route_and_the_document(client, name, network, question):
    check_request_body("put", f"/v1/networks/doc-{name}", network)
    check_request_body("post", f"/v1/networks/doc-{name}/{name}", question)
    assert client.put(f"/v1/networks/doc-{name}", json=network).status_code == 201
    r = client.post(f"/v1/networks/doc-{name}/{name}", json=question)
    assert r.status_code == 200, r.get_json()
    asked, whole = r.get_json(), client.post(f"/v1/{name}", json=scenario(KINDS[name].example)).get_json()
    for doc in (asked, whole):
        doc.pop("timing_ms"), doc.pop("network", None)
    assert asked == whole  # the same question, asked of the stored network


def test_the_mincostflow_what_if_documents_its_supplies():
    """The bug this file was written for: the document took only ``changes``."""
    schema = DOCUMENT["components"]["schemas"]["MincostflowWhatIfRequest"]
    assert {"supplies", "changes", "options"} <= set(schema["properties"])


# -- the checks can fail ----------------------------------------------------------------


def test_a_body_off_the_documented_schema_is_refused():
    body = scenario("depots-maxflow")
    check_request_body("post", "/v1/maxflow", body)
    with pytest.raises(ContractBroken, match="refuses"):
        check_request_body("post", "/v1/maxflow", {**body, "sauce": "extra"})
    with pytest.raises(ContractBroken, match="refuses"):
        check_request_body("post", "/v1/networks/x/mincostflow", {"supplies": [], "surprise": 1})


def test_a_success_to_an_undocumented_body_breaks_the_contract(client):
    body = scenario("depots-maxflow")
    # The service refuses unknown fields itself, so the check is shown a 200 it did
    # not give: a success to a body the schema refuses is what it must catch.
    with pytest.raises(ContractBroken, match="answered 200 to a body"):
        check_accepted_body(SpecRequest("post", "/v1/maxflow", b'{"sauce": 1}'), 200)
    assert post(client, "/v1/maxflow", body).status_code == 200


def test_an_answer_off_its_schema_breaks_the_contract():
    # A stand-in app answering a documented path with a body off its schema (the
    # service's own answers are what every other test checks).
    app = Flask(__name__)
    app.add_url_rule("/healthz", "healthz", lambda: {"status": 5})
    app.add_url_rule("/readyz", "readyz", lambda: ({"status": "ready"}, 418))
    client = app.test_client()
    with pytest.raises(ContractBroken, match="healthz"):
        client.get("/healthz")
    with pytest.raises(ContractBroken, match="418"):
        client.get("/readyz")


def test_an_undocumented_route_breaks_the_contract(tmp_path):
    app = create_app({"data_dir": str(tmp_path)})
    app.add_url_rule("/v1/secret", "secret", lambda: {"ok": True})
    client = app.test_client()
    with pytest.raises(ContractBroken, match="not in openapi.yaml"):
        client.get("/v1/secret")
    assert client.get("/v1/nowhere").status_code == 404  # no route at all: a 404 problem is fine
