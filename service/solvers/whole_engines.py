"""The MIP engines that ship with OR-Tools, behind one call: CP-SAT and SCIP.

``run_engine(name, model, hint, ...)`` solves a :class:`~.whole_model.WholeModel`
and answers an :class:`EngineResult`. CP-SAT is the service's engine (README,
"Whole units": measured faster to a first plan and to a 1% gap on the benchmark, it
reports every improving plan with its bound while it runs, and it works in exact
integers). SCIP, through the MPSolver interface that ``pywraplp`` also wraps, is kept
for the benchmark (``tests.perf whole_units``) and as a second opinion in tests.

CP-SAT's model is written straight into its proto (one ``extend`` per row): building
it through ``LinearExpr`` objects took over a minute at 60k variables.
"""

from __future__ import annotations

import logging
import os
import threading
import time
from dataclasses import dataclass
from typing import Callable

import numpy as np
from ortools.linear_solver.python import model_builder_helper as mbh
from ortools.sat.python import cp_model

from ..errors import SolverFailure
from .versions import ORTOOLS_VERSION
from .whole_model import INT_LIMIT, WholeModel

log = logging.getLogger("sluice.solver")

ENGINES = ("cp-sat", "scip")
#: CP-SAT search workers: its portfolio (LNS, feasibility jump, core search) needs a
#: few; more than the host's cores only time-slices them.
CPSAT_WORKERS = int(os.environ.get("H17_W", max(1, min(8, os.cpu_count() or 1))))
#: SCIP answers doubles: a value within this of an integer is that integer.
ROUNDING_TOL = 1e-6


@dataclass
class EngineResult:
    status: str  # optimal | feasible | infeasible | unknown
    values: np.ndarray | None  # int64 column values of the best plan found
    objective: float | None
    bound: float | None  # best proven bound on the objective (model units)
    seconds: float


#: ``on_plan(objective, bound, seconds) -> stop?``: called on every improving plan.
OnPlan = Callable[[float, float, float], bool]


def engine_info(name: str) -> dict:
    solver = {"cp-sat": "OR-Tools CP-SAT", "scip": "SCIP (OR-Tools MPSolver)"}[name]
    return {"kind": "mip", "solver": solver, "version": ORTOOLS_VERSION}


def run_engine(name: str, model: WholeModel, hint: np.ndarray | None, *, time_limit: float, gap: float,
               on_plan: OnPlan | None = None) -> EngineResult:
    """Solve ``model`` with the named engine within ``time_limit`` seconds.

    Parameters
    ----------
    hint : ndarray, optional
        A value per column (a feasible plan, or rounded LP values): the first plan tried.
    gap : float
        Stop once the engine's relative gap is at most this.
    on_plan : callable, optional
        CP-SAT only: told of every improving plan; a true return stops the search.
    """
    if name == "cp-sat":
        return _cpsat(model, hint, time_limit, gap, on_plan)
    if name == "scip":
        return _mpsolver("scip", model, hint, time_limit, gap)
    raise ValueError(f"unknown engine {name!r}")


def _cpsat_proto(model: WholeModel, hint: np.ndarray | None) -> cp_model.CpModel:
    cp = cp_model.CpModel()
    proto = cp.proto
    for upper in model.col_upper.tolist():
        proto.variables.add().domain.extend([0, upper])
    A = model.matrix
    indptr, indices, data = A.indptr, A.indices.tolist(), A.data.tolist()
    lower, upper = model.row_lower.tolist(), model.row_upper.tolist()
    for r in range(A.shape[0]):
        lo, hi = indptr[r], indptr[r + 1]
        if lo == hi:
            continue
        linear = proto.constraints.add().linear
        linear.vars.extend(indices[lo:hi])
        linear.coeffs.extend(data[lo:hi])
        linear.domain.extend([max(lower[r], -INT_LIMIT), min(upper[r], INT_LIMIT)])
    used = np.flatnonzero(model.c)
    # CP-SAT minimises; a maximisation is written as minimising -c with scaling_factor -1.
    sign = -1 if model.maximize else 1
    proto.objective.vars.extend(used.tolist())
    proto.objective.coeffs.extend((sign * model.c[used]).tolist())
    if model.maximize:
        proto.objective.scaling_factor = -1.0
    if hint is not None:
        proto.solution_hint.vars.extend(range(model.num_vars))
        proto.solution_hint.values.extend(np.asarray(hint, dtype=np.int64).tolist())
    return cp


class _Watcher(cp_model.CpSolverSolutionCallback):
    """Reports every improving plan; stops the search when ``on_plan`` says so."""

    def __init__(self, on_plan: OnPlan | None, started: float):
        super().__init__()
        self.on_plan, self.started = on_plan, started
        self.lock = threading.Lock()

    def on_solution_callback(self) -> None:
        if self.on_plan is None:
            return
        with self.lock:
            if self.on_plan(self.objective_value, self.best_objective_bound, time.perf_counter() - self.started):
                self.stop_search()


def _cpsat(model: WholeModel, hint, time_limit: float, gap: float, on_plan) -> EngineResult:
    started = time.perf_counter()
    cp = _cpsat_proto(model, hint)
    solver = cp_model.CpSolver()
    params = solver.parameters
    params.max_time_in_seconds = max(0.0, time_limit - (time.perf_counter() - started))
    params.relative_gap_limit = gap
    params.num_workers = CPSAT_WORKERS
    extra = os.environ.get("H17_P")
    if extra:
        from google.protobuf import text_format
        for kv in extra.split(","):
            k, v = kv.split("=")
            setattr(params, k, type(getattr(params, k))(v) if not isinstance(getattr(params, k), bool) else v == "1")
    status = solver.solve(cp, _Watcher(on_plan, started))
    seconds = time.perf_counter() - started
    name = solver.status_name(status)
    if name == "MODEL_INVALID":
        raise SolverFailure(f"CP-SAT rejected the model: {cp.validate()}")
    if name == "INFEASIBLE":
        return EngineResult("infeasible", None, None, None, seconds)
    if name not in ("OPTIMAL", "FEASIBLE"):
        return EngineResult("unknown", None, None, _cpsat_bound(solver), seconds)
    values = np.asarray(solver.response_proto.solution, dtype=np.int64)
    return EngineResult("optimal" if name == "OPTIMAL" else "feasible", values, solver.objective_value,
                        solver.best_objective_bound, seconds)


def _cpsat_bound(solver: cp_model.CpSolver) -> float | None:
    bound = solver.best_objective_bound
    return bound if np.isfinite(bound) else None


def _mpsolver(backend: str, model: WholeModel, hint, time_limit: float, gap: float) -> EngineResult:
    started = time.perf_counter()
    mb = mbh.ModelBuilderHelper()
    big = float(INT_LIMIT)
    mb.fill_model_from_sparse_data(
        model.col_lower.astype(np.float64), model.col_upper.astype(np.float64), model.c.astype(np.float64),
        np.where(model.row_lower <= -INT_LIMIT, -np.inf, model.row_lower.astype(np.float64)),
        np.where(model.row_upper >= INT_LIMIT, np.inf, model.row_upper.astype(np.float64)),
        model.matrix.astype(np.float64))
    for j in range(model.num_vars):
        mb.set_var_integrality(j, True)
    mb.set_maximize(model.maximize)
    if hint is not None:
        for j, v in enumerate(np.asarray(hint).tolist()):
            mb.add_hint(j, float(v))
    solver = mbh.ModelSolverHelper(backend)
    solver.set_time_limit_in_seconds(max(0.01, time_limit - (time.perf_counter() - started)))
    solver.set_solver_specific_parameters(f"limits/gap = {gap}")
    solver.solve(mb)
    seconds = time.perf_counter() - started
    status = solver.status()
    name = getattr(status, "name", str(status))
    if "INFEASIBLE" in name:
        return EngineResult("infeasible", None, None, None, seconds)
    bound = solver.best_objective_bound() if solver.has_response() else None
    bound = bound if bound is not None and abs(bound) < big else None
    if not solver.has_solution():
        return EngineResult("unknown", None, None, bound, seconds)
    raw = np.asarray(solver.variable_values(), dtype=np.float64)
    values = np.rint(raw)
    if np.abs(raw - values).max(initial=0.0) > ROUNDING_TOL:
        raise SolverFailure(f"{backend} answered a value {np.abs(raw - values).max():g} away from a whole number")
    return EngineResult("optimal" if name == "OPTIMAL" else "feasible", values.astype(np.int64),
                        solver.objective_value(), bound, seconds)
