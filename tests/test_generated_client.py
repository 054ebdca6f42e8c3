"""A client generated from ``openapi/openapi.yaml`` calls every kind on a real server.

openapi-python-client writes a typed client from the committed document (once per test
session, into a scratch folder); the tests then drive ``sluice serve`` through it, as a
client team would. Every kind in :data:`service.kinds.KINDS` is called with its
scenario (``POST /v1/<kind>``), and every kind that can be asked of a stored network
with the same problem split into a stored network and a question
(``PUT /v1/networks/{name}``, then ``POST /v1/networks/{name}/<kind>``, split as
tests.contract.as_stored_question says). What the
generated models let through is compared with what the scenario holds: a field the
document forgets is one the generated client silently drops.
"""

from __future__ import annotations

import importlib
import inspect
import subprocess
import sys

import pytest

from service.kinds import KINDS
from tests.contract import SPEC_FILE, as_stored_question, document
from tests.conftest import scenario

pytestmark = pytest.mark.server

PACKAGE = "sluice_generated_client"
DOCUMENT = document()


@pytest.fixture(scope="session")
def generated(tmp_path_factory):
    """The generated package, imported (generated once per session)."""
    where = tmp_path_factory.mktemp("generated-client")
    config = where / "config.yaml"
    config.write_text(f"package_name_override: {PACKAGE}\npost_hooks: []\n")
    done = subprocess.run(
        [sys.executable, "-m", "openapi_python_client", "generate", "--path", str(SPEC_FILE), "--meta", "none",
         "--config", str(config), "--output-path", str(where / PACKAGE)],
        capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stdout + done.stderr
    sys.path.insert(0, str(where))
    try:
        yield importlib.import_module(PACKAGE)
    finally:
        sys.path.remove(str(where))
        for name in [m for m in sys.modules if m == PACKAGE or m.startswith(PACKAGE + ".")]:
            del sys.modules[name]


@pytest.fixture(scope="session")
def api(generated, server):
    """The generated client's ``Client`` on the session's real server."""
    with generated.Client(base_url=server.url, raise_on_unexpected_status=True, timeout=60) as client:
        yield client


def operation(generated, path: str, method: str):
    """The generated module of ``method path`` (named by its operationId)."""
    operation_id = DOCUMENT["paths"][path][method]["operationId"]
    return importlib.import_module(f"{generated.__name__}.api.default.{operation_id}")


def body_model(module):
    """The model class the generated operation takes as its JSON ``body``."""
    annotation = inspect.signature(module.sync_detailed).parameters["body"].annotation
    if isinstance(annotation, str):  # postponed annotations: look the name up where it was written
        annotation = vars(module)[annotation]
    return annotation


def call(generated, api, path: str, method: str, body: dict, **parameters):
    """Send ``body`` through the generated model and operation; the detailed response."""
    module = operation(generated, path, method)
    model = body_model(module).from_dict(body)
    # What the generated client would send: a field the document lacks is lost here.
    assert model.to_dict() == body, f"the generated {type(model).__name__} does not carry the body whole"
    return module.sync_detailed(client=api, body=model, **parameters)


def answer(response) -> dict:
    """The parsed answer as a dict, without the timing (which differs between calls)."""
    assert response.status_code == 200, response.content[:2000]
    doc = response.parsed.to_dict()
    doc.pop("timing_ms", None)
    doc.pop("network", None)
    return doc


def what_if_kinds() -> list[str]:
    """Kinds the document lets a client ask of a stored network."""
    return sorted(name for name in KINDS if f"/v1/networks/{{name}}/{name}" in DOCUMENT["paths"])


@pytest.mark.parametrize("name", sorted(KINDS))
def test_the_generated_client_solves_every_kind(generated, api, server, name):
    body = scenario(KINDS[name].example)
    got = answer(call(generated, api, f"/v1/{name}", "post", body))
    assert got["status"] == "optimal" and got["certificate"]["checked"] is True
    # The same answer as the service gives a plain JSON client (checked against the
    # document too): the generated models neither lose nor change a field of it.
    direct = server.post(f"/v1/{name}", json=body, timeout=60).json()
    direct.pop("timing_ms")
    assert got == direct


def test_what_if_kinds_are_the_kinds_that_say_so():
    assert what_if_kinds() == sorted(n for n, kind in KINDS.items() if kind.from_network is not None)
    assert "mincostflow" in what_if_kinds()


@pytest.mark.parametrize("name", what_if_kinds())
def test_the_generated_client_asks_a_stored_network(generated, api, name):
    """PUT the scenario's network, then ask its question of the stored copy (for
    mincostflow: supplies in the question): the answer equals the direct solve's."""
    body = scenario(KINDS[name].example)
    path = f"/v1/networks/{{name}}/{name}"
    network, question = as_stored_question(name, body)
    stored = call(generated, api, "/v1/networks/{name}", "put", network, name=f"generated-{name}")
    assert stored.status_code in (200, 201), stored.content
    assert stored.parsed.arc_count == len(body["arcs"])
    asked = answer(call(generated, api, path, "post", question, name=f"generated-{name}"))
    direct = answer(call(generated, api, f"/v1/{name}", "post", body))
    assert asked["status"] == "optimal" and asked["certificate"]["checked"] is True
    assert asked == direct


def test_a_what_if_with_supplies_and_changes(generated, api):
    """Min-cost flow on a stored network with supplies and a closed lane, through the
    generated client; the reference is the direct solve of the changed problem."""
    body = scenario(KINDS["mincostflow"].example)
    network, question = as_stored_question("mincostflow", body)
    assert question["supplies"], "the scenario has supplies to send"
    call(generated, api, "/v1/networks/{name}", "put", network, name="generated-closed")
    closed = next(i for i, a in enumerate(body["arcs"]) if not a.get("lower"))
    asked = answer(call(generated, api, "/v1/networks/{name}/mincostflow", "post",
                        {**question, "changes": [{"arc": closed, "closed": True}]}, name="generated-closed"))
    changed = {**body, "arcs": [{**a, "capacity": 0} if i == closed else a for i, a in enumerate(body["arcs"])]}
    direct = answer(call(generated, api, "/v1/mincostflow", "post", changed))
    assert asked["status"] == direct["status"]
    assert asked.get("cost") == direct.get("cost") and asked.get("flows") == direct.get("flows")
    if asked["status"] == "optimal":
        assert asked["flows"][closed] == 0
