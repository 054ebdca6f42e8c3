"""Boxes and paths: the shapes a diagram is laid out with, and how to test them.

A path is a list of segments, each a line (two points) or a cubic Bézier curve (four
points); the SVG writer draws exactly these (``M``, ``L``, ``C``), so what the layout
checks is what the reader sees.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Box:
    """An axis-aligned rectangle, ``x0 <= x1`` and ``y0 <= y1`` (SVG user units)."""

    x0: float
    y0: float
    x1: float
    y1: float

    @classmethod
    def around(cls, x: float, y: float, width: float, height: float) -> Box:
        """The box of the given size centred on ``(x, y)``.

        Parameters
        ----------
        x, y : float
            The centre.
        width, height : float
            The size (not negative).

        Returns
        -------
        Box
        """
        return cls(x - width / 2, y - height / 2, x + width / 2, y + height / 2)

    def grown(self, by: float) -> Box:
        """The box with ``by`` added on every side.

        Parameters
        ----------
        by : float
            Margin (negative shrinks it).

        Returns
        -------
        Box
        """
        return Box(self.x0 - by, self.y0 - by, self.x1 + by, self.y1 + by)

    def shifted(self, dx: float, dy: float) -> Box:
        """The box moved by ``(dx, dy)``.

        Parameters
        ----------
        dx, dy : float

        Returns
        -------
        Box
        """
        return Box(self.x0 + dx, self.y0 + dy, self.x1 + dx, self.y1 + dy)



def union(boxes) -> Box:
    """The smallest box holding all of ``boxes``.

    Parameters
    ----------
    boxes : iterable of Box
        At least one.

    Returns
    -------
    Box
    """
    boxes = list(boxes)
    return Box(min(b.x0 for b in boxes), min(b.y0 for b in boxes),
               max(b.x1 for b in boxes), max(b.y1 for b in boxes))


Point = tuple[float, float]
#: A line ``(p0, p1)`` or a cubic Bézier curve ``(p0, c1, c2, p1)``.
Segment = tuple[Point, ...]


def sample(path: list[Segment], step: float = 2.0) -> np.ndarray:
    """Points along a path, about ``step`` apart, ends included.

    Parameters
    ----------
    path : list of Segment
        Lines and cubic curves, in order.
    step : float
        The largest distance between two points, about (each segment is cut into
        pieces by a bound on its length).

    Returns
    -------
    ndarray of float, shape (n, 2)
        Empty for an empty path.
    """
    if not path:
        return np.zeros((0, 2))
    # Every segment as a cubic (a line is the cubic with its control points at thirds).
    ctrl = np.array([seg if len(seg) == 4 else (seg[0], _third(seg, 1), _third(seg, 2), seg[1]) for seg in path],
                    dtype=np.float64)
    reach = np.hypot(*np.diff(ctrl, axis=1).transpose(2, 0, 1)).sum(axis=1)  # bounds each segment's length
    counts = (reach / step).astype(np.int64) + 2
    which = np.repeat(np.arange(len(path)), counts)
    first = np.concatenate([[0], np.cumsum(counts)[:-1]])
    t = ((np.arange(which.size) - first[which]) / (counts[which] - 1))[:, None]
    c = ctrl[which]
    s = 1 - t
    return s ** 3 * c[:, 0] + 3 * s * s * t * c[:, 1] + 3 * s * t * t * c[:, 2] + t ** 3 * c[:, 3]


def _third(line: Segment, k: int) -> Point:
    (x0, y0), (x1, y1) = line
    return (x0 + (x1 - x0) * k / 3, y0 + (y1 - y0) * k / 3)


def arc_lengths(points: np.ndarray) -> np.ndarray:
    """Distance along a sampled path from its first point to each point.

    Parameters
    ----------
    points : ndarray, shape (n, 2)
        A path's points in order (:func:`sample`).

    Returns
    -------
    ndarray of float, shape (n,)
        0 at the first point, then the running sum of straight steps.
    """
    if len(points) == 0:
        return np.zeros(0)
    return np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(points, axis=0).T))])


def bounds(points: np.ndarray) -> Box:
    """The box of a set of points.

    Parameters
    ----------
    points : ndarray, shape (n, 2)
        At least one point.

    Returns
    -------
    Box
    """
    return Box(float(points[:, 0].min()), float(points[:, 1].min()),
               float(points[:, 0].max()), float(points[:, 1].max()))
