"""Planning questions: resilience (every closure's loss) and capacity expansion.

* ``resilience``: :func:`service.solvers.resilience.arc_closures` (the maximum flow,
  every flow-carrying arc's loss, each checked with a witness flow and a cut) against
  the naive way, measured in the same run: an OR-Tools SimpleMaxFlow re-solved from
  numpy arrays once per flow-carrying arc, with that arc closed. On the large network
  the naive way is timed on a random sample of those arcs and extrapolated (said so in
  the table). Networks: bench_maxflow's random networks (a source and a sink each
  touching 1% of the arcs). Targets (issue 18): ratio >= 10 on 1,000 nodes / 10,000
  arcs and on 10,000 nodes / 100,000 arcs; the small one inside the default
  synchronous time limit (30 s), also measured over HTTP.
* ``expansion``: :func:`service.solvers.expansion.cheapest_expansion` with per-unit
  charges only (min-cost flow, potentials, certificate, replay) against one bare
  OR-Tools SimpleMinCostFlow solve of the same augmented network (the lanes plus an
  added-capacity arc per widenable lane, the target as supply and demand). Target:
  ratio <= 2.

Run: ``python -m tests.perf planning`` (``--quick``: no 1M-arc expansion).
"""

from __future__ import annotations

import time

import numpy as np
import orjson
import requests
from ortools.graph.python import max_flow, min_cost_flow

from service.solvers.expansion import Lanes, cheapest_expansion
from service.solvers.resilience import arc_closures
from tests.perf.bench_maxflow import random_network
from tests.perf.harness import best_of, best_of_pair, post_json, served, table

#: Flow-carrying arcs re-solved the naive way on the large network (then extrapolated).
NAIVE_SAMPLE = 300


def _max_flow(n, tail, head, cap):
    solver = max_flow.SimpleMaxFlow()
    solver.add_arc_with_capacity(n - 1, n - 1, 0)
    arcs = solver.add_arcs_with_capacity(tail, head, cap)
    solver.solve(0, n - 1)
    return solver.optimal_flow(), np.asarray(solver.flows(arcs))


def naive_losses(n, tail, head, cap, arcs) -> tuple[np.ndarray, float]:
    """Re-solve once per arc with that arc closed; returns the losses and the seconds."""
    value, _ = _max_flow(n, tail, head, cap)
    losses = np.zeros(arcs.size, dtype=np.int64)
    started = time.perf_counter()
    for i, e in enumerate(arcs.tolist()):
        closed = cap.copy()
        closed[e] = 0
        losses[i] = value - _max_flow(n, tail, head, closed)[0]
    return losses, time.perf_counter() - started


def resilience_rows(m: int, sample: int | None) -> tuple:
    n, tail, head, cap = random_network(m)
    _, flows = _max_flow(n, tail, head, cap)
    carrying = np.flatnonzero((flows > 0) & (tail != head))
    ours_time = best_of(lambda: arc_closures(n, tail, head, cap, None, 0, n - 1), repeat=2)
    solution, certificate = arc_closures(n, tail, head, cap, None, 0, n - 1)
    loss = np.zeros(m, dtype=np.int64)
    loss[solution.failing] = solution.loss
    asked = carrying if sample is None else np.sort(np.random.default_rng(1).choice(carrying, sample, replace=False))
    naive, naive_seconds = naive_losses(n, tail, head, cap, asked)
    assert np.array_equal(naive, loss[asked]), "the naive losses differ from the solver's"
    naive_total = naive_seconds * carrying.size / asked.size
    how = "measured" if sample is None else f"{asked.size} sampled, extrapolated"
    return (f"{n:,} / {m:,}", f"{carrying.size:,}", f"{solution.failing.size:,}", f"{ours_time * 1e3:,.0f}",
            f"{naive_total * 1e3:,.0f} ({how})", f"{naive_total / ours_time:.1f}x",
            f"{solution.stats.get('group_tests', 0)}", f"{certificate['flows_checked']}")


def http_resilience_seconds(m: int) -> tuple[float, int]:
    """One POST /v1/resilience on the small network (columnar, cache bypassed)."""
    n, tail, head, cap = random_network(m)
    body = orjson.dumps({"source": 0, "sink": n - 1, "arcs": {"from": tail.tolist(), "to": head.tolist(),
                                                              "capacity": cap.tolist()},
                         "options": {"cache": "bypass"}})
    with served() as server, requests.Session() as session:
        post_json(session, server.url + "/v1/resilience", body)  # warm the worker
        started = time.perf_counter()
        answer = post_json(session, server.url + "/v1/resilience", body)
        return time.perf_counter() - started, len(answer["failures"])


def expansion_lanes(m: int, seed: int = 0) -> Lanes:
    """bench_maxflow's random network, 70% of lanes widenable, the target 20% above
    today's maximum flow."""
    n, tail, head, cap = random_network(m, seed)
    rng = np.random.default_rng(seed + 1)
    value, _ = _max_flow(n, tail, head, cap)
    widenable = rng.random(m) < 0.7
    expand_unlimited = widenable & (rng.random(m) < 0.1)
    expand_cost = np.where(widenable, rng.integers(1, 20, m), 0)
    expand_max = np.where(widenable & ~expand_unlimited, rng.integers(0, 50, m), 0)
    return Lanes(n, tail, head, cap, None, widenable, expand_cost, expand_max, expand_unlimited, None, 0, n - 1,
                 int(value * 1.2))


def bare_min_cost_flow(lanes: Lanes) -> None:
    """The floor: one SimpleMinCostFlow solve of the augmented network, flows read."""
    extra = np.flatnonzero(lanes.widenable)
    big = lanes.target
    solver = min_cost_flow.SimpleMinCostFlow()
    arcs = solver.add_arcs_with_capacity_and_unit_cost(
        np.concatenate([lanes.tail, lanes.tail[extra]]).astype(np.int32),
        np.concatenate([lanes.head, lanes.head[extra]]).astype(np.int32),
        np.concatenate([lanes.capacity, np.where(lanes.expand_unlimited[extra], big, lanes.expand_max[extra])]),
        np.concatenate([np.zeros(lanes.tail.size, np.int64), lanes.expand_cost[extra]]))
    supply = np.zeros(lanes.num_nodes, np.int64)
    supply[lanes.source], supply[lanes.sink] = lanes.target, -lanes.target
    solver.set_nodes_supplies(np.arange(lanes.num_nodes, dtype=np.int32), supply)
    assert solver.solve() == solver.OPTIMAL
    solver.flows(arcs)


def expansion_row(m: int) -> tuple:
    lanes = expansion_lanes(m)
    solution, _ = cheapest_expansion(lanes)
    assert solution.status == "optimal"
    floor, ours = best_of_pair(lambda: bare_min_cost_flow(lanes), lambda: cheapest_expansion(lanes), repeat=3)
    return (f"{lanes.num_nodes:,} / {m:,}", f"{int(lanes.widenable.sum()):,}", f"{int(solution.additions.sum()):,}",
            f"{floor * 1e3:,.0f}", f"{ours * 1e3:,.0f}", f"{ours / floor:.2f}")


def run(args) -> None:
    print("resilience: every closure's loss vs one OR-Tools max-flow re-solve per flow-carrying arc")
    rows = [resilience_rows(10_000, None), resilience_rows(100_000, NAIVE_SAMPLE)]
    table(rows, ("nodes / arcs", "carrying", "failures", "ours ms", "naive ms", "naive / ours", "group tests",
                 "flows checked"))
    seconds, failures = http_resilience_seconds(10_000)
    print(f"POST /v1/resilience, 10,000 arcs (columnar, every failure listed: {failures}): {seconds * 1e3:,.0f} ms "
          f"(default synchronous limit 30 s)")
    print("\nexpansion, per-unit charges: cheapest_expansion vs one bare min-cost flow of the augmented network")
    sizes = [100_000] if args.quick else [100_000, 1_000_000]
    table([expansion_row(m) for m in sizes],
          ("nodes / arcs", "widenable", "units added", "min-cost ms", "expansion ms", "ratio"))
