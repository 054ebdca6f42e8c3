"""GET /v1/solutions/{digest}/diagram.svg: cached answers drawn by digest."""

import xml.etree.ElementTree as ET

from tests.conftest import scenario

DEPOTS = scenario("depots-maxflow")


def test_a_cached_max_flow_answer_is_drawn_with_its_cut(client):
    doc = client.post("/v1/maxflow", json=DEPOTS).get_json()
    r = client.get(f"/v1/solutions/{doc['digest']}/diagram.svg")
    assert r.status_code == 200 and r.mimetype == "image/svg+xml"
    root = ET.fromstring(r.data)  # well-formed SVG
    assert root.tag.endswith("svg")
    fresh = client.post("/v1/diagram.svg", json={"kind": "maxflow", "problem": DEPOTS})
    assert fresh.status_code == 200
    assert r.data == fresh.data  # the cached drawing equals a fresh one of the same answer


def test_unknown_digest_is_404_and_a_large_problem_413(client):
    r = client.get("/v1/solutions/sha256:" + "0" * 64 + "/diagram.svg")
    assert r.status_code == 404 and r.mimetype == "application/problem+json"
    chain = {"source": 0, "sink": 99, "arcs": {"from": list(range(99)), "to": list(range(1, 100)),
                                                "capacity": [5] * 99}}
    digest = client.post("/v1/maxflow", json=chain).get_json()["digest"]
    r = client.get(f"/v1/solutions/{digest}/diagram.svg")
    assert r.status_code == 413 and "diagrams are drawn for at most" in r.get_json()["detail"]


def test_stored_network_from_a_dimacs_file_round_trips(client):
    text = "c invented depot lanes\np max 4 5\nn 1 s\nn 4 t\na 1 2 7\na 1 3 4\na 2 3 2\na 2 4 5\na 3 4 6\n"
    r = client.put("/v1/networks/dimacs-depots", data=text, content_type="text/x-dimacs")
    assert r.status_code == 201, r.get_data(as_text=True)
    assert r.get_json()["arc_count"] == 5
    exported = client.get("/v1/networks/dimacs-depots", headers={"Accept": "text/x-dimacs"})
    assert exported.status_code == 200 and exported.mimetype == "text/x-dimacs"
    lines = [ln for ln in exported.get_data(as_text=True).splitlines() if ln.startswith("a ")]
    assert [ln.split()[1:3] for ln in lines] == [["1", "2"], ["1", "3"], ["2", "3"], ["2", "4"], ["3", "4"]]
    # the stored network answers a max-flow question (value 11 = 7 + 4 out of node 1)
    r = client.post("/v1/networks/dimacs-depots/maxflow", json={"source": 1, "sink": 4})
    assert r.status_code == 200 and r.get_json()["value"] == 11
    bad = client.put("/v1/networks/dimacs-bad", data="p max 2 1\na 1 2 x\n", content_type="text/x-dimacs")
    assert bad.status_code == 422 and bad.get_json()["errors"][0]["pointer"].startswith("/line/")


def test_a_cached_min_cost_answer_is_drawn_with_its_potentials(client):
    body = scenario("depots-mincostflow")
    doc = client.post("/v1/mincostflow", json=body).get_json()
    assert doc["status"] == "optimal"
    r = client.get(f"/v1/solutions/{doc['digest']}/diagram.svg")
    assert r.status_code == 200
    ET.fromstring(r.data)
    fresh = client.post("/v1/diagram.svg", json={"kind": "mincostflow", "problem": body})
    assert r.data == fresh.data
    assert "π" in r.data.decode()  # potentials are drawn
