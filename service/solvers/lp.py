"""Linear programs on GLOP, built from a sparse matrix in one call.

``solve_lp`` takes the model as numpy arrays and a CSR matrix and hands them to
OR-Tools' ``fill_model_from_sparse_data``: no per-term Python loop.

Sign convention of the duals returned here: GLOP's own, i.e. the derivative of the
objective (in the model's sense) with respect to each row's active bound. Callers
that publish duals convert them to the convention stated in the API spec.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from ortools.linear_solver.python import model_builder_helper as mbh

from ..errors import SolverFailure
from .versions import ORTOOLS_VERSION

_STATUS = {
    mbh.SolveStatus.OPTIMAL: "optimal",
    mbh.SolveStatus.INFEASIBLE: "infeasible",
    mbh.SolveStatus.UNBOUNDED: "unbounded",
    mbh.SolveStatus.FEASIBLE: "time_limit",
    mbh.SolveStatus.NOT_SOLVED: "time_limit",
    mbh.SolveStatus.CANCELLED_BY_USER: "time_limit",
}


@dataclass
class LPSolution:
    status: str  # optimal | infeasible | unbounded | time_limit
    x: np.ndarray | None
    objective: float | None
    row_duals: np.ndarray | None
    reduced_costs: np.ndarray | None
    engine: dict


def lp_engine(**extra) -> dict:
    return {"kind": "lp", "solver": "OR-Tools GLOP", "version": ORTOOLS_VERSION, **extra}


def solve_lp(
    c: np.ndarray,
    matrix: sp.csr_matrix,
    row_lower: np.ndarray,
    row_upper: np.ndarray,
    col_lower: np.ndarray,
    col_upper: np.ndarray,
    *,
    maximize: bool = False,
    time_limit: float | None = None,
    presolve: bool = True,
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
    time_limit : float, optional
        Seconds.
    presolve : bool
        GLOP's presolve may report an unbounded model as infeasible; callers re-solve
        without it to tell the two apart.

    Returns
    -------
    LPSolution
        ``x``, duals and reduced costs are set only when ``status == "optimal"``.

    Raises
    ------
    SolverFailure
        For an invalid model or an abnormal solver stop.
    """
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
    if time_limit is not None:
        solver.set_time_limit_in_seconds(float(time_limit))
    if not presolve:
        solver.set_solver_specific_parameters("use_preprocessing: false")
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
