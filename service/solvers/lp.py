"""Certified linear programs: GLOP's answers (:mod:`service.solvers.glop`) proved.

``solve_certified`` is the front for callers that publish an answer: it tells an
infeasible model from an unbounded one by proofs of its own (a least-violation
model and an improving-direction model) and certifies every answer with
:mod:`service.solvers.lp_checks`.

Sign convention (one for every LP answer Sluice gives): a row's dual is the change
of the objective per unit increase of the row's active bound, and a variable's
reduced cost is the change of the objective per unit increase of the variable's
active bound; the same for ``min`` and ``max``. Measured on OR-Tools 9.15: the duals
and reduced costs GLOP returns through ``model_builder_helper`` already follow it in
both senses and on both bound sides (``tests/test_lp_solver.py`` pins this, against
finite differences and scipy's marginals), so no sign is flipped here.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

from ..deadline import Deadline, remaining
from ..errors import SelfCheckFailed, SolverFailure
from . import lp_checks
from .glop import MIN_SLICE, LPSolution, lp_engine, solve_lp

#: Values this close (relative) to an integer are reported as that integer, see ``tidy``.
TIDY = 1e-9

#: Also importable from here: the GLOP primitives the certified front stands on.
__all__ = ["LPModel", "LPResult", "LPSolution", "improving_direction", "least_violation", "settle_feasible",
           "solve_certified", "solve_lp", "tidy", "timed_out"]

# --------------------------------------------------------------------------- certified front


@dataclass
class LPModel:
    """``opt c.x + constant`` subject to ``row_lower <= A x <= row_upper``, ``col_lower <= x <= col_upper``."""

    c: np.ndarray
    matrix: sp.csr_matrix
    row_lower: np.ndarray
    row_upper: np.ndarray
    col_lower: np.ndarray
    col_upper: np.ndarray
    maximize: bool = False
    constant: float = 0.0

    @property
    def num_rows(self) -> int:
        """Constraints: the rows of ``matrix``."""
        return int(self.matrix.shape[0])

    @property
    def num_cols(self) -> int:
        """Variables: the columns of ``matrix``."""
        return int(self.matrix.shape[1])


@dataclass
class LPResult:
    """A certified answer.

    ``x``, ``duals`` and ``reduced_costs`` are set when optimal; ``x`` (a feasible
    start) and ``ray`` when unbounded; ``conflict_rows`` / ``conflict_cols`` (the rows
    and variable bounds whose combination proves it) when infeasible.
    """

    status: str
    objective: float | None = None
    x: np.ndarray | None = None
    duals: np.ndarray | None = None
    reduced_costs: np.ndarray | None = None
    ray: np.ndarray | None = None
    conflict_rows: np.ndarray | None = None
    conflict_cols: np.ndarray | None = None
    certificate: dict = field(default_factory=lambda: {"checked": False})
    engine: dict = field(default_factory=lp_engine)


def _solve(model: LPModel, deadline: Deadline | None, **kwargs) -> LPSolution:
    left = remaining(deadline)
    if left is not None and left < MIN_SLICE:
        return LPSolution("time_limit", None, None, None, None, lp_engine())
    return solve_lp(model.c, model.matrix, model.row_lower, model.row_upper, model.col_lower, model.col_upper,
                    maximize=model.maximize, deadline=deadline, **kwargs)


def _optimal(model: LPModel, sol: LPSolution) -> LPResult:
    x = tidy(model, sol.x)
    y, d = _near_integers(sol.row_duals), _near_integers(sol.reduced_costs)
    try:
        certificate = lp_checks.check_optimal(model, x, y, d, sol.objective)
    except SelfCheckFailed:  # the tidied duals must never be what fails: check GLOP's own
        y, d = sol.row_duals, sol.reduced_costs
        certificate = lp_checks.check_optimal(model, x, y, d, sol.objective)
    return LPResult("optimal", certificate["primal_objective"], x, y, d, certificate=certificate)


def _near_integers(v: np.ndarray) -> np.ndarray:
    near = np.rint(v)
    return np.where(np.abs(v - near) <= TIDY * (1.0 + np.abs(v)), near, v) + 0.0


def tidy(model: LPModel, x: np.ndarray) -> np.ndarray:
    """Round values within 1e-9 (relative) of an integer to it, e.g. 49.99999999999999
    to 50, unless that makes the solution less feasible. The certificate then checks
    the tidied values, so nothing unchecked is returned."""
    tidied = _near_integers(x)
    if lp_checks.primal_residual(model, tidied) <= lp_checks.primal_residual(model, x):
        return tidied
    return x


def timed_out() -> LPResult:
    """The ``time_limit`` result: the deadline passed before any answer to check."""
    return LPResult("time_limit", certificate={"checked": False, "reason": "the time limit stopped the solver "
                                                                           "before it had an answer to check"})


def solve_certified(model: LPModel, *, deadline: Deadline | None = None, dual_simplex: bool = False,
                    prove: bool = True) -> LPResult:
    """Solve an LP and certify the answer, whatever its status.

    ``optimal`` is certified by primal and dual residuals, the duality gap and
    complementary slackness; ``infeasible`` by a least-violation model whose dual
    bound proves a positive least total violation; ``unbounded`` by a feasible point
    and an improving direction of the recession cone. GLOP's own word on
    infeasible versus unbounded is never taken alone (its presolve mixes them up).

    Parameters
    ----------
    model : LPModel
    deadline : Deadline, optional
        When all solves together must end; when it passes the status is ``time_limit``.
        None: no limit.
    dual_simplex : bool
        See :func:`solve_lp`.
    prove : bool
        With False, an ``infeasible`` or ``unbounded`` status is GLOP's word only
        (``certificate["checked"]`` is False) and the caller must prove it, e.g. with
        a model-specific bound and :func:`improving_direction`.

    Returns
    -------
    LPResult

    Raises
    ------
    SelfCheckFailed
        An answer failed its certificate (a bug).
    SolverFailure
        GLOP and the proofs disagree in a way no re-solve settles.
    """
    sol = _solve(model, deadline, dual_simplex=dual_simplex)
    if sol.status == "optimal":
        return _optimal(model, sol)
    if sol.status == "time_limit":
        return timed_out()
    if not prove:
        return LPResult(sol.status, certificate={"checked": False, "reason": "GLOP's status, not yet proved"})
    phase1 = least_violation(model, deadline)
    if phase1 is None:
        return timed_out()
    if phase1.status == "infeasible":
        return phase1
    return settle_feasible(model, phase1.x, deadline, said=sol.status, dual_simplex=dual_simplex)


def settle_feasible(model: LPModel, start: np.ndarray, deadline: Deadline | None, *, said: str,
                    dual_simplex: bool) -> LPResult:
    """Finish a model GLOP called infeasible or unbounded that has the feasible point
    ``start``: unbounded when an improving direction exists, else solved again."""
    ray = improving_direction(model, deadline)
    if ray is None:
        return timed_out()
    if ray is not False:
        certificate = lp_checks.check_unbounded(model, start, ray)
        return LPResult("unbounded", x=start, ray=ray, certificate=certificate)
    # Feasible and bounded, yet GLOP said otherwise: ask once more, the other way round.
    retry = _solve(model, deadline, presolve=False, dual_simplex=not dual_simplex)
    if retry.status == "optimal":
        return _optimal(model, retry)
    if retry.status == "time_limit":
        return timed_out()
    raise SolverFailure(f"GLOP reported the model {said}, but it has a feasible point and no improving direction")


def least_violation(model: LPModel, deadline: Deadline | None) -> LPResult | None:
    """Minimise the total violation of the rows, each relative to its bound: the sum
    of ``|violation_i| / (1 + |bound_i|)`` (variables keep their bounds).

    Returns an ``optimal`` result whose ``x`` is feasible within the checks'
    tolerance, an ``infeasible`` one when no such point was found and the model's
    certified dual bound proves the least violation positive, or None on time out.

    Raises
    ------
    SolverFailure
        Neither: the model sits on the edge of feasibility, too close to call.
    """
    m, n = model.num_rows, model.num_cols
    bounded = np.flatnonzero(np.isfinite(model.row_lower) | np.isfinite(model.row_upper))
    k = bounded.size
    weight = 1.0 / (1.0 + lp_checks._bound_scale(model.row_lower, model.row_upper)[bounded])
    eye = sp.csr_matrix((np.ones(k), (bounded, np.arange(k))), shape=(m, k))
    elastic = LPModel(
        c=np.concatenate([np.zeros(n), weight, weight]),
        matrix=sp.hstack([model.matrix, eye, -eye], format="csr"),
        row_lower=model.row_lower, row_upper=model.row_upper,
        col_lower=np.concatenate([model.col_lower, np.zeros(2 * k)]),
        col_upper=np.concatenate([model.col_upper, np.full(2 * k, np.inf)]),
    )
    sol = _solve(elastic, deadline)
    if sol.status == "time_limit":
        return None
    if sol.status != "optimal":
        raise SolverFailure(f"GLOP reported the least-violation model {sol.status}; it is always feasible and bounded")
    inner = lp_checks.check_optimal(elastic, sol.x, sol.row_duals, sol.reduced_costs, sol.objective)
    x = sol.x[:n]
    if lp_checks.relative_primal_residual(model, x) <= lp_checks.REL:
        return LPResult("optimal", x=x)
    bound = inner["dual_objective"]
    if bound <= inner["tolerance"]["gap"]:
        raise SolverFailure("the model is on the edge of feasibility: no point within tolerance was found, "
                            "yet no positive least violation could be proved")
    d_tol = inner["tolerance"]["dual"]
    rows = np.flatnonzero(np.abs(sol.row_duals) > d_tol)
    cols = np.flatnonzero(np.abs(sol.reduced_costs[:n]) > d_tol)
    certificate = {"checked": True, "least_total_violation": bound, "tolerance": {"relative": lp_checks.REL,
                                                                                  "gap": inner["tolerance"]["gap"]},
                   "primal_residual": inner["primal_residual"], "dual_residual": inner["dual_residual"],
                   "gap": inner["gap"]}
    return LPResult("infeasible", conflict_rows=rows, conflict_cols=cols, certificate=certificate)


def improving_direction(model: LPModel, deadline: Deadline | None):
    """An improving direction of the recession cone, ``False`` when none, None on time out.

    The direction model keeps only the homogeneous part of every finite bound and
    boxes the direction in [-1, 1], so it is feasible (0) and bounded.
    """
    finite = np.isfinite
    direction = LPModel(
        c=model.c, matrix=model.matrix, maximize=model.maximize,
        row_lower=np.where(finite(model.row_lower), 0.0, -np.inf),
        row_upper=np.where(finite(model.row_upper), 0.0, np.inf),
        col_lower=np.where(finite(model.col_lower), 0.0, -1.0),
        col_upper=np.where(finite(model.col_upper), 0.0, 1.0),
    )
    sol = _solve(direction, deadline)
    if sol.status == "time_limit":
        return None
    if sol.status != "optimal":
        raise SolverFailure(f"GLOP reported the direction model {sol.status}; it is always feasible and bounded")
    if lp_checks.improvement_rate(model, sol.x) <= lp_checks.rate_tolerance(model):
        return False
    return sol.x
