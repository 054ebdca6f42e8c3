"""The explorer page's routes and the scenario listing (the page itself: test_explorer_browser.py)."""

from __future__ import annotations

from service.api.explorer import EXAMPLES, SHARED_EXAMPLES
from service.kinds import KINDS
from tests.conftest import SCENARIOS, scenario


def test_page_and_assets(client):
    r = client.get("/")
    assert r.status_code == 200 and r.mimetype == "text/html"
    html = r.get_data(as_text=True)
    assert '<script src="/explorer/explorer.js">' in html and 'id="diagram"' in html
    assert client.get("/explorer/explorer.js").mimetype == "text/javascript"
    assert client.get("/explorer/explorer.css").mimetype == "text/css"
    r = client.get("/explorer/secret.py")
    assert r.status_code == 404 and r.mimetype == "application/problem+json"


def test_scenarios_are_listed_with_kind_and_endpoint(client):
    listed = {s["name"]: s for s in client.get("/v1/scenarios").get_json()["scenarios"]}
    files = {p.stem for p in SCENARIOS.iterdir() if p.suffix == ".json"}
    files |= {p.name for p in SCENARIOS.iterdir() if p.suffix == ".dimacs"}
    assert set(listed) == files and "depots-maxflow.dimacs" in files
    assert listed["depots-maxflow"] == {"name": "depots-maxflow", "kind": "maxflow", "endpoint": "/v1/maxflow",
                                        "title": "depots", "media_type": "application/json"}
    assert listed["verify-depots-maxflow"]["endpoint"] == "/v1/verify/maxflow"
    assert listed["verify-depots-mincostflow"]["endpoint"] == "/v1/verify/mincostflow"
    assert listed["batch-depots"]["endpoint"] == "/v1/batch"
    assert listed["depots-maxflow.dimacs"] == {"name": "depots-maxflow.dimacs", "kind": "maxflow",
                                               "endpoint": "/v1/maxflow", "title": "depots",
                                               "media_type": "text/x-dimacs"}


def test_every_scenario_is_answered_by_its_endpoint(client):
    for s in client.get("/v1/scenarios").get_json()["scenarios"]:
        if s["endpoint"] is None:
            continue
        r = client.get(f"/v1/scenarios/{s['name']}")
        assert r.status_code == 200 and r.mimetype == s["media_type"]
        answer = client.post(s["endpoint"], data=r.data, content_type=s["media_type"])
        assert answer.status_code == 200, (s, answer.get_json())


def test_scenario_body_is_the_file(client):
    r = client.get("/v1/scenarios/depots-maxflow")
    assert r.get_json() == scenario("depots-maxflow")
    r = client.get("/v1/scenarios/depots-maxflow.dimacs")
    assert r.mimetype == "text/x-dimacs" and r.get_data(as_text=True).startswith("c Invented")
    r = client.get("/v1/scenarios/no-such-thing")
    assert r.status_code == 404 and r.mimetype == "application/problem+json"


#: The files GET /v1/scenarios served before the kinds declared their own examples
#: (service/api/explorer.py's hard-coded list): moving the list must not change it.
SERVED = {
    "batch-depots", "depots-lp", "depots-lp-matrix", "depots-maxflow", "depots-maxflow-columns",
    "depots-maxflow.dimacs", "depots-mincostflow", "depots-multicommodity", "depots-multicommodity-whole",
    "night-pallets-expansion", "night-pallets-resilience", "vans-assignment", "verify-depots-maxflow",
    "verify-depots-mincostflow", "xdock-night-flowovertime",
}


def test_the_served_files_are_the_same_as_before(client):
    listed = [s["name"] for s in client.get("/v1/scenarios").get_json()["scenarios"]]
    assert len(listed) == len(set(listed)) and set(listed) == SERVED
    for name in listed:
        assert client.get(f"/v1/scenarios/{name}").status_code == 200, name


def test_each_kind_declares_the_examples_of_its_own_endpoints(client):
    """A kind's ``examples`` are listed under that kind; only SHARED_EXAMPLES belong to none."""
    listed = {s["name"]: s for s in client.get("/v1/scenarios").get_json()["scenarios"]}
    declared = [name for kind in KINDS.values() for name in (kind.example, *kind.examples)]
    assert len(declared) == len(set(declared)), "a file is declared by two kinds (or twice)"
    assert set(EXAMPLES) == set(declared) | set(SHARED_EXAMPLES)
    assert not set(SHARED_EXAMPLES) & set(declared)
    for kind in KINDS.values():
        for file in (kind.example, *kind.examples):
            name = file.removesuffix(".json")
            assert listed[name]["kind"] == kind.name, (kind.name, listed[name])
    for file in SHARED_EXAMPLES:
        assert listed[file.removesuffix(".json")]["kind"] is None
