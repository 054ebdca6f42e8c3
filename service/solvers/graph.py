"""The solvers' one graph type and the operations every solver repeats on it.

A network is arrays: ``tail[e] -> head[e]`` for arc ``e``, with optional ``capacity``,
``unlimited`` (arcs without an upper bound) and ``cost`` aligned with the arcs.
:class:`Graph` holds them together; the free functions below take plain arrays, so
solvers that build arcs on the fly (time-expanded copies, contracted components,
residual arcs) share the same code.

Three breadth-first searches serve everything:

- :func:`reach` and :func:`bfs_predecessors`: scipy's compiled
  ``csgraph.breadth_first_order`` over a CSR pattern, for reachability and
  node-to-node predecessor trees;
- :func:`bfs_tree`: a layered numpy search that records the *arc* by which each node
  was reached (a residual network has parallel arcs, and a plan check must name the
  arc) and stops as soon as a target is reached;
- :func:`bfs_depth`: the number of arcs from the nearest of several starts (the
  diagrams' columns, :mod:`service.drawing.layout`).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp
from scipy.sparse import csgraph

FORWARD, BACKWARD = 1, -1


@dataclass
class Residual:
    """The residual network of a plan: one entry per residual arc.

    ``arc`` is the index of the original arc, ``direction`` +1 (forward: more flow
    can go along the arc) or -1 (backward: flow on the arc can be taken back),
    ``src``/``dst`` the residual arc's end nodes, ``room`` how much can be pushed
    (``inf`` for a forward arc without a limit).
    """

    arc: np.ndarray
    direction: np.ndarray
    src: np.ndarray
    dst: np.ndarray
    room: np.ndarray

    @property
    def size(self) -> int:
        """Number of residual arcs."""
        return int(self.arc.size)

    def subset(self, index: np.ndarray) -> "Residual":
        """The residual arcs at ``index``, in that order."""
        return Residual(self.arc[index], self.direction[index], self.src[index], self.dst[index],
                        self.room[index])


@dataclass(frozen=True)
class Graph:
    """A directed network as aligned arrays.

    Parameters
    ----------
    num_nodes : int
    tail, head : ndarray of int
        Arc ``e`` runs from ``tail[e]`` to ``head[e]``.
    capacity : ndarray, optional
        Upper bound per arc (ignored where ``unlimited``).
    unlimited : ndarray of bool, optional
        Arcs without an upper bound; None for none.
    cost : ndarray, optional
        Cost per unit of flow per arc (None: all zero).
    lower : ndarray, optional
        Lower bound per arc (None: all zero).

    Notes
    -----
    The fields are the caller's arrays, never copies, so building a Graph costs
    nothing at any size; solvers treat them as read-only. The hot engines
    (:mod:`~service.solvers.maxflow_graph`, :mod:`~service.solvers.mincost_graph`) still
    take plain arrays: the fronts unpack a Graph once at their entry. ``replace``
    gives a graph with some arrays swapped (scaled capacities, stand-in bounds).
    """

    num_nodes: int
    tail: np.ndarray
    head: np.ndarray
    capacity: np.ndarray | None = None
    unlimited: np.ndarray | None = None
    cost: np.ndarray | None = None
    lower: np.ndarray | None = None

    def replace(self, **changes) -> "Graph":
        """The same graph with the named fields swapped (no array is copied).

        Parameters
        ----------
        **changes
            Field names and their new values, as for :func:`dataclasses.replace`.

        Returns
        -------
        Graph
        """
        return replace(self, **changes)

    @property
    def num_arcs(self) -> int:
        """Number of arcs."""
        return int(self.tail.size)

    @property
    def limited(self) -> np.ndarray:
        """Indices of the arcs with an upper bound."""
        if self.unlimited is None:
            return np.arange(self.num_arcs)
        return np.flatnonzero(~self.unlimited)

    def balance(self, flows: np.ndarray) -> np.ndarray:
        """Inflow minus outflow at every node; see :func:`node_balance`."""
        return node_balance(self.num_nodes, self.tail, self.head, flows)

    def max_degree(self) -> int:
        """The most arcs meeting at one node (in plus out; 0 without arcs)."""
        return max_degree(self.num_nodes, self.tail, self.head)

    def residual(self, flows: np.ndarray, tol=0.0) -> Residual:
        """The residual arcs of a feasible plan (above the graph's lower bounds); see
        :func:`residual_network`."""
        return residual_network(self.tail, self.head, self.capacity, self.unlimited, self.lower, flows, tol)[0]

    def depth(self, starts) -> np.ndarray:
        """Arcs from the nearest of ``starts``, -1 where unreached; see :func:`bfs_depth`."""
        return bfs_depth(self.num_nodes, self.tail, self.head, starts)

    def residual_reach(self, flows: np.ndarray, start: int, slack=0) -> np.ndarray:
        """Nodes reachable from ``start`` in the residual network; see :func:`residual_reach`."""
        return residual_reach(self.num_nodes, self.tail, self.head, flows, self.capacity, self.unlimited,
                              start, slack)


def node_balance(num_nodes: int, tail: np.ndarray, head: np.ndarray, flows: np.ndarray) -> np.ndarray:
    """Inflow minus outflow at every node.

    Parameters
    ----------
    num_nodes : int
    tail, head : ndarray of int
    flows : ndarray
        Flow per arc; the result has its dtype (exact for integer flows, Python-int
        object arrays included).

    Returns
    -------
    ndarray
        ``balance[v]`` = flow into ``v`` minus flow out of ``v``.
    """
    balance = np.zeros(num_nodes, dtype=flows.dtype)
    np.add.at(balance, head, flows)
    np.subtract.at(balance, tail, flows)
    return balance


def max_degree(num_nodes: int, tail: np.ndarray, head: np.ndarray) -> int:
    """The most arc ends at one node (in-degree plus out-degree; 0 without arcs)."""
    if tail.size == 0:
        return 0
    # Two counts added, not one over both ends concatenated: the copy costs more.
    return int((np.bincount(tail, minlength=num_nodes) + np.bincount(head, minlength=num_nodes)).max())


def residual_masks(flows, capacity, unlimited, tol=0):
    """Which arcs are residual forward (room to add flow) and backward (flow to remove).

    Parameters
    ----------
    flows, capacity : ndarray
    unlimited : ndarray of bool or None
    tol : number or ndarray
        How far from a bound an arc must be to count as open.

    Returns
    -------
    (forward, backward) : ndarray of bool
    """
    forward = flows < capacity - tol
    if unlimited is not None:
        forward |= unlimited
    backward = flows > tol
    return forward, backward


def residual_arcs(tail, head, capacity, unlimited, flows, slack=0):
    """End nodes of the residual arcs (room forward, flow backward), forward arcs first.

    Returns
    -------
    (src, dst) : ndarray of int64
    """
    forward, backward = residual_masks(flows, capacity, unlimited, slack)
    return (np.concatenate([tail[forward], head[backward]]).astype(np.int64),
            np.concatenate([head[forward], tail[backward]]).astype(np.int64))


def residual_network(tail, head, capacity, unlimited, lower, flows, tol=0.0, cost=None):
    """The residual arcs of a feasible plan, forward arcs first.

    Parameters
    ----------
    tail, head : ndarray of int
    capacity : ndarray
    unlimited : ndarray of bool or None
    lower : ndarray or None
        Lower bounds (None for all zero): flow above them can be taken back.
    flows : ndarray
    tol : float
        Room at or below ``tol`` does not make a residual arc.
    cost : ndarray, optional

    Returns
    -------
    (Residual, weight)
        ``weight`` is the per-residual-arc cost (``cost`` forward, ``-cost`` backward)
        or None when ``cost`` is None.
    """
    room = capacity - flows
    if unlimited is not None:
        room = np.where(unlimited, np.inf, room.astype(np.float64)) if unlimited.any() else room
    back = flows - (0 if lower is None else lower)
    fwd = np.flatnonzero(room > tol)
    bwd = np.flatnonzero(back > tol)
    dtype = np.float64 if room.dtype.kind == "f" else flows.dtype
    res = Residual(
        arc=np.concatenate([fwd, bwd]),
        direction=np.concatenate([np.full(fwd.size, FORWARD, np.int8), np.full(bwd.size, BACKWARD, np.int8)]),
        src=np.concatenate([tail[fwd], head[bwd]]).astype(np.int64),
        dst=np.concatenate([head[fwd], tail[bwd]]).astype(np.int64),
        room=np.concatenate([room[fwd].astype(dtype), back[bwd].astype(dtype)]),
    )
    weight = None if cost is None else np.concatenate([cost[fwd], -cost[bwd]])
    return res, weight


def pattern(num_nodes: int, src: np.ndarray, dst: np.ndarray) -> sp.csr_matrix:
    """The arcs ``src -> dst`` as a boolean CSR adjacency matrix (parallel arcs merge)."""
    return sp.csr_matrix((np.ones(src.size, dtype=bool), (src, dst)), shape=(num_nodes, num_nodes))


def components(num_nodes: int, src: np.ndarray, dst: np.ndarray, strong: bool = False):
    """Connected components of the arcs ``src -> dst``.

    Parameters
    ----------
    strong : bool
        Strongly connected components (arcs one-way) instead of weakly connected ones.

    Returns
    -------
    (count, labels)
        The number of components and the component of every node.
    """
    if strong:
        return csgraph.connected_components(pattern(num_nodes, src, dst), directed=True, connection="strong")
    return csgraph.connected_components(pattern(num_nodes, src, dst), directed=False)


def reach(num_nodes: int, src: np.ndarray, dst: np.ndarray, start: int) -> np.ndarray:
    """Nodes reachable from ``start`` over the arcs ``src -> dst`` (boolean mask)."""
    return reach_in(pattern(num_nodes, src, dst), start)


def reach_in(adjacency: sp.spmatrix, start: int) -> np.ndarray:
    """Nodes reachable from ``start`` in a sparse adjacency matrix (boolean mask)."""
    mask = np.zeros(adjacency.shape[0], dtype=bool)
    mask[csgraph.breadth_first_order(adjacency, start, directed=True, return_predecessors=False)] = True
    return mask


def bfs_predecessors(num_nodes: int, src: np.ndarray, dst: np.ndarray, start: int) -> np.ndarray:
    """Breadth-first predecessor of every node over the arcs ``src -> dst``.

    Returns
    -------
    ndarray of int32
        ``pred[v]`` is the node from which ``v`` was first reached; negative for the
        start and for nodes not reached.
    """
    _, pred = csgraph.breadth_first_order(pattern(num_nodes, src, dst), start, directed=True,
                                          return_predecessors=True)
    return pred


def residual_reach(num_nodes, tail, head, flows, capacity, unlimited, start: int, slack=0) -> np.ndarray:
    """Nodes reachable from ``start`` in the residual network (boolean mask).

    Parameters
    ----------
    num_nodes : int
    tail, head : ndarray of int
    flows, capacity : ndarray
    unlimited : ndarray of bool or None
    start : int
    slack : number or ndarray
        How far from a bound an arc must be to count as open (one number or one per
        arc).

    Returns
    -------
    ndarray of bool
    """
    return reach(num_nodes, *residual_arcs(tail, head, capacity, unlimited, flows, slack), start)


def bfs_tree(num_nodes: int, src: np.ndarray, dst: np.ndarray, start: int, target: int | None = None):
    """Breadth-first search over arcs ``src -> dst``, one vectorised step per layer.

    Parameters
    ----------
    num_nodes : int
    src, dst : ndarray of int
    start : int
    target : int, optional
        Stop once this node is reached.

    Returns
    -------
    (parent, reached)
        ``parent[v]`` is the index (into ``src``/``dst``) of the arc by which ``v`` was
        first reached, -1 for the start and unreached nodes; ``reached`` is a mask.
    """
    order = np.argsort(src, kind="stable")
    src_sorted, dst_sorted = src[order], dst[order]
    starts = np.searchsorted(src_sorted, np.arange(num_nodes + 1))
    parent = np.full(num_nodes, -1, dtype=np.int64)
    reached = np.zeros(num_nodes, dtype=bool)
    reached[start] = True
    frontier = np.array([start], dtype=np.int64)
    while frontier.size and not (target is not None and reached[target]):
        lo, hi = starts[frontier], starts[frontier + 1]
        counts = hi - lo
        total = int(counts.sum())
        if total == 0:
            break
        # Ragged gather of every arc leaving the frontier.
        offsets = np.repeat(lo - np.concatenate([[0], np.cumsum(counts)[:-1]]), counts)
        idx = offsets + np.arange(total)
        heads = dst_sorted[idx]
        fresh = ~reached[heads]
        idx, heads = idx[fresh], heads[fresh]
        nodes, first = np.unique(heads, return_index=True)
        parent[nodes] = order[idx[first]]
        reached[nodes] = True
        frontier = nodes
    return parent, reached


def bfs_depth(num_nodes: int, src: np.ndarray, dst: np.ndarray, starts) -> np.ndarray:
    """Breadth-first distance in arcs from the nearest of ``starts``, one numpy step per layer.

    Parameters
    ----------
    num_nodes : int
    src, dst : ndarray of int
        Arc ``e`` runs from ``src[e]`` to ``dst[e]``.
    starts : iterable of int
        Nodes at depth 0 (repeats allowed; none gives all -1).

    Returns
    -------
    ndarray of int64
        ``depth[v]``: the fewest arcs on a path from a start to ``v``; -1 where no path.
    """
    depth = np.full(num_nodes, -1, dtype=np.int64)
    frontier = np.unique(np.asarray(list(starts), dtype=np.int64))
    level = 0
    while frontier.size:
        depth[frontier] = level
        nxt = dst[np.isin(src, frontier)]
        frontier = np.unique(nxt[depth[nxt] < 0])
        level += 1
    return depth
