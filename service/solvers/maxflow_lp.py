"""Maximum flow as a linear program on GLOP (``options.engine = "lp"``).

Answers hold to ``LP_TOLERANCE`` relative to each figure's own magnitude (an arc's
capacity, a node's throughput), which the certificate states. The default engine
answers every max-flow problem exactly (:mod:`service.solvers.front`); this one is
there for callers who ask for it.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from ..errors import FieldError, InputError, SelfCheckFailed, SolverFailure, SolveTimeout
from . import certificates
from .graph import Graph, residual_reach
from .glop import incidence_matrix, solve_lp
from .maxflow_graph import MaxFlowSolution, graph_engine, unlimited_path

LP_TOLERANCE = 1e-6


def max_flow_lp(graph: Graph, source: int, sink: int, *, deadline=None) -> MaxFlowSolution:
    """Maximum s-t flow by linear programming (GLOP), with a minimum cut.

    The model: maximise ``v`` subject to ``A f - b v = 0`` and ``0 <= f <= capacity``,
    where ``A`` is the node-arc incidence matrix and ``b`` is +1 at the source and -1
    at the sink. The cut is the set of nodes reachable from the source in the residual
    network of the LP's flow.

    Parameters
    ----------
    graph : Graph
        With ``capacity`` (may be float; 0 where ``unlimited``) and ``unlimited``.
    source, sink : int
    deadline : Deadline, optional
        When GLOP must stop.

    Returns
    -------
    MaxFlowSolution
        As :func:`service.solvers.maxflow_graph.max_flow_graph` gives.
    """
    num_nodes, tail, head = graph.num_nodes, graph.tail, graph.head
    capacity, unlimited = graph.capacity, graph.unlimited
    # Unboundedness is structural: the graph solver finds an unlimited s-t path exactly.
    path = unlimited_path(num_nodes, tail, head, unlimited, source, sink)
    if path is not None:
        return MaxFlowSolution("unbounded", None, np.empty(0), np.empty(0, bool),
                               graph_engine("SimpleMaxFlow"), unbounded_path=path)
    m = tail.size
    cap = capacity.astype(np.float64, copy=False)  # read only: float capacities are not copied
    upper = np.where(unlimited, np.inf, cap) if unlimited is not None else cap
    b = np.zeros((num_nodes, 1))
    b[source, 0], b[sink, 0] = -1.0, 1.0
    matrix = sp.hstack([incidence_matrix(num_nodes, tail, head), sp.csr_matrix(b)], format="csr")
    zeros = np.zeros(num_nodes)
    c = np.zeros(m + 1)
    c[m] = 1.0
    failure = "no optimal answer"
    for scale in _scales(cap):
        try:
            lp = solve_lp(c, matrix, zeros, zeros, np.zeros(m + 1), np.append(upper / scale, np.inf),
                          maximize=True, deadline=deadline)
        except SolverFailure as exc:  # e.g. ABNORMAL on a badly conditioned scaling
            failure = exc.detail
            continue
        if lp.status == "time_limit":
            raise SolveTimeout("the LP engine reached the time limit before the maximum flow")
        if lp.status != "optimal":
            failure = f"GLOP returned {lp.status} for a bounded max-flow model"
            continue
        flows = np.clip(lp.x[:m] * scale, 0.0, upper)
        value = float(lp.x[m]) * scale
        # Open residual arcs: further than LP_TOLERANCE of their own capacity from a bound.
        slack = LP_TOLERANCE * np.where(np.isfinite(upper), upper, abs(value))
        source_side = residual_reach(num_nodes, tail, head, flows, upper, None, source, slack)
        solution = MaxFlowSolution("optimal", value, flows, source_side, dict(lp.engine, tolerance=LP_TOLERANCE),
                                   tolerance=LP_TOLERANCE)
        # GLOP's tolerances are absolute, so a scaling can lose small capacities or
        # strain large ones: only an answer that passes the certificate is taken.
        try:
            certificates.check_max_flow(graph.replace(capacity=cap), source, sink, flows, value, source_side,
                                        LP_TOLERANCE)
        except SelfCheckFailed as exc:
            failure = f"{exc.detail} (scaling {scale:g})"
            continue
        return solution
    low, high = _range(cap)
    raise InputError(FieldError("/arcs", f"the LP engine found no maximum flow it could certify to a relative "
                                         f"tolerance of {LP_TOLERANCE:g} for capacities from {low:g} to "
                                         f"{high:g} ({failure}); options.engine 'auto' solves it exactly"))


def _range(cap: np.ndarray) -> tuple[float, float]:
    positive = cap[cap > 0]
    return (float(positive.min()), float(positive.max())) if positive.size else (0.0, 0.0)


def _scales(cap: np.ndarray) -> list[float]:
    """Divisors for the capacities, tried in turn: GLOP's tolerances are absolute, so
    the model is best conditioned when the capacities sit around 1. First the
    geometric mean of the smallest positive and the largest capacity (both ends
    equally far from 1), then the largest (everything at most 1: integer data whose
    sums overflow int64 comes here), then none."""
    positive = cap[cap > 0]
    if positive.size == 0:
        return [1.0]
    low, high = float(positive.min()), float(positive.max())
    scales = [max(1.0, float(np.sqrt(low) * np.sqrt(high))), max(1.0, high), 1.0]
    return list(dict.fromkeys(scales))
