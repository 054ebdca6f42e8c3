"""Certificates of LP answers, recomputed from the model and the answer alone.

Nothing here trusts the solver: the residuals, the dual objective and the
complementarity products are recomputed with numpy/scipy from the model's arrays.

Sign convention (see :mod:`service.solvers.lp`): ``y[i]`` is the change of the
objective per unit increase of row ``i``'s active bound, ``d[j]`` the same for
variable ``j``'s active bound, for ``min`` and ``max`` alike. With ``s = +1`` for
``min`` and ``-1`` for ``max``, ``s*y[i] > 0`` points at the row's lower bound and
``s*y[i] < 0`` at its upper bound (raising a lower bound can only hurt, raising an
upper bound only help); a dual pointing at an infinite bound is dual infeasible.
Then for any primal-feasible ``x``::

    c.x + constant  =  D  +  sum_i y_i (a_i.x - beta_i)  +  sum_j d_j (x_j - lambda_j)

where ``D = constant + y.beta + d.lambda`` is the dual objective, ``beta`` and
``lambda`` the bounds the duals point at, and ``d = c - A^T y``. Every product in the
sums has the sign of ``s``: that is weak duality, and at an optimum each is zero
(complementary slackness), so the gap is zero too.

Tolerances are relative (``REL``) to the scale of the figures they bound, and every
certificate reports the absolute tolerances it used.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from ..errors import SelfCheckFailed

#: Relative tolerance of every LP check.
REL = 1e-6
#: Largest dense block (entries) used to prove full rank when the active system is not square.
DENSE_RANK_LIMIT = 250_000


def _fail(what: str) -> None:
    raise SelfCheckFailed(f"self-check failed: {what}")


def _max(a: np.ndarray) -> float:
    return float(a.max()) if a.size else 0.0


def _finite_max(*arrays) -> float:
    top = 0.0
    for a in arrays:
        f = np.abs(a[np.isfinite(a)])
        top = max(top, _max(f))
    return top


def sense(model) -> float:
    return -1.0 if model.maximize else 1.0


def bound_violation(values: np.ndarray, lower: np.ndarray, upper: np.ndarray) -> np.ndarray:
    """How far each value lies outside [lower, upper] (0 inside; infinite bounds never bind)."""
    with np.errstate(invalid="ignore"):
        v = np.maximum(np.maximum(lower - values, values - upper), 0.0)
    return np.nan_to_num(v, nan=0.0)


def primal_residual(model, x: np.ndarray) -> float:
    """Largest violation of any row or variable bound by ``x``."""
    act = model.matrix @ x
    return max(_max(bound_violation(act, model.row_lower, model.row_upper)),
               _max(bound_violation(x, model.col_lower, model.col_upper)))


def primal_tolerance(model, x: np.ndarray) -> float:
    """``REL`` times the scale of the bounds and of the row activities' terms."""
    terms = abs(model.matrix) @ np.abs(x)
    scale = max(_finite_max(model.row_lower, model.row_upper, model.col_lower, model.col_upper),
                _max(terms), _max(np.abs(x)))
    return REL * (1.0 + scale)


def dual_tolerance(model, y: np.ndarray) -> float:
    terms = abs(model.matrix).T @ np.abs(y)
    return REL * (1.0 + max(_max(np.abs(model.c)), _max(terms)))


def _pointed(duals: np.ndarray, lower: np.ndarray, upper: np.ndarray, s: float):
    """The bound each dual points at, and the duals that point at an infinite bound."""
    toward_lower = s * duals > 0
    toward_upper = s * duals < 0
    beta = np.where(toward_lower, lower, np.where(toward_upper, upper, 0.0))
    infeasible = ~np.isfinite(beta)
    return np.where(infeasible, 0.0, beta), infeasible


def check_optimal(model, x, y, d_solver, objective_solver) -> dict:
    """Certify an optimal primal-dual pair.

    Parameters
    ----------
    model : LPModel
    x, y : ndarray
        Primal values and row duals (in the module's convention).
    d_solver : ndarray
        The solver's reduced costs; they must agree with ``c - A^T y``.
    objective_solver : float
        The solver's objective (``constant`` excluded); it must agree with ``c.x``.

    Returns
    -------
    dict
        ``checked``, ``primal_residual``, ``dual_residual``, ``gap``,
        ``complementarity``, ``primal_objective``, ``dual_objective``,
        ``duals_unique``, ``degenerate``, ``tolerance`` {primal, dual, gap}.

    Raises
    ------
    SelfCheckFailed
        A residual, the gap or a complementarity product exceeds its tolerance.
    """
    s = sense(model)
    A = model.matrix
    act = A @ x
    p_res = primal_residual(model, x)
    tp = primal_tolerance(model, x)
    d = model.c - A.T @ y
    beta, bad_rows = _pointed(y, model.row_lower, model.row_upper, s)
    lam, bad_cols = _pointed(d, model.col_lower, model.col_upper, s)
    d_res = max(_max(np.abs(y[bad_rows])), _max(np.abs(d[bad_cols])),
                _max(np.abs(d - d_solver)) if d_solver is not None else 0.0)
    td = dual_tolerance(model, y)
    primal = float(model.c @ x) + model.constant
    dual = float(y @ beta + d @ lam) + model.constant
    gap = abs(primal - dual)
    tg = REL * (1.0 + float(np.abs(model.c) @ np.abs(x)) + float(np.abs(y) @ np.abs(beta))
                + float(np.abs(d) @ np.abs(lam)))
    comp = max(_max(np.abs(y) * np.abs(act - beta) * ~bad_rows * (y != 0)),
               _max(np.abs(d) * np.abs(x - lam) * ~bad_cols * (d != 0)))
    if not np.all(np.isfinite(x)) or not np.all(np.isfinite(y)):
        _fail("the LP answer holds a non-finite number")
    if p_res > tp:
        _fail(f"the LP solution violates a constraint or bound by {p_res:g} (tolerance {tp:g})")
    if d_res > td:
        _fail(f"the LP duals are infeasible by {d_res:g} (tolerance {td:g})")
    if gap > tg:
        _fail(f"the LP duality gap is {gap:g} (tolerance {tg:g})")
    if comp > tg:
        _fail(f"complementary slackness fails by {comp:g} (tolerance {tg:g})")
    if objective_solver is not None and abs(objective_solver + model.constant - primal) > tg:
        _fail(f"the solver's objective {objective_solver:g} differs from c.x = {primal - model.constant:g}")
    unique, degenerate = duals_uniqueness(model, x, y, act, tp, td)
    return {
        "checked": True,
        "primal_residual": p_res,
        "dual_residual": d_res,
        "gap": gap,
        "complementarity": comp,
        "primal_objective": primal,
        "dual_objective": dual,
        "duals_unique": unique,
        "degenerate": degenerate,
        "tolerance": {"primal": tp, "dual": td, "gap": tg},
    }


def duals_uniqueness(model, x, y, act, tp, td) -> tuple[bool, bool]:
    """Whether the duals are provably the only optimal ones, and whether ``x`` is degenerate.

    Every optimal dual must vanish on rows strictly inside their bounds and give a
    zero reduced cost to variables strictly inside theirs (complementary slackness
    with this ``x``). When the active rows' columns of those variables have full row
    rank, those equations fix the duals: they are unique. A basic solution with
    fewer interior variables than active rows is degenerate: some basic variable
    sits at a bound, and other duals may be equally optimal.

    Returns
    -------
    (duals_unique, degenerate)
    """
    with np.errstate(invalid="ignore"):
        inactive = (act - model.row_lower > tp) & (model.row_upper - act > tp)
        interior = (x - model.col_lower > tp) & (model.col_upper - x > tp)
    rows = np.flatnonzero(~inactive)
    cols = np.flatnonzero(interior)
    if rows.size == 0:
        return True, False
    degenerate = cols.size < rows.size
    if degenerate:
        return False, True
    block = model.matrix[rows][:, cols]
    if cols.size == rows.size:
        try:
            lu = spla.splu(sp.csc_matrix(block))
        except RuntimeError:  # exactly singular
            return False, False
        y_r = lu.solve(np.ascontiguousarray(model.c[cols], dtype=np.float64), trans="T")
        agree = np.all(np.isfinite(y_r)) and _max(np.abs(y_r - y[rows])) <= max(td, REL * (1 + _max(np.abs(y))))
        return bool(agree), False
    if rows.size * cols.size <= DENSE_RANK_LIMIT:
        return bool(np.linalg.matrix_rank(block.toarray()) == rows.size), False
    return False, False


def improvement_rate(model, direction: np.ndarray) -> float:
    """How fast the objective improves along ``direction`` (positive = better)."""
    return -sense(model) * float(model.c @ direction)


def rate_tolerance(model) -> float:
    return REL * (1.0 + _max(np.abs(model.c)))


def check_unbounded(model, start: np.ndarray, direction: np.ndarray) -> dict:
    """Certify unboundedness: ``start`` is feasible, ``direction`` keeps every finite
    bound (homogeneously) and improves the objective, so ``start + t*direction``
    stays feasible and improves without limit as ``t`` grows.

    Raises
    ------
    SelfCheckFailed
        When the start is infeasible, the direction leaves the recession cone or
        does not improve.
    """
    p_res = primal_residual(model, start)
    tp = primal_tolerance(model, start)
    if p_res > tp:
        _fail(f"the unbounded model's start point violates a constraint by {p_res:g}")
    finite = np.isfinite
    zero_l = np.where(finite(model.row_lower), 0.0, -np.inf)
    zero_u = np.where(finite(model.row_upper), 0.0, np.inf)
    col_l = np.where(finite(model.col_lower), 0.0, -np.inf)
    col_u = np.where(finite(model.col_upper), 0.0, np.inf)
    move = model.matrix @ direction
    r_res = max(_max(bound_violation(move, zero_l, zero_u)), _max(bound_violation(direction, col_l, col_u)))
    tr = REL * (1.0 + _max(abs(model.matrix) @ np.abs(direction)))
    if r_res > tr:
        _fail(f"the improving direction leaves a finite bound by {r_res:g} per unit step")
    rate = improvement_rate(model, direction)
    if rate <= rate_tolerance(model):
        _fail("the direction does not improve the objective")
    return {"checked": True, "primal_residual": p_res, "direction_residual": r_res,
            "improvement_per_step": rate, "tolerance": {"primal": tp, "direction": tr}}
