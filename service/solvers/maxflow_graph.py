"""Maximum flow on integer data with OR-Tools' SimpleMaxFlow (push-relabel).

Plain functions over numpy arrays; no HTTP, no problem model.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from ortools.graph.python import max_flow as ortools_max_flow

from ..errors import SolverFailure
from .versions import ORTOOLS_VERSION

INT64_MAX = 2**63 - 1


@dataclass
class MaxFlowSolution:
    """A solved max-flow problem.

    ``status`` is ``"optimal"`` or ``"unbounded"``. For ``"unbounded"``,
    ``unbounded_path`` holds the arc indices of an s-t path without capacity limits and
    the other arrays are empty.
    """

    status: str
    value: int | float | None
    flows: np.ndarray
    source_side: np.ndarray
    engine: dict
    unbounded_path: np.ndarray | None = None
    tolerance: float = 0.0


class CapacityOverflow(ValueError):
    """The capacity sums do not fit the solver's 64-bit arithmetic."""


def graph_engine(solver: str, **extra) -> dict:
    """The ``engine`` document of an answer from an OR-Tools graph solver.

    Parameters
    ----------
    solver : str
        The OR-Tools class, e.g. ``"SimpleMaxFlow"``.
    **extra
        More members (scaling, method), merged in.

    Returns
    -------
    dict
        ``kind: "graph"``, ``solver``, ``version`` and ``extra``.
    """
    return {"kind": "graph", "solver": f"OR-Tools {solver}", "version": ORTOOLS_VERSION, **extra}


def run_max_flow(num_nodes, tail, head, capacity, source, sink):
    """One OR-Tools max-flow solve on int64 capacities: ``(solver, arc handles)``."""
    solver = ortools_max_flow.SimpleMaxFlow()
    if num_nodes:
        # Make sure every node exists even when no arc touches it.
        solver.add_arc_with_capacity(num_nodes - 1, num_nodes - 1, 0)
    arcs = solver.add_arcs_with_capacity(tail, head, capacity)
    status = solver.solve(source, sink)
    if status != solver.OPTIMAL:
        raise SolverFailure(f"OR-Tools max-flow returned status {status}")
    return solver, arcs


def unlimited_path(num_nodes, tail, head, unlimited, source, sink) -> np.ndarray | None:
    """An s-t path of arcs without capacity limits, as arc indices, or ``None``."""
    if unlimited is None or not unlimited.any():
        return None
    # One unit of capacity per unlimited arc: flow > 0 iff such a path exists.
    probe = unlimited.astype(np.int64)
    solver, arcs = run_max_flow(num_nodes, tail, head, probe, source, sink)
    if solver.optimal_flow() == 0:
        return None
    used = np.flatnonzero(solver.flows(arcs) > 0)
    return _walk(tail[used], head[used], source, sink, used)


def _walk(tails, heads, source, sink, arc_ids) -> np.ndarray:
    """Breadth-first search from source to sink over a (small) set of arcs.

    A queue walk, not :func:`.graph.bfs_tree`: that one costs a numpy round per layer,
    and an unlimited path can be long (a 100,000-arc chain: 71 ms here, 2 s there,
    measured in-process); the tie-breaks differ too (the path answered would change).
    """
    order = np.argsort(tails, kind="stable")
    tails, heads, arc_ids = tails[order], heads[order], arc_ids[order]
    starts = np.searchsorted(tails, np.arange(max(tails.max(), heads.max()) + 2))
    parent = {source: -1}
    frontier = [source]
    while frontier and sink not in parent:
        nxt = []
        for u in frontier:
            if u + 1 >= starts.size:
                continue
            for k in range(starts[u], starts[u + 1]):
                v = int(heads[k])
                if v not in parent:
                    parent[v] = k
                    nxt.append(v)
        frontier = nxt
    path = []
    v = sink
    while parent[v] != -1:
        k = parent[v]
        path.append(int(arc_ids[k]))
        v = int(tails[k])
    return np.array(path[::-1], dtype=np.int64)


def check_capacity_sums(capacity: np.ndarray, unlimited: np.ndarray | None) -> int:
    """Return the stand-in capacity for unlimited arcs; raise when sums overflow.

    A maximum flow never exceeds the total finite capacity when no unlimited s-t path
    exists, so ``total + 1`` never binds: an unlimited arc is never saturated and never
    lands in the minimum cut.
    """
    finite = capacity if unlimited is None else capacity[~unlimited]
    if finite.size and float(finite.astype(np.float64).sum()) > 2.0**62:
        raise CapacityOverflow("the capacities sum to more than 2**62")
    total = int(finite.sum()) if finite.size else 0
    k = 0 if unlimited is None else int(unlimited.sum())
    big = total + 1
    if total + k * big > INT64_MAX:
        raise CapacityOverflow("the capacities with unlimited arcs would overflow 64-bit sums")
    return big


def max_flow_graph(num_nodes, tail, head, capacity, unlimited, source, sink) -> MaxFlowSolution:
    """Maximum s-t flow and a minimum cut on integer capacities.

    Parameters
    ----------
    num_nodes : int
    tail, head : ndarray of int32
    capacity : ndarray of int64
        0 where ``unlimited``.
    unlimited : ndarray of bool or None
        Arcs without a capacity limit.
    source, sink : int
        Node indices, distinct.

    Returns
    -------
    MaxFlowSolution

    Raises
    ------
    CapacityOverflow
        When the capacity sums do not fit 64-bit integers.
    SolverFailure
        When OR-Tools reports anything but optimal.

    Examples
    --------
    >>> import numpy as np
    >>> s = max_flow_graph(3, np.array([0, 1], np.int32), np.array([1, 2], np.int32),
    ...                    np.array([5, 3]), None, 0, 2)
    >>> s.value, s.flows.tolist()
    (3, [3, 3])
    """
    path = unlimited_path(num_nodes, tail, head, unlimited, source, sink)
    if path is not None:
        return MaxFlowSolution("unbounded", None, np.empty(0, np.int64), np.empty(0, bool),
                               graph_engine("SimpleMaxFlow"), unbounded_path=path)
    big = check_capacity_sums(capacity, unlimited)
    cap = capacity if unlimited is None or not unlimited.any() else np.where(unlimited, big, capacity)
    solver, arcs = run_max_flow(num_nodes, tail, head, cap.astype(np.int64, copy=False), source, sink)
    flows = np.asarray(solver.flows(arcs), dtype=np.int64)
    source_side = np.zeros(num_nodes, dtype=bool)
    source_side[np.asarray(solver.get_source_side_min_cut(), dtype=np.int64)] = True
    return MaxFlowSolution("optimal", int(solver.optimal_flow()), flows, source_side, graph_engine("SimpleMaxFlow"))
