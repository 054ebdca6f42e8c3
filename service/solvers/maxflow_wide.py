"""Exact maximum flow for integer capacities whose sums int64 cannot hold.

Capacities arrive as Python ints (a numpy object array) or int64. The flow is built
by bit scaling on top of the int64 engine: first the maximum flow of ``u >> k`` (``k``
chosen so that every sum fits), then ``step`` bits at a time back to ``u``. Going
from ``u' = u >> k`` to ``u'' = u >> (k - step)``, the doubled flow ``2**step * f``
is feasible for ``u''`` and every cut grows by less than ``2**step`` per arc, so the
residual network needs at most ``m * (2**step - 1)`` more units: its capacities are
capped just above that (a cap above the residual maximum never binds and never lands
in a minimum cut) and it goes to OR-Tools as int64. Each phase is one vectorised
OR-Tools solve; the phases are few (about ``(bits - 61) / step``, ``step`` = 61
minus twice the bits of the arc count, so that every sum of a phase fits int64). The
minimum cut is read from the final flow's residual network, and
:func:`service.solvers.certificates.check_max_flow` checks everything in Python
integers.
"""

from __future__ import annotations

import numpy as np

from .graph import node_balance, residual_reach
from .maxflow_graph import MaxFlowSolution, graph_engine, run_max_flow, unlimited_path


def max_flow_wide(num_nodes, tail, head, capacity, unlimited, source, sink) -> MaxFlowSolution:
    """Maximum s-t flow and a minimum cut, exactly, for capacities of any size.

    Parameters as for :func:`service.solvers.maxflow_graph.max_flow_graph`, but
    ``capacity`` may be an object array of Python ints; the flows come back as one.
    """
    path = unlimited_path(num_nodes, tail, head, unlimited, source, sink)
    if path is not None:
        return MaxFlowSolution("unbounded", None, np.empty(0, object), np.empty(0, bool),
                               graph_engine("SimpleMaxFlow"), unbounded_path=path)
    cap = capacity.astype(object)
    if unlimited is not None and unlimited.any():
        # No unlimited s-t path: the finite capacities bound the flow, so this never binds.
        cap[unlimited] = int(cap[~unlimited].sum()) + 1
    m = int(tail.size)
    total = int(cap.sum()) if m else 0
    # Every sum OR-Tools forms on a phase (2m residual capacities) stays below 2**62.
    step = max(1, 61 - 2 * (m + 1).bit_length())
    shift = max(0, total.bit_length() - 61)
    flows = _phase(num_nodes, tail, head, (cap >> shift).astype(np.int64), source, sink).astype(object)
    phases = 1
    while shift:
        drop = min(step, shift)
        shift -= drop
        flows = flows << drop
        flows = flows + _augment(num_nodes, tail, head, cap >> shift, flows, m * ((1 << drop) - 1), source, sink)
        phases += 1
    side = residual_reach(num_nodes, tail, head, flows, cap, None, source)
    return MaxFlowSolution("optimal", int(node_balance(num_nodes, tail, head, flows)[sink]), flows, side,
                           graph_engine("SimpleMaxFlow", phases=phases))


def _phase(num_nodes, tail, head, cap: np.ndarray, source, sink) -> np.ndarray:
    solver, arcs = run_max_flow(num_nodes, tail, head, cap, source, sink)
    return np.asarray(solver.flows(arcs), dtype=np.int64)


def _augment(num_nodes, tail, head, cap, flows, bound: int, source, sink) -> np.ndarray:
    """The maximum flow of the residual network, capped at ``bound + 1`` (it needs at
    most ``bound``), as the change of every arc's flow."""
    ceiling = bound + 1
    forward = np.minimum(cap - flows, ceiling).astype(np.int64)
    backward = np.minimum(flows, ceiling).astype(np.int64)
    both_tail = np.concatenate([tail, head])
    both_head = np.concatenate([head, tail])
    change = _phase(num_nodes, both_tail, both_head, np.concatenate([forward, backward]), source, sink)
    m = tail.size
    return (change[:m] - change[m:]).astype(object)
