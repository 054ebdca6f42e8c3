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

Tolerances are relative: each row's violation is measured against 1 + its bound +
the magnitude of its terms, each variable's against 1 + its bound + its value, each
reduced cost against 1 + |c_j| + the magnitude of its column's dual terms, and must
stay within ``REL``; the gap and complementarity products against the magnitude of
the objective's terms. Certificates report the absolute figures and the relative
ones that were checked.
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


def sense(model) -> float:
    """The sign ``s`` of the module's sign convention: +1 for ``min``, -1 for ``max``."""
    return -1.0 if model.maximize else 1.0


def bound_violation(values: np.ndarray, lower: np.ndarray, upper: np.ndarray) -> np.ndarray:
    """How far each value lies outside [lower, upper] (0 inside; infinite bounds never bind)."""
    with np.errstate(invalid="ignore"):
        v = np.maximum(np.maximum(lower - values, values - upper), 0.0)
    return np.nan_to_num(v, nan=0.0)


def _bound_scale(lower: np.ndarray, upper: np.ndarray) -> np.ndarray:
    """Per entry, the larger magnitude of its finite bounds (0 when it has none)."""
    lo = np.where(np.isfinite(lower), np.abs(lower), 0.0)
    up = np.where(np.isfinite(upper), np.abs(upper), 0.0)
    return np.maximum(lo, up)


def primal_violations(model, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per row and per variable, how far ``x`` lies outside the bounds (0 inside)."""
    act = model.matrix @ x
    return (bound_violation(act, model.row_lower, model.row_upper),
            bound_violation(x, model.col_lower, model.col_upper))


def primal_scales(model, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """What each violation is measured against: 1 + the row's bound + sum |a_ij x_j|
    (per row), 1 + the variable's bound + |x_j| (per variable). A tolerance relative to
    each row's own magnitudes, so a row written in small units is held as tightly as
    any other."""
    rows = 1.0 + _bound_scale(model.row_lower, model.row_upper) + abs(model.matrix) @ np.abs(x)
    cols = 1.0 + _bound_scale(model.col_lower, model.col_upper) + np.abs(x)
    return rows, cols


def primal_residual(model, x: np.ndarray) -> float:
    """Largest violation of any row or variable bound by ``x`` (absolute)."""
    rows, cols = primal_violations(model, x)
    return max(_max(rows), _max(cols))


def relative_primal_residual(model, x: np.ndarray) -> float:
    """Largest violation relative to its scale (see :func:`primal_scales`)."""
    rows, cols = primal_violations(model, x)
    s_rows, s_cols = primal_scales(model, x)
    return max(_max(rows / s_rows), _max(cols / s_cols))


def dual_tolerance(model, y: np.ndarray) -> float:
    """An absolute figure below which a dual or reduced cost is noise."""
    terms = abs(model.matrix).T @ np.abs(y)
    return REL * (1.0 + max(_max(np.abs(model.c)), _max(terms), _max(np.abs(y))))


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
        ``checked``, ``primal_residual`` and ``dual_residual`` (absolute, largest),
        their relative forms, ``gap``, ``complementarity``, ``primal_objective``,
        ``dual_objective``, ``duals_unique``, ``degenerate``, ``tolerance``.

    Raises
    ------
    SelfCheckFailed
        A relative residual exceeds ``REL``, or the gap or a complementarity product
        exceeds the gap tolerance.
    """
    if not np.all(np.isfinite(x)) or not np.all(np.isfinite(y)):
        _fail("the LP answer holds a non-finite number")
    s = sense(model)
    A = model.matrix
    act = A @ x
    v_rows, v_cols = primal_violations(model, x)
    s_rows, s_cols = primal_scales(model, x)
    p_abs = max(_max(v_rows), _max(v_cols))
    p_rel = max(_max(v_rows / s_rows), _max(v_cols / s_cols))
    d = model.c - A.T @ y
    beta, bad_rows = _pointed(y, model.row_lower, model.row_upper, s)
    lam, bad_cols = _pointed(d, model.col_lower, model.col_upper, s)
    # Per variable, dual figures are measured against 1 + |c_j| + sum_i |a_ij y_i|;
    # a row dual pointing at a missing bound against 1 + the largest dual.
    t_cols = 1.0 + np.abs(model.c) + abs(A).T @ np.abs(y)
    t_rows = 1.0 + _max(np.abs(y))
    mismatch = np.abs(d - d_solver) if d_solver is not None else np.zeros_like(d)
    d_abs = max(_max(np.abs(y[bad_rows])), _max(np.abs(d[bad_cols])), _max(mismatch))
    d_rel = max(_max(np.abs(y[bad_rows])) / t_rows, _max((np.abs(d) * bad_cols) / t_cols), _max(mismatch / t_cols))
    primal = float(model.c @ x) + model.constant
    dual = float(y @ beta + d @ lam) + model.constant
    gap = abs(primal - dual)
    tg = REL * (1.0 + float(np.abs(model.c) @ np.abs(x)) + float(np.abs(y) @ np.abs(beta))
                + float(np.abs(d) @ np.abs(lam)))
    comp = max(_max(np.abs(y) * np.abs(act - beta) * ~bad_rows * (y != 0)),
               _max(np.abs(d) * np.abs(x - lam) * ~bad_cols * (d != 0)))
    if p_rel > REL:
        _fail(f"the LP solution violates a constraint or bound by {p_abs:g} ({p_rel:g} relative)")
    if d_rel > REL:
        _fail(f"the LP duals are infeasible by {d_abs:g} ({d_rel:g} relative)")
    if gap > tg:
        _fail(f"the LP duality gap is {gap:g} (tolerance {tg:g})")
    if comp > tg:
        _fail(f"complementary slackness fails by {comp:g} (tolerance {tg:g})")
    if objective_solver is not None and abs(objective_solver + model.constant - primal) > tg:
        _fail(f"the solver's objective {objective_solver:g} differs from c.x = {primal - model.constant:g}")
    unique, degenerate = duals_uniqueness(model, x, y, act, REL * s_rows, REL * s_cols, dual_tolerance(model, y))
    return {
        "checked": True,
        "primal_residual": p_abs,
        "primal_residual_relative": p_rel,
        "dual_residual": d_abs,
        "dual_residual_relative": d_rel,
        "gap": gap,
        "complementarity": comp,
        "primal_objective": primal,
        "dual_objective": dual,
        "duals_unique": unique,
        "degenerate": degenerate,
        "tolerance": {"relative": REL, "gap": tg, "dual": dual_tolerance(model, y)},
    }


def duals_uniqueness(model, x, y, act, tp_rows, tp_cols, td) -> tuple[bool, bool]:
    """Whether the duals are provably the only optimal ones, and whether ``x`` is degenerate.

    Every optimal dual must vanish on rows strictly inside their bounds and give a
    zero reduced cost to variables strictly inside theirs (complementary slackness
    with this ``x``). When the active rows' columns of those variables have full row
    rank, those equations fix the duals: they are unique. A basic solution with
    fewer interior variables than active rows is degenerate: some basic variable
    sits at a bound, and other duals may be equally optimal.

    Parameters
    ----------
    tp_rows, tp_cols : ndarray or float
        How far inside its bounds a row activity or variable must be to count as inside.
    td : float
        Agreement asked of the duals recomputed from the active system.

    Returns
    -------
    (duals_unique, degenerate)
    """
    with np.errstate(invalid="ignore"):
        inactive = (act - model.row_lower > tp_rows) & (model.row_upper - act > tp_rows)
        interior = (x - model.col_lower > tp_cols) & (model.col_upper - x > tp_cols)
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
    """The improvement rate at or below which a direction does not count as improving.

    ``REL * (1 + max |c_j|)``: relative to the objective's largest coefficient, so
    a rate that small is taken for rounding noise, not for an improving direction.

    Returns
    -------
    float
    """
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
    p_rel = relative_primal_residual(model, start)
    if p_rel > REL:
        _fail(f"the unbounded model's start point violates a constraint by {p_res:g}")
    finite = np.isfinite
    zero_l = np.where(finite(model.row_lower), 0.0, -np.inf)
    zero_u = np.where(finite(model.row_upper), 0.0, np.inf)
    col_l = np.where(finite(model.col_lower), 0.0, -np.inf)
    col_u = np.where(finite(model.col_upper), 0.0, np.inf)
    move = model.matrix @ direction
    v_rows = bound_violation(move, zero_l, zero_u)
    v_cols = bound_violation(direction, col_l, col_u)
    r_res = max(_max(v_rows), _max(v_cols))
    r_rel = max(_max(v_rows / (1.0 + abs(model.matrix) @ np.abs(direction))), _max(v_cols))
    if r_rel > REL:
        _fail(f"the improving direction leaves a finite bound by {r_res:g} per unit step")
    rate = improvement_rate(model, direction)
    if rate <= rate_tolerance(model):
        _fail("the direction does not improve the objective")
    return {"checked": True, "primal_residual": p_res, "primal_residual_relative": p_rel,
            "direction_residual": r_res, "improvement_per_step": rate, "tolerance": {"relative": REL}}
