"""POST /v1/multicommodity against an independent scipy linprog formulation written here,
networkx max-flows, and LP duality (capacity prices are subgradients of the optimum)."""

from __future__ import annotations


import numpy as np
import pytest
from scipy.optimize import linprog

from service.errors import SelfCheckFailed
from service.solvers.graph import Graph
from service.solvers.multicommodity import Commodities, check_flows, multicommodity_flow
from tests.checkers import assert_capacities, assert_conservation
from tests.conftest import scenario
from tests.http import pointers
from tests.references import max_flow_value


# --------------------------------------------------------------------------- reference


def reference(n, arcs, commodities, objective="min-cost"):
    """Multi-commodity flow written out row by row for scipy.optimize.linprog(method="highs").

    ``arcs``: (tail, head, capacity or None, cost); ``commodities``: (source, sink, demand).
    Returns (status, cost, delivered per commodity); max-throughput is lexicographic:
    most delivery first, then least cost with the delivery held.
    """
    m, K = len(arcs), len(commodities)
    throughput = objective == "max-throughput"
    nvar = K * m + (K if throughput else 0)
    a_eq, b_eq = [], []
    for k, (s, t, d) in enumerate(commodities):
        for v in range(n):
            row = np.zeros(nvar)
            for a, (tail, head, _cap, _cost) in enumerate(arcs):
                if tail == v:
                    row[k * m + a] += 1
                if head == v:
                    row[k * m + a] -= 1
            rhs = 0.0
            if throughput:
                row[K * m + k] = -1.0 if v == s else (1.0 if v == t else 0.0)
            else:
                rhs = d if v == s else (-d if v == t else 0.0)
            a_eq.append(row)
            b_eq.append(rhs)
    a_ub, b_ub = [], []
    for a, (_t, _h, cap, _c) in enumerate(arcs):
        if cap is not None:
            row = np.zeros(nvar)
            for k in range(K):
                row[k * m + a] = 1
            a_ub.append(row)
            b_ub.append(cap)
    cost = np.zeros(nvar)
    for k in range(K):
        for a, arc in enumerate(arcs):
            cost[k * m + a] = arc[3]
    bounds = [(0, None)] * (K * m) + ([(0, d) for _s, _t, d in commodities] if throughput else [])

    def run(c, extra_ub=None, extra_b=None):
        ub = a_ub + ([extra_ub] if extra_ub is not None else [])
        bb = b_ub + ([extra_b] if extra_b is not None else [])
        return linprog(c, A_ub=np.array(ub) if ub else None, b_ub=np.array(bb) if ub else None,
                       A_eq=np.array(a_eq), b_eq=np.array(b_eq), bounds=bounds, method="highs")

    if not throughput:
        res = run(cost)
        if res.status != 0:
            return {2: "infeasible", 3: "unbounded"}[res.status], None, None
        return "optimal", res.fun, [d for _s, _t, d in commodities]
    most = np.zeros(nvar)
    most[K * m:] = -1.0
    first = run(most)
    delivered = -first.fun
    hold = np.zeros(nvar)
    hold[K * m:] = -1.0
    second = run(cost, hold, -(delivered - 1e-9))
    if second.status == 3:
        return "unbounded", None, None
    return "optimal", second.fun, list(second.x[K * m:])


def random_instance(rng, *, scale=1.0):
    n = int(rng.integers(5, 9))
    arcs = []
    for v in range(n - 1):  # a path keeps every sink reachable
        arcs.append((v, v + 1, int(rng.integers(3, 12)), int(rng.integers(0, 6))))
    for _ in range(int(rng.integers(6, 14))):
        t, h = rng.choice(n, size=2, replace=False)
        cap = None if rng.random() < 0.15 else int(rng.integers(1, 10))
        arcs.append((int(t), int(h), cap, int(rng.integers(0, 9))))
    commodities = []
    for _ in range(int(rng.integers(2, 4))):
        s = int(rng.integers(0, n - 1))
        t = int(rng.integers(s + 1, n))
        commodities.append((s, t, float(rng.integers(1, 8)) * scale))
    return n, arcs, commodities


def request_of(arcs, commodities, objective):
    return {
        "objective": objective,
        "nodes": list(range(max(max(a[0], a[1]) for a in arcs) + 1)),
        "arcs": [{"from": t, "to": h, "capacity": cap, "cost": cost} for t, h, cap, cost in arcs],
        "commodities": [{"id": f"c{k}", "source": s, "sink": t, "demand": d}
                        for k, (s, t, d) in enumerate(commodities)],
    }


def check_plan(n, arcs, commodities, out):
    """Per-commodity conservation and shared capacities, with tests/checkers.py."""
    flows = np.asarray(out["flows"])
    tails = [a[0] for a in arcs]
    heads = [a[1] for a in arcs]
    for k, (s, t, _d) in enumerate(commodities):
        supply = np.zeros(n)
        supply[s] += out["delivered"][k]
        supply[t] -= out["delivered"][k]
        assert_conservation(n, tails, heads, flows[k], supply, tol=1e-7)
    assert_capacities(flows.sum(axis=0), [a[2] for a in arcs], tol=1e-7)
    assert_capacities(flows.ravel(), [None] * flows.size, tol=1e-9)  # no negative flow


def with_capacity(arcs, a, delta):
    t, h, cap, cost = arcs[a]
    return arcs[:a] + [(t, h, cap + delta, cost)] + arcs[a + 1:]


# --------------------------------------------------------------------------- answers


@pytest.mark.parametrize("seed", range(10))
def test_min_cost_against_linprog(client, seed):
    rng = np.random.default_rng(seed)
    n, arcs, commodities = random_instance(rng)
    status, cost, _ = reference(n, arcs, commodities)
    out = client.post("/v1/multicommodity", json=request_of(arcs, commodities, "min-cost")).get_json()
    assert out["status"] == status
    if status != "optimal":
        return
    assert out["cost"] == pytest.approx(cost, abs=1e-7)
    check_plan(n, arcs, commodities, out)
    assert out["certificate"]["checked"] is True
    assert out["certificate"]["gap"] <= 1e-7


@pytest.mark.parametrize("seed", range(8))
def test_max_throughput_against_linprog(client, seed):
    rng = np.random.default_rng(50 + seed)
    n, arcs, commodities = random_instance(rng, scale=3.0)
    status, cost, delivered = reference(n, arcs, commodities, "max-throughput")
    out = client.post("/v1/multicommodity", json=request_of(arcs, commodities, "max-throughput")).get_json()
    assert out["status"] == status == "optimal"
    assert sum(out["delivered"]) == pytest.approx(sum(delivered), abs=1e-7)
    assert out["cost"] == pytest.approx(cost, abs=1e-6)
    check_plan(n, arcs, commodities, out)
    assert out["certificate"]["delivery_bound"] == pytest.approx(sum(delivered), abs=1e-7)


def test_random_instances_are_not_all_alike():
    """The min-cost sample above holds both feasible and infeasible instances."""
    statuses = {reference(*random_instance(np.random.default_rng(seed)))[0] for seed in range(10)}
    assert statuses == {"optimal", "infeasible"}


@pytest.mark.parametrize("seed", range(4))
def test_capacity_prices_are_subgradients(client, seed):
    """LP duality: a capacity price p (cost saved per unit of capacity) satisfies
    cost(u + 1) >= cost(u) - p and cost(u - 1) >= cost(u) + p for every optimal dual,
    degenerate or not (the optimal cost is convex in the capacities). Re-solved with the
    reference; and bottlenecks are exactly the arcs with a positive price."""
    rng = np.random.default_rng(seed)
    for _ in range(20):
        n, arcs, commodities = random_instance(rng)
        if reference(n, arcs, commodities)[0] == "optimal":
            break
    out = client.post("/v1/multicommodity", json=request_of(arcs, commodities, "min-cost")).get_json()
    prices = out["capacity_prices"]
    base = out["cost"]
    for a, arc in enumerate(arcs):
        if arc[2] is None:
            assert prices[a] == 0
            continue
        up = reference(n, with_capacity(arcs, a, 1), commodities)[1]
        assert up >= base - prices[a] - 1e-6
        if arc[2] >= 1:
            down = reference(n, with_capacity(arcs, a, -1), commodities)[1]
            if down is not None:
                assert down >= base + prices[a] - 1e-6
    assert out["bottlenecks"] == [a for a, p in enumerate(prices) if p > 0]
    assert min(prices) >= 0


def indexed(body: dict):
    """A request body as the reference model takes it: node indices, arc and commodity tuples."""
    names: dict = {}
    for arc in body["arcs"]:
        names.setdefault(arc["from"], len(names))
        names.setdefault(arc["to"], len(names))
    arcs = [(names[a["from"]], names[a["to"]], a["capacity"], a["cost"]) for a in body["arcs"]]
    commodities = [(names[c["source"]], names[c["sink"]], c["demand"]) for c in body["commodities"]]
    return names, arcs, commodities


def test_scenario_prices_and_bottlenecks(client):
    body = scenario("depots-multicommodity")
    out = client.post("/v1/multicommodity", json=body).get_json()
    names, arcs, commodities = indexed(body)
    status, cost, _ = reference(len(names), arcs, commodities)
    assert out["status"] == status == "optimal"
    assert out["cost"] == pytest.approx(cost)
    assert out["bottlenecks"]
    for a in out["bottlenecks"]:  # a positive price marks a full lane (complementary slackness)
        assert sum(f[a] for f in out["flows"]) == pytest.approx(arcs[a][2])
        up = reference(len(names), with_capacity(arcs, a, 1), commodities)[1]
        assert up >= cost - out["capacity_prices"][a] - 1e-6


def test_max_throughput_prices_bound_the_extra_delivery(client):
    """For max-throughput the price is extra delivery per unit of capacity: the most
    delivered is concave in the capacities, so D(u + 1) <= D(u) + p for every arc."""
    body = scenario("depots-multicommodity")
    body["objective"] = "max-throughput"
    for c in body["commodities"]:
        c["demand"] *= 2
    out = client.post("/v1/multicommodity", json=body).get_json()
    names, arcs, commodities = indexed(body)
    total = sum(out["delivered"])
    assert total == pytest.approx(sum(reference(len(names), arcs, commodities, "max-throughput")[2]))
    assert out["bottlenecks"]
    for a, p in enumerate(out["capacity_prices"]):
        more = sum(reference(len(names), with_capacity(arcs, a, 1), commodities, "max-throughput")[2])
        assert more <= total + p + 1e-6
        if p > 0:
            less = sum(reference(len(names), with_capacity(arcs, a, -1), commodities, "max-throughput")[2])
            assert less <= total - p + 1e-6


def test_infeasible_min_cost_names_commodities_and_binding_arcs(client):
    body = scenario("depots-multicommodity")
    for c in body["commodities"]:
        c["demand"] *= 2
    out = client.post("/v1/multicommodity", json=body).get_json()
    assert out["status"] == "infeasible"
    info = out["infeasibility"]
    # networkx: which commodities exceed their own maximum flow, with the arcs to themselves
    alone = [c["id"] for c in body["commodities"]
             if max_flow_value(body["arcs"], c["source"], c["sink"]) < c["demand"]]
    assert info["cannot_meet_alone"] == alone and alone
    assert set(alone) <= set(info["commodities"])
    names, arcs, commodities = indexed(body)
    best = sum(reference(len(names), arcs, commodities, "max-throughput")[2])
    assert info["max_delivered"] == pytest.approx(best)
    assert sum(info["shortfall"]) == pytest.approx(sum(c[2] for c in commodities) - best)
    assert out["certificate"]["delivery_bound"] < out["certificate"]["total_demand"]
    # The binding arcs do bind: one more unit on each of them delivers more.
    wider = arcs
    for a in info["arcs"]:
        wider = with_capacity(wider, a, 1)
    assert sum(reference(len(names), wider, commodities, "max-throughput")[2]) > best + 0.5


def test_unreachable_sink_is_infeasible_without_binding_arcs(client):
    body = {"arcs": [{"from": "a", "to": "b", "capacity": 5}, {"from": "c", "to": "b", "capacity": 5}],
            "commodities": [{"id": "x", "source": "a", "sink": "c", "demand": 1}]}
    out = client.post("/v1/multicommodity", json=body).get_json()
    assert out["status"] == "infeasible"
    assert out["infeasibility"]["arcs"] == [] and out["infeasibility"]["cannot_meet_alone"] == ["x"]


def test_negative_cycle_without_limit_is_unbounded(client):
    body = {"arcs": [{"from": "a", "to": "b", "capacity": 5, "cost": 1},
                     {"from": "b", "to": "c", "cost": -3},
                     {"from": "c", "to": "b", "cost": 1}],
            "commodities": [{"id": 7, "source": "a", "sink": "b", "demand": 2}]}
    for objective in ("min-cost", "max-throughput"):
        out = client.post("/v1/multicommodity", json=body | {"objective": objective}).get_json()
        assert out["status"] == "unbounded"
        cycle = out["unbounded"]["arcs"]
        assert out["unbounded"]["commodity"] == 7
        assert sum(body["arcs"][a].get("cost", 0) for a in cycle) < 0
        assert sorted(body["arcs"][a]["from"] for a in cycle) == sorted(body["arcs"][a]["to"] for a in cycle)


def test_columnar_arcs_and_integer_ids(client):
    body = {"arcs": {"from": [0, 1, 0], "to": [1, 2, 2], "capacity": [4, 4, 1], "cost": [1, 1, 5]},
            "commodities": [{"id": 0, "source": 0, "sink": 2, "demand": 5}]}
    out = client.post("/v1/multicommodity", json=body).get_json()
    assert out["status"] == "optimal" and out["cost"] == pytest.approx(4 * 2 + 5)
    assert out["flows"] == [[4, 4, 1]] and out["delivered"] == [5]


# --------------------------------------------------------------------------- the check fails


def small():
    net = Graph(3, np.array([0, 1, 0], dtype=np.int32), np.array([1, 2, 2], dtype=np.int32),
                  np.array([4, 4, 1]), None, np.array([1.0, 1.0, 5.0]))
    com = Commodities(np.array([0]), np.array([2]), np.array([5.0]))
    return net, com


def test_check_flows_fails_on_wrong_plans():
    net, com = small()
    solution = multicommodity_flow(net, com)
    good = solution.flows.copy()
    lp = {"primal_residual": 0.0, "dual_residual": 0.0, "dual_objective": 13.0, "gap": 0.0,
          "duals_unique": False, "degenerate": False, "tolerance": {"gap": 1e-5}}
    prices = solution.capacity_prices
    assert check_flows(net, com, good, com.demands, prices, lp)["cost"] == pytest.approx(13)
    leaky = good.copy()
    leaky[0, 1] -= 1  # loses a unit at node 1
    over = good + np.array([[1.0, 1.0, 0.0]])  # 5 on arcs of capacity 4
    for flows, delivered, p in ((leaky, com.demands, prices), (over, com.demands + 1, prices),
                                (good, com.demands + 1, prices),  # claims more than is moved
                                (good * 0.8, com.demands * 0.8, prices)):  # priced arcs not full
        with pytest.raises(SelfCheckFailed):
            check_flows(net, com, flows, delivered, p, lp)


# --------------------------------------------------------------------------- bad input

GOOD = {"arcs": [{"from": "a", "to": "b", "capacity": 5, "cost": 1}, {"from": "b", "to": "c", "capacity": 5}],
        "commodities": [{"id": "x", "source": "a", "sink": "c", "demand": 1}]}


@pytest.mark.parametrize("what,patch,pointer", [
    ("unknown source", {"commodities": [{"id": "x", "source": "q", "sink": "c", "demand": 1}]},
     "/commodities/0/source"),
    ("source is sink", {"commodities": [{"id": "x", "source": "a", "sink": "a", "demand": 1}]},
     "/commodities/0/sink"),
    ("duplicate id", {"commodities": [{"id": "x", "source": "a", "sink": "c", "demand": 1}] * 2},
     "/commodities/1/id"),
    ("negative demand", {"commodities": [{"id": "x", "source": "a", "sink": "c", "demand": -1}]},
     "/commodities/0/demand"),
    ("boolean demand", {"commodities": [{"id": "x", "source": "a", "sink": "c", "demand": True}]},
     "/commodities/0/demand"),
    ("missing demand", {"commodities": [{"id": "x", "source": "a", "sink": "c"}]}, "/commodities/0/demand"),
    ("no commodities", {"commodities": []}, "/commodities"),
    ("bad objective", {"objective": "cheapest"}, "/objective"),
    ("lower bound", {"arcs": [{"from": "a", "to": "b", "capacity": 5, "lower": 1},
                              {"from": "b", "to": "c"}]}, "/arcs/0/lower"),
    ("string capacity", {"arcs": [{"from": "a", "to": "b", "capacity": "5"}, {"from": "b", "to": "c"}]},
     "/arcs/0/capacity"),
    ("graph engine", {"options": {"engine": "graph"}}, "/options/engine"),
])
def test_bad_input(client, what, patch, pointer):
    r = client.post("/v1/multicommodity", json=GOOD | patch)
    assert r.status_code == 422, r.get_json()
    assert r.headers["Content-Type"].startswith("application/problem+json")
    assert pointer in pointers(r)


def test_commodity_limit_is_the_configured_one(tmp_path):
    """SLUICE_MAX_COMMODITIES (Settings.max_commodities) bounds a request: 413 with a pointer."""
    from service.api import create_app

    body = {"arcs": [{"from": "a", "to": "b", "capacity": 5}],
            "commodities": [{"id": f"c{i}", "source": "a", "sink": "b", "demand": 1} for i in range(3)]}
    small = create_app({"data_dir": str(tmp_path), "max_commodities": 2}).test_client()
    r = small.post("/v1/multicommodity", json=body)
    assert r.status_code == 413 and r.get_json()["errors"][0]["pointer"] == "/commodities"
    roomy = create_app({"data_dir": str(tmp_path / "b"), "max_commodities": 3}).test_client()
    assert roomy.post("/v1/multicommodity", json=body).status_code == 200
