"""The service's own checks of a solution, run before any answer is returned.

Each checker recomputes the figures from the problem data and the solution alone,
independently of the solver that produced it, and raises
:class:`~service.errors.SelfCheckFailed` when a condition fails. With integer data
the comparisons are exact (int64 arithmetic); with fractional data they hold to the
stated tolerance.
"""

from __future__ import annotations

import numpy as np

from ..errors import SelfCheckFailed


def node_balance(num_nodes: int, tail: np.ndarray, head: np.ndarray, flows: np.ndarray) -> np.ndarray:
    """Inflow minus outflow at every node (exact for integer flows)."""
    balance = np.zeros(num_nodes, dtype=flows.dtype)
    np.add.at(balance, head, flows)
    np.subtract.at(balance, tail, flows)
    return balance


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


def check_max_flow(
    num_nodes: int,
    tail: np.ndarray,
    head: np.ndarray,
    capacity: np.ndarray,
    unlimited: np.ndarray | None,
    source: int,
    sink: int,
    flows: np.ndarray,
    value,
    source_side: np.ndarray,
    tolerance: float = 0.0,
) -> dict:
    """Certify a maximum flow by the max-flow min-cut theorem.

    A flow that respects every capacity, is conserved at every node but the source
    and sink, and whose value equals the capacity of an s-t cut is maximum (weak
    duality: no flow exceeds any cut).

    Parameters
    ----------
    source_side : ndarray of bool
        Membership of each node in the cut's source side.
    tolerance : float
        0 for integer data; the absolute slack allowed for fractional data.

    Returns
    -------
    dict
        The certificate: ``checked``, ``flow_value``, ``cut_capacity``,
        ``max_imbalance``, ``max_capacity_excess``, ``tolerance``.

    Raises
    ------
    SelfCheckFailed
        When any of the conditions fails.
    """
    excess = capacity_excess(flows, capacity, unlimited)
    max_excess = _as_number(excess.max()) if excess.size else 0
    if max_excess > tolerance:
        _fail(f"an arc carries flow outside [0, capacity] by {max_excess}")
    balance = node_balance(num_nodes, tail, head, flows)
    out_of_source = -balance[source]
    into_sink = balance[sink]
    inner = balance.copy()
    inner[[source, sink]] = 0
    max_imbalance = _as_number(np.abs(inner).max()) if inner.size else 0
    if max_imbalance > tolerance:
        _fail(f"flow is not conserved at a node (imbalance {max_imbalance})")
    if abs(out_of_source - value) > tolerance or abs(into_sink - value) > tolerance:
        _fail(f"flow value {value} differs from the net flow at the source or sink")
    if not source_side[source] or source_side[sink]:
        _fail("the cut does not separate the source from the sink")
    crossing = source_side[tail] & ~source_side[head]
    if unlimited is not None and (crossing & unlimited).any():
        _fail("the cut contains an arc without a capacity limit")
    cut_capacity = _as_number(capacity[crossing].sum())
    if abs(cut_capacity - value) > tolerance * max(1, int(crossing.sum())):
        _fail(f"flow value {value} differs from the cut capacity {cut_capacity}")
    return {
        "checked": True,
        "flow_value": _as_number(value),
        "cut_capacity": cut_capacity,
        "max_imbalance": max_imbalance,
        "max_capacity_excess": max_excess,
        "tolerance": tolerance,
    }


def check_path(tail, head, unlimited, source: int, sink: int, path: np.ndarray) -> None:
    """Check that ``path`` is an s-t path made only of arcs without a capacity limit."""
    if path.size == 0 or tail[path[0]] != source or head[path[-1]] != sink:
        _fail("the unbounded path does not run from the source to the sink")
    if not np.all(head[path[:-1]] == tail[path[1:]]):
        _fail("the unbounded path is not connected")
    if not unlimited[path].all():
        _fail("the unbounded path uses an arc with a capacity limit")
