"""Engine choice and certification for every problem kind."""

from __future__ import annotations

from typing import Literal

import numpy as np

from ..errors import FieldError, InputError
from . import certificates
from .maxflow_graph import CapacityOverflow, MaxFlowSolution, check_capacity_sums, max_flow_graph
from .maxflow_lp import max_flow_lp
from .scaling import common_scale

EngineChoice = Literal["auto", "graph", "lp"]


def _graph_refused(reason: str, pointer: str = "/arcs") -> InputError:
    return InputError(
        FieldError(pointer, f"{reason}; the graph engine cannot solve it exactly (use options.engine 'lp' or 'auto')"),
    )


def maximum_flow(
    num_nodes: int,
    tail: np.ndarray,
    head: np.ndarray,
    capacity: np.ndarray,
    unlimited: np.ndarray | None,
    source: int,
    sink: int,
    *,
    engine: EngineChoice = "auto",
    time_limit: float | None = None,
) -> tuple[MaxFlowSolution, dict]:
    """Solve and certify a max-flow problem.

    Engine choice: ``graph`` solves integers exactly and decimals with at most six
    places by exact scaling; ``lp`` uses GLOP; ``auto`` takes the graph engine
    whenever it can answer exactly and the LP engine otherwise.

    Returns
    -------
    (MaxFlowSolution, certificate)

    Raises
    ------
    InputError
        ``engine="graph"`` on data it cannot solve exactly.
    SelfCheckFailed
        When the answer fails its certificate (a bug).
    """
    if engine != "lp":
        answer = _graph_route(num_nodes, tail, head, capacity, unlimited, source, sink, forced=engine == "graph")
        if answer is not None:
            return answer
    solution = max_flow_lp(num_nodes, tail, head, capacity, unlimited, source, sink, time_limit=time_limit)
    return solution, certify_max_flow(solution, num_nodes, tail, head, capacity, unlimited, source, sink)


def _graph_route(num_nodes, tail, head, capacity, unlimited, source, sink, *, forced: bool):
    """Solve on integers (scaled from decimals when needed) and certify exactly."""
    scaled = common_scale(capacity)
    if scaled is None:
        if forced:
            raise _graph_refused("capacities have more than 6 decimal places or are too large once scaled")
        return None
    d, (int_capacity,) = scaled
    try:
        check_capacity_sums(int_capacity, unlimited)
    except CapacityOverflow as exc:
        if forced:
            raise _graph_refused(str(exc)) from None
        return None
    solution = max_flow_graph(num_nodes, tail, head, int_capacity, unlimited, source, sink)
    certificate = certify_max_flow(solution, num_nodes, tail, head, int_capacity, unlimited, source, sink)
    if d:
        _unscale(solution, certificate, 10**d)
    return solution, certificate


def _unscale(solution: MaxFlowSolution, certificate: dict, factor: int) -> None:
    """Divide an exact integer answer by the decimal scale (one rounding per number)."""
    solution.flows = solution.flows / factor
    if solution.value is not None:
        solution.value = solution.value / factor
    solution.engine = dict(solution.engine, decimal_scale=factor)
    for name in ("flow_value", "cut_capacity"):
        if name in certificate:
            certificate[name] = certificate[name] / factor
    certificate["decimal_scale"] = factor


def certify_max_flow(solution: MaxFlowSolution, num_nodes, tail, head, capacity, unlimited, source, sink) -> dict:
    if solution.status == "unbounded":
        certificates.check_path(tail, head, unlimited, source, sink, solution.unbounded_path)
        return {"checked": True, "unbounded_path_arcs": int(solution.unbounded_path.size)}
    if solution.tolerance:
        capacity = capacity.astype(np.float64)  # LP answers: compare in floating point, never wrap int64
    return certificates.check_max_flow(
        num_nodes, tail, head, capacity, unlimited, source, sink,
        solution.flows, solution.value, solution.source_side, solution.tolerance,
    )
