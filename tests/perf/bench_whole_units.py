"""Whole units on /v1/multicommodity: CP-SAT against SCIP against scipy's HiGHS MILP.

Two invented networks of 200 sites and 1,500 lanes (each site linked to its seven
nearest neighbours plus random long lanes; cost = distance), 40 commodities each:

- ``integral``: tight lanes (capacity 10-59, demands pushed until the LP plan is
  fractional), every flow a whole number.
- ``single-path``: roomier lanes (30-79), each commodity on one path.

Rows, each with a limit of 10 s (``--quick``: a small network, 3 s):

- *cold engines*: the same arc-flow model (:mod:`service.solvers.whole_model`) handed
  to CP-SAT, to SCIP (through MathOpt, as the service drives it), to CBC (through
  ``pywraplp``) and to ``scipy.optimize.milp`` (HiGHS), no warm start. The times and
  gaps are read from each engine's own log (CP-SAT's and SCIP's log callbacks; CBC and
  HiGHS print to stdout, which is captured), against each engine's own bound.
- *service*: :func:`~service.solvers.multicommodity_whole.whole_unit_flow` with each
  engine: LP relaxation, rounding/repair heuristic, then the engine hinted with the
  heuristic's plan, the LP bound combined with the engine's; both engines report
  every improving plan with their bound while they run.

Columns: time to the first plan, time until the gap is at most 1%, the gap at the end
and the status. The gap is ``|plan - bound| / max(|plan|, |bound|)`` throughout.
"""

from __future__ import annotations

import os
import re
import tempfile
import time
from contextlib import contextmanager

import numpy as np
from ortools.linear_solver import linear_solver_pb2, pywraplp
from ortools.linear_solver.python import model_builder_helper as mbh
from ortools.math_opt import callback_pb2, model_parameters_pb2, parameters_pb2, result_pb2
from ortools.math_opt.core.python import solver as mathopt
from ortools.sat.python import cp_model
from scipy.optimize import Bounds, LinearConstraint, milp

from service.deadline import Deadline
from service.solvers import whole_engines
from service.solvers.graph import Graph
from service.solvers.multicommodity import Commodities, multicommodity_flow
from service.solvers.multicommodity_whole import whole_unit_flow
from service.solvers.whole_model import INT_LIMIT, WholeData, build_model, cost_scale
from tests.perf.harness import table

ONE_PERCENT = 0.01
num = whole_engines.number


def depot_network(seed: int, *, nodes: int = 200, arcs: int = 1500, commodities: int = 40, cap_low: int = 10,
                  cap_high: int = 60, load: float = 1.0):
    """Invented sites on a unit square: lanes to the nearest neighbours plus random
    ones; cost = rounded distance x 100 + 1; demands 5-29 times ``load``."""
    rng = np.random.default_rng(seed)
    pos = rng.random((nodes, 2))
    dist = np.linalg.norm(pos[:, None] - pos[None], axis=2)
    np.fill_diagonal(dist, np.inf)
    per = arcs // nodes
    tail = np.repeat(np.arange(nodes), per)
    head = np.argsort(dist, axis=1)[:, :per].ravel()
    extra = arcs - tail.size
    t2 = rng.integers(0, nodes, extra)
    tail = np.concatenate([tail, t2])
    head = np.concatenate([head, (t2 + rng.integers(1, nodes, extra)) % nodes])
    cost = np.rint(dist[tail, head] * 100) + 1
    cap = rng.integers(cap_low, cap_high, arcs).astype(np.int64)
    src = rng.integers(0, nodes, commodities)
    snk = (src + rng.integers(1, nodes, commodities)) % nodes
    demand = np.floor(rng.integers(5, 30, commodities) * load)
    return Graph(nodes, tail, head, cap, None, cost), Commodities(src, snk, demand)


CASES = {  # name -> (network arguments, single_path); loads chosen so the LP plan is fractional
    "integral": (dict(seed=1, cap_low=10, cap_high=60, load=2.7), False),
    "single-path": (dict(seed=1, cap_low=30, cap_high=80, load=1.5), True),
}
QUICK = dict(nodes=60, arcs=420, commodities=12)


def whole_data(net: Graph, com: Commodities, single_path: bool) -> WholeData:
    scale, cost = cost_scale(net.cost)
    return WholeData(net, com, com.demands.astype(np.int64), cost, scale, single_path, False)


# --------------------------------------------------------------------------- timelines


def gap_of(plan, bound) -> float | None:
    if plan is None or bound is None or not np.isfinite(plan) or not np.isfinite(bound):
        return None
    return 0.0 if plan == bound else abs(plan - bound) / max(abs(plan), abs(bound))


def summary(points: list, final_plan, final_bound, seconds: float, status: str) -> tuple:
    """(first plan s, time to <= 1% s, final gap, status, total s) from (t, plan, bound) points."""
    first = next((t for t, p, _ in points if p is not None and np.isfinite(p)), None)
    one = next((t for t, p, b in points if (g := gap_of(p, b)) is not None and g <= ONE_PERCENT), None)
    final = gap_of(final_plan, final_bound)
    if one is None and final is not None and final <= ONE_PERCENT:
        one = seconds
    return first, one, final, status, seconds


@contextmanager
def captured_stdout():
    """The process's fd 1 into a temporary file (SCIP and HiGHS print from C); yields a
    function that returns what was written."""
    with tempfile.TemporaryFile(mode="w+b") as sink:
        saved = os.dup(1)
        os.dup2(sink.fileno(), 1)
        text: list = []
        try:
            yield lambda: text[0] if text else ""
        finally:
            os.dup2(saved, 1)
            os.close(saved)
            sink.seek(0)
            text.append(sink.read().decode(errors="replace"))


CPSAT_LINE = re.compile(r"^#(\w+)\s+([\d.]+)s\s+best:(\S+)\s+next:\[(\S+?),(\S+?)\]")


def cold_cpsat(model, limit: float) -> tuple:
    started = time.perf_counter()
    cp = whole_engines.cpsat_model(model, None)
    solver = cp_model.CpSolver()
    solver.parameters.max_time_in_seconds = limit
    solver.parameters.num_workers = whole_engines.CPSAT_WORKERS
    solver.parameters.log_search_progress = True
    solver.parameters.log_to_stdout = False
    lines: list = []
    solver.log_callback = lines.append
    built = time.perf_counter() - started
    status = solver.status_name(solver.solve(cp))
    points = []
    for line in lines:
        if (match := CPSAT_LINE.match(line)) is not None:
            best = float(match.group(3)) if match.group(3) != "inf" else None
            points.append((built + float(match.group(2)), best, float(match.group(4))))
    plan = solver.objective_value if status in ("OPTIMAL", "FEASIBLE") else None
    return summary(points, plan, solver.best_objective_bound, time.perf_counter() - started, status)


def cold_scip(model, limit: float) -> tuple:
    """SCIP through MathOpt (the service's adapter builds the same proto); its log's table."""
    started = time.perf_counter()
    proto = whole_engines.scip_model(model)
    params = parameters_pb2.SolveParametersProto()
    params.time_limit.seconds = int(limit)
    params.gscip.int_params["timing/clocktype"] = 2
    log = whole_engines.ScipTable()
    built = time.perf_counter() - started
    result = mathopt.solve(proto, parameters_pb2.SOLVER_TYPE_GSCIP, parameters_pb2.SolverInitializerProto(), params,
                           model_parameters_pb2.ModelSolveParametersProto(), log.read,
                           callback_pb2.CallbackRegistrationProto(), None, None)
    bounds = result.termination.objective_bounds
    plan = bounds.primal_bound if result.solutions else None
    status = result_pb2.TerminationReasonProto.Name(result.termination.reason).replace("TERMINATION_REASON_", "")
    points = [(built + t, primal, dual) for t, primal, dual in log.rows]
    return summary(points, plan, bounds.dual_bound, time.perf_counter() - started, status)


CBC_PLAN = re.compile(r"Integer solution of (\S+) found.*\(([\d.]+) seconds\)")
CBC_NODES = re.compile(r"(\S+) best solution, best possible (\S+) \(([\d.]+) seconds\)")


def cold_cbc(model, limit: float) -> tuple:
    """CBC through pywraplp (MPSolver), the model handed over as an MPModelProto."""
    started = time.perf_counter()
    builder = mbh.ModelBuilderHelper()
    builder.fill_model_from_sparse_data(
        model.col_lower.astype(np.float64), model.col_upper.astype(np.float64), model.c.astype(np.float64),
        np.where(model.row_lower <= -INT_LIMIT, -np.inf, model.row_lower).astype(np.float64),
        np.where(model.row_upper >= INT_LIMIT, np.inf, model.row_upper).astype(np.float64),
        model.matrix.astype(np.float64))
    for j in range(model.num_vars):
        builder.set_var_integrality(j, True)
    builder.set_maximize(model.maximize)
    with tempfile.NamedTemporaryFile(suffix=".pb") as f:
        builder.write_model_to_proto_file(f.name)
        proto = linear_solver_pb2.MPModelProto.FromString(open(f.name, "rb").read())
    solver = pywraplp.Solver.CreateSolver("CBC")
    solver.LoadModelFromProto(proto)
    solver.SetTimeLimit(int(limit * 1000))
    solver.EnableOutput()
    built = time.perf_counter() - started
    with captured_stdout() as log:
        status = solver.Solve()
    points = []
    for line in log().splitlines():
        if (match := CBC_PLAN.search(line)) is not None:
            points.append((built + float(match.group(2)), num(match.group(1)), None))
        elif (match := CBC_NODES.search(line)) is not None:
            points.append((built + float(match.group(3)), num(match.group(1)), num(match.group(2))))
    names = {pywraplp.Solver.OPTIMAL: "OPTIMAL", pywraplp.Solver.FEASIBLE: "FEASIBLE",
             pywraplp.Solver.INFEASIBLE: "INFEASIBLE", pywraplp.Solver.NOT_SOLVED: "NOT_SOLVED"}
    has_plan = status in (pywraplp.Solver.OPTIMAL, pywraplp.Solver.FEASIBLE)
    plan = solver.Objective().Value() if has_plan else None
    return summary(points, plan, solver.Objective().BestBound(), time.perf_counter() - started,
                   names.get(status, str(status)))


def cold_milp(model, limit: float) -> tuple:
    """scipy.optimize.milp (HiGHS) on the same arrays; its log's BestBound / BestSol columns."""
    started = time.perf_counter()
    A = model.matrix.astype(np.float64)
    lower = np.where(model.row_lower <= -INT_LIMIT, -np.inf, model.row_lower).astype(np.float64)
    upper = np.where(model.row_upper >= INT_LIMIT, np.inf, model.row_upper).astype(np.float64)
    sign = -1.0 if model.maximize else 1.0
    with captured_stdout() as log:
        res = milp(sign * model.c.astype(np.float64), constraints=LinearConstraint(A, lower, upper),
                   bounds=Bounds(model.col_lower.astype(np.float64), model.col_upper.astype(np.float64)),
                   integrality=np.ones(model.num_vars), options={"time_limit": limit, "disp": True})
    points = []
    for line in log().splitlines():
        tokens = line.split()
        if not tokens or not re.fullmatch(r"[\d.]+s", tokens[-1]):
            continue
        explored = next((i for i, tok in enumerate(tokens) if tok.endswith("%")), None)
        if explored is None or explored + 2 >= len(tokens):
            continue
        points.append((float(tokens[-1][:-1]), num(tokens[explored + 2]), num(tokens[explored + 1])))
    plan = res.fun if res.x is not None else None
    bound = getattr(res, "mip_dual_bound", None)
    return summary(points, plan, bound, time.perf_counter() - started, res.message.split(".")[0][:28])


def service_run(net, com, single_path: bool, engine: str, limit: float) -> tuple:
    points = []
    started = time.perf_counter()

    def on_progress(report):
        points.append((time.perf_counter() - started, report["incumbent"], report["bound"]))

    sol = whole_unit_flow(net, com, single_path=single_path, deadline=Deadline.after(limit), engine=engine,
                          on_progress=on_progress)
    return summary(points, sol.cost, sol.bound, time.perf_counter() - started, sol.status)


def _s(value) -> str:
    return "-" if value is None else f"{value:.2f}"


def _gap(value) -> str:
    return "-" if value is None else f"{100 * value:.3f}%"


def run(args) -> None:
    limit = 3.0 if args.quick else 10.0
    print(f"limit {limit:g} s per run; CP-SAT workers {whole_engines.CPSAT_WORKERS}; host cores "
          f"{os.cpu_count()} (shared: figures are as measured)", flush=True)
    for name, (shape, single_path) in CASES.items():
        net, com = depot_network(**{**shape, **(QUICK if args.quick else {})})
        data = whole_data(net, com, single_path)
        model = build_model(data)
        lp = multicommodity_flow(net, com)
        print(f"\n{name}: {net.num_arcs} arcs x {com.count} commodities = {model.num_vars} variables, "
              f"{model.matrix.shape[0]} rows; LP relaxation {lp.status} {lp.cost}", flush=True)
        rows = []
        for label, fn in (("cold CP-SAT", lambda: cold_cpsat(model, limit)),
                          ("cold SCIP", lambda: cold_scip(model, limit)),
                          ("cold CBC", lambda: cold_cbc(model, limit)),
                          ("cold scipy.milp (HiGHS)", lambda: cold_milp(model, limit)),
                          ("service, CP-SAT", lambda: service_run(net, com, single_path, "cp-sat", limit)),
                          ("service, SCIP", lambda: service_run(net, com, single_path, "scip", limit))):
            first, one, final, status, seconds = fn()
            rows.append((label, _s(first), _s(one), _gap(final), status, _s(seconds)))
            print(f"  {label}: done", flush=True)
        table(rows, ("run", "first plan s", "to 1% gap s", f"gap at end ({limit:g} s limit)", "status", "total s"))
