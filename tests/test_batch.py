"""POST /v1/batch: order, per-item failures with item-relative pointers, limits.

Reference: networkx.maximum_flow_value for every item's value.
"""

from __future__ import annotations


import numpy as np
import pytest

from service.api import create_app
from service.kinds import KINDS
from tests.conftest import scenario
from tests.references import max_flow_of

DEPOTS = scenario("depots-maxflow")


def random_item(rng, n=8, m=20) -> dict:
    arcs = [{"from": f"n{a}", "to": f"n{b}", "capacity": int(c)}
            for a, b, c in zip(rng.integers(0, n, m), rng.integers(0, n, m), rng.integers(0, 30, m)) if a != b]
    arcs.append({"from": "n0", "to": f"n{n - 1}", "capacity": 1})  # both ends always exist
    return {"source": "n0", "sink": f"n{n - 1}", "arcs": arcs}


def test_results_come_back_in_order_and_match_networkx(client):
    rng = np.random.default_rng(11)
    problems = [random_item(rng) for _ in range(25)]
    r = client.post("/v1/batch", json={"items": [{"kind": "maxflow", "problem": p} for p in problems]})
    assert r.status_code == 200
    results = r.get_json()["results"]
    assert len(results) == len(problems)
    for problem, result in zip(problems, results):
        assert result["status"] == "optimal" and result["certificate"]["checked"] is True
        assert result["value"] == max_flow_of(problem)
        assert len(result["flows"]) == len(problem["arcs"])
        assert set(result["timing_ms"]) == {"parse", "solve", "total"}


def test_a_batch_answer_equals_the_single_answer(client):
    single = client.post("/v1/maxflow", json=DEPOTS).get_json()
    (item,) = client.post("/v1/batch", json={"items": [{"kind": "maxflow", "problem": DEPOTS}]}).get_json()["results"]
    single.pop("timing_ms")
    item.pop("timing_ms")
    assert item == single


def test_bad_items_fail_alone_with_pointers_relative_to_the_item(client):
    bad_capacity = {"source": "a", "sink": "b", "arcs": [{"from": "a", "to": "b", "capacity": -4}]}
    items = [
        {"kind": "maxflow", "problem": DEPOTS},
        {"kind": "maxflow", "problem": bad_capacity},
        {"kind": "teleport", "problem": DEPOTS},
        {"problem": DEPOTS},
        {"kind": "maxflow"},
        "not an item",
        {"kind": "maxflow", "problem": DEPOTS, "priority": 1},
        {"kind": "maxflow", "problem": {**DEPOTS, "sink": "nowhere"}},
        {"kind": "maxflow", "problem": [1, 2]},
        {"kind": "maxflow", "problem": DEPOTS},
    ]
    r = client.post("/v1/batch", json={"items": items})
    assert r.status_code == 200
    results = r.get_json()["results"]
    assert [x.get("value") for x in (results[0], results[-1])] == [160, 160]
    expected = {1: "/problem/arcs/0/capacity", 2: "/kind", 3: "/kind", 4: "/problem", 5: "", 6: "/priority",
                7: "/problem/sink", 8: "/problem"}
    for i, pointer in expected.items():
        problem = results[i]
        assert problem["status"] == 422 and problem["type"] == "urn:sluice:problem:invalid-input", (i, problem)
        assert problem["item"] == i
        assert problem["errors"][0]["pointer"] == pointer, (i, problem)
    assert "must be >= 0" in results[1]["errors"][0]["detail"]


def test_whole_batch_errors(client):
    assert client.post("/v1/batch", json={"items": []}).get_json() == {"results": []}
    for body, pointer in (({}, "/items"), ({"items": {}}, "/items"), ([], ""), ({"items": [], "x": 1}, "/x")):
        r = client.post("/v1/batch", json=body)
        assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == pointer
    r = client.post("/v1/batch", data=b"{", headers={"Content-Type": "application/json"})
    assert r.status_code == 400
    r = client.post("/v1/batch", data=b"items", headers={"Content-Type": "text/plain"})
    assert r.status_code == 415


def test_item_limit_is_configurable(tmp_path):
    client = create_app({"data_dir": str(tmp_path), "max_batch_items": 3}).test_client()
    item = {"kind": "maxflow", "problem": DEPOTS}
    assert client.post("/v1/batch", json={"items": [item] * 3}).status_code == 200
    r = client.post("/v1/batch", json={"items": [item] * 4})
    assert r.status_code == 413 and r.get_json()["errors"] == [
        {"pointer": "/items", "detail": "has 4 items; the limit is 3"}]


def test_items_past_the_time_limit_get_a_504_problem(tmp_path):
    # A time limit of 0 has run out before the first item: every item is refused alone.
    client = create_app({"data_dir": str(tmp_path), "time_limit": 0.0}).test_client()
    results = client.post("/v1/batch", json={"items": [{"kind": "maxflow", "problem": DEPOTS}] * 2}).get_json()[
        "results"]
    assert [x["status"] for x in results] == [504, 504] and [x["item"] for x in results] == [0, 1]


@pytest.mark.skipif("mincostflow" not in KINDS, reason="the mincostflow kind (issue 3) is not registered on this branch")
def test_kinds_can_be_mixed(client):
    plan = scenario("verify-depots-mincostflow")
    results = client.post("/v1/batch", json={"items": [{"kind": "mincostflow", "problem": plan["problem"]},
                                                        {"kind": "maxflow", "problem": DEPOTS}]}).get_json()["results"]
    assert results[0]["cost"] == 1080 and results[1]["value"] == 160


def test_batch_scenario_file(client):
    body = scenario("batch-depots")
    results = client.post("/v1/batch", json=body).get_json()["results"]
    assert results[0]["value"] == 160 and results[1]["value"] == max_flow_of(body["items"][1]["problem"])
    assert results[2]["errors"][0]["pointer"] == "/problem/sink"
