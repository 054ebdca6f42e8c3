"""POST /v1/maxflow through the Flask test client and through a real `sluice serve`."""

import socket
from fractions import Fraction

import numpy as np
import pytest

from tests.checkers import assert_cut, assert_max_flow
from tests.conftest import scenario
from tests.references import max_flow_of

OBJECTS = scenario("depots-maxflow")
COLUMNS = scenario("depots-maxflow-columns")


def check_response(body, doc):
    arcs = body["arcs"]
    if isinstance(arcs, list):
        tails, heads, caps = [a["from"] for a in arcs], [a["to"] for a in arcs], [a.get("capacity") for a in arcs]
    else:
        tails, heads, caps = arcs["from"], arcs["to"], arcs.get("capacity", [None] * len(arcs["from"]))
    ids = sorted(set(tails) | set(heads), key=str)
    pos = {v: i for i, v in enumerate(ids)}
    assert doc["status"] == "optimal"
    assert doc["value"] == max_flow_of(body)
    assert len(doc["flows"]) == len(tails)  # aligned with the request's arcs
    assert_max_flow(len(ids), [pos[t] for t in tails], [pos[h] for h in heads], caps,
                    pos[body["source"]], pos[body["sink"]], doc["flows"], doc["value"])
    assert_cut(tails, heads, caps, set(doc["cut"]["source_side"]), body["source"], body["sink"], doc["value"])
    crossing = [i for i, (t, h) in enumerate(zip(tails, heads))
                if t in doc["cut"]["source_side"] and h not in doc["cut"]["source_side"]]
    assert doc["cut"]["arcs"] == crossing
    cert = doc["certificate"]
    assert cert["checked"] is True and cert["flow_value"] == cert["cut_capacity"] == doc["value"]
    assert cert["max_imbalance"] == 0
    assert doc["digest"].startswith("sha256:") and len(doc["digest"]) == 71
    assert doc["engine"]["kind"] == "graph" and doc["engine"]["version"]
    assert set(doc["timing_ms"]) == {"parse", "solve", "total"}


@pytest.mark.parametrize("body", [OBJECTS, COLUMNS], ids=["objects-string-ids", "columns-integer-ids"])
def test_solves_both_forms(client, body):
    r = client.post("/v1/maxflow", json=body)
    assert r.status_code == 200 and r.mimetype == "application/json"
    check_response(body, r.get_json())


def test_ids_are_returned_exactly_as_sent(client):
    body = {"source": 10, "sink": 30, "arcs": {"from": [10, 20], "to": [20, 30], "capacity": [4, 9]}}
    doc = client.post("/v1/maxflow", json=body).get_json()
    assert doc["cut"]["source_side"] == [10] and doc["value"] == 4 and doc["cut"]["arcs"] == [0]


def test_same_problem_in_either_form_has_the_same_digest(client):
    as_columns = {"source": OBJECTS["source"], "sink": OBJECTS["sink"], "arcs": {
        "from": [a["from"] for a in OBJECTS["arcs"]], "to": [a["to"] for a in OBJECTS["arcs"]],
        "capacity": [a["capacity"] for a in OBJECTS["arcs"]]}}
    one = client.post("/v1/maxflow", json=OBJECTS).get_json()
    two = client.post("/v1/maxflow", json=as_columns).get_json()
    assert one["digest"] == two["digest"] and one["flows"] == two["flows"]
    three = client.post("/v1/maxflow", json={**OBJECTS, "options": {"engine": "lp"}}).get_json()
    assert three["digest"] != one["digest"] and three["engine"]["kind"] == "lp"
    assert three["value"] == pytest.approx(one["value"])


def test_detail_option_trims_the_answer(client):
    doc = client.post("/v1/maxflow", json={**OBJECTS, "options": {"detail": ["cut"]}}).get_json()
    assert "flows" not in doc and doc["cut"]["capacity"] == 160


def test_unbounded_answer_names_its_path(client):
    body = {"source": "a", "sink": "c", "arcs": [{"from": "a", "to": "b"}, {"from": "b", "to": "c", "capacity": None}]}
    doc = client.post("/v1/maxflow", json=body).get_json()
    assert doc["status"] == "unbounded" and doc["value"] is None
    assert doc["unbounded_path"] == {"arcs": [0, 1], "nodes": ["a", "b", "c"]}


def test_fractional_capacities(client):
    body = {"source": "a", "sink": "c", "arcs": {"from": ["a", "b", "a"], "to": ["b", "c", "c"],
                                                   "capacity": [0.75, 0.5, 1.1]}}
    doc = client.post("/v1/maxflow", json=body).get_json()
    assert doc["value"] == 1.6 and doc["engine"]["decimal_scale"] == 100
    body["arcs"]["capacity"] = [1 / 3, 0.5, 1 / 7]
    doc = client.post("/v1/maxflow", json=body).get_json()
    # Not decimals of at most nine places: solved exactly on their binary values,
    # whose exact sum is rounded once.
    assert doc["engine"]["kind"] == "graph" and doc["certificate"]["tolerance"] == 0
    assert doc["value"] == float(Fraction(1 / 3) + Fraction(1 / 7))
    body["options"] = {"engine": "lp"}
    doc = client.post("/v1/maxflow", json=body).get_json()
    assert doc["engine"]["kind"] == "lp" and doc["value"] == pytest.approx(1 / 3 + 1 / 7)
    assert doc["certificate"]["relative_tolerance"] > 0 and doc["certificate"]["tolerance"] > 0


def test_health_and_readiness(client):
    assert client.get("/healthz").get_json() == {"status": "ok"}
    r = client.get("/readyz")
    assert r.status_code == 200 and r.get_json()["checks"]["solver"] == "ok"


# --- a real `sluice serve` process --------------------------------------------------

@pytest.mark.server
@pytest.mark.parametrize("body", [OBJECTS, COLUMNS], ids=["objects", "columns"])
def test_real_server_solves_both_forms(server, body):
    r = server.post("/v1/maxflow", json=body, timeout=30)
    assert r.status_code == 200
    check_response(body, r.json())


@pytest.mark.server
def test_real_server_random_network_matches_networkx(server):
    rng = np.random.default_rng(7)
    n, m = 300, 3000
    body = {"source": "n0", "sink": f"n{n - 1}", "arcs": {
        "from": [f"n{i}" for i in rng.integers(0, n, m)], "to": [f"n{i}" for i in rng.integers(0, n, m)],
        "capacity": rng.integers(0, 50, m).tolist()}}
    r = server.post("/v1/maxflow", json=body, timeout=30)
    assert r.status_code == 200
    check_response(body, r.json())


@pytest.mark.server
def test_real_server_errors_are_problems_and_it_keeps_answering(server):
    r = server.post("/v1/maxflow", data=b"{nope", headers={"Content-Type": "application/json"},
                      timeout=10)
    assert r.status_code == 400 and r.headers["Content-Type"] == "application/problem+json"
    # Announce a 200 MB body and send none of it: the limit is enforced from the header.
    with socket.create_connection(("127.0.0.1", server.port), timeout=10) as conn:
        conn.sendall(b"POST /v1/maxflow HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\n"
                     b"Content-Length: 209715200\r\n\r\n")
        head = conn.recv(4096).decode()
    assert head.startswith("HTTP/1.1 413") and "application/problem+json" in head
    r = server.post("/v1/maxflow", json={**OBJECTS, "sink": "nowhere"}, timeout=10)
    assert r.status_code == 422 and r.json()["errors"][0]["pointer"] == "/sink"
    r = server.post("/v1/maxflow", json=OBJECTS, timeout=10)
    assert r.status_code == 200 and r.json()["value"] == 160
    assert server.get("/openapi.json", timeout=10).json()["info"]["title"] == "Sluice"
