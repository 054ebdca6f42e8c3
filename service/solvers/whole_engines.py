"""The MIP engines that ship with OR-Tools, behind one call: SCIP and CP-SAT.

``run_engine(name, model, hint, ...)`` solves a :class:`~.whole_model.WholeModel`
and answers an :class:`EngineResult`. SCIP is the service's engine: on the benchmark
(``tests.perf whole_units``, README "Whole units") it closed the gap that CP-SAT left
open, and, given no plan, found one where CP-SAT found none in 10 s. It is driven
through MathOpt (OR-Tools' newer interface to the same bundled SCIP that ``pywraplp``
wraps) because MathOpt takes the model as arrays and calls back on every improving
plan, which MPSolver's Python interface cannot do. CP-SAT stays as the second opinion
(tests) and for hosts with many cores, where its portfolio search gains most.

Both models are written straight into the engines' protos (one ``extend`` per field
or row): building CP-SAT's through ``LinearExpr`` objects took over a minute at 60k
variables.
"""

from __future__ import annotations

import logging
import math
import os
import re
import threading
import time
from dataclasses import dataclass
from typing import Callable

import numpy as np
from ortools.math_opt import callback_pb2, model_parameters_pb2, model_pb2, parameters_pb2, result_pb2
from ortools.math_opt.core.python import solver as mathopt
from ortools.sat.python import cp_model

from ..errors import SolverFailure
from .versions import ORTOOLS_VERSION
from .whole_model import INT_LIMIT, WholeModel

log = logging.getLogger("sluice.solver")

#: CP-SAT search workers: its portfolio (LNS, feasibility jump, core search) needs a
#: few; more than the host's cores only time-slices them.
CPSAT_WORKERS = max(1, min(8, os.cpu_count() or 1))
#: SCIP answers doubles: a value within this of an integer is that integer.
ROUNDING_TOL = 1e-6
#: SCIP checks its time limit between steps (a presolve round, a root LP) and frees a
#: large model slowly: on the 60k-variable benchmark model on a loaded 2-core host it
#: returned up to 1.6 s past its limit, and 1.2 s more went to freeing the model. It
#: gets its own limit this much early (at most 20% of the time left). (MathOpt's
#: interrupter did not stop it there: measured.)
SCIP_MARGIN = 2.0


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
    """The ``engine`` document of a whole-unit answer.

    Parameters
    ----------
    name : {"cp-sat", "scip"}

    Returns
    -------
    dict
        ``kind: "mip"``, ``solver`` and the OR-Tools ``version``.

    Raises
    ------
    KeyError
        ``name`` is not one of the two engines.
    """
    solver = {"cp-sat": "OR-Tools CP-SAT", "scip": "SCIP (OR-Tools MathOpt)"}[name]
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
        return _scip(model, hint, time_limit, gap, on_plan)
    raise ValueError(f"unknown engine {name!r}")


def cpsat_model(model: WholeModel, hint: np.ndarray | None) -> cp_model.CpModel:
    """``model`` as a CP-SAT model (written into its proto), with ``hint`` as its solution hint."""
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
        """CP-SAT's hook on each improving solution: tell ``on_plan``; stop the search if asked."""
        with self.lock:
            if _told(self.on_plan, self.objective_value, self.best_objective_bound, self.started):
                self.stop_search()


def _told(on_plan: OnPlan | None, objective: float, bound: float, started: float) -> bool:
    """Tell ``on_plan`` of a plan; whether to stop. An exception must not reach the
    engine (it would leave it in a broken state): it is logged, and the search goes on."""
    if on_plan is None:
        return False
    try:
        return bool(on_plan(objective, bound, time.perf_counter() - started))
    except Exception:  # noqa: BLE001 - see above
        log.exception("whole units: the progress callback failed")
        return False


def _cpsat(model: WholeModel, hint, time_limit: float, gap: float, on_plan) -> EngineResult:
    started = time.perf_counter()
    cp = cpsat_model(model, hint)
    solver = cp_model.CpSolver()
    params = solver.parameters
    params.max_time_in_seconds = max(0.0, time_limit - (time.perf_counter() - started))
    params.relative_gap_limit = gap
    params.num_workers = CPSAT_WORKERS
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


def scip_model(model: WholeModel) -> model_pb2.ModelProto:
    """``model`` as a MathOpt model proto: every column filled from the arrays in one go."""
    proto = model_pb2.ModelProto()
    n = model.num_vars
    variables = proto.variables
    variables.ids.extend(range(n))
    variables.lower_bounds.extend(model.col_lower.astype(np.float64).tolist())
    variables.upper_bounds.extend(model.col_upper.astype(np.float64).tolist())
    variables.integers.extend([True] * n)
    used = np.flatnonzero(model.c)
    proto.objective.maximize = model.maximize
    proto.objective.linear_coefficients.ids.extend(used.tolist())
    proto.objective.linear_coefficients.values.extend(model.c[used].astype(np.float64).tolist())
    rows = model.matrix.shape[0]
    constraints = proto.linear_constraints
    constraints.ids.extend(range(rows))
    constraints.lower_bounds.extend(np.where(model.row_lower <= -INT_LIMIT, -np.inf, model.row_lower).tolist())
    constraints.upper_bounds.extend(np.where(model.row_upper >= INT_LIMIT, np.inf, model.row_upper).tolist())
    coo = model.matrix.tocoo()
    order = np.lexsort((coo.col, coo.row))  # MathOpt wants row-major order
    matrix = proto.linear_constraint_matrix
    matrix.row_ids.extend(coo.row[order].tolist())
    matrix.column_ids.extend(coo.col[order].tolist())
    matrix.coefficients.extend(coo.data[order].astype(np.float64).tolist())
    return proto


class ScipTable:
    """Reads SCIP's progress table from its log lines: ``rows`` of (seconds, primal,
    dual) and the latest dual ``bound``. The columns are named in a header row."""

    def __init__(self):
        self.columns: tuple[int, int] | None = None
        self.rows: list[tuple[float, float | None, float | None]] = []
        self.bound: float | None = None

    def read(self, lines: list[str]) -> None:
        """Take in lines of SCIP's log (MathOpt's message callback).

        The header row fixes which columns hold the dual and primal bounds; each table
        row after it adds ``(seconds, primal, dual)`` to ``rows``, and a dual bound that
        is a number becomes the latest ``bound``.

        Parameters
        ----------
        lines : list of str
        """
        for line in lines:
            cells = [c.strip() for c in line.split("|")]
            if "dualbound" in cells and "primalbound" in cells:
                self.columns = cells.index("dualbound"), cells.index("primalbound")
                continue
            if self.columns is None or len(cells) <= max(self.columns):
                continue
            seconds = re.search(r"([\d.]+)s$", cells[0])
            if seconds is None:
                continue
            dual, primal = (number(cells[i]) for i in self.columns)
            self.rows.append((float(seconds.group(1)), primal, dual))
            if dual is not None:
                self.bound = dual


def number(text: str) -> float | None:
    """A number in an engine's log, or None for "--", "-" and the like."""
    try:
        value = float(text)
    except ValueError:
        return None
    return value if math.isfinite(value) and abs(value) < 1e19 else None


def _scip(model: WholeModel, hint, time_limit: float, gap: float, on_plan) -> EngineResult:
    started = time.perf_counter()
    proto = scip_model(model)
    left = max(0.01, time_limit - (time.perf_counter() - started))
    params = parameters_pb2.SolveParametersProto()
    own = max(0.01, left - min(SCIP_MARGIN, 0.2 * left))
    params.time_limit.seconds, params.time_limit.nanos = int(own), int((own % 1) * 1e9)
    params.relative_gap_tolerance = gap
    params.absolute_gap_tolerance = 0.0
    params.gscip.int_params["timing/clocktype"] = 2  # wall clock: SCIP counts CPU time by default
    model_params = model_parameters_pb2.ModelSolveParametersProto()
    if hint is not None:
        values = model_params.solution_hints.add().variable_values
        values.ids.extend(range(model.num_vars))
        values.values.extend(np.asarray(hint, dtype=np.float64).tolist())
    registration = callback_pb2.CallbackRegistrationProto()
    if on_plan is not None:
        # Only when someone listens: SCIP logs a harmless error when the event handler
        # behind this callback is installed.
        registration.request_registration.append(callback_pb2.CALLBACK_EVENT_MIP_SOLUTION)

    cost = model.c.astype(np.float64)
    log_rows = ScipTable()

    def callback(data):
        """MathOpt's callback on each new SCIP solution: price it and tell ``on_plan``.

        Returns
        -------
        CallbackResultProto
            ``terminate`` set when ``on_plan`` asks to stop.
        """
        # The stats SCIP passes here are in its presolved space (an objective whose fixed
        # part was moved out reads 0), so the plan is priced from its own values and the
        # bound is the last one SCIP's log showed (the log prints original values).
        plan = data.primal_solution_vector
        objective = float(cost[np.asarray(plan.ids, dtype=np.int64)] @ np.asarray(plan.values, dtype=np.float64))
        bound = log_rows.bound if log_rows.bound is not None else math.nan
        return callback_pb2.CallbackResultProto(terminate=_told(on_plan, objective, bound, started))

    try:
        result = mathopt.solve(proto, parameters_pb2.SOLVER_TYPE_GSCIP, parameters_pb2.SolverInitializerProto(),
                               params, model_params, log_rows.read, registration,
                               callback if on_plan is not None else None, None)
    except Exception as exc:  # noqa: BLE001 - pybind's StatusNotOk: an invalid model is our bug
        raise SolverFailure(f"SCIP did not solve the model: {exc}") from None
    seconds = time.perf_counter() - started
    reason = result_pb2.TerminationReasonProto.Name(result.termination.reason).removeprefix("TERMINATION_REASON_")
    if reason == "INFEASIBLE":
        return EngineResult("infeasible", None, None, None, seconds)
    if reason not in ("OPTIMAL", "FEASIBLE", "NO_SOLUTION_FOUND"):  # numerical trouble, "unbounded" (bounded vars)
        raise SolverFailure(f"SCIP stopped with {reason}: {result.termination.detail}")
    bound = result.termination.objective_bounds.dual_bound
    bound = bound if math.isfinite(bound) else None
    if not result.solutions or not result.solutions[0].HasField("primal_solution"):
        return EngineResult("unknown", None, None, bound, seconds)
    solution = result.solutions[0].primal_solution
    raw = np.zeros(model.num_vars)
    raw[np.asarray(solution.variable_values.ids, dtype=np.int64)] = solution.variable_values.values
    values = np.rint(raw)
    if np.abs(raw - values).max(initial=0.0) > ROUNDING_TOL:
        raise SolverFailure(f"SCIP answered a value {np.abs(raw - values).max():g} away from a whole number")
    return EngineResult("optimal" if reason == "OPTIMAL" else "feasible", values.astype(np.int64),
                        solution.objective_value, bound, seconds)
