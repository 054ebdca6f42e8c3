"""Whole units on /v1/multicommodity: integral and single-path plans with proven gaps.

References:
- scipy.optimize.milp (HiGHS) on the arc-flow model, written out here arc by arc
  (:func:`reference`), independently of service/solvers/whole_model.py.
- Every plan replayed by :func:`replay` (tests/checkers.py plus plain loops): whole
  numbers, shared capacities, conservation per commodity, each path simple and carrying
  the whole demand, the cost recomputed.
- The invented scenario (service/scenarios/depots-multicommodity-whole.json) is worked
  by hand in the README: three commodities, each with a two-lane route around a ring
  of three 25-pallet lanes, each lane shared by two of them (an odd cycle). The LP
  puts 12.5 on each route (cost 525); whole units can put at most 37 pallets on the
  ring (x1 + x2, x2 + x3, x3 + x1 <= 25 in integers), so 526; one path each leaves room
  on the ring for one commodity only, so 550.
"""

from __future__ import annotations

import json
import time

import numpy as np
import pytest
from scipy.optimize import Bounds, LinearConstraint, milp

from service.deadline import Deadline
from service.errors import SelfCheckFailed
from service.jobs.model import DONE, RUNNING
from service.solvers.graph import Graph
from service.solvers.multicommodity import Commodities, multicommodity_flow
from service.solvers.multicommodity_whole import whole_unit_flow
from service.solvers.whole_checks import check_plan, relative_gap
from service.solvers.whole_model import WholeData, cost_scale
from tests.checkers import assert_capacities, assert_conservation, assert_integral
from tests.conftest import scenario
from tests.http import pointers
from tests.perf.bench_whole_units import depot_network

SCENARIO = scenario("depots-multicommodity-whole")


# --------------------------------------------------------------------------- instances


def random_instance(seed: int, n: int = 7, m: int = 18, k: int = 3):
    """Invented lanes between sites: tight whole-number capacities (a few unlimited),
    costs 0-9, demands 1-9; some instances are infeasible on purpose."""
    rng = np.random.default_rng(seed)
    tail = rng.integers(0, n, m)
    head = (tail + rng.integers(1, n, m)) % n
    cap = rng.integers(2, 14, m).astype(np.int64)
    unlimited = rng.random(m) < 0.1
    cost = rng.integers(0, 10, m).astype(np.float64)
    src = rng.integers(0, n, k)
    snk = (src + rng.integers(1, n, k)) % n
    demand = rng.integers(1, 10, k).astype(np.float64)
    return (Graph(n, tail, head, np.where(unlimited, 0, cap), unlimited if unlimited.any() else None, cost),
            Commodities(src, snk, demand))


# --------------------------------------------------------------------------- reference


def reference(net: Graph, com: Commodities, *, single_path: bool, objective: str = "min-cost"):
    """The arc-flow model for scipy.optimize.milp, row by row.

    Integral: x[k, a] whole units. Single path: x[k, a] in {0, 1}, flow d_k x[k, a],
    and (max-throughput) y_k in {0, 1} delivering all of d_k or nothing. With costs >=
    0 the binary model's optimum is the single-path optimum (cycles can be dropped at no
    cost). max-throughput is lexicographic: the most delivery, then the least cost.
    Returns (status, cost, delivered total).
    """
    n, m, K = net.num_nodes, net.num_arcs, com.count
    throughput = objective == "max-throughput"
    nvar = K * m + (K if throughput else 0)
    weight = com.demands if single_path else np.ones(K)
    rows, lo, hi = [], [], []
    for k in range(K):
        for v in range(n):
            row = np.zeros(nvar)
            for a in range(m):
                row[k * m + a] += int(net.tail[a] == v) - int(net.head[a] == v)
            end = int(v == com.sources[k]) - int(v == com.sinks[k])  # +1 source, -1 sink
            rhs = (1.0 if single_path else com.demands[k]) * end
            if throughput:
                row[K * m + k] = -end
                rhs = 0.0
            rows.append(row)
            lo.append(rhs)
            hi.append(rhs)
    for a in range(m):
        if net.unlimited is not None and net.unlimited[a]:
            continue
        row = np.zeros(nvar)
        for k in range(K):
            row[k * m + a] = weight[k]
        rows.append(row)
        lo.append(-np.inf)
        hi.append(net.capacity[a])
    cost = np.zeros(nvar)
    for k in range(K):
        cost[k * m:(k + 1) * m] = net.cost * weight[k]
    upper = np.full(nvar, 1.0 if single_path else np.inf)
    if throughput:
        upper[K * m:] = 1.0 if single_path else com.demands
    deliver = np.zeros(nvar)
    deliver[K * m:] = weight if throughput else 0

    def run(c, extra=None):
        A, lo_, hi_ = np.array(rows), np.array(lo), np.array(hi)
        if extra is not None:
            A, lo_, hi_ = np.vstack([A, extra[0]]), np.append(lo_, extra[1]), np.append(hi_, np.inf)
        return milp(c, constraints=LinearConstraint(A, lo_, hi_), bounds=Bounds(np.zeros(nvar), upper),
                    integrality=np.ones(nvar))

    if not throughput:
        res = run(cost)
        if res.status == 2:
            return "infeasible", None, None
        assert res.status == 0, res.message
        return "optimal", round(res.fun), round(float(com.demands.sum()))
    first = run(-deliver)
    assert first.status == 0, first.message
    most = round(-first.fun)
    second = run(cost, (deliver, most))
    assert second.status == 0, second.message
    return "optimal", round(second.fun), most


# --------------------------------------------------------------------------- replay


def replay(net: Graph, com: Commodities, sol, *, single_path: bool, throughput: bool = False) -> None:
    """Check a whole-unit answer from its flows alone (plain loops, not the service's code)."""
    K, m = com.count, net.num_arcs
    flows = np.asarray(sol.flows)
    assert flows.shape == (K, m)
    assert_integral(flows.ravel())
    caps = [None if net.unlimited is not None and net.unlimited[a] else int(net.capacity[a]) for a in range(m)]
    assert_capacities(flows.sum(axis=0), caps)
    assert (flows >= 0).all()
    for k in range(K):
        supply = np.zeros(net.num_nodes)
        supply[com.sources[k]] += sol.delivered[k]
        supply[com.sinks[k]] -= sol.delivered[k]
        assert_conservation(net.num_nodes, net.tail, net.head, flows[k], supply)
        if not throughput:
            assert sol.delivered[k] == com.demands[k]
        if single_path:
            path = sol.paths[k]
            assert sol.delivered[k] in (0, com.demands[k])
            if sol.delivered[k]:
                nodes = [int(net.tail[path[0]])] + [int(net.head[a]) for a in path]
                assert nodes[0] == com.sources[k] and nodes[-1] == com.sinks[k]
                assert all(net.head[a] == net.tail[b] for a, b in zip(path, path[1:]))
                assert len(set(nodes)) == len(nodes), "the path repeats a node"
                expected = np.zeros(m)
                expected[path] = com.demands[k]
                assert np.array_equal(flows[k], expected), "the path does not carry the whole demand alone"
            else:
                assert path == [] and not flows[k].any()
    assert sol.cost == pytest.approx(float(sum(net.cost[a] * flows[:, a].sum() for a in range(m))), abs=1e-9)
    if throughput:
        assert sol.bound >= float(np.sum(sol.delivered))
    else:
        assert sol.bound <= sol.cost + 1e-9


# --------------------------------------------------------------------------- against milp

SEEDS = range(24)


@pytest.mark.parametrize("single_path", [False, True], ids=["integral", "single-path"])
@pytest.mark.parametrize("seed", SEEDS)
def test_min_cost_against_milp(seed, single_path):
    net, com = random_instance(seed)
    status, cost, _ = reference(net, com, single_path=single_path)
    sol = whole_unit_flow(net, com, single_path=single_path, deadline=Deadline.after(20))
    assert sol.status == status, (sol.status, sol.infeasibility)
    if status == "optimal":
        assert sol.cost == cost and sol.gap == 0.0 and sol.bound == cost
        replay(net, com, sol, single_path=single_path)


@pytest.mark.parametrize("single_path", [False, True], ids=["integral", "single-path"])
@pytest.mark.parametrize("seed", SEEDS[:12])
def test_max_throughput_against_milp(seed, single_path):
    net, com = random_instance(seed)
    _, cost, most = reference(net, com, single_path=single_path, objective="max-throughput")
    sol = whole_unit_flow(net, com, objective="max-throughput", single_path=single_path, deadline=Deadline.after(20))
    assert sol.status == "optimal"
    assert int(np.sum(sol.delivered)) == most and sol.bound == most and sol.gap == 0.0
    assert sol.cost == cost and sol.certificate["cost_bound"] == cost
    replay(net, com, sol, single_path=single_path, throughput=True)


def test_the_random_instances_cover_the_interesting_cases():
    """Among the seeds: single path infeasible while the fractional problem is feasible,
    and single path dearer than whole units. (Whole units dearer than the LP is rare on
    random data: the scenario test has it, worked by hand.)"""
    single_infeasible = dearer_path = 0
    for seed in SEEDS:
        net, com = random_instance(seed)
        lp = multicommodity_flow(net, com)
        units = reference(net, com, single_path=False)
        path = reference(net, com, single_path=True)
        single_infeasible += lp.status == "optimal" and path[0] == "infeasible"
        dearer_path += units[0] == path[0] == "optimal" and path[1] > units[1]
    assert single_infeasible >= 2 and dearer_path >= 2, (single_infeasible, dearer_path)


def test_cp_sat_agrees_with_milp():
    """The second engine on the same instances: same optimum."""
    for seed in SEEDS[:8]:
        net, com = random_instance(seed)
        for single_path in (False, True):
            status, cost, _ = reference(net, com, single_path=single_path)
            sol = whole_unit_flow(net, com, single_path=single_path, deadline=Deadline.after(20), engine="cp-sat")
            assert sol.status == status and (status != "optimal" or sol.cost == cost)


# --------------------------------------------------------------------------- proofs


def test_infeasible_single_path_is_proven_by_the_solver_and_names_who_cannot_travel():
    # Demand 6 over two lanes of 4: the fractional plan splits it, one path cannot.
    net = Graph(4, np.array([0, 0, 1, 2]), np.array([1, 2, 3, 3]), np.array([4, 4, 9, 9]), None,
                  np.array([1.0, 1.0, 1.0, 1.0]))
    com = Commodities(np.array([0]), np.array([3]), np.array([6.0]))
    assert multicommodity_flow(net, com).status == "optimal"
    assert whole_unit_flow(net, com, deadline=Deadline.after(30)).status == "optimal"  # whole units may split 3 + 3
    sol = whole_unit_flow(net, com, single_path=True, deadline=Deadline.after(30))
    assert sol.status == "infeasible"
    assert sol.infeasibility["proof"] == "solver" and sol.infeasibility["cannot_travel_alone"].tolist() == [0]


def test_lp_infeasible_is_the_proof_when_even_fractions_cannot_move_the_demand():
    net = Graph(2, np.array([0]), np.array([1]), np.array([3]), None, np.array([1.0]))
    com = Commodities(np.array([0]), np.array([1]), np.array([5.0]))
    sol = whole_unit_flow(net, com, deadline=Deadline.after(30))
    assert sol.status == "infeasible" and sol.infeasibility["proof"] == "lp-relaxation"
    assert sol.infeasibility["max_delivered"] == pytest.approx(3)


def test_negative_cycle_without_limit_is_unbounded_in_whole_units_too():
    net = Graph(3, np.array([0, 1, 2, 1]), np.array([1, 2, 1, 2]), np.array([5, 0, 0, 5]),
                  np.array([False, True, True, False]), np.array([1.0, -2.0, 1.0, 1.0]))
    com = Commodities(np.array([0]), np.array([2]), np.array([3.0]))
    sol = whole_unit_flow(net, com, deadline=Deadline.after(30))
    assert sol.status == "unbounded" and sol.certificate["integral_plan"]["integral"] is True


def test_a_time_limited_larger_instance_answers_feasible_with_a_gap_or_optimal_on_time():
    net, com = depot_network(1, cap_low=30, cap_high=80, load=1.5)  # the benchmark's single-path network
    reports = []
    started = time.monotonic()
    sol = whole_unit_flow(net, com, single_path=True, deadline=Deadline.after(3.0), on_progress=reports.append)
    elapsed = time.monotonic() - started
    assert elapsed < 30  # generous: the limit is 3 s; a shared host may be slow to stop
    assert sol.status in ("feasible", "optimal")
    assert (sol.gap > 0) if sol.status == "feasible" else (sol.gap == 0)
    assert reports and reports[0]["incumbent"] is not None and reports[-1]["gap"] >= sol.gap
    replay(net, com, sol, single_path=True)


# --------------------------------------------------------------------------- the certificate fails


def _scenario_data():
    body = SCENARIO
    names = sorted({a["from"] for a in body["arcs"]} | {a["to"] for a in body["arcs"]})
    index = {name: i for i, name in enumerate(names)}
    net = Graph(len(names), np.array([index[a["from"]] for a in body["arcs"]]),
                  np.array([index[a["to"]] for a in body["arcs"]]), np.array([a["capacity"] for a in body["arcs"]]),
                  None, np.array([float(a["cost"]) for a in body["arcs"]]))
    com = Commodities(np.array([index[c["source"]] for c in body["commodities"]]),
                      np.array([index[c["sink"]] for c in body["commodities"]]),
                      np.array([float(c["demand"]) for c in body["commodities"]]))
    return net, com


def _data(net, com, single_path):
    scale, cost = cost_scale(net.cost)
    return WholeData(net, com, com.demands.astype(np.int64), cost, scale, single_path, False)


def test_check_plan_fails_on_wrong_plans():
    net, com = _scenario_data()
    units = whole_unit_flow(net, com, deadline=Deadline.after(30))
    path = whole_unit_flow(net, com, single_path=True, deadline=Deadline.after(30))
    data, pdata = _data(net, com, False), _data(net, com, True)
    good = dict(cost=526, bound=526, gap=0.0)
    check_plan(data, units.flows, units.delivered, None, **good)  # the right plan passes
    check_plan(pdata, path.flows, path.delivered, path.paths, cost=550, bound=550, gap=0.0)
    half = units.flows.astype(float)
    half[0, 3] -= 0.5
    half[0, 5] -= 0.5
    over = units.flows.copy()
    over[1, 4] += 13  # ring lane beyond 25, and commodity 1 no longer conserved
    leak = units.flows.copy()
    leak[2, 11] -= 1
    wrong = [
        (data, half, units.delivered, None, good),  # not whole numbers
        (data, over, units.delivered, None, good),
        (data, leak, units.delivered, None, good),
        (data, units.flows, units.delivered, None, dict(cost=525, bound=525, gap=0.0)),  # cost not recomputed
        (data, units.flows, units.delivered, None, dict(cost=526, bound=527, gap=relative_gap(526, 527))),
        (data, units.flows, units.delivered, None, dict(cost=526, bound=525, gap=0.0)),  # gap does not follow
        (data, units.flows, units.delivered - 1, None, good),  # demand not met
    ]
    p = path.paths
    loop = [list(p[0]), list(p[1]), list(p[2])]
    loop[0] = loop[0][:2] + [4, 5] + loop[0][2:]  # goes round the ring once more: not simple
    broken = [list(p[0][::-1]), p[1], p[2]]  # arcs out of order
    split = path.flows.copy()
    split[1, 10] = 13
    split[1, 1] = 12  # half of dry-goods onto another route
    wrong += [
        (pdata, path.flows, path.delivered, loop, dict(cost=550, bound=550, gap=0.0)),
        (pdata, path.flows, path.delivered, broken, dict(cost=550, bound=550, gap=0.0)),
        (pdata, split, path.delivered, p, dict(cost=550, bound=550, gap=0.0)),
        (pdata, path.flows, path.delivered, None, dict(cost=550, bound=550, gap=0.0)),
    ]
    for i, (d, flows, delivered, paths, claims) in enumerate(wrong):
        with pytest.raises(SelfCheckFailed):
            check_plan(d, flows, delivered, paths, **claims)
            pytest.fail(f"wrong plan {i} passed")


# --------------------------------------------------------------------------- over HTTP


def test_scenario_lp_is_fractional_and_whole_units_cost_a_little_more(client):
    lp_body = {**SCENARIO, "options": {}}
    lp = client.post("/v1/multicommodity", json=lp_body).get_json()
    assert lp["cost"] == 525 and 12.5 in lp["flows"][0]
    whole = client.post("/v1/multicommodity", json=SCENARIO).get_json()
    assert whole["status"] == "optimal" and whole["cost"] == 526 and whole["bound"] == 526 and whole["gap"] == 0
    assert whole["engine"]["kind"] == "mip" and whole["certificate"]["integral"] is True
    assert all(float(x).is_integer() for row in whole["flows"] for x in row)
    single = client.post("/v1/multicommodity", json={**SCENARIO, "options": {"single_path": True}}).get_json()
    assert single["status"] == "optimal" and single["cost"] == 550
    assert [p["commodity"] for p in single["paths"]] == ["chilled-dairy", "dry-goods", "frozen-veg"]
    assert single["certificate"]["paths_checked"] == 3
    # With a 5% target the LP bound already proves the first plan good enough.
    loose = client.post("/v1/multicommodity", json={**SCENARIO, "options": {"single_path": True, "gap": 0.05}})
    doc = loose.get_json()
    assert doc["status"] == "optimal" and doc["bound"] == 525 and doc["gap"] == pytest.approx(25 / 550)
    assert doc["digest"] != single["digest"] != whole["digest"] != lp["digest"]


def test_columnar_arcs_and_max_throughput(client):
    arcs = SCENARIO["arcs"]
    columns = {f: [a[f] for a in arcs] for f in ("from", "to", "capacity", "cost")}
    body = {**SCENARIO, "arcs": columns, "objective": "max-throughput", "options": {"single_path": True}}
    doc = client.post("/v1/multicommodity", json=body).get_json()
    assert doc["status"] == "optimal" and sum(doc["delivered"]) == 75 and doc["cost"] == 550


GOOD = {"arcs": [{"from": "a", "to": "b", "capacity": 5, "cost": 1}, {"from": "b", "to": "c", "capacity": 5}],
        "commodities": [{"id": "x", "source": "a", "sink": "c", "demand": 3}], "options": {"integral": True}}


@pytest.mark.parametrize("what,patch,pointer", [
    ("fractional capacity", {"arcs": [{"from": "a", "to": "b", "capacity": 5.5}, {"from": "b", "to": "c"}]},
     "/arcs/0/capacity"),
    ("fractional capacity, columns", {"arcs": {"from": ["a", "b"], "to": ["b", "c"], "capacity": [5, 2.5]}},
     "/arcs/capacity/1"),
    ("fractional demand", {"commodities": [{"id": "x", "source": "a", "sink": "c", "demand": 2.5}]},
     "/commodities/0/demand"),
    ("cost with 7 decimals", {"arcs": [{"from": "a", "to": "b", "capacity": 5, "cost": 0.0000001},
                                       {"from": "b", "to": "c"}]}, "/arcs/0/cost"),
    ("negative cost on a single path", {"arcs": [{"from": "a", "to": "b", "cost": -1}, {"from": "b", "to": "c"}],
                                        "options": {"single_path": True}}, "/arcs/0/cost"),
    ("gap above 1", {"options": {"integral": True, "gap": 1.5}}, "/options/gap"),
    ("negative gap", {"options": {"single_path": True, "gap": -0.1}}, "/options/gap"),
    ("gap without whole units", {"options": {"gap": 0.1}}, "/options/gap"),
    ("single path but not integral", {"options": {"single_path": True, "integral": False}}, "/options/integral"),
    ("lp engine with whole units", {"options": {"integral": True, "engine": "lp"}}, "/options/engine"),
    ("integral not a boolean", {"options": {"integral": "yes"}}, "/options/integral"),
    ("single_path not a boolean", {"options": {"single_path": 1}}, "/options/single_path"),
])
def test_bad_input_names_its_field(client, what, patch, pointer):
    r = client.post("/v1/multicommodity", json=GOOD | patch)
    assert r.status_code == 422, (what, r.get_json())
    assert r.headers["Content-Type"].startswith("application/problem+json")
    assert pointer in pointers(r), r.get_json()


def test_fractional_data_is_still_fine_without_whole_units(client):
    body = GOOD | {"arcs": [{"from": "a", "to": "b", "capacity": 5.5}, {"from": "b", "to": "c"}], "options": {}}
    assert client.post("/v1/multicommodity", json=body).get_json()["status"] == "optimal"


def test_stored_network_what_if_and_batch_take_the_same_options(client):
    body = SCENARIO
    r = client.put("/v1/networks/ring", json={"arcs": body["arcs"]})
    assert r.status_code == 201
    query = {"commodities": body["commodities"], "options": {"integral": True}}
    stored = client.post("/v1/networks/ring/multicommodity", json=query).get_json()
    assert stored["cost"] == 526 and stored["status"] == "optimal" and stored["network"]["name"] == "ring"
    # Close a ring lane for this question only: the ring then takes one commodity's worth less.
    closed = client.post("/v1/networks/ring/multicommodity",
                         json={**query, "changes": [{"key": "ring-ashby-brae", "closed": True}]}).get_json()
    assert closed["status"] == "optimal" and closed["cost"] == 550  # only frozen-veg can use the ring
    bad = client.post("/v1/networks/ring/multicommodity",
                      json={**query, "options": {"single_path": True, "gap": 3}})
    assert bad.status_code == 422 and bad.get_json()["errors"][0]["pointer"] == "/options/gap"
    fractional = client.post("/v1/networks/ring/multicommodity",
                             json={**query, "changes": [{"arc": 3, "capacity": 2.5}]})
    assert fractional.status_code == 422
    assert fractional.get_json()["errors"][0]["pointer"] == "/options/integral"
    batch = client.post("/v1/batch", json={"items": [
        {"kind": "multicommodity", "problem": body},
        {"kind": "multicommodity", "problem": {**body, "options": {"single_path": True, "gap": -1}}}]}).get_json()
    assert batch["results"][0]["cost"] == 526
    assert batch["results"][1]["errors"][0]["pointer"] == "/problem/options/gap"


def _benchmark_body(load: float = 1.5) -> dict:
    """The benchmark's single-path network as a request body (columnar arcs)."""
    net, com = depot_network(1, cap_low=30, cap_high=80, load=load)
    names = [f"site-{i}" for i in range(net.num_nodes)]
    return {
        "arcs": {"from": [names[t] for t in net.tail], "to": [names[h] for h in net.head],
                 "capacity": net.capacity.tolist(), "cost": net.cost.tolist()},
        "commodities": [{"id": f"order-{k}", "source": names[s], "sink": names[t], "demand": int(d)}
                        for k, (s, t, d) in enumerate(zip(com.sources, com.sinks, com.demands))],
    }


def test_a_job_reports_the_incumbent_and_the_gap_while_it_runs(client):
    problem = {**_benchmark_body(), "options": {"single_path": True, "time_limit": 6}}
    r = client.post("/v1/jobs", json={"kind": "multicommodity", "problem": problem})
    assert r.status_code == 202
    seen = []
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline:
        doc = client.get(r.headers["Location"]).get_json()
        if doc["state"] == RUNNING and "progress" in doc:
            seen.append(doc["progress"])
        if doc["state"] not in ("queued", "running"):
            break
        time.sleep(0.1)
    assert doc["state"] == DONE, doc.get("error")
    assert seen, "no progress was reported while the job ran"
    last = seen[-1]
    assert set(last) == {"phase", "incumbent", "bound", "gap", "seconds"}
    assert last["incumbent"] is not None and 0 <= last["gap"] <= 1 and last["bound"] <= last["incumbent"]
    assert doc["result"]["status"] in ("optimal", "feasible") and "progress" not in doc


def test_whole_unit_answers_match_the_published_schema(client):
    """Every answer shape (optimal, feasible with a gap, infeasible by either proof) against
    the OpenAPI document's MultiCommodityResponse (JSON Schema 2020-12, jsonschema)."""
    from jsonschema import Draft202012Validator

    from service.api.spec import build_spec

    spec = build_spec()
    validator = Draft202012Validator({"$ref": "#/components/schemas/MulticommodityResponse",
                                      "components": spec["components"]})
    bodies = [SCENARIO, {**SCENARIO, "options": {"single_path": True, "gap": 0.05}},
              {**SCENARIO, "objective": "max-throughput", "options": {"single_path": True}},
              {**SCENARIO, "commodities": [{**c, "demand": 31} for c in SCENARIO["commodities"]],
               "options": {"single_path": True}},  # 31 > every 30-pallet direct lane and 25 on the ring
              {**SCENARIO, "commodities": [{**c, "demand": 90} for c in SCENARIO["commodities"]]}]
    statuses = set()
    for body in bodies:
        r = client.post("/v1/multicommodity", json=body)
        assert r.status_code == 200
        doc = r.get_json()
        validator.validate(doc)
        statuses.add((doc["status"], (doc.get("infeasibility") or {}).get("proof")))
    assert statuses == {("optimal", None), ("infeasible", "solver"), ("infeasible", "lp-relaxation")}


@pytest.mark.redis
def test_a_redis_job_records_progress_while_it_runs(redis_url, redis_prefix):
    from service.jobs.redis_backend import RedisJobs

    backend = RedisJobs(redis_url, prefix=redis_prefix, queue=redis_prefix + "queue", lease=5.0)
    try:
        problem = {**_benchmark_body(), "options": {"single_path": True, "time_limit": 5}}
        record = backend.submit("acme", "multicommodity", json.dumps(problem).encode(), time_limit=5)
        import threading

        worker = threading.Thread(target=backend.run, args=(record.id,))
        worker.start()
        seen = []
        while worker.is_alive():
            current = backend.get("acme", record.id)
            if current.state == RUNNING and current.progress is not None:
                seen.append(current.document()["progress"])
            time.sleep(0.1)
        worker.join()
        final = backend.get("acme", record.id)
        assert final.state == DONE, final.error
        assert seen and seen[-1]["incumbent"] is not None and "progress" not in final.document()
    finally:
        backend.close()


def test_a_jobs_file_from_before_progress_reports_gets_the_column(tmp_path):
    import sqlite3

    from service.jobs.sqlite_backend import SqliteJobs
    from service.kinds import Limits

    old = sqlite3.connect(tmp_path / "jobs.sqlite3")
    old.execute("CREATE TABLE jobs (id TEXT PRIMARY KEY, tenant TEXT NOT NULL, kind TEXT NOT NULL, state TEXT NOT "
                "NULL, body BLOB, result BLOB, error TEXT, created REAL NOT NULL, started REAL, finished REAL, "
                "attempts INTEGER NOT NULL DEFAULT 0, time_limit REAL NOT NULL, cancel INTEGER NOT NULL DEFAULT 0, "
                "owner TEXT, lease_until REAL)")
    old.execute("INSERT INTO jobs (id, tenant, kind, state, created, time_limit) VALUES ('a' , 't', 'maxflow', "
                "'queued', 0, 5)")
    old.commit()
    old.close()
    jobs = SqliteJobs(str(tmp_path), limits=Limits(), workers=0)
    assert jobs.get("t", "a").state == "queued" and jobs.get("t", "a").progress is None


def test_no_plan_within_the_time_limit_is_status_time_limit(client):
    # Heavier demands, where routing largest-first on what is left finds no plan, and the
    # shortest limit a client may ask: the LP does not finish, nor does any search start.
    body = {**_benchmark_body(load=1.9), "options": {"single_path": True, "time_limit": 0.01}}
    r = client.post("/v1/multicommodity", json=body)
    doc = r.get_json()
    assert r.status_code == 200 and doc["status"] == "time_limit", doc.get("status")
    assert doc["gap"] is None and doc["bound"] == 0 and "flows" not in doc and "paths" not in doc
    assert doc["certificate"] == {"checked": True, "reason": "no plan within the time limit"}
