"""The service's own checks of a solution, run before any answer is returned.

Each checker recomputes the figures from the problem data and the solution alone,
independently of the solver that produced it, and raises
:class:`~service.errors.SelfCheckFailed` when a condition fails. With exact data
(int64, or Python ints beyond it) the comparisons are exact; answers of the LP engine
hold to a relative tolerance, each figure against its own magnitude (an arc against
its capacity, a node against its throughput), and the certificate states it.
"""

from __future__ import annotations

import numpy as np

from ..errors import SelfCheckFailed
from .graph import Graph, node_balance  # noqa: F401  (node_balance: re-exported for the checkers)


def capacity_excess(flows, capacity, unlimited, lower=None) -> np.ndarray:
    """Per arc, how far the flow lies outside [lower, capacity] (0 when inside)."""
    below = (0 if lower is None else lower) - flows
    above = flows - capacity
    if unlimited is not None:
        above = np.where(unlimited, 0, above)
    return np.maximum(np.maximum(below, above), 0)


def _as_number(x):
    return x.item() if hasattr(x, "item") else x


def _fail(what: str) -> None:
    raise SelfCheckFailed(f"self-check failed: {what}")


def throughput(num_nodes: int, tail: np.ndarray, head: np.ndarray, flows: np.ndarray) -> np.ndarray:
    """Per node, the larger of its inflow and outflow (float64): its own magnitude."""
    f = np.abs(flows.astype(np.float64, copy=False))
    return np.maximum(np.bincount(head, f, num_nodes), np.bincount(tail, f, num_nodes))


def arc_magnitude(capacity, unlimited, flows, lower=None) -> np.ndarray:
    """Per arc, its own magnitude (float64): its bounds, or its flow where unlimited."""
    size = np.abs(capacity.astype(np.float64))
    if unlimited is not None:
        size = np.where(unlimited, np.abs(flows.astype(np.float64)), size)
    if lower is not None:
        size = np.maximum(size, np.abs(lower.astype(np.float64)))
    return size


def beyond(error, allowed, relative: float):
    """Where ``error`` exceeds its allowance; exact comparisons when ``relative`` is 0."""
    return error > (allowed if relative else 0)


def check_max_flow(
    graph: Graph,
    source: int,
    sink: int,
    flows: np.ndarray,
    value,
    source_side: np.ndarray,
    relative: float = 0.0,
) -> dict:
    """Certify a maximum flow by the max-flow min-cut theorem.

    A flow that respects every capacity, is conserved at every node but the source
    and sink, and whose value equals the capacity of an s-t cut is maximum (weak
    duality: no flow exceeds any cut).

    Parameters
    ----------
    graph : Graph
        With ``capacity`` (ignored where ``unlimited``) and ``unlimited``.
    source, sink : int
    flows : ndarray
        With the capacities: int64 or Python ints (object) for exact data, every
        comparison then exact; float64 for answers of the LP engine.
    value : number
        The flow's value.
    source_side : ndarray of bool
        Membership of each node in the cut's source side.
    relative : float
        0 for exact data. Otherwise each figure may be off by ``relative`` times its
        own magnitude: an arc by its capacity, a node's conservation by its
        throughput, the cut by the capacities of the arcs crossing it either way plus
        the throughput of the source side's nodes.

    Returns
    -------
    dict
        The certificate: ``checked``, ``flow_value``, ``cut_capacity``,
        ``max_imbalance``, ``max_capacity_excess``, ``tolerance`` (the largest
        absolute allowance used; 0 for exact data) and, when ``relative`` is not 0,
        ``relative_tolerance``.

    Raises
    ------
    SelfCheckFailed
        When any of the conditions fails.
    """
    num_nodes, tail, head = graph.num_nodes, graph.tail, graph.head
    capacity, unlimited = graph.capacity, graph.unlimited
    excess = capacity_excess(flows, capacity, unlimited)
    arcs = relative * arc_magnitude(capacity, unlimited, flows) if relative else 0
    bad = beyond(excess, arcs, relative)
    if bad.any():
        _fail(f"an arc carries flow outside [0, capacity] by {_as_number(excess[bad].max())}")
    max_excess = _as_number(excess.max()) if excess.size else 0
    balance = node_balance(num_nodes, tail, head, flows)
    through = throughput(num_nodes, tail, head, flows) if relative else np.zeros(num_nodes)
    nodes = relative * through
    out_of_source = -balance[source]
    into_sink = balance[sink]
    inner = balance.copy()
    inner[[source, sink]] = 0
    off = beyond(abs(inner), nodes, relative)
    if off.any():
        _fail(f"flow is not conserved at a node (imbalance {_as_number(abs(inner[off]).max())})")
    max_imbalance = _as_number(abs(inner).max()) if inner.size else 0
    if beyond(abs(out_of_source - value), nodes[source], relative) or \
            beyond(abs(into_sink - value), nodes[sink], relative):
        _fail(f"flow value {value} differs from the net flow at the source or sink")
    if not source_side[source] or source_side[sink]:
        _fail("the cut does not separate the source from the sink")
    crossing = source_side[tail] & ~source_side[head]
    if unlimited is not None and (crossing & unlimited).any():
        _fail("the cut contains an arc without a capacity limit")
    cut_capacity = _as_number(capacity[crossing].sum()) if crossing.any() else 0
    cut_allowed = 0.0
    if relative:
        back = ~source_side[tail] & source_side[head]
        sizes = arc_magnitude(capacity, unlimited, flows)
        cut_allowed = relative * (float(sizes[crossing | back].sum()) + float(through[source_side].sum()))
    if beyond(abs(cut_capacity - value), cut_allowed, relative):
        _fail(f"flow value {value} differs from the cut capacity {cut_capacity}")
    certificate = {
        "checked": True,
        "flow_value": _as_number(value),
        "cut_capacity": cut_capacity,
        "max_imbalance": max_imbalance,
        "max_capacity_excess": max_excess,
        "tolerance": max(float(np.max(arcs, initial=0.0)), float(nodes.max(initial=0.0)), cut_allowed),
    }
    if relative:
        certificate["relative_tolerance"] = relative
    return certificate


def check_path(tail, head, unlimited, source: int, sink: int, path: np.ndarray) -> None:
    """Check that ``path`` is an s-t path made only of arcs without a capacity limit."""
    if path.size == 0 or tail[path[0]] != source or head[path[-1]] != sink:
        _fail("the unbounded path does not run from the source to the sink")
    if not np.all(head[path[:-1]] == tail[path[1:]]):
        _fail("the unbounded path is not connected")
    if not unlimited[path].all():
        _fail("the unbounded path uses an arc with a capacity limit")
