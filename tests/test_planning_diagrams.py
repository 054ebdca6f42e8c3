"""Diagrams of the planning kinds: the worst closures (resilience) and the widened lanes
(expansion) marked, fresh and through the cached-answer route; every SVG parsed with
xml.etree. (Routing and label geometry: tests/test_diagram_geometry.py covers these
kinds through their scenarios and random networks.)"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import pytest

from tests.conftest import scenario

SVG = "{http://www.w3.org/2000/svg}"


def arcs_by_class(svg: bytes) -> tuple[dict, dict]:
    """(arc index -> its mark class, arc index -> its label text) of a diagram."""
    root = ET.fromstring(svg)
    marks, labels = {}, {}
    for g in root.iter(f"{SVG}g"):
        classes = g.get("class", "").split()
        if "arc" in classes:
            a = int(g.get("data-arc"))
            marks[a] = next(c for c in classes if c.endswith("-arc") and c != "arc")
    for t in root.iter(f"{SVG}text"):
        if t.get("class") == "arc-label" and t.get("data-arc") is not None:
            labels[int(t.get("data-arc"))] = t.text
    return marks, labels


def both_routes(client, kind: str, body: dict) -> list[bytes]:
    fresh = client.post("/v1/diagram.svg", json={"kind": kind, "problem": body})
    assert fresh.status_code == 200, fresh.get_data(as_text=True)
    solved = client.post(f"/v1/{kind}", json=body)
    cached = client.get(f"/v1/solutions/{solved.get_json()['digest']}/diagram.svg")
    assert cached.status_code == 200, cached.get_data(as_text=True)
    return [fresh.data, cached.data]


@pytest.mark.parametrize("route", [0, 1], ids=["fresh", "cached"])
def test_resilience_marks_the_worst_closures_with_their_loss(client, route):
    body = scenario("night-pallets-resilience.json")
    answer = client.post("/v1/resilience", json=body).get_json()
    svg = both_routes(client, "resilience", body)[route]
    marks, _ = arcs_by_class(svg)
    worst = [f["arc"] for f in answer["failures"][:3]]
    assert [a for a, m in sorted(marks.items()) if m == "closure-arc"] == sorted(worst)
    text = svg.decode()
    for f in answer["failures"][:3]:
        assert f"−{f['loss']:g}" in text
    assert f"worst closure leaves {answer['failures'][0]['value_without']:g}" in text


@pytest.mark.parametrize("route", [0, 1], ids=["fresh", "cached"])
def test_expansion_marks_the_widened_lanes_with_the_capacity_added(client, route):
    body = scenario("night-pallets-expansion.json")
    answer = client.post("/v1/expansion", json=body).get_json()
    svg = both_routes(client, "expansion", body)[route]
    marks, _ = arcs_by_class(svg)
    assert answer["widened"] and [a for a, m in sorted(marks.items()) if m == "widened-arc"] == answer["widened"]
    text = svg.decode()
    for a in answer["widened"]:
        assert f"+{answer['additions'][a]:g}" in text
    assert f"cost {answer['cost']:g}" in text


def test_an_expansion_out_of_reach_marks_the_cut(client):
    body = scenario("night-pallets-expansion.json") | {"target": 5000}
    answer = client.post("/v1/expansion", json=body).get_json()
    assert answer["status"] == "infeasible"
    svg = both_routes(client, "expansion", body)[0]
    marks, _ = arcs_by_class(svg)
    assert [a for a, m in sorted(marks.items()) if m == "cut-arc"] == sorted(answer["cut"]["arcs"])
    assert b"out of reach" in svg


def _classes(svg: bytes, css: str) -> list:
    return [r for r in ET.fromstring(svg).iter(f"{SVG}rect") if r.get("class") == css]


@pytest.mark.parametrize("route", [0, 1], ids=["fresh", "cached"])
def test_flowovertime_draws_departures_holdover_shut_periods_and_the_cut(client, route):
    body = scenario("xdock-night-flowovertime.json")
    answer = client.post("/v1/flowovertime", json=body).get_json()
    svg = both_routes(client, "flowovertime", body)[route]
    root = ET.fromstring(svg)
    assert root.get("data-horizon") == "12"
    assert len(_classes(svg, "departure")) == len(answer["departures"])
    assert len(_classes(svg, "holdover")) == len(answer["holdover"]) > 0
    cut = answer["cut"]
    assert len(_classes(svg, "cut")) == len(cut["departures"]) + len(cut["holdover"])
    closure = body["arcs"][3]["capacity"]
    shut = [int(r.get("x").split(".")[0]) for r in _classes(svg, "shut")]
    assert len(shut) == closure.count(0)
    labels = [t.text for t in root.iter(f"{SVG}text") if t.get("class") == "node-label"]
    assert "van-ormsby-night-closure (1)" in labels  # the lane's key and transit, on both routes
    assert f"Most by the horizon: {answer['value']:g} units" in svg.decode()


def test_the_timeline_check_can_fail(client):
    from tests.test_diagram_geometry import arc_ends, check_timeline

    body = scenario("xdock-night-flowovertime.json")
    svg = client.post("/v1/diagram.svg", json={"kind": "flowovertime", "problem": body}).data
    check_timeline(svg, arc_ends(body))
    moved = svg.replace(b'class="departure" data-period="0"', b'class="departure" data-period="3"', 1)
    with pytest.raises(AssertionError):
        check_timeline(moved, arc_ends(body))
    with pytest.raises(AssertionError):
        check_timeline(svg, arc_ends(body)[:-1])


def test_a_min_cost_schedule_is_drawn_with_its_deliveries(client):
    body = scenario("xdock-night-flowovertime.json")
    body = {k: v for k, v in body.items() if k not in ("source", "sink")} | {"objective": "min-cost", "options": {}}
    body["nodes"][0]["supply"], body["nodes"][3]["supply"] = 50, -50
    svg = both_routes(client, "flowovertime", body)[0]
    assert b"Min-cost schedule: cost" in svg and b"demand met" in svg
