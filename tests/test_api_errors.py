"""Every kind of bad request gets a 4xx application/problem+json naming the field."""

import json

import orjson
import pytest

from service.api import create_app
from service.model.fastjson import decode_columnar
from tests.conftest import scenario
from tests.http import assert_problem, post

GOOD = scenario("depots-maxflow")

@pytest.mark.parametrize("raw, fragment", [
    (b"{", "not valid JSON"),
    (b'{"source": NaN}', "not valid JSON"),
    (b'{"source": "a", "sink": "b", "arcs": [{"from": "a", "to": "b", "capacity": Infinity}]}', "not valid JSON"),
    (b'{"source": "\xff\xfe"}', "UTF-8"),
    (b"[" * 5000 + b"]" * 5000, "depth"),
    (b"", "empty"),
])
def test_undecodable_bodies_are_400(client, raw, fragment):
    doc = assert_problem(post(client, "/v1/maxflow", raw), 400)
    assert fragment in doc["detail"]


def test_wrong_media_type_is_415(client):
    assert_problem(post(client, "/v1/maxflow", orjson.dumps(GOOD), content_type="text/plain"), 415)
    assert_problem(client.post("/v1/maxflow", data=orjson.dumps(GOOD)), 415)


def test_unknown_route_and_method(client):
    assert_problem(client.get("/v1/nowhere"), 404)
    r = client.get("/v1/maxflow")
    assert_problem(r, 405)
    assert "POST" in r.headers["Allow"]


def test_body_over_the_limit_is_413_before_reading(tmp_path):
    app = create_app({"max_body_mb": 0.001, "data_dir": str(tmp_path)})
    r = app.test_client().post("/v1/maxflow", data=b"{" + b" " * 5000 + b"}", content_type="application/json")
    assert_problem(r, 413)


def test_arc_limit_is_413_with_pointer(tmp_path):
    app = create_app({"max_arcs": 3, "data_dir": str(tmp_path)})
    assert_problem(post(app.test_client(), "/v1/maxflow", GOOD), 413, pointer="/arcs")


@pytest.mark.parametrize("change, pointer", [
    (lambda b: b.pop("source"), "/source"),
    (lambda b: b.update(sink=b["source"]), "/sink"),
    (lambda b: b.update(sink="store-nowhere"), "/sink"),
    (lambda b: b.update(source=-3), "/source"),
    (lambda b: b.update(source=True), "/source"),
    (lambda b: b.update(colour="blue"), "/colour"),
    (lambda b: b.update(options={"engine": "quantum"}), "/options/engine"),
    (lambda b: b.update(options={"time_limit": "5"}), "/options/time_limit"),
    (lambda b: b.update(options={"time_limit": -1}), "/options/time_limit"),
    (lambda b: b.update(options={"time_limit": 0.005}), "/options/time_limit"),  # below 0.01 s
    (lambda b: b.update(options={"detail": ["everything"]}), "/options/detail/0"),
    (lambda b: b.update(options={"speed": 1}), "/options/speed"),
    (lambda b: b["arcs"][3].update(capacity=-5), "/arcs/3/capacity"),
    (lambda b: b["arcs"][3].update(capacity="70"), "/arcs/3/capacity"),
    (lambda b: b["arcs"][3].update(capacity=False), "/arcs/3/capacity"),
    (lambda b: b["arcs"][4].update(capacity=1e300), "/arcs/4/capacity"),
    (lambda b: b["arcs"][5].update(to=7), "/arcs/5/to"),
    (lambda b: b["arcs"][6].pop("from"), "/arcs/6/from"),
    (lambda b: b["arcs"][2].update(lower=1), "/arcs/2/lower"),
    (lambda b: b["arcs"][1].update(weight=3), "/arcs/1/weight"),
    (lambda b: b.update(arcs={"from": ["a", "b"], "to": ["b"]}), "/arcs/to"),
    (lambda b: b.update(arcs={"from": ["a"], "to": ["b"], "capacity": [float("nan")]}), "/arcs/capacity/0"),
    (lambda b: b.update(nodes=[{"id": "a"}, "b"]), "/nodes/1"),
])
def test_invalid_problems_are_422_with_pointer(client, change, pointer):
    body = json.loads(json.dumps(GOOD))
    change(body)
    raw = json.dumps(body).encode()  # json, not orjson: lets NaN through to test our check
    if b"NaN" in raw:
        # A NaN literal is not JSON; clients that send one get the 400 above. Here a
        # non-number must be named: send it as a string.
        raw = raw.replace(b"NaN", b'"NaN"')
    assert_problem(post(client, "/v1/maxflow", raw), 422, pointer=pointer)


def test_server_answers_correctly_after_errors(client):
    for raw in (b"{", b"[]", b'{"source": 1}'):
        assert post(client, "/v1/maxflow", raw).status_code in (400, 422)
    r = post(client, "/v1/maxflow", GOOD)
    assert r.status_code == 200 and r.get_json()["value"] == 160


def test_unexpected_errors_are_500_problems_without_trace(app, monkeypatch):
    from service.kinds import maxflow

    def boom(*args, **kwargs):
        raise RuntimeError("secret internals")

    # A kind is a frozen declaration: the unexpected error comes from the solver it calls.
    monkeypatch.setattr(maxflow, "maximum_flow", boom)
    r = app.test_client().post("/v1/maxflow", data=orjson.dumps(GOOD), content_type="application/json")
    doc = assert_problem(r, 500)
    assert "secret" not in r.get_data(as_text=True) and "internal" in doc["type"]


def test_failed_self_check_is_a_500_not_a_200(app, monkeypatch):
    """A wrong solver answer must be caught by the certificate, not returned."""
    import numpy as np

    from service.solvers import front

    real = front.max_flow_graph

    def wrong(*args, **kwargs):
        solution = real(*args, **kwargs)
        solution.flows = solution.flows + np.int64(1)  # every arc one unit off
        return solution

    monkeypatch.setattr(front, "max_flow_graph", wrong)
    r = app.test_client().post("/v1/maxflow", data=orjson.dumps(GOOD), content_type="application/json")
    doc = assert_problem(r, 500)
    assert "self-check" in doc["type"]


# The columnar fast decoder must agree with the ordinary one, or step aside.
@pytest.mark.parametrize("raw, pointer", [
    (b'{"source":0,"sink":2,"arcs":{"from":[0,1],"to":[1,2],"capacity":[3,true]}}', "/arcs/capacity/1"),
    (b'{"source":0,"sink":2,"arcs":{"from":[0,1],"to":[1,2],"capacity":[3,[4]]}}', "/arcs/capacity/1"),
    (b'{"source":0,"sink":2,"arcs":{"from":[0,1],"to":[1,2],"capacity":[3,"4"]}}', "/arcs/capacity/1"),
    (b'{"source":0,"sink":2,"arcs":{"from":[0,1],"to":[1,2],"capacity":[3,-4]}}', "/arcs/capacity/1"),
    (b'{"source":0,"sink":2,"arcs":{"from":[0,1],"to":[1,2.5],"capacity":[3,4]}}', "/arcs/to/1"),
    (b'{"source":0,"sink":2,"arcs":{"from":[0,-1],"to":[1,2],"capacity":[3,4]}}', "/arcs/from/1"),
    (b'{"source":0,"sink":2,"arcs":{"from":[0,[1]],"to":[1,2],"capacity":[3,4]}}', "/arcs/from/1"),
    (b'{"source":0,"sink":2,"arcs":{"from":[0,1],"to":[1,2],"capacity":[3,18446744073709551615]}}',
     "/arcs/capacity/1"),
    (b'{"source":0,"sink":2,"arcs":{"from":[0,1],"to":[1,2],"capacity":[3,4],"capacity":[1,1],"x":[]}}',
     "/arcs/x"),
])
def test_columnar_fast_path_rejects_what_the_ordinary_path_rejects(client, raw, pointer):
    assert_problem(post(client, "/v1/maxflow", raw), 422, pointer=pointer)


def test_columnar_fast_path_gives_the_ordinary_answer(client):
    body = {"source": 0, "sink": 3, "arcs": {"from": [0, 0, 1, 2, 1], "to": [1, 2, 3, 3, 2],
                                             "capacity": [4, 2.5, 3, 9, 1], "cost": [1, 2, 3, 4, 5]}}
    labelled = {**body, "arcs": {**body["arcs"], "key": ["lane[0]", "lane[1]", "lane[2]", "lane[3]", "lane[4]"]}}
    assert decode_columnar(orjson.dumps(body)) is not None
    assert decode_columnar(orjson.dumps(labelled)) is None  # "[" inside strings: ordinary path
    fast = post(client, "/v1/maxflow", body).get_json()
    slow = post(client, "/v1/maxflow", labelled).get_json()
    assert fast["value"] == slow["value"] == 6.5 and fast["flows"] == slow["flows"]
    assert fast["digest"] == slow["digest"]
