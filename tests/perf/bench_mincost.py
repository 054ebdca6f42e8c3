"""Min-cost flow: end to end over HTTP against the in-process OR-Tools floor; potentials vs solve.

* ``e2e / floor``: one POST /v1/mincostflow (columnar JSON, flows and potentials in the
  answer, certificate included) against the least any service must do in-process:
  hand the numpy arrays to SimpleMinCostFlow, solve, read the flows.
* ``potentials / solve``: :func:`service.solvers.potentials.node_potentials` against
  the OR-Tools solve of the same network, on random and grid-like networks.

Targets (issue 3): e2e / floor <= 2.5 at 100k and 1M arcs; potentials / solve <= 1.
"""

from __future__ import annotations

import time

import numpy as np
import orjson
import requests
from ortools.graph.python import min_cost_flow as ortools_min_cost_flow

from service.solvers.graph import Graph
from service.solvers.potentials import node_potentials
from tests.perf.harness import best_of, post_json, served, table


def random_network(n: int, m: int, seed: int = 0, max_cost: int = 100, supply_share: float = 0.01):
    """Random arcs plus a ring of expensive unlimited-ish arcs that keeps the problem feasible."""
    rng = np.random.default_rng(seed)
    extra = m - n
    tail = np.concatenate([rng.integers(0, n, extra), np.arange(n)]).astype(np.int32)
    head = np.concatenate([rng.integers(0, n, extra), np.roll(np.arange(n), -1)]).astype(np.int32)
    cap = rng.integers(1, 100, m).astype(np.int64)
    cost = rng.integers(0, max_cost, m).astype(np.int64)
    k = max(2, int(n * supply_share))
    nodes = rng.permutation(n)[: 2 * k]
    amount = rng.integers(1, 200, k)
    supply = np.zeros(n, np.int64)
    supply[nodes[:k]] = amount
    supply[nodes[k:]] = -amount
    cap[extra:] = amount.sum()
    cost[extra:] = max_cost
    return n, tail, head, cap, cost, supply


def grid_network(rows: int, cols: int, seed: int = 0, per_supply: int = 5000):
    """A rows x cols grid with arcs both ways between neighbours (about 4 rows cols arcs)."""
    rng = np.random.default_rng(seed)
    idx = np.arange(rows * cols).reshape(rows, cols)
    pairs = [(idx[:, :-1], idx[:, 1:]), (idx[:, 1:], idx[:, :-1]), (idx[:-1], idx[1:]), (idx[1:], idx[:-1])]
    tail = np.concatenate([a.ravel() for a, _ in pairs]).astype(np.int32)
    head = np.concatenate([b.ravel() for _, b in pairs]).astype(np.int32)
    cap = rng.integers(20, 100, tail.size).astype(np.int64)
    cost = rng.integers(1, 20, tail.size).astype(np.int64)
    n = rows * cols
    k = max(2, n // per_supply)
    nodes = rng.permutation(n)[: 2 * k]
    amount = rng.integers(1, 50, k)
    supply = np.zeros(n, np.int64)
    supply[nodes[:k]] = amount
    supply[nodes[k:]] = -amount
    return n, tail, head, cap, cost, supply


def ortools_floor(n, tail, head, cap, cost, supply):
    """In-process OR-Tools: add arcs, set supplies, solve, read flows. Returns (seconds, solve seconds, flows)."""
    t0 = time.perf_counter()
    solver = ortools_min_cost_flow.SimpleMinCostFlow()
    arcs = solver.add_arcs_with_capacity_and_unit_cost(tail, head, cap, cost)
    solver.set_nodes_supplies(np.arange(n, dtype=np.int32), supply)
    t1 = time.perf_counter()
    status = solver.solve()
    t2 = time.perf_counter()
    assert status == solver.OPTIMAL, status
    flows = np.asarray(solver.flows(arcs))
    return time.perf_counter() - t0, t2 - t1, flows


def request_body(n, tail, head, cap, cost, supply) -> bytes:
    # Every node declared, in index order: the service numbers nodes as the floor does
    # (OR-Tools' running time depends on the node order, which would blur the comparison).
    return orjson.dumps({
        "nodes": {"id": np.arange(n), "supply": supply},
        "arcs": {"from": tail, "to": head, "capacity": cap, "cost": cost},
        "options": {"detail": ["flows", "potentials"], "cache": "bypass"},
    }, option=orjson.OPT_SERIALIZE_NUMPY)


def run(args) -> None:
    sizes = [(1_000, 10_000), (10_000, 100_000)] if args.quick else [(10_000, 100_000), (100_000, 1_000_000)]
    rows = []
    with served(workers=1) as server:
        session = requests.Session()
        url = server.url + "/v1/mincostflow"
        for n, m in sizes:
            net = random_network(n, m)
            repeat = 2 if m <= 100_000 else 1
            floor = best_of(lambda: ortools_floor(*net), repeat)
            body = request_body(*net)
            answers = []
            e2e = best_of(lambda: answers.append(post_json(session, url, body)), repeat)
            out = answers[-1]
            assert out["status"] == "optimal" and out["certificate"]["gap"] == 0
            t = out["timing_ms"]
            rows.append((f"random {n:,} nodes", f"{m:,}", f"{len(body) / 1e6:.1f} MB", f"{floor:.2f}", f"{e2e:.2f}",
                         f"{t['parse'] / 1000:.2f}", f"{t['solve'] / 1000:.2f}", f"{e2e / floor:.2f}x"))
    print("min-cost flow end to end (1 worker, columnar JSON, flows + potentials + certificate) vs in-process floor")
    table(rows, ("network", "arcs", "body", "floor s", "e2e s", "server parse s", "server solve s", "e2e/floor"))

    print("\npotentials (contraction + frontier Bellman-Ford) vs the OR-Tools solve, in-process")
    cases = [("random", random_network(10_000, 100_000) if args.quick else random_network(100_000, 1_000_000)),
             ("grid", grid_network(50, 500) if args.quick else grid_network(250, 1000))]
    rows = []
    for name, (n, tail, head, cap, cost, supply) in cases:
        _, solve_s, flows = ortools_floor(n, tail, head, cap, cost, supply)
        t0 = time.perf_counter()
        p = node_potentials(Graph(n, tail, head, cap, None, cost), flows)
        pot_s = time.perf_counter() - t0
        rc = cost + p[tail] - p[head]
        assert np.all(rc[flows < cap] >= 0) and np.all(rc[flows > 0] <= 0)
        rows.append((name, f"{n:,}", f"{tail.size:,}", f"{solve_s:.2f}", f"{pot_s:.2f}", f"{pot_s / solve_s:.3f}"))
    table(rows, ("network", "nodes", "arcs", "solve s", "potentials s", "potentials/solve"))
    print("(shared 2-core machine: figures are noisy; best of 2 runs at 100k arcs, a single run at 1M)")
