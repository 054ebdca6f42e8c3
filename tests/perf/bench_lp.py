"""LP and multi-commodity flow: the service end to end against GLOP in-process.

Rows, for each model:
- GLOP in-process: the same arrays handed straight to OR-Tools' model_builder_helper
  (fill_model_from_sparse_data + solve), no checks - the floor.
- service in-process: the kind's parse() + solve() on the decoded body (model reading,
  GLOP, certificate).
- HTTP: a real `sluice serve` (one worker) answering the JSON body, decode to encode.

Models (invented data):
- LP: a transport plan, depots x stores with 50k random lanes, lane capacities as
  variable bounds: 100k nonzeros. Sent in the sparse matrix form and in the object form.
- multi-commodity: 10k arcs (a ring of 2k nodes plus random lanes) x 20 commodities,
  min-cost and max-throughput.
"""

from __future__ import annotations

import time

import numpy as np
import orjson
import requests
import scipy.sparse as sp
from ortools.linear_solver.python import model_builder_helper as mbh

from service.deadline import Deadline
from service.kinds import Limits
from service.kinds import lp as lp_kind
from service.kinds import multicommodity as mc_kind
from tests.perf.harness import best_of, post_json, served, table

LIMITS = Limits()


def glop(c, A, rl, ru, cl, cu, *, maximize=False, params=""):
    model = mbh.ModelBuilderHelper()
    model.fill_model_from_sparse_data(cl, cu, c, rl, ru, A)
    model.set_maximize(maximize)
    solver = mbh.ModelSolverHelper("glop")
    if params:
        solver.set_solver_specific_parameters(params)
    solver.solve(model)
    return solver.objective_value()


def transport_lp(depots: int, stores: int, lanes: int, seed: int = 7):
    rng = np.random.default_rng(seed)
    keys = rng.choice(depots * stores, size=lanes, replace=False)
    src, dst = keys // stores, keys % stores
    supply = rng.integers(50, 150, depots).astype(float)
    demand = rng.integers(10, 60, stores).astype(float)
    demand = np.floor(demand * 0.9 * supply.sum() / demand.sum())
    cost = np.round(rng.uniform(1, 20, lanes), 2)
    cap = rng.integers(5, 40, lanes).astype(float)
    rows = np.concatenate([src, depots + dst])
    cols = np.concatenate([np.arange(lanes)] * 2)
    A = sp.csr_matrix((np.ones(2 * lanes), (rows, cols)), shape=(depots + stores, lanes))
    rl = np.concatenate([np.full(depots, -np.inf), demand])
    ru = np.concatenate([supply, np.full(stores, np.inf)])
    arrays = (cost, A, rl, ru, np.zeros(lanes), cap)
    names = [f"lane-{j}" for j in range(lanes)]
    rnames = [f"depot-{i}" for i in range(depots)] + [f"store-{i}" for i in range(stores)]
    coo = A.tocoo()
    matrix_body = {
        "objective": {"sense": "min", "coefficients": cost.tolist()},
        "variables": {"name": names, "upper": cap.tolist()},
        "constraints": {"name": rnames, "lower": [None] * depots + demand.tolist(),
                        "upper": supply.tolist() + [None] * stores},
        "matrix": {"row": coo.row.tolist(), "column": coo.col.tolist(), "value": coo.data.tolist()},
    }
    terms = [{} for _ in rnames]
    for i, j in zip(coo.row.tolist(), coo.col.tolist()):
        terms[i][names[j]] = 1
    object_body = {
        "objective": {"sense": "min", "terms": dict(zip(names, cost.tolist()))},
        "variables": [{"name": n, "upper": u} for n, u in zip(names, cap.tolist())],
        "constraints": [{"name": rnames[i], "terms": terms[i], **({"upper": float(supply[i])} if i < depots
                         else {"lower": float(demand[i - depots])})} for i in range(len(rnames))],
    }
    return arrays, matrix_body, object_body


def multicommodity_case(n: int, m: int, k: int, seed: int = 1):
    rng = np.random.default_rng(seed)
    tail = np.concatenate([np.arange(n), rng.integers(0, n, m - n)])
    head = np.concatenate([(np.arange(n) + 1) % n, rng.integers(0, n, m - n)])
    cap = rng.integers(5, 30, m)
    cost = rng.integers(1, 10, m)
    src = rng.integers(0, n, k)
    snk = (src + rng.integers(1, n, k)) % n
    dem = rng.integers(5, 20, k)
    body = {
        "arcs": {"from": tail.tolist(), "to": head.tolist(), "capacity": cap.tolist(), "cost": cost.tolist()},
        "nodes": list(range(n)),
        "commodities": [{"id": f"product-{i}", "source": int(s), "sink": int(t), "demand": int(d)}
                        for i, (s, t, d) in enumerate(zip(src, snk, dem))],
    }
    return (tail, head, cap.astype(float), cost.astype(float), src, snk, dem.astype(float)), body


def baseline_multicommodity(case, objective: str) -> float:
    """The same LP built here with scipy.sparse and solved by GLOP directly (dual simplex
    for cost, primal for delivery - the settings the service measured fastest)."""
    tail, head, cap, cost, src, snk, dem = case
    n, m, k = int(max(tail.max(), head.max()) + 1), tail.size, src.size
    inc = sp.csr_matrix((np.r_[np.ones(m), -np.ones(m)], (np.r_[tail, head], np.r_[np.arange(m), np.arange(m)])),
                        shape=(n, m))
    block = sp.kron(sp.identity(k), inc, format="csr")
    share = sp.hstack([sp.identity(m)] * k, format="csr")
    if objective == "min-cost":
        b = np.zeros(k * n)
        np.add.at(b, n * np.arange(k) + src, dem)
        np.add.at(b, n * np.arange(k) + snk, -dem)
        A = sp.vstack([block, share], format="csr")
        return glop(np.tile(cost, k), A, np.r_[b, np.full(m, -np.inf)], np.r_[b, cap], np.zeros(k * m),
                    np.full(k * m, np.inf), params="use_dual_simplex: true")
    t = sp.csr_matrix((np.r_[-np.ones(k), np.ones(k)], (np.r_[n * np.arange(k) + src, n * np.arange(k) + snk],
                                                        np.r_[np.arange(k), np.arange(k)])), shape=(k * n, k))
    A = sp.vstack([sp.hstack([block, t]), sp.hstack([share, sp.csr_matrix((m, k))])], format="csr")
    rl, ru = np.r_[np.zeros(k * n), np.full(m, -np.inf)], np.r_[np.zeros(k * n), cap]
    cl, cu = np.zeros(k * m + k), np.r_[np.full(k * m, np.inf), dem]
    best = glop(np.r_[np.zeros(k * m), np.ones(k)], A, rl, ru, cl, cu, maximize=True)
    hold = sp.csr_matrix(np.r_[np.zeros(k * m), np.ones(k)][None, :])
    return glop(np.r_[np.tile(cost, k), np.zeros(k)], sp.vstack([A, hold], format="csr"), np.r_[rl, best],
                np.r_[ru, np.inf], cl, cu, params="use_dual_simplex: true")


def in_process(kind, body):
    return kind.solve(kind.parse(body, LIMITS), Deadline.after(600.0))


def _bypass(body: dict) -> dict:
    return {**body, "options": {**body.get("options", {}), "cache": "bypass"}}


def run(args) -> None:
    quick = getattr(args, "quick", False)
    lanes = 5_000 if quick else 50_000
    arrays, matrix_body, object_body = transport_lp(60 if quick else 250, 100 if quick else 400, lanes)
    mc_case, mc_body = multicommodity_case(400 if quick else 2_000, 2_000 if quick else 10_000, 20)
    repeat = 1 if quick else 2
    rows = []
    with served(workers=1) as server, requests.Session() as session:
        nnz = arrays[1].nnz
        base = best_of(lambda: glop(*arrays), repeat)
        expected = glop(*arrays)
        out = in_process(lp_kind.KIND, matrix_body)
        assert abs(out["objective"] - expected) <= 1e-6 * abs(expected), (out["objective"], expected)
        service = best_of(lambda: in_process(lp_kind.KIND, matrix_body), repeat)
        # cache bypass: every repetition is solved (the result cache would answer repeats)
        encoded = orjson.dumps(_bypass(matrix_body))
        http = best_of(lambda: post_json(session, server.url + "/v1/lp", encoded), repeat)
        rows.append((f"LP {nnz // 1000}k nonzeros, matrix form", f"{base:.2f}", f"{service:.2f}",
                     f"{http:.2f}", f"{service / base:.2f}", f"{http / base:.2f}", f"{len(encoded) / 1e6:.1f}"))
        encoded_obj = orjson.dumps(_bypass(object_body))
        service_obj = best_of(lambda: in_process(lp_kind.KIND, object_body), repeat)
        http_obj = best_of(lambda: post_json(session, server.url + "/v1/lp", encoded_obj), repeat)
        rows.append((f"LP {nnz // 1000}k nonzeros, object form", f"{base:.2f}", f"{service_obj:.2f}",
                     f"{http_obj:.2f}", f"{service_obj / base:.2f}", f"{http_obj / base:.2f}",
                     f"{len(encoded_obj) / 1e6:.1f}"))
        m, k = len(mc_body["arcs"]["from"]), len(mc_body["commodities"])
        for objective in ("min-cost", "max-throughput"):
            body = mc_body | {"objective": objective}
            t0 = time.perf_counter()
            expected = baseline_multicommodity(mc_case, objective)
            base = time.perf_counter() - t0
            out = in_process(mc_kind.KIND, body)
            assert out["status"] == "optimal" and abs(out["cost"] - expected) <= 1e-6 * abs(expected), out["cost"]
            service = best_of(lambda: in_process(mc_kind.KIND, body), 1)
            encoded = orjson.dumps(_bypass(body))
            http = best_of(lambda: post_json(session, server.url + "/v1/multicommodity", encoded), 1)
            rows.append((f"multi-commodity {m // 1000}k arcs x {k}, {objective}", f"{base:.2f}", f"{service:.2f}",
                         f"{http:.2f}", f"{service / base:.2f}", f"{http / base:.2f}", f"{len(encoded) / 1e6:.1f}"))
    table(rows, ("model", "GLOP in-process s", "service in-process s", "HTTP s", "service/GLOP", "HTTP/GLOP",
                 "body MB"))
