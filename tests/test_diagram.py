"""SVG diagrams of solved networks: well-formed, the cut or binding arcs marked, limits."""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET

import networkx as nx
import numpy as np
import pytest

from service.api import create_app
from service.api.diagram import render_diagram, solution_diagram
from service.drawing.layout import layered_layout
from service.solvers.graph import Graph
from service.errors import InputError
from service.kinds import KINDS
from tests.conftest import scenario

SVG = "{http://www.w3.org/2000/svg}"
DEPOTS = scenario("depots-maxflow")
MC_PLAN = scenario("verify-depots-mincostflow")


def groups(root, css: str) -> list:
    return [g for g in root.iter(f"{SVG}g") if css in g.get("class", "").split()]


def draw(client, kind, problem):
    r = client.post("/v1/diagram.svg", json={"kind": kind, "problem": problem})
    assert r.status_code == 200 and r.mimetype == "image/svg+xml", r.data[:300]
    return ET.fromstring(r.data)  # well-formed XML or this raises


def test_maxflow_diagram_marks_exactly_the_minimum_cut(client):
    root = draw(client, "maxflow", DEPOTS)
    answer = client.post("/v1/maxflow", json=DEPOTS).get_json()
    assert root.tag == f"{SVG}svg" and root.get("data-kind") == "maxflow"
    arcs = groups(root, "arc")
    assert [int(g.get("data-arc")) for g in arcs] == list(range(len(DEPOTS["arcs"])))
    cut = {int(g.get("data-arc")) for g in groups(root, "cut-arc")}
    assert cut == set(answer["cut"]["arcs"]) == {6, 7}
    for g in groups(root, "cut-arc"):
        assert len([x for x in g.iter(f"{SVG}line") if x.get("class") == "notch"]) == 2
    source_side = {g.get("data-node") for g in groups(root, "source-side")}
    sink_side = {g.get("data-node") for g in groups(root, "sink-side")}
    assert source_side == set(answer["cut"]["source_side"]) and sink_side == {"store-quillmouth"}
    texts = " ".join(t.text or "" for t in root.iter(f"{SVG}text"))
    assert "Max flow 160" in texts and "100/100" in texts and "0/25" in texts
    idle = {int(g.get("data-arc")) for g in groups(root, "idle-arc")}
    assert idle == {i for i, f in enumerate(answer["flows"]) if f == 0}


def test_layout_is_layered_from_source_to_sink():
    rng = np.random.default_rng(4)
    n, m = 15, 40
    tail, head = rng.integers(0, n, m), rng.integers(0, n, m)
    layer, rank = layered_layout(Graph(n, tail, head), [0], [n - 1])
    g = nx.DiGraph()
    g.add_nodes_from(range(n))
    g.add_edges_from(zip(tail.tolist(), head.tolist()))
    distance = nx.single_source_shortest_path_length(g, 0)  # the reference breadth-first layers
    inner = [v for v in range(n) if v != n - 1]
    reached = [v for v in inner if v in distance]
    strays = [v for v in inner if v not in distance]
    assert strays, "the instance should have nodes the source cannot reach"
    assert all(layer[v] == distance[v] for v in reached)
    assert layer[n - 1] == max(layer[v] for v in reached) + 1  # the sink: a column of its own, at the right
    assert (layer == layer[n - 1]).sum() == 1
    assert all(layer[v] == layer[n - 1] + 1 for v in strays)  # unreached nodes: a last column
    for k in range(int(layer.max()) + 1):  # ranks are 0..size-1 within each layer
        assert sorted(rank[layer == k].tolist()) == list(range(int((layer == k).sum())))


def test_unbounded_answer_draws_its_path(client):
    body = {"source": "a", "sink": "c", "arcs": [{"from": "a", "to": "b"}, {"from": "b", "to": "c", "capacity": None},
                                                 {"from": "a", "to": "c", "capacity": 3}]}
    root = draw(client, "maxflow", body)
    assert {int(g.get("data-arc")) for g in groups(root, "proof-arc")} == {0, 1}


def test_ids_are_escaped(client):
    body = {"source": "<dock & \"co\">", "sink": "t'", "arcs": [{"from": "<dock & \"co\">", "to": "t'", "capacity": 2}]}
    root = draw(client, "maxflow", body)
    labels = [t.text for t in root.iter(f"{SVG}text") if t.get("class") == "node-label"]
    assert labels == ["<dock & \"co\">", "t'"]


def test_size_limits_give_413(tmp_path):
    client = create_app({"data_dir": str(tmp_path), "max_diagram_nodes": 5, "max_diagram_arcs": 8}).test_client()
    r = client.post("/v1/diagram.svg", json={"kind": "maxflow", "problem": DEPOTS})
    assert r.status_code == 413 and r.mimetype == "application/problem+json"
    assert r.get_json()["errors"][0]["pointer"] == "/problem/arcs"
    assert "SLUICE_MAX_DIAGRAM_ARCS" in r.get_json()["detail"]  # parsed once, within the diagram limits
    small = {**DEPOTS, "arcs": DEPOTS["arcs"][:8]}
    r = client.post("/v1/diagram.svg", json={"kind": "maxflow", "problem": small})
    assert r.status_code == 413 and r.get_json()["errors"][0]["pointer"] == "/problem/nodes"


def test_bad_requests(client):
    r = client.post("/v1/diagram.svg", json={"kind": "lp", "problem": {}})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/kind"
    r = client.post("/v1/diagram.svg", json={"kind": "maxflow", "problem": {**DEPOTS, "sink": "nowhere"}})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/problem/sink"
    r = client.post("/v1/diagram.svg", json={"kind": "maxflow"})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/problem"


def test_min_cost_answer_marks_binding_arcs_and_potentials(client):
    # The optimal plan of the invented depots instance (see tests/test_verify.py), and its
    # potentials as the plan check returns them; drawn without needing the min-cost solver.
    flows = [80, 20, 20, 70, 30, 30]
    checked = client.post("/v1/verify/mincostflow", json={**MC_PLAN, "flows": flows}).get_json()
    assert checked["optimal"]
    result = {"status": "optimal", "cost": checked["cost"], "flows": flows,
              "node_ids": checked["node_ids"], "potentials": checked["potentials"]}
    root = ET.fromstring(render_diagram("mincostflow", MC_PLAN["problem"], result))
    binding = {int(g.get("data-arc")) for g in groups(root, "binding-arc")}
    caps = [a["capacity"] for a in MC_PLAN["problem"]["arcs"]]
    assert binding == {i for i, (f, c) in enumerate(zip(flows, caps)) if f == c} == {0, 3, 5}
    shown = [t.text for t in root.iter(f"{SVG}text") if t.get("class") == "potential"]
    assert shown == [f"π = {p:g}" for p in checked["potentials"]]
    roles = [t.text for t in root.iter(f"{SVG}text") if t.get("class") == "role"]
    assert sorted(roles) == sorted(["SUPPLY 100", "SUPPLY 50", "DEMAND 90", "DEMAND 60"])


def test_cached_solution_hook_draws_a_response(app):
    with app.app_context():
        answer = app.test_client().post("/v1/maxflow", json=DEPOTS).get_json()
        response = solution_diagram("maxflow", DEPOTS, answer)
        assert response.mimetype == "image/svg+xml"
        root = ET.fromstring(response.get_data())
        assert {int(g.get("data-arc")) for g in groups(root, "cut-arc")} == {6, 7}
        with pytest.raises(InputError):
            solution_diagram("assignment", {}, {})


@pytest.mark.skipif("mincostflow" not in KINDS, reason="the mincostflow kind (issue 3) is not registered on this branch")
def test_min_cost_diagram_over_http(client):
    root = draw(client, "mincostflow", MC_PLAN["problem"])
    assert root.get("data-kind") == "mincostflow" and groups(root, "binding-arc")


def test_control_characters_in_ids_and_keys_stay_well_formed(client):
    # XML 1.0 cannot carry U+0000 or the other C0 controls, not even as character
    # references (XML 1.0, section 2.2 "Characters": only #x9, #xA, #xD below #x20).
    a, t, mid = "dock\u0000a", "t\u001fz", "mid\\x\u007f"
    body = {"source": a, "sink": t, "arcs": [{"from": a, "to": t, "capacity": 2, "key": "lane\u0001"},
                                             {"from": a, "to": mid, "capacity": 1},
                                             {"from": mid, "to": t, "capacity": 5}]}
    raw = client.post("/v1/diagram.svg", json={"kind": "maxflow", "problem": body}).data
    assert not set(raw.decode()) & {chr(c) for c in range(32) if c not in (9, 10, 13)}
    root = draw(client, "maxflow", body)  # parses, so well-formed
    labels = [t.text for t in root.iter(f"{SVG}text") if t.get("class") == "node-label"]
    assert labels == ["dock\u2400a", "t\u241fz", "mid\\x\u2421"]  # control pictures
    # data-node spells ids reversibly, as JSON would
    exact = [g.get("data-node") for g in groups(root, "node")]
    assert [json.loads(f'"{v}"') for v in exact] == [a, t, mid]
    titles = [g.find(f"{SVG}title").text for g in groups(root, "arc")]
    assert titles[0] == "arc 0 (lane\u2401): dock\u2400a → t\u241fz"
    digest = client.post("/v1/maxflow", json=body).get_json()["digest"]
    cached = client.get(f"/v1/solutions/{digest}/diagram.svg")
    assert cached.status_code == 200 and cached.data == raw  # the cached answer draws the same


def test_lower_bounds_are_drawn(client):
    body = scenario("depots-mincostflow")
    lower = [i for i, a in enumerate(body["arcs"]) if a.get("lower")]
    assert lower, "the scenario should have an arc with a lower bound"
    root = draw(client, "mincostflow", body)
    assert {int(g.get("data-arc")) for g in groups(root, "lower-bounded")} == set(lower)
    flows = client.post("/v1/mincostflow", json=body).get_json()["flows"]
    shown = {int(t.get("data-arc")): t.text for t in root.iter(f"{SVG}text") if t.get("class") == "arc-label"}
    for i in lower:
        arc = body["arcs"][i]
        assert shown[i] == f"{flows[i]:g}/{arc['lower']}..{arc['capacity']} @{arc['cost']}"
    legend = [t.text for t in root.iter(f"{SVG}text") if t.get("class") == "legend"]
    assert "flow/lower..capacity @cost" in legend
