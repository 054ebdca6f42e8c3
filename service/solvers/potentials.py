"""Node potentials (duals of flow conservation) from an optimal flow.

OR-Tools' Python API returns flows but not the duals, so we rebuild them. A flow is
optimal exactly when its residual network has no negative-cost cycle, and then the
shortest-path distances from a virtual root (joined to every node at cost 0) are
potentials ``p`` with

    reduced cost  rc = cost + p[tail] - p[head] >= 0   on every residual arc.

General shortest paths with negative arc costs are slow (Bellman-Ford is O(nm);
measured here it takes minutes at a million arcs), so two facts of the optimal
residual network do most of the work:

1. An arc with ``0 < flow < capacity`` is residual in both directions, so its
   reduced cost must be exactly 0: ``p[head] = p[tail] + cost``. These arcs are
   contracted: every connected component of them gets its potentials relative to
   one representative by summing costs down a breadth-first spanning tree
   (pointer doubling, O(n log depth) numpy work).
2. What remains is a shortest-path problem on the contracted graph, whose arcs are
   one-way. It is solved by Bellman-Ford relaxation restricted to the frontier of
   nodes whose label changed in the last round, vectorised per round. Contraction
   collapses the long flow paths, so the number of rounds stays small (tens on
   random and grid networks of a million arcs).

Nothing here is trusted: :mod:`service.solvers.mincost_checks` checks the reduced
cost of every arc and the duality gap before an answer leaves the service.
"""

from __future__ import annotations

import numpy as np

from ..errors import SelfCheckFailed
from .graph import Graph, bfs_predecessors, components, residual_masks


def node_potentials(graph: Graph, flows: np.ndarray) -> np.ndarray:
    """Potentials proving an integer flow optimal.

    Parameters
    ----------
    graph : Graph
        ``cost`` (int64) per arc; ``capacity`` (int64) is ignored where
        ``unlimited`` (such arcs always have room for more flow); ``lower`` is
        ignored (the flow is measured from zero lower bounds).
    flows : ndarray of int64
        An optimal flow with zero lower bounds.

    Returns
    -------
    ndarray of int64
        ``p`` with ``cost + p[tail] - p[head] >= 0`` wherever flow can be added and
        ``<= 0`` wherever flow can be removed; the smallest potential is 0.

    Raises
    ------
    SelfCheckFailed
        When the residual network has a negative cycle (the flow is not optimal).

    Examples
    --------
    >>> import numpy as np
    >>> g = Graph(3, np.array([0, 1]), np.array([1, 2]), np.array([1, 1]), cost=np.array([2, 3]))
    >>> node_potentials(g, np.array([1, 0])).tolist()
    [0, 2, 2]
    """
    num_nodes, tail, head = graph.num_nodes, graph.tail, graph.head
    if num_nodes == 0:
        return np.zeros(0, dtype=np.int64)
    cost = graph.cost.astype(np.int64, copy=False)
    forward, backward = residual_masks(flows, graph.capacity, graph.unlimited)
    free = forward & backward
    labels, offset, k = free_components(num_nodes, tail[free], head[free], cost[free])
    if not np.array_equal(offset[head[free]] - offset[tail[free]], cost[free]):
        # A cycle of arcs strictly inside their bounds has nonzero cost: cancelling it improves the flow.
        raise SelfCheckFailed("self-check failed: the residual network has a negative cycle (flow not optimal)")
    one_f = forward & ~free
    one_b = backward & ~free
    ct = np.concatenate([labels[tail[one_f]], labels[head[one_b]]])
    ch = np.concatenate([labels[head[one_f]], labels[tail[one_b]]])
    w = np.concatenate([
        cost[one_f] + offset[tail[one_f]] - offset[head[one_f]],
        -cost[one_b] + offset[head[one_b]] - offset[tail[one_b]],
    ])
    between = ct != ch
    dist = shortest_from_virtual_root(k, ct[between], ch[between], w[between])
    p = dist[labels] + offset
    return p - p.min()


def free_components(num_nodes: int, ft: np.ndarray, fh: np.ndarray, fc: np.ndarray):
    """Components of the arcs that must have reduced cost 0, with relative potentials.

    Returns
    -------
    (labels, offset, count)
        ``labels[v]`` is the component of node ``v``; ``offset[v]`` its potential
        relative to the component's representative, so ``offset[fh] - offset[ft] ==
        fc`` holds on every given arc when they are consistent.
    """
    if ft.size == 0:
        return np.arange(num_nodes, dtype=np.int64), np.zeros(num_nodes, dtype=np.int64), num_nodes
    ft = ft.astype(np.int64)
    fh = fh.astype(np.int64)
    # Both directions: p[fh] = p[ft] + fc and p[ft] = p[fh] - fc.
    rows = np.concatenate([ft, fh])
    cols = np.concatenate([fh, ft])
    weights = np.concatenate([fc, -fc])
    code = rows * num_nodes + cols
    code, first = np.unique(code, return_index=True)  # parallel copies would be summed by scipy
    rows, cols, weights = rows[first], cols[first], weights[first]
    count, labels = components(num_nodes, rows, cols)
    parent = _bfs_parents(rows, cols, labels, count, num_nodes)
    # Weight of the tree arc parent[v] -> v, found in the sorted codes.
    child = np.arange(num_nodes, dtype=np.int64)
    is_root = parent == child
    pos = np.searchsorted(code, parent * num_nodes + child)
    step = np.where(is_root, 0, weights[np.minimum(pos, code.size - 1)])
    offset = _sum_to_root(parent, step, is_root)
    return labels.astype(np.int64), offset, count


def _bfs_parents(rows, cols, labels: np.ndarray, count: int, num_nodes: int) -> np.ndarray:
    """Breadth-first spanning forest: parent of every node (a root is its own parent)."""
    reps = np.full(count, num_nodes, dtype=np.int64)
    np.minimum.at(reps, labels, np.arange(num_nodes, dtype=np.int64))
    # A virtual root joined to one representative per component gives one BFS for all.
    root = np.full(count, num_nodes, dtype=np.int64)
    pred = bfs_predecessors(num_nodes + 1, np.concatenate([rows, root]), np.concatenate([cols, reps]), num_nodes)
    parent = pred[:num_nodes].astype(np.int64)
    parent[reps] = reps
    return parent


def _sum_to_root(parent: np.ndarray, step: np.ndarray, is_root: np.ndarray) -> np.ndarray:
    """``total[v] = step[v] + total[parent[v]]`` for a forest, by pointer doubling."""
    total = step.astype(np.int64, copy=True)
    jump = parent.copy()
    pending = np.flatnonzero(~is_root[jump])
    while pending.size:
        up = jump[pending]
        total[pending] += total[up]
        jump[pending] = jump[up]
        pending = pending[~is_root[jump[pending]]]
    return total


def shortest_from_virtual_root(k: int, tail: np.ndarray, head: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Distances from a virtual root joined to every node at cost 0 (so all are <= 0).

    Bellman-Ford relaxation, one vectorised round per hop, over the out-arcs of the
    nodes whose distance changed in the previous round only.

    Raises
    ------
    SelfCheckFailed
        When relaxation does not settle within ``k`` rounds: a negative cycle.
    """
    dist = np.zeros(k, dtype=w.dtype if w.size else np.int64)
    if not w.size:
        return dist
    order = np.argsort(tail, kind="stable")
    tail, head, w = tail[order], head[order], w[order]
    starts = np.searchsorted(tail, np.arange(k + 1))
    # Round one: from the all-zero labels only negative arcs can improve anything.
    neg = w < 0
    if not neg.any():
        return dist
    np.minimum.at(dist, head[neg], w[neg])
    active = np.unique(head[neg])
    rounds = 1
    while active.size:
        rounds += 1
        if rounds > k + 1:
            raise SelfCheckFailed("self-check failed: the residual network has a negative cycle (flow not optimal)")
        lo, hi = starts[active], starts[active + 1]
        lengths = hi - lo
        total = int(lengths.sum())
        if total == 0:
            break
        # Indices of all out-arcs of the active nodes, without a Python loop.
        idx = np.repeat(lo - np.cumsum(lengths) + lengths, lengths) + np.arange(total)
        cand = dist[tail[idx]] + w[idx]
        hd = head[idx]
        better = cand < dist[hd]
        if not better.any():
            break
        hd, cand = hd[better], cand[better]
        np.minimum.at(dist, hd, cand)
        active = np.unique(hd)
    return dist
