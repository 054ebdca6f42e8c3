"""Where the nodes go: layered, left to right.

Layer 0 holds the anchors on the left (the source, or the supply nodes); every other
node sits one layer right of its nearest predecessor by breadth-first search along
the arcs (the solvers' graph type, :meth:`~service.solvers.graph.Graph.depth`); the
right anchors (the sink, or the demand nodes) take a layer of their own at the right
edge; nodes the search does not reach go to a last column. Within a layer, nodes are
ordered by the mean position of their neighbours in the layer before (two sweeps),
which keeps most arcs from crossing.

Columns are as far apart as their widest node needs to leave a channel between
them, where arcs run; rows are spaced so that a gap between two nodes' footprints (the
node with its captions) leaves room for arcs to pass. :mod:`.routing` uses both.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..solvers.graph import Graph
from .geometry import Box, union

COL_GAP, ROW_GAP = 230.0, 96.0
#: The narrowest channel between two columns' footprints.
MIN_CHANNEL = 110.0


def layered_layout(graph: Graph, sources, sinks) -> tuple[np.ndarray, np.ndarray]:
    """Layer (column) and rank (row within the column) of every node.

    Parameters
    ----------
    graph : Graph
        The nodes and arcs (only ``num_nodes``, ``tail`` and ``head`` are read).
    sources, sinks : sequence of int
        Nodes for the left edge and for a right-most column of their own.

    Returns
    -------
    (layer, rank) : ndarray of int

    Examples
    --------
    >>> layer, rank = layered_layout(Graph(3, np.array([0, 1]), np.array([1, 2])), [0], [2])
    >>> layer.tolist(), rank.tolist()
    ([0, 1, 2], [0, 0, 0])
    """
    num_nodes = graph.num_nodes
    tail, head = np.asarray(graph.tail, dtype=np.int64), np.asarray(graph.head, dtype=np.int64)
    sinks = [s for s in sinks if s not in set(sources)]
    layer = graph.depth(sources or ([0] if num_nodes else []))
    inner = np.ones(num_nodes, dtype=bool)
    inner[list(sinks)] = False
    reached = (layer >= 0) & inner
    last = int(layer[reached].max()) if reached.any() else 0
    layer[~inner] = last + 1
    stray = layer < 0
    if stray.any():
        layer[stray] = last + 2 if sinks else last + 1
    return layer, _order_layers(layer, tail, head)


def _order_layers(layer: np.ndarray, tail, head) -> np.ndarray:
    rank = np.zeros(layer.size, dtype=np.float64)
    columns = [np.flatnonzero(layer == k) for k in range(int(layer.max()) + 1)] if layer.size else []
    for column in columns:
        rank[column] = np.arange(column.size)
    for _ in range(2):  # barycentre sweeps, left to right
        for k in range(1, len(columns)):
            column = columns[k]
            if column.size < 2:
                continue
            keys = []
            for v in column:
                near = np.concatenate([tail[(head == v) & (layer[tail] == k - 1)],
                                       head[(tail == v) & (layer[head] == k - 1)]])
                keys.append(rank[near].mean() if near.size else rank[v])
            order = column[np.argsort(np.asarray(keys), kind="stable")]
            columns[k] = order
            rank[order] = np.arange(order.size)
    return rank.astype(np.int64)


@dataclass(frozen=True)
class Footprint:
    """What a node covers, relative to its centre: its pill (with any tab) and captions.

    ``pill`` is where arcs attach; ``parts`` are every box (pill, captions) that no
    other arc and no label may enter.
    """

    pill: Box
    parts: tuple[Box, ...]

    @property
    def extent(self) -> Box:
        """The box holding all of the footprint's parts."""
        return union(self.parts)


@dataclass(frozen=True)
class Placement:
    """Node centres and the columns they stand in.

    ``columns[k]`` lists column ``k``'s nodes top to bottom; ``left[k]``/``right[k]`` are
    the x where its footprints end on each side (the channel borders).
    """

    x: np.ndarray
    y: np.ndarray
    layer: np.ndarray
    columns: list
    left: np.ndarray
    right: np.ndarray


def place(layer: np.ndarray, rank: np.ndarray, shapes: list[Footprint], spread: float = 1.0) -> Placement:
    """Centres for every node, column by column.

    Empty layers (a layer whose only nodes were moved to the right-most one) take no room:
    ``Placement.layer`` numbers the columns that hold nodes.

    Parameters
    ----------
    layer, rank : ndarray of int
        Per node, its column and its row in it (:func:`layered_layout`).
    shapes : list of Footprint
        Per node, what it covers.
    spread : float
        Above 1, channels and gaps are wider (more room for labels).

    Returns
    -------
    Placement
    """
    used, layer = np.unique(layer, return_inverse=True)
    layer = layer.reshape(-1)
    count = used.size
    columns = [np.flatnonzero(layer == k) for k in range(count)]
    columns = [column[np.argsort(rank[column], kind="stable")] for column in columns]
    reach_left = np.array([max((-shapes[v].extent.x0 for v in c), default=0.0) for c in columns])
    reach_right = np.array([max((shapes[v].extent.x1 for v in c), default=0.0) for c in columns])
    centres = np.zeros(count)
    for k in range(1, count):
        needed = reach_right[k - 1] + reach_left[k] + MIN_CHANNEL * spread
        centres[k] = centres[k - 1] + max(COL_GAP * spread, needed)
    row = ROW_GAP * spread
    tallest = max((c.size for c in columns), default=1)
    x, y = np.zeros(layer.size), np.zeros(layer.size)
    for k, column in enumerate(columns):
        x[column] = centres[k]
        y[column] = (tallest - column.size) * row / 2 + np.arange(column.size) * row
    return Placement(x, y, layer, columns, centres - reach_left, centres + reach_right)
