"""Linear programs on GLOP, built from a sparse matrix in one call.

``solve_lp`` takes the model as numpy arrays and a CSR matrix and hands them to
OR-Tools' ``fill_model_from_sparse_data``: no per-term Python loop. It gives GLOP's
word; :mod:`service.solvers.lp` proves and certifies it for callers that publish an
answer. The sign convention of duals and reduced costs is the one stated there.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from ortools.linear_solver.python import model_builder_helper as mbh

from ..deadline import Deadline, remaining
from ..errors import FieldError, InputError, SolverFailure
from . import lp_checks
from .versions import ORTOOLS_VERSION

_STATUS = {
    mbh.SolveStatus.OPTIMAL: "optimal",
    mbh.SolveStatus.INFEASIBLE: "infeasible",
    mbh.SolveStatus.UNBOUNDED: "unbounded",
    mbh.SolveStatus.FEASIBLE: "time_limit",
    mbh.SolveStatus.NOT_SOLVED: "time_limit",
    mbh.SolveStatus.CANCELLED_BY_USER: "time_limit",
}

#: Shortest time handed to GLOP for a follow-up solve; below it we report time_limit.
MIN_SLICE = 1e-3
#: Measured on OR-Tools 9.15 (random LPs against SciPy's HiGHS, 25 per span): every
#: answer was certified while the nonzero magnitudes of a model (coefficients, bounds,
#: costs) spanned at most 1e8; at 1e10 a fifth failed their check, at 1e16 most did.
RELIABLE_SPAN = 1e8


@dataclass
class LPSolution:
    status: str  # optimal | infeasible | unbounded | time_limit
    x: np.ndarray | None
    objective: float | None
    row_duals: np.ndarray | None
    reduced_costs: np.ndarray | None
    engine: dict


def lp_engine(**extra) -> dict:
    """The ``engine`` member of an LP answer: GLOP and its OR-Tools version, plus ``extra``."""
    return {"kind": "lp", "solver": "OR-Tools GLOP", "version": ORTOOLS_VERSION, **extra}


def _glop(c, matrix, row_lower, row_upper, col_lower, col_upper, maximize, deadline: Deadline | None,
          params) -> LPSolution:
    model = mbh.ModelBuilderHelper()
    model.fill_model_from_sparse_data(
        np.ascontiguousarray(col_lower, dtype=np.float64),
        np.ascontiguousarray(col_upper, dtype=np.float64),
        np.ascontiguousarray(c, dtype=np.float64),
        np.ascontiguousarray(row_lower, dtype=np.float64),
        np.ascontiguousarray(row_upper, dtype=np.float64),
        sp.csr_matrix(matrix, dtype=np.float64),
    )
    model.set_maximize(maximize)
    solver = mbh.ModelSolverHelper("glop")
    seconds = remaining(deadline)  # read once the model is filled: GLOP's clock starts now
    if seconds is not None:
        solver.set_time_limit_in_seconds(max(seconds, MIN_SLICE))
    if params:
        solver.set_solver_specific_parameters(" ".join(params))
    solver.solve(model)
    raw = solver.status()
    status = _STATUS.get(raw)
    if status is None:
        raise SolverFailure(f"GLOP stopped with status {raw.name}")
    if status != "optimal":
        return LPSolution(status, None, None, None, None, lp_engine())
    return LPSolution(
        status,
        np.asarray(solver.variable_values(), dtype=np.float64),
        float(solver.objective_value()),
        np.asarray(solver.dual_values(), dtype=np.float64),
        np.asarray(solver.reduced_costs(), dtype=np.float64),
        lp_engine(),
    )


def solve_lp(
    c: np.ndarray,
    matrix: sp.csr_matrix,
    row_lower: np.ndarray,
    row_upper: np.ndarray,
    col_lower: np.ndarray,
    col_upper: np.ndarray,
    *,
    maximize: bool = False,
    deadline: Deadline | None = None,
    presolve: bool = True,
    dual_simplex: bool = False,
    confirm: bool = True,
) -> LPSolution:
    """Solve ``opt c.x`` subject to ``row_lower <= A x <= row_upper`` and column bounds.

    Parameters
    ----------
    c : ndarray of float64
        Objective coefficients.
    matrix : scipy.sparse.csr_matrix
        Constraint matrix, one row per constraint.
    row_lower, row_upper, col_lower, col_upper : ndarray of float64
        Bounds; ``-inf``/``inf`` for none.
    maximize : bool
    deadline : Deadline, optional
        When the whole call must end (both solves when a status is confirmed); GLOP
        gets what is left of it once its model is filled, at least :data:`MIN_SLICE`.
        None: no limit.
    presolve : bool
        Use GLOP's presolve. It reports unbounded models as infeasible (measured on
        OR-Tools 9.15 even for ``min -x, x >= 0``), hence ``confirm``.
    dual_simplex : bool
        Use the dual simplex method: far faster on network models whose costs are
        dual feasible from the start (multi-commodity flow).
    confirm : bool
        When presolve reports ``infeasible`` or ``unbounded``, re-solve without it
        and return that answer instead. The status is then GLOP's best word, not a
        proof: :func:`solve_certified` proves it.

    Returns
    -------
    LPSolution
        ``x``, duals and reduced costs are set only when ``status == "optimal"``;
        duals and reduced costs follow the module's sign convention.

    Raises
    ------
    SolverFailure
        For an invalid model or an abnormal solver stop.
    """
    params = ["use_dual_simplex: true"] if dual_simplex else []
    try:
        first = _glop(c, matrix, row_lower, row_upper, col_lower, col_upper, maximize, deadline,
                      params + ([] if presolve else ["use_preprocessing: false"]))
    except SolverFailure:
        if not presolve:
            raise
        # An abnormal stop (badly scaled data) sometimes passes with the other simplex
        # method and no presolve (measured on OR-Tools 9.15).
        other = [] if dual_simplex else ["use_dual_simplex: true"]
        return _glop(c, matrix, row_lower, row_upper, col_lower, col_upper, maximize, deadline,
                     other + ["use_preprocessing: false"])
    if not (presolve and confirm and first.status in ("infeasible", "unbounded")):
        return first
    left = remaining(deadline)
    if left is not None and left < MIN_SLICE:
        return first
    return _glop(c, matrix, row_lower, row_upper, col_lower, col_upper, maximize, deadline,
                 params + ["use_preprocessing: false"])


def magnitude_span(*arrays: np.ndarray) -> tuple[float, float]:
    """Smallest and largest finite nonzero magnitude over the arrays (0, 0 when none)."""
    found = [np.abs(a[np.isfinite(a) & (a != 0)]) for a in arrays if a is not None and a.size]
    found = [f for f in found if f.size]
    if not found:
        return 0.0, 0.0
    return float(min(f.min() for f in found)), float(max(f.max() for f in found))


def beyond_range(exc: SolverFailure, pointer: str, **parts: np.ndarray) -> InputError:
    """A 422 for data GLOP could not solve or certify: the spans of their magnitudes,
    and the span it is measured to take (:data:`RELIABLE_SPAN`)."""
    spans = []
    for name, values in parts.items():
        low, high = magnitude_span(values)
        if high:
            spans.append(f"{name} {low:g} to {high:g}")
    low, high = magnitude_span(*parts.values())
    ratio = high / low if low else 0.0
    span = f"{ratio:.1e}" if np.isfinite(ratio) else "beyond 1e308"
    return InputError(FieldError(pointer, (
        f"the LP engine found no answer it could certify to a relative tolerance of {lp_checks.REL:g} "
        f"({exc.detail}); the magnitudes here span {span} ({'; '.join(spans)}), while GLOP, which computes "
        f"in doubles with absolute tolerances, is certified reliably up to a span of {RELIABLE_SPAN:.0e}: "
        "rescale the units (e.g. thousands of units, or cents to dollars) to bring them closer")))


def incidence_matrix(num_nodes: int, tail: np.ndarray, head: np.ndarray) -> sp.csr_matrix:
    """Node-arc incidence matrix: +1 at (tail, arc), -1 at (head, arc); rows = nodes.

    Row ``i`` of ``A @ flows`` is the outflow minus the inflow at node ``i``. A
    self-loop's two entries cancel.
    """
    m = tail.size
    cols = np.arange(m)
    data = np.concatenate([np.ones(m), -np.ones(m)])
    return sp.csr_matrix(
        (data, (np.concatenate([tail, head]), np.concatenate([cols, cols]))), shape=(num_nodes, m)
    )
