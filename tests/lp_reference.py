"""Reference LP helpers for the tests, written independently of the service's code.

Models here are plain dicts of numpy arrays (c, A dense, row lower/upper, column
lower/upper, sense). ``linprog_solve`` hands them to scipy.optimize.linprog with
method="highs" (the reference solver); ``duality_figures`` recomputes strong duality
and complementary slackness from an answer with loops and dense algebra, not with
service.solvers.lp_checks.
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import linprog

INF = float("inf")


def random_model(rng: np.random.Generator, n: int, m: int, *, maximize: bool, feasible: bool = True) -> dict:
    """A random LP with mixed bound and row kinds, feasible by construction (rows are
    built around a point ``x0`` inside the variable bounds) unless ``feasible`` is False."""
    kinds = rng.choice(["nonneg", "box", "upper_only", "free"], size=n, p=[0.4, 0.35, 0.15, 0.1])
    x0 = rng.uniform(-2, 4, n)
    col_lower = np.where(kinds == "nonneg", 0.0, np.where(kinds == "box", x0 - rng.uniform(0, 3, n), -INF))
    col_upper = np.where(kinds == "box", x0 + rng.uniform(0, 3, n), np.where(kinds == "upper_only", x0 + 1, INF))
    x0 = np.where(kinds == "nonneg", np.abs(x0), x0)
    A = rng.integers(-4, 6, size=(m, n)).astype(float)
    A[rng.random((m, n)) < 0.4] = 0.0
    act = A @ x0
    row_kind = rng.choice(["le", "ge", "eq", "range"], size=m, p=[0.4, 0.3, 0.15, 0.15])
    slack = rng.uniform(0, 3, m)
    row_lower = np.where(np.isin(row_kind, ["ge", "range"]), act - slack, np.where(row_kind == "eq", act, -INF))
    row_upper = np.where(np.isin(row_kind, ["le", "range"]), act + slack, np.where(row_kind == "eq", act, INF))
    if not feasible:
        row_lower, row_upper = row_lower.copy(), row_upper.copy()
        i = int(rng.integers(m))
        A = np.vstack([A, A[i]])
        row_lower = np.append(row_lower, act[i] + 5.0)
        row_upper = np.append(row_upper, INF)
        row_lower[i], row_upper[i] = -INF, act[i]
    c = rng.integers(-5, 6, n).astype(float)
    return {"c": c, "A": A, "row_lower": row_lower, "row_upper": row_upper, "col_lower": col_lower,
            "col_upper": col_upper, "maximize": maximize}


def linprog_solve(model: dict):
    """Solve with scipy's HiGHS; returns the OptimizeResult and the objective in the model's sense."""
    A, rl, ru = model["A"], model["row_lower"], model["row_upper"]
    eq = rl == ru
    up = ~eq & np.isfinite(ru)
    lo = ~eq & np.isfinite(rl)
    a_ub = np.vstack([A[up], -A[lo]])
    b_ub = np.concatenate([ru[up], -rl[lo]])
    sign = -1.0 if model["maximize"] else 1.0
    bounds = [(None if not np.isfinite(l) else l, None if not np.isfinite(u) else u)
              for l, u in zip(model["col_lower"], model["col_upper"])]
    def run(options):
        return linprog(sign * model["c"], A_ub=a_ub if a_ub.size else None, b_ub=b_ub if a_ub.size else None,
                       A_eq=A[eq] if eq.any() else None, b_eq=rl[eq] if eq.any() else None, bounds=bounds,
                       method="highs", options=options)

    res = run({})
    if res.status in (2, 3):
        # HiGHS's presolve, like GLOP's, can call an unbounded model infeasible (seen in
        # test_lp_solver.py); without presolve the simplex tells them apart.
        res = run({"presolve": False})
    objective = sign * res.fun if res.status == 0 else None
    return res, objective


def linprog_row_duals(model: dict, res) -> np.ndarray:
    """scipy's marginals turned into d objective / d (active row bound), in the model's sense."""
    A, rl, ru = model["A"], model["row_lower"], model["row_upper"]
    eq = rl == ru
    up = ~eq & np.isfinite(ru)
    lo = ~eq & np.isfinite(rl)
    y = np.zeros(A.shape[0])
    k, total = int(up.sum()), int(up.sum() + lo.sum())
    if total:
        marg = res.ineqlin.marginals  # d fun / d b_ub; a lower bound l is the row -a.x <= -l
        y[up] += marg[:k]
        y[lo] -= marg[k:total]
    if eq.any():
        y[eq] += res.eqlin.marginals
    return -y if model["maximize"] else y


def to_request(model: dict) -> dict:
    """The model as a /v1/lp request body in object form (variables x0.., rows r0..)."""
    n = len(model["c"])

    def num(v):
        return None if not np.isfinite(v) else float(v)

    variables = [{"name": f"x{j}", "lower": num(model["col_lower"][j]), "upper": num(model["col_upper"][j])}
                 for j in range(n)]
    constraints = []
    for i, row in enumerate(model["A"]):
        item = {"name": f"r{i}", "terms": {f"x{j}": float(v) for j, v in enumerate(row) if v != 0}}
        lo, up = model["row_lower"][i], model["row_upper"][i]
        if lo == up:
            item["equals"] = float(lo)
        else:
            if np.isfinite(lo):
                item["lower"] = float(lo)
            if np.isfinite(up):
                item["upper"] = float(up)
        constraints.append(item)
    return {"objective": {"sense": "max" if model["maximize"] else "min",
                          "terms": {f"x{j}": float(v) for j, v in enumerate(model["c"])}},
            "variables": variables, "constraints": constraints}


def duality_figures(model: dict, x, y, d) -> dict:
    """Primal feasibility, the dual objective and complementary slackness, recomputed.

    Convention under test: y[i] = d objective / d (active bound of row i), d[j] the
    same for variable j; s*y > 0 points at the lower bound (s = +1 min, -1 max).
    """
    A, c = model["A"], model["c"]
    s = -1.0 if model["maximize"] else 1.0
    x, y, d = (np.asarray(v, dtype=float) for v in (x, y, d))
    act = A @ x
    viol = 0.0
    for i in range(A.shape[0]):
        viol = max(viol, model["row_lower"][i] - act[i], act[i] - model["row_upper"][i])
    for j in range(len(x)):
        viol = max(viol, model["col_lower"][j] - x[j], x[j] - model["col_upper"][j])
    stationarity = float(np.abs(c - A.T @ y - d).max())
    dual = 0.0
    comp = 0.0
    sign_error = 0.0
    for duals, lower, upper, values in ((y, model["row_lower"], model["row_upper"], act),
                                        (d, model["col_lower"], model["col_upper"], x)):
        for k, v in enumerate(duals):
            if abs(v) < 1e-12:
                continue
            bound = lower[k] if s * v > 0 else upper[k]
            if not np.isfinite(bound):
                sign_error = max(sign_error, abs(v))
                continue
            dual += v * bound
            comp = max(comp, abs(v) * abs(values[k] - bound))
    return {"primal_violation": viol, "primal_objective": float(c @ x), "dual_objective": dual,
            "stationarity": stationarity, "complementarity": comp, "sign_error": sign_error}
