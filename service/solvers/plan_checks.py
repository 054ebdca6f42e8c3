"""What every plan check shares: the verdict, exact or tolerant arithmetic, and the
bound and conservation violations of a plan (see :mod:`service.solvers.verify`)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import SelfCheckFailed
from .graph import BACKWARD, FORWARD, Graph, Residual, max_degree, node_balance, residual_network

__all__ = ["BACKWARD", "FORWARD", "MAX_LISTED_VIOLATIONS", "RELATIVE_TOLERANCE", "Residual", "Verdict",
           "common_dtype", "find_violations", "node_balance", "residual_network", "tolerance_for"]

#: Most violations listed in a verdict; ``violation_count`` always has the total.
MAX_LISTED_VIOLATIONS = 10_000
#: Relative slack for plans or data with fractions (exact 0 for integers).
RELATIVE_TOLERANCE = 1e-9


@dataclass
class Verdict:
    """The outcome of checking one plan (node and arc numbers are indices)."""

    feasible: bool
    objective: float | int  # value (max-flow) or cost (min-cost flow)
    tolerance: float
    violation_count: int = 0
    arc_violations: list = field(default_factory=list)  # (arc, kind, excess)
    node_violations: list = field(default_factory=list)  # (node, imbalance)
    optimal: bool = False
    steps: list | None = None  # [(arc, direction)] of the improving path or cycle
    amount: float | int | None = None  # flow to push along it; None: no limit
    unit_cost: float | int | None = None  # min-cost: cost per unit pushed round the cycle
    gain: float | int | None = None  # value gained or cost saved; None: unbounded
    source_side: np.ndarray | None = None  # max-flow proof of optimality
    cut_arcs: np.ndarray | None = None
    cut_capacity: float | int | None = None
    potentials: np.ndarray | None = None  # min-cost proof of optimality


def _number(x):
    return x.item() if hasattr(x, "item") else x


def _fail(what: str) -> None:
    raise SelfCheckFailed(f"self-check of a plan verdict failed: {what}")


#: Integer sums and products stay exact in int64 below this bound.
EXACT_BOUND = 2.0**62


def _abs_sum(a) -> float:
    return 0.0 if a is None or not np.size(a) else float(np.abs(np.asarray(a, dtype=np.float64)).sum())


def common_dtype(*arrays, weights=None) -> np.dtype:
    """int64 when every array is integral and every sum fits, else float64.

    Node balances add up flows and capacities, and a cost is a sum of ``weights``
    times flows: when those could leave int64 the check runs in float64 (with a
    tolerance) instead of wrapping round.
    """
    integral = all(a is None or np.asarray(a).dtype.kind in "iub" for a in arrays + (weights,))
    total = sum(_abs_sum(a) for a in arrays)
    if weights is not None and np.size(weights):
        total += float(np.abs(np.asarray(weights, dtype=np.float64)).max()) * total
    return np.dtype(np.int64) if integral and total < EXACT_BOUND else np.dtype(np.float64)


def tolerance_for(dtype: np.dtype, *arrays) -> float:
    """0 for integers; otherwise a slack relative to the largest magnitude involved."""
    if dtype.kind == "i":
        return 0.0
    scale = 1.0
    for a in arrays:
        if a is not None and np.size(a):
            finite = np.asarray(a, dtype=np.float64)
            finite = finite[np.isfinite(finite)]
            if finite.size:
                scale = max(scale, float(np.abs(finite).max()))
    return RELATIVE_TOLERANCE * scale



def find_violations(graph: Graph, flows, supply, free=None, tol=0.0):
    """Every bound and conservation violation of a plan.

    Parameters
    ----------
    graph : Graph
        The arcs and their bounds: ``capacity``, ``unlimited`` (arcs without an upper
        bound) and ``lower`` (None for all zero).
    flows : ndarray
        The plan, aligned with the arcs.
    supply : ndarray
        Required net outflow per node (0 for inner nodes of a max-flow problem).
    free : ndarray of int, optional
        Nodes exempt from conservation (the source and sink of a max-flow problem).
    tol : float
        Slack allowed before a difference counts as a violation.

    Returns
    -------
    (arc_violations, node_violations, count)
        ``arc_violations``: ``(arc, kind, excess)`` with kind ``"capacity"`` (flow above
        capacity by ``excess``) or ``"lower"`` (flow below the lower bound, 0 by default,
        by ``excess``); ``node_violations``: ``(node, imbalance)`` with ``imbalance`` =
        supply + inflow - outflow (positive: flow is left over at the node; negative:
        more leaves than arrives). Lists are cut at ``MAX_LISTED_VIOLATIONS``;
        ``count`` is the full total.
    """
    num_nodes, tail, head = graph.num_nodes, graph.tail, graph.head
    above = flows - graph.capacity
    if graph.unlimited is not None:
        above = np.where(graph.unlimited, 0, above)
    below = (0 if graph.lower is None else graph.lower) - flows
    over = np.flatnonzero(above > tol)
    under = np.flatnonzero(below > tol)
    imbalance = supply + node_balance(num_nodes, tail, head, flows)
    if free is not None:
        imbalance[free] = 0
    bad_nodes = np.flatnonzero(np.abs(imbalance) > tol * max(1, max_degree(num_nodes, tail, head)))
    count = int(over.size + under.size + bad_nodes.size)
    arcs = sorted([(int(i), "capacity", _number(above[i])) for i in over[:MAX_LISTED_VIOLATIONS]]
                  + [(int(i), "lower", _number(below[i])) for i in under[:MAX_LISTED_VIOLATIONS]])
    arcs = arcs[:MAX_LISTED_VIOLATIONS]
    nodes = [(int(v), _number(imbalance[v])) for v in bad_nodes[:max(0, MAX_LISTED_VIOLATIONS - len(arcs))]]
    return arcs, nodes, count



def _finite(x, dtype):
    """None for an unlimited amount; an int for integer data."""
    if math.isinf(x):
        return None
    return int(x) if dtype.kind == "i" else _number(x)


def _unlimited_first(res: Residual, search):
    """Run ``search`` on the residual arcs without limits, then on all of them.

    ``search(residual)`` returns residual arc indices or None; indices found in the
    subset are mapped back to ``res``.
    """
    endless = np.flatnonzero(np.isinf(res.room)) if res.room.dtype.kind == "f" else np.empty(0, np.int64)
    if endless.size:
        found = search(res.subset(endless), endless)
        if found is not None:
            return endless[np.asarray(found, dtype=np.int64)]
    return search(res, None)



def _walk(steps, tail, head):
    """(from, to) of each step of a residual path or cycle."""
    out = []
    for arc, direction in steps:
        a, b = int(tail[arc]), int(head[arc])
        out.append((a, b) if direction == FORWARD else (b, a))
    return out


def _apply(flows, steps, amount):
    arcs = np.array([a for a, _ in steps], dtype=np.int64)
    signs = np.array([d for _, d in steps], dtype=flows.dtype)
    moved = flows.copy()
    np.add.at(moved, arcs, signs * amount)
    return moved


