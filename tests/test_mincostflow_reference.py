"""Min-cost flow against outside references: networkx, SciPy's HiGHS, a textbook example, the theorems.

References used beside each check:
* networkx.network_simplex (min-cost flow; no lower bounds there, so the test
  transforms them itself) and networkx.max_flow_min_cost (max-flow mode);
* scipy.optimize.linprog with HiGHS (max-flow mode with lower bounds, as two LPs);
* networkx.maximum_flow on the auxiliary network (feasibility, independently);
* LP strong duality (primal cost = dual bound) and the integrality theorem.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from scipy.optimize import linprog

from service.solvers import Graph
from service.solvers.mincost import min_cost_flow
from tests.checkers import assert_capacities, assert_conservation, assert_integral
from tests.references import max_flow_value, min_cost_flow_cost


def random_network(n, m, seed, *, negative_unlimited=False, lower=True, decimals=False):
    rng = np.random.default_rng(seed)
    tail = rng.integers(0, n, m).astype(np.int32)
    head = rng.integers(0, n, m).astype(np.int32)
    cap = rng.integers(0, 20, m).astype(np.int64)
    cost = rng.integers(-4, 10, m).astype(np.int64)
    unl = rng.random(m) < 0.3
    if not negative_unlimited:
        cost[unl] = np.abs(cost[unl])
    cap[unl] = 0
    low = np.where(rng.random(m) < 0.15, rng.integers(0, 4, m), 0) if lower else np.zeros(m, np.int64)
    low = np.where(unl, low, np.minimum(low, cap)).astype(np.int64)
    sup = np.zeros(n, np.int64)
    for _ in range(3):
        a, b = rng.integers(0, n, 2)
        q = rng.integers(1, 10)
        sup[a] += q
        sup[b] -= q
    if decimals:
        return tail, head, cap / 4, unl, cost / 10, low / 4, sup / 4
    return tail, head, cap, unl, cost, low, sup


def networkx_reference(n, tail, head, cap, unl, cost, low, sup):
    """(status, cost) by networkx.network_simplex (tests/references.min_cost_flow_cost,
    which settles self-loops itself), lower bounds transformed away here: each arc's
    lower bound is shipped up front (its cost a constant) and the rest is the arc."""
    b = [float(x) for x in sup]
    constant = 0.0
    arcs = []
    for i, (t, h) in enumerate(zip(tail.tolist(), head.tolist())):
        lo, c = float(low[i]), float(cost[i])
        constant += lo * c
        b[t] -= lo
        b[h] += lo
        arcs.append((t, h, None if unl[i] else float(cap[i]) - lo, c))
    value = min_cost_flow_cost(arcs, dict(enumerate(b)), range(n))
    return (value, None) if isinstance(value, str) else ("optimal", value + constant)


def feasible_by_networkx(n, tail, head, cap, unl, low, sup) -> bool:
    """Hoffman feasibility with networkx.maximum_flow on the auxiliary network."""
    b = [float(x) for x in sup]
    arcs = []
    for i, (t, h) in enumerate(zip(tail.tolist(), head.tolist())):
        b[t] -= float(low[i])
        b[h] += float(low[i])
        arcs.append((t, h, None if unl[i] else float(cap[i]) - float(low[i])))
    arcs += [("S", v, b[v]) for v in range(n) if b[v] > 0] + [(v, "T", -b[v]) for v in range(n) if b[v] < 0]
    need = sum(x for x in b if x > 0)
    return need == 0 or max_flow_value(arcs, "S", "T") >= need - 1e-9


def assert_solution(n, tail, head, cap, unl, cost, low, sup, sol, cert, tol=0.0):
    caps = [None if u else c for c, u in zip(cap.tolist(), unl.tolist())]
    assert_capacities(sol.flows, caps, low, tol=tol)
    assert_conservation(n, tail, head, sol.flows, sup, tol=tol)
    assert cert["checked"] and abs(cert["gap"]) <= tol * max(1, abs(cert["primal_cost"]))
    # Weak duality recomputed here: potentials give a bound no flow can beat.
    p = np.asarray(sol.potentials, dtype=float)
    rc = cost + p[tail] - p[head]
    assert np.all(rc[unl] >= -tol - 1e-9), "an unlimited arc has negative reduced cost"
    dual = -(sup * p).sum() + (low * np.maximum(rc, 0)).sum() - (np.where(unl, 0, cap) * np.maximum(-rc, 0)).sum()
    assert abs(dual - float(np.dot(cost, sol.flows))) <= 1e-6 * max(1.0, abs(dual)) + tol * 10


@pytest.mark.parametrize("engine", ["graph", "lp"])
@pytest.mark.parametrize("negative_unlimited", [False, True])
def test_random_networks_match_network_simplex(engine, negative_unlimited):
    statuses = set()
    for seed in range(120):
        n = 8
        tail, head, cap, unl, cost, low, sup = random_network(n, 22, seed, negative_unlimited=negative_unlimited)
        sol, cert = min_cost_flow(Graph(n, tail, head, cap, unl, cost, low), sup, engine=engine)
        status, value = networkx_reference(n, tail, head, cap, unl, cost, low, sup)
        statuses.add(sol.status)
        if status == "unbounded" and sol.status == "infeasible":
            # networkx reports a negative uncapacitated cycle before it checks feasibility.
            assert not feasible_by_networkx(n, tail, head, cap, unl, low, sup)
            continue
        assert sol.status == status, seed
        if status == "optimal":
            tol = sol.tolerance
            assert sol.cost == pytest.approx(value, abs=1e-6)
            assert_solution(n, tail, head, cap, unl, cost, low, sup, sol, cert, tol)
            if engine == "graph":
                assert_integral(sol.flows)  # integrality theorem
        if status == "infeasible":
            assert not feasible_by_networkx(n, tail, head, cap, unl, low, sup)
    assert "optimal" in statuses and "infeasible" in statuses
    if negative_unlimited:
        assert "unbounded" in statuses


def test_decimal_data_are_solved_exactly_by_scaling():
    for seed in range(60):
        n = 7
        tail, head, cap, unl, cost, low, sup = random_network(n, 18, seed, decimals=True)
        sol, cert = min_cost_flow(Graph(n, tail, head, cap, unl, cost, low), sup)
        # networkx's simplex is only reliable on integers: give it the data times 4 and 10.
        status, value = networkx_reference(n, tail, head, np.rint(cap * 4), unl, np.rint(cost * 10),
                                           np.rint(low * 4), np.rint(sup * 4))
        value = None if value is None else value / 40
        assert sol.status == status
        if status == "optimal":
            assert sol.engine["kind"] == "graph" and "decimal_scale" in sol.engine
            assert sol.cost == pytest.approx(value, abs=1e-9)
            assert_solution(n, tail, head, cap, unl, cost, low, sup, sol, cert)


def test_fractions_beyond_six_places_go_to_lp_with_stated_tolerance():
    tail = np.array([0, 0, 1, 2], np.int32)
    head = np.array([1, 2, 3, 3], np.int32)
    cap = np.array([1 / 3, 2.0, 1.0, 2.0])
    cost = np.array([1.0, 2.5, 1.0, 1 / 7])
    sup = np.array([1.0, 0, 0, -1.0])
    sol, cert = min_cost_flow(Graph(4, tail, head, cap, None, cost), sup)
    assert sol.engine["kind"] == "lp" and sol.tolerance > 0
    # Reference: scipy.optimize.linprog (HiGHS) on the same LP.
    a = np.zeros((4, 4))
    a[tail, np.arange(4)] += 1
    a[head, np.arange(4)] -= 1
    ref = linprog(cost, A_eq=a, b_eq=sup, bounds=list(zip(np.zeros(4), cap)), method="highs")
    assert sol.cost == pytest.approx(ref.fun, abs=1e-6)
    assert cert["tolerance"] > 0 and abs(cert["gap"]) <= cert["tolerance"]


def max_flow_min_cost_reference(n, tail, head, cap, unl, cost, sup):
    """(shipped, cost) by networkx.max_flow_min_cost with a super source and sink."""
    graph = nx.DiGraph()
    graph.add_nodes_from(["S", "T"])
    # networkx wants a simple digraph: split every arc with a middle node.
    for i, (t, h) in enumerate(zip(tail.tolist(), head.tolist())):
        attrs = {"weight": int(cost[i])}
        if not unl[i]:
            attrs["capacity"] = int(cap[i])
        graph.add_edge(t, ("mid", i), **attrs)
        graph.add_edge(("mid", i), h, weight=0)
    for v in range(n):
        if sup[v] > 0:
            graph.add_edge("S", v, capacity=int(sup[v]), weight=0)
        elif sup[v] < 0:
            graph.add_edge(v, "T", capacity=int(-sup[v]), weight=0)
    flow = nx.max_flow_min_cost(graph, "S", "T")
    shipped = sum(flow["S"].values())
    return shipped, nx.cost_of_flow(graph, flow)


def test_max_flow_mode_matches_networkx_max_flow_min_cost():
    for seed in range(80):
        n = 8
        tail, head, cap, unl, cost, _, sup = random_network(n, 20, seed, lower=False)
        sup = sup.copy()
        sup[np.argmax(sup)] += 7  # unbalanced: more supply than demand
        sol, cert = min_cost_flow(Graph(n, tail, head, cap, unl, cost), sup, shortage="max-flow")
        shipped, value = max_flow_min_cost_reference(n, tail, head, cap, unl, cost, sup)
        assert sol.status == "optimal"
        assert sol.shipped == shipped and sol.cost == value
        assert cert["shipped_bound"] == shipped
        # What was shipped at each node plus what was not adds up to its supply.
        net_out = assert_conservation(n, tail, head, sol.flows, sup - sol.unmet)
        assert np.all(np.sign(sol.unmet) * np.sign(sup) >= 0)
        assert net_out[net_out > 0].sum() == shipped


def lexicographic_linprog(n, tail, head, cap, unl, cost, low, sup):
    """Max-flow mode as two LPs for scipy.optimize.linprog (HiGHS): most shipped, then least cost."""
    m = tail.size
    src, dst = np.flatnonzero(sup > 0), np.flatnonzero(sup < 0)
    # Variables: arc flows, shipped per supply node, received per demand node.
    k = m + src.size + dst.size
    a = np.zeros((n, k))
    for i, (t, h) in enumerate(zip(tail, head)):
        a[t, i] += 1
        a[h, i] -= 1
    for j, v in enumerate(src):
        a[v, m + j] -= 1
    for j, v in enumerate(dst):
        a[v, m + src.size + j] += 1
    bounds = [(float(low[i]), None if unl[i] else float(cap[i])) for i in range(m)]
    bounds += [(0, float(sup[v])) for v in src] + [(0, float(-sup[v])) for v in dst]
    ship = np.zeros(k)
    ship[m:m + src.size] = -1
    first = linprog(ship, A_eq=a, b_eq=np.zeros(n), bounds=bounds, method="highs")
    if first.status == 2:
        return "infeasible", None, None
    best = -first.fun
    c = np.concatenate([cost.astype(float), np.zeros(k - m)])
    second = linprog(c, A_eq=np.vstack([a, -ship]), b_eq=np.append(np.zeros(n), best), bounds=bounds,
                     method="highs")
    if second.status == 3:
        return "unbounded", best, None
    return "optimal", best, second.fun


def test_max_flow_mode_with_lower_bounds_matches_highs():
    seen = set()
    for seed in range(60):
        n = 7
        tail, head, cap, unl, cost, low, sup = random_network(n, 18, seed)
        sup = sup.copy()
        sup[np.argmin(sup)] -= 5  # more demand than supply
        sol, cert = min_cost_flow(Graph(n, tail, head, cap, unl, cost, low), sup, shortage="max-flow")
        status, shipped, value = lexicographic_linprog(n, tail, head, cap, unl, cost, low, sup)
        seen.add(sol.status)
        if status == "unbounded":
            assert sol.status == "unbounded"
            continue
        assert sol.status == status, seed
        if status == "optimal":
            assert sol.shipped == pytest.approx(shipped, abs=1e-7)
            assert sol.cost == pytest.approx(value, abs=1e-7)
            assert_capacities(sol.flows, [None if u else c for c, u in zip(cap, unl)], low)
    assert "optimal" in seen


def test_max_flow_mode_lp_engine_agrees_with_graph_engine():
    for seed in range(30):
        n = 7
        tail, head, cap, unl, cost, low, sup = random_network(n, 18, seed)
        sup = sup.copy()
        sup[np.argmax(sup)] += 4
        graph, _ = min_cost_flow(Graph(n, tail, head, cap, unl, cost, low), sup, shortage="max-flow")
        lp, cert = min_cost_flow(Graph(n, tail, head, cap, unl, cost, low), sup, shortage="max-flow", engine="lp")
        assert lp.status == graph.status
        if graph.status == "optimal":
            assert lp.shipped == pytest.approx(graph.shipped, abs=1e-6)
            assert lp.cost == pytest.approx(graph.cost, abs=1e-5)


def test_infeasibility_proof_set_satisfies_its_inequality():
    for seed in range(100):
        n = 8
        tail, head, cap, unl, cost, low, sup = random_network(n, 16, seed)
        sol, _ = min_cost_flow(Graph(n, tail, head, cap, unl, cost, low), sup)
        if sol.status != "infeasible":
            continue
        proof = sol.infeasibility
        x = proof["members"]
        # Recomputed here with plain loops: what must leave X exceeds what can.
        must, can, arcs = float(sup[x].sum()), 0.0, []
        for i, (t, h) in enumerate(zip(tail, head)):
            if x[t] and not x[h]:
                assert not unl[i]
                can += cap[i]
                arcs.append(i)
            elif x[h] and not x[t]:
                must += low[i]
        assert must > can
        assert must == proof["net_supply"] and can == proof["outgoing_capacity"]
        assert arcs == proof["arcs"].tolist()


def test_unbounded_answer_carries_a_negative_cycle_of_unlimited_arcs():
    tail = np.array([0, 1, 2, 3], np.int32)
    head = np.array([1, 2, 1, 2], np.int32)
    cap = np.array([5, 0, 0, 3])
    unl = np.array([False, True, True, False])
    cost = np.array([1, -3, 1, 0])
    sup = np.array([0, 0, 0, 0])
    sol, cert = min_cost_flow(Graph(4, tail, head, cap, unl, cost), sup)
    assert sol.status == "unbounded"
    assert sorted(sol.negative_cycle.tolist()) == [1, 2] and cert["cycle_cost"] == -2
    graph = nx.DiGraph()
    graph.add_weighted_edges_from([(1, 2, -3), (2, 1, 1)])
    assert nx.negative_edge_cycle(graph)  # networkx agrees a negative cycle exists


def test_transportation_textbook_example():
    """Hillier & Lieberman, Introduction to Operations Research, the P & T Company transportation
    example (chapter on the transportation problem): 3 canneries, 4 warehouses, truckloads of peas.
    Supplies, demands, unit costs and the optimum 152,535 recalled from memory; networkx confirms."""
    costs = np.array([[464, 513, 654, 867], [352, 416, 690, 791], [995, 682, 388, 685]])
    supply = [75, 125, 100]
    demand = [80, 65, 70, 85]
    tail = np.repeat(np.arange(3), 4).astype(np.int32)
    head = (3 + np.tile(np.arange(4), 3)).astype(np.int32)
    sup = np.array(supply + [-d for d in demand])
    sol, cert = min_cost_flow(Graph(7, tail, head, np.zeros(12, np.int64), np.ones(12, bool), costs.ravel()), sup)
    assert sol.status == "optimal" and sol.cost == 152_535
    assert cert["dual_bound"] == 152_535 and cert["gap"] == 0
    status, value = networkx_reference(7, tail, head, np.zeros(12), np.ones(12, bool), costs.ravel(),
                                       np.zeros(12), sup)
    assert value == 152_535
    # Potentials: the delivered price at each warehouse minus the price at each cannery never
    # exceeds the lane's cost, with equality on every lane used.
    p = sol.potentials
    rc = costs.ravel() + p[tail] - p[head]
    assert np.all(rc >= 0) and np.all(rc[sol.flows > 0] == 0)


def test_huge_costs_are_solved_exactly_by_their_common_factor_or_refused_with_a_422():
    tail = np.array([0], np.int32)
    head = np.array([1], np.int32)
    sup = np.array([1, -1])
    sol, cert = min_cost_flow(Graph(2, tail, head, np.array([1]), None, np.array([2**60])), sup)
    # 2**60 * (nodes + 1) overflows OR-Tools' int64 costs; divided by 2**60 it is 1.
    assert sol.engine["kind"] == "graph" and sol.cost == 2**60 and cert["cost_factor"] == 2**60
    assert cert["gap"] == 0 and cert["tolerance"] == 0
    from service.errors import InputError

    tail, head = np.array([0, 0], np.int32), np.array([1, 1], np.int32)
    for engine in ("auto", "graph"):  # coprime costs: no common factor helps; never the LP engine
        with pytest.raises(InputError) as info:
            min_cost_flow(Graph(2, tail, head, np.array([1, 1]), None, np.array([2**60 + 1, 2**60 + 3])), sup,
                          engine=engine)
        error = info.value.errors[0]
        assert error.pointer == "/arcs" and "arc 1's cost" in error.detail and "at most" in error.detail
