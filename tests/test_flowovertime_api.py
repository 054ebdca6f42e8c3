"""POST /v1/flowovertime over HTTP (Flask test client): the scenario, both arc forms, bad
input by pointer, the size limit, batch items, jobs, the result cache.

Every schedule that comes back is walked unit by unit (``tests/overtime_reference.py``)
in the network the request describes; each response is checked against the committed
OpenAPI document by the test client itself (``tests/contract.py``).
"""

from __future__ import annotations

import copy
import json

import numpy as np
import pytest

from service.api import create_app
from service.config import Settings
from service.kinds import Limits
from service.solvers.timeexpanded import Schedule, TimedNetwork
from tests.conftest import scenario
from tests.http import finished_job, pointers, post
from tests.overtime_reference import replay_units

SCENARIO = scenario("xdock-night-flowovertime")


def network_of(body) -> tuple[TimedNetwork, list]:
    """The request's network as arrays, read here with plain loops (object-form arcs)."""
    ids = [n["id"] if isinstance(n, dict) else n for n in body.get("nodes") or []]
    for a in body["arcs"]:
        for end in (a["from"], a["to"]):
            if end not in ids:
                ids.append(end)
    H = body["horizon"]
    caps = [a.get("capacity") for a in body["arcs"]]
    cap = np.array([[0 if (c[p] if isinstance(c, list) else c) is None else (c[p] if isinstance(c, list) else c)
                     for p in range(H)] for c in caps])
    unl = np.array([[(c[p] if isinstance(c, list) else c) is None for p in range(H)] for c in caps])
    hold = np.zeros(len(ids), np.int64)
    hold_unl = np.ones(len(ids), bool)
    for n in body.get("nodes") or []:
        if isinstance(n, dict) and n.get("holdover") is not None:
            hold[ids.index(n["id"])] = n["holdover"]
            hold_unl[ids.index(n["id"])] = False
    net = TimedNetwork(len(ids), H, np.array([ids.index(a["from"]) for a in body["arcs"]]),
                       np.array([ids.index(a["to"]) for a in body["arcs"]]),
                       np.array([a.get("transit", 0) for a in body["arcs"]]), cap, unl, None, hold, hold_unl)
    return net, ids


def schedule_of(out, ids) -> Schedule:
    deps, holds = out["departures"], out["holdover"]
    return Schedule(np.array([d["arc"] for d in deps], np.int64), np.array([d["period"] for d in deps], np.int64),
                    np.array([d["amount"] for d in deps], np.int64),
                    np.array([ids.index(h["node"]) for h in holds], np.int64),
                    np.array([h["period"] for h in holds], np.int64), np.array([h["amount"] for h in holds], np.int64))


def test_scenario_max_by_horizon_is_certified_and_replays_unit_by_unit(client):
    r = post(client, "/v1/flowovertime", SCENARIO)
    assert r.status_code == 200, r.get_json()
    out = r.get_json()
    cert = out["certificate"]
    assert out["status"] == "optimal" and cert["checked"] and cert["earliest_arrival"]
    assert out["value"] == sum(out["arrivals"]) == out["cut"]["capacity"] == cert["cut_capacity"]
    assert cert["cumulative_arrivals"] == cert["cut_capacities"]
    assert cert["total_arrival_time"] == cert["min_total_arrival_time"]
    assert out["period"] == SCENARIO["period"] and out["horizon"] == SCENARIO["horizon"]
    # The night closure of the Ormsby van (periods 5-8) is honoured.
    assert not [d for d in out["departures"] if d["arc"] == 3 and 5 <= d["period"] <= 8]
    net, ids = network_of(SCENARIO)
    delivered = replay_units(net, schedule_of(out, ids), net.horizon, source=0, sink=3)
    assert [delivered.get((3, p), 0) for p in range(net.horizon)] == out["arrivals"]


def columns_of(body):
    arcs = body["arcs"]
    cols = {k: [a.get(k, {"transit": 0, "cost": 0}.get(k)) for a in arcs]
            for k in ("from", "to", "transit", "capacity", "cost", "key")}
    nodes = {"id": [n["id"] for n in body["nodes"]],
             "holdover": [n.get("holdover") for n in body["nodes"]],
             "holdover_cost": [n.get("holdover_cost", 0) for n in body["nodes"]]}
    return {**body, "arcs": cols, "nodes": nodes}


def test_columnar_form_gives_the_same_answer_and_digest(client):
    a = post(client, "/v1/flowovertime", SCENARIO).get_json()
    b = post(client, "/v1/flowovertime", columns_of(SCENARIO)).get_json()
    a.pop("timing_ms"), b.pop("timing_ms")
    assert a == b
    # Costs price nothing in max-by-horizon: the same problem, the same digest.
    free = copy.deepcopy(SCENARIO)
    for arc in free["arcs"]:
        arc.pop("cost")
    assert post(client, "/v1/flowovertime", free).get_json()["digest"] == a["digest"]


def test_quickest_and_min_cost_on_the_scenario(client):
    body = {**SCENARIO, "objective": "quickest", "amount": 100}
    out = post(client, "/v1/flowovertime", body).get_json()
    assert out["status"] == "optimal" and out["value"] == 100 and sum(out["arrivals"]) == 100
    assert out["cut"]["horizon"] == out["horizon"] - 1 and out["cut"]["capacity"] < 100
    net, ids = network_of(SCENARIO)
    replay_units(net, schedule_of(out, ids), out["horizon"], source=0, sink=3)
    longest = post(client, "/v1/flowovertime", {**body, "amount": 10_000}).get_json()
    assert longest["status"] == "infeasible" and longest["cut"]["capacity"] < 10_000

    nodes = copy.deepcopy(SCENARIO["nodes"])
    nodes[0]["supply"], nodes[3]["supply"] = 120, -120
    cheap = {k: v for k, v in SCENARIO.items() if k not in ("source", "sink", "options")}
    out = post(client, "/v1/flowovertime", {**cheap, "objective": "min-cost", "nodes": nodes}).get_json()
    assert out["status"] == "optimal" and out["cost"] == out["certificate"]["dual_bound"]
    assert sum(d["amount"] for d in out["deliveries"]) == 120
    assert sum(d["amount"] for d in out["releases"]) == 120
    supply = np.zeros(len(ids), np.int64)
    supply[0], supply[3] = 120, -120
    replay_units(net, schedule_of(out, ids), net.horizon, supply=supply)
    nodes[0]["supply"], nodes[3]["supply"] = 900, -900
    short = post(client, "/v1/flowovertime", {**cheap, "objective": "min-cost", "nodes": nodes}).get_json()
    proof = short["infeasibility"]
    assert short["status"] == "infeasible" and proof["net_supply"] > proof["outgoing_capacity"]
    assert proof["node_periods"] and all(set(e) == {"node", "period"} for e in proof["node_periods"])


def test_detail_leaves_parts_out(client):
    out = post(client, "/v1/flowovertime", {**SCENARIO, "options": {"detail": ["arrivals"]}}).get_json()
    assert "arrivals" in out and "departures" not in out and "cut" not in out and "holdover" not in out


def test_decimals_are_solved_exactly(client):
    body = copy.deepcopy(SCENARIO)
    for a in body["arcs"]:
        a["capacity"] = [c / 4 for c in a["capacity"]] if isinstance(a["capacity"], list) else a["capacity"] / 4
    for n in body["nodes"]:
        if "holdover" in n:
            n["holdover"] /= 4
    whole = post(client, "/v1/flowovertime", SCENARIO).get_json()
    out = post(client, "/v1/flowovertime", body).get_json()
    assert out["value"] == whole["value"] / 4 and out["certificate"]["decimal_scale"] == 100
    assert out["arrivals"] == [x / 4 for x in whole["arrivals"]]


def with_arc(field, value, index=1):
    body = copy.deepcopy(SCENARIO)
    body["arcs"][index][field] = value
    return body


@pytest.mark.parametrize("body, pointer", [
    (with_arc("transit", -1), "/arcs/1/transit"),
    (with_arc("transit", 1.5), "/arcs/1/transit"),
    (with_arc("transit", "2"), "/arcs/1/transit"),
    (with_arc("capacity", [1, 2, 3], index=3), "/arcs/3/capacity"),
    (with_arc("capacity", [1] * 11 + [-1], index=3), "/arcs/3/capacity/11"),
    (with_arc("capacity", [1] * 11 + [True], index=3), "/arcs/3/capacity/11"),
    (with_arc("capacity", {"a": 1}), "/arcs/1/capacity"),
    (with_arc("cost", -2), "/arcs/1/cost"),
    (with_arc("lower", 1), "/arcs/1/lower"),
    ({**SCENARIO, "horizon": 0}, "/horizon"),
    ({**SCENARIO, "horizon": 2.0}, "/horizon"),
    ({**SCENARIO, "horizon": True}, "/horizon"),
    ({**SCENARIO, "objective": "quickest"}, "/amount"),
    ({**SCENARIO, "objective": "quickest", "amount": 0}, "/amount"),
    ({**SCENARIO, "amount": 5}, "/amount"),
    ({k: v for k, v in SCENARIO.items() if k != "source"}, "/source"),
    ({**SCENARIO, "sink": "depot-brackwater"}, "/sink"),
    ({**SCENARIO, "sink": "nowhere"}, "/sink"),
    ({**SCENARIO, "objective": "min-cost"}, "/source"),
    ({**SCENARIO, "objective": "teleport"}, "/objective"),
    ({**SCENARIO, "options": {"engine": "lp"}}, "/options/engine"),
])
def test_bad_input_names_its_field(client, body, pointer):
    r = post(client, "/v1/flowovertime", body)
    assert r.status_code == 422, r.get_json()
    assert pointer in pointers(r)


def test_bad_node_fields_and_supplies_name_their_field(client):
    nodes = copy.deepcopy(SCENARIO["nodes"])
    nodes[1]["holdover"] = -3
    assert pointers(post(client, "/v1/flowovertime", {**SCENARIO, "nodes": nodes})) == ["/nodes/1/holdover"]
    nodes = copy.deepcopy(SCENARIO["nodes"])
    nodes[2]["supply"] = 5
    assert pointers(post(client, "/v1/flowovertime", {**SCENARIO, "nodes": nodes})) == ["/nodes/2/supply"]  # max-by-horizon
    body = {k: v for k, v in SCENARIO.items() if k not in ("source", "sink")}
    assert pointers(post(client, "/v1/flowovertime", {**body, "objective": "min-cost", "nodes": nodes})) == ["/nodes"]  # unbalanced
    cols = columns_of(SCENARIO)
    cols["arcs"]["transit"][4] = -1
    assert pointers(post(client, "/v1/flowovertime", cols)) == ["/arcs/transit/4"]
    cols = columns_of(SCENARIO)
    cols["arcs"]["capacity"][3] = [1, 2]
    assert pointers(post(client, "/v1/flowovertime", cols)) == ["/arcs/capacity/3"]


def test_an_expanded_size_over_the_limit_is_a_413_naming_horizon(client):
    r = post(client, "/v1/flowovertime", {**SCENARIO, "horizon": 10_000_000})
    assert r.status_code == 413 and pointers(r) == ["/horizon"]
    assert "horizon x (arcs + nodes)" in r.get_json()["errors"][0]["detail"]
    # Even before a capacity list of that length is read.
    r = post(client, "/v1/flowovertime", {**SCENARIO, "horizon": 2_000_000})
    assert r.status_code == 413 and pointers(r) == ["/horizon"]


def test_the_expanded_size_limit_is_a_setting(tmp_path, monkeypatch):
    """SLUICE_MAX_EXPANDED reaches the parse limit: the scenario fits the default, not a tiny one."""
    monkeypatch.setenv("SLUICE_MAX_EXPANDED", "10")
    settings = Settings.from_env()
    assert settings.max_expanded == 10 and Limits.from_settings(settings).max_expanded == 10
    small = create_app({"data_dir": str(tmp_path / "data")}).test_client()  # the variable is read
    r = post(small, "/v1/flowovertime", SCENARIO)
    assert r.status_code == 413 and pointers(r) == ["/horizon"]
    monkeypatch.delenv("SLUICE_MAX_EXPANDED")
    assert post(create_app({"data_dir": str(tmp_path / "other")}).test_client(), "/v1/flowovertime",
                SCENARIO).status_code == 200


def test_a_batch_item_answers_as_the_single_call_and_a_bad_one_fails_alone(client):
    single = post(client, "/v1/flowovertime", SCENARIO).get_json()
    r = client.post("/v1/batch", json={"items": [{"kind": "flowovertime", "problem": SCENARIO},
                                                 {"kind": "flowovertime", "problem": {**SCENARIO, "horizon": 0}}]})
    assert r.status_code == 200
    good, bad = r.get_json()["results"]
    good.pop("timing_ms"), single.pop("timing_ms")
    assert good == single
    assert bad["status"] == 422 and bad["errors"][0]["pointer"].endswith("/horizon")



def test_jobs_and_respond_async_run_the_same_solve(client):
    single = post(client, "/v1/flowovertime", SCENARIO).get_json()
    r = client.post("/v1/jobs", json={"kind": "flowovertime", "problem": SCENARIO})
    assert r.status_code == 202
    doc = finished_job(client, r.headers["Location"])
    assert doc["state"] == "done" and doc["result"]["value"] == single["value"]
    assert doc["result"]["digest"] == single["digest"]
    r = post(client, "/v1/flowovertime", SCENARIO, headers={"Prefer": "respond-async"})
    assert r.status_code == 202
    assert finished_job(client, r.headers["Location"])["result"]["arrivals"] == single["arrivals"]
    assert client.post("/v1/jobs", json={"kind": "flowovertime", "problem": {**SCENARIO, "horizon": -1}}
                       ).status_code == 422  # validated before it is queued


def test_a_repeated_request_is_a_cache_hit(client):
    first = post(client, "/v1/flowovertime", SCENARIO)
    second = post(client, "/v1/flowovertime", SCENARIO)
    assert first.headers["Cache-Status"] == "sluice; fwd=miss; stored"
    assert second.headers["Cache-Status"] == "sluice; hit"
    assert second.get_json()["departures"] == first.get_json()["departures"]


def test_a_large_body_read_by_the_compiled_scanner_answers_as_the_ordinary_path(client):
    # Without transit or capacity lists, a body over 16 KB takes the compiled scanner (arcs as
    # columns); with "transit": 0 spelled out it takes orjson and lists. Same problem, same answer.
    rng = np.random.default_rng(5)
    arcs = [{"from": f"n{a}", "to": f"n{b}", "capacity": int(c)}
            for a, b, c in zip(rng.integers(0, 60, 900), rng.integers(0, 60, 900), rng.integers(0, 9, 900))]
    body = {"horizon": 6, "source": "n0", "sink": "n1", "arcs": arcs}
    assert len(json.dumps(body)) > 16 * 1024
    spelled = {**body, "arcs": [{**a, "transit": 0} for a in arcs]}
    a, b = post(client, "/v1/flowovertime", body).get_json(), post(client, "/v1/flowovertime", spelled).get_json()
    assert a["status"] == "optimal" and a["value"] > 0
    a.pop("timing_ms"), b.pop("timing_ms")
    assert a == b


def test_a_scanned_body_with_lower_bounds_is_refused_as_on_the_ordinary_path(client):
    arcs = [{"from": f"n{i % 50}", "to": f"n{(i * 7 + 1) % 50}", "capacity": 3, "lower": 1 if i == 40 else 0}
            for i in range(900)]
    body = {"horizon": 4, "source": "n0", "sink": "n1", "arcs": arcs}
    r = post(client, "/v1/flowovertime", body)
    assert r.status_code == 422 and pointers(r) == ["/arcs/40/lower"]
    small = {**body, "arcs": [{"from": "n0", "to": "n1", "lower": 1}]}
    assert pointers(post(client, "/v1/flowovertime", small)) == ["/arcs/0/lower"]
