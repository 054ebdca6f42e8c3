"""Arc labels placed along their arcs, greedily, so that no two texts meet.

Each label tries spots along its own arc: sitting on the arc (its halo interrupts
the stroke), just above, below, right or left of it, at steps along the arc's length. A spot is
allowed only if the label's box meets no box already taken (node pills and captions,
marks, titles, labels placed before); among the allowed spots it takes the one
nearest the arc's middle, preferring spots that cover no other arc. Labels of short
arcs go first: they have the fewest spots. When some label finds no spot at all the
caller lays the diagram out again with more room (see :func:`.scene.draw`).
"""

from __future__ import annotations

import numpy as np

from .geometry import Box, arc_lengths

#: Spots are tried this far apart along an arc, and never this close to its ends.
STEP, END_CLEARANCE = 4.0, 16.0
#: Size of the cells in which arcs' strokes are counted.
CELL = 4.0
#: Cost of a spot, in px along the arc: covering another arc, sitting on the arc, below
#: it, beside it (right or left: for arcs that run up or down).
COVERS_ARC, ON_ARC, BELOW, BESIDE = 60.0, 40.0, 5.0, 10.0


class Placer:
    """Keeps the boxes already taken and the strokes of every arc.

    Parameters
    ----------
    taken : list of Box
        Boxes no label may meet.
    strokes : list of ndarray
        Per arc, points along its path (``(n, 2)``), to count the arcs a spot covers.
    """

    def __init__(self, taken: list[Box], strokes: list[np.ndarray]):
        self.boxes = np.array([(b.x0, b.y0, b.x1, b.y1) for b in taken], dtype=np.float64).reshape(-1, 4)
        everything = np.concatenate([p for p in strokes if len(p)] or [np.zeros((0, 2))])
        self.origin = everything.min(axis=0) - 2 * CELL if len(everything) else np.zeros(2)
        self.cells = [np.unique(self._cell(p), axis=0) for p in strokes]
        shape = tuple(int(v) + 2 for v in np.max([c.max(axis=0) for c in self.cells if len(c)] or [[0, 0]], axis=0))
        grid = np.zeros(shape, dtype=np.int64)
        for c in self.cells:
            np.add.at(grid, (c[:, 0], c[:, 1]), 1)
        self.shape = shape
        self.table = np.zeros((shape[0] + 1, shape[1] + 1), dtype=np.int64)  # summed-area table
        self.table[1:, 1:] = grid.cumsum(0).cumsum(1)

    def _cell(self, points: np.ndarray) -> np.ndarray:
        return np.floor((points - self.origin) / CELL).astype(np.int64).reshape(-1, 2)

    def take(self, box: Box) -> None:
        """Mark a box as taken: no later label may meet it.

        Parameters
        ----------
        box : Box
        """
        self.boxes = np.vstack([self.boxes, (box.x0, box.y0, box.x1, box.y1)])

    def _meets(self, cand: np.ndarray) -> np.ndarray:
        # Only the taken boxes near the candidates can meet one: filter them first.
        b = self.boxes
        near = ((b[:, 0] < cand[:, 2].max()) & (cand[:, 0].min() < b[:, 2])
                & (b[:, 1] < cand[:, 3].max()) & (cand[:, 1].min() < b[:, 3]))
        b = b[near]
        if not len(b):
            return np.zeros(len(cand), dtype=bool)
        hit = ((cand[:, None, 0] < b[None, :, 2]) & (b[None, :, 0] < cand[:, None, 2])
               & (cand[:, None, 1] < b[None, :, 3]) & (b[None, :, 1] < cand[:, None, 3]))
        return hit.any(axis=1)

    def _covered(self, arc: int, cand: np.ndarray) -> np.ndarray:
        """Per candidate box, how many (arc, cell) pairs of other arcs it covers."""
        limit = np.array(self.shape)
        lo = np.clip(np.floor((cand[:, :2] - self.origin) / CELL).astype(np.int64), 0, limit)
        hi = np.clip(np.floor((cand[:, 2:] - self.origin) / CELL).astype(np.int64) + 1, 0, limit)
        return _window_sums(self.table, lo, hi) - _own_sums(self.cells[arc], lo, hi)

    def place(self, arc: int, width: float, height: float, points: np.ndarray, middle, clearance: float) -> Box | None:
        """The best free spot along an arc for a label, taken.

        Parameters
        ----------
        arc : int
            The arc labelled (its own strokes do not count against a spot).
        width, height : float
            The label's size.
        points : ndarray, shape (n, 2)
            Points along the arc (:func:`.geometry.sample`).
        middle : point
            The preferred point.
        clearance : float
            The space between the arc's centre line and a label beside it (half the
            stroke and a little more).

        Returns
        -------
        Box or None
            The spot, now taken; ``None`` when no spot is free.
        """
        side, up = width / 2 + clearance, height / 2 + clearance
        # On the arc, above, below, right of and left of each point.
        shifts = np.array([(0.0, 0.0), (0.0, -up), (0.0, up), (side, 0.0), (-side, 0.0)])
        return self._best(arc, width, height, points, middle, shifts, np.array([ON_ARC, 0.0, BELOW, BESIDE, BESIDE]))

    def place_mark(self, arc: int, width: float, height: float, points: np.ndarray, middle) -> Box | None:
        """Like :meth:`place`, for a mark drawn across the arc (centred on it).

        Parameters
        ----------
        arc : int
        width, height : float
        points : ndarray, shape (n, 2)
        middle : point
            As for :meth:`place`.

        Returns
        -------
        Box or None
            The spot, now taken; ``None`` when no spot is free.
        """
        return self._best(arc, width, height, points, middle, np.zeros((1, 2)), np.zeros(1))

    def _best(self, arc, width, height, points, middle, shifts: np.ndarray, extra: np.ndarray) -> Box | None:
        length = arc_lengths(points)
        if len(points) < 2 or length[-1] <= 0:
            return None
        want = length[int(np.argmin(np.hypot(*(points - np.asarray(middle)).T)))]
        low, high = min(END_CLEARANCE, length[-1] / 3), max(length[-1] - END_CLEARANCE, 2 * length[-1] / 3)
        at = np.arange(low, high + 1e-9, STEP)
        xs, ys = np.interp(at, length, points[:, 0]), np.interp(at, length, points[:, 1])
        cx = (xs[:, None] + shifts[None, :, 0]).ravel()
        cy = (ys[:, None] + shifts[None, :, 1]).ravel()
        cand = np.stack([cx - width / 2, cy - height / 2, cx + width / 2, cy + height / 2], axis=1)
        cost = np.repeat(np.abs(at - want), len(shifts)) + np.tile(extra, at.size)
        cost = cost + COVERS_ARC * (self._covered(arc, cand) > 0)
        cost[self._meets(cand)] = np.inf
        best = int(np.argmin(cost)) if cost.size else 0
        if not cost.size or not np.isfinite(cost[best]):
            return None
        box = Box(*cand[best])
        self.take(box)
        return box


def _window_sums(table: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Sums over the cell windows ``[lo, hi)`` of a grid, from its summed-area table."""
    return table[hi[:, 0], hi[:, 1]] - table[lo[:, 0], hi[:, 1]] - table[hi[:, 0], lo[:, 1]] + table[lo[:, 0], lo[:, 1]]


def _own_sums(cells: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """How many of ``cells`` (one arc's) lie in each window: a small summed-area table
    over just the windows' span."""
    if not len(cells):
        return np.zeros(len(lo), dtype=np.int64)
    start = np.minimum(lo.min(axis=0), cells.min(axis=0))
    stop = np.maximum(hi.max(axis=0), cells.max(axis=0) + 1)
    grid = np.zeros(tuple(stop - start), dtype=np.int64)
    np.add.at(grid, (cells[:, 0] - start[0], cells[:, 1] - start[1]), 1)
    table = np.zeros((grid.shape[0] + 1, grid.shape[1] + 1), dtype=np.int64)
    table[1:, 1:] = grid.cumsum(0).cumsum(1)
    return _window_sums(table, lo - start, hi - start)
