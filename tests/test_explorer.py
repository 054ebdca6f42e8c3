"""The explorer page's routes and the scenario listing (the page itself: test_explorer_browser.py)."""

from __future__ import annotations


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
