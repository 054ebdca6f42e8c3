"""How arcs run: through the channels between columns and the gaps between rows.

No arc crosses a node it does not join. Every arc leaves its tail's pill sideways, at
a port of its own on that side, runs straight to the border of its column's channel,
and from there on only ever is

- in a channel (a cubic curve from one border to the next, which stays within the
  channel because a Bézier curve stays within the hull of its control points), or
- in a gap between two nodes' footprints of an intermediate column, on a lane of its
  own (a straight line across the column),

until it reaches the border of its head's column and runs straight into a port on
the head's pill. Arcs to a later column leave on the right and enter on the left;
arcs to an earlier column the other way round; arcs within one column (and loops)
leave and enter on the right, bulging into the channel there.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .geometry import Point, Segment
from .layout import Footprint, Placement

#: Clearance between a footprint and the border of its channel (more than half the widest stroke).
PAD = 6.0
#: Spacing of arcs sharing a gap, and of ports on one side of a pill.
LANE, PORT_SPACING = 8.0, 7.0
#: Ports stay within this distance of the pill's middle.
PORT_REACH = 10.0
#: Space left between an arrowhead and the pill it points at.
HEAD_GAP = 2.0
#: How far a loop's control points rise above and sink below its ports (for the innermost loop).
LOOP_SWELL = 22.0
#: Curvature of a channel crossing: how far along the crossing its control points sit.
BEND = 0.45


@dataclass(frozen=True)
class Route:
    """An arc's path (lines and cubic curves, in order) and its middle: the point where
    its label and any mark are placed first (the middle of its longest channel crossing)."""

    path: list
    middle: Point


def route_all(tail: np.ndarray, head: np.ndarray, placed: Placement, shapes: list[Footprint],
              spread: float = 1.0) -> list[Route]:
    """How every arc runs between the placed nodes.

    Parameters
    ----------
    tail, head : ndarray of int
        Arc ends.
    placed : Placement
        Node centres and columns (:func:`.layout.place`).
    shapes : list of Footprint
        Per node, what it covers.
    spread : float
        Above 1, loops and brackets are larger (more room for labels).

    Returns
    -------
    list of Route
        One per arc, in arc order.
    """
    tail, head = tail.tolist(), head.tolist()
    layer = placed.layer
    sides = [_sides(int(layer[u]), int(layer[v])) for u, v in zip(tail, head)]
    ports = _ports(tail, head, sides, placed, shapes)
    lanes = _lanes(tail, head, ports, placed, shapes)
    brackets = _bracket_reach(tail, head, placed, spread)
    return [_route(a, tail[a], head[a], ports[a], lanes.get(a, []), brackets.get(a), placed)
            for a in range(len(tail))]


def _sides(lu: int, lv: int) -> tuple[str, str]:
    if lu < lv:
        return "right", "left"
    if lu > lv:
        return "left", "right"
    return "right", "right"


def _ports(tail, head, sides, placed: Placement, shapes) -> list[tuple[Point, Point]]:
    """Where each arc leaves its tail and enters its head: ends sharing a pill side are
    spread along it, ordered by the height of the node at the other end."""
    ends: dict[tuple[int, str], list] = {}
    for a, (u, v) in enumerate(zip(tail, head)):
        out_side, in_side = sides[a]
        # A loop's two ends: the tail above the head, the first loop innermost (as in _bracket_reach).
        loop = 0.5 + 1e-3 * a if u == v else 0.0
        ends.setdefault((u, out_side), []).append((placed.y[v] - loop, a, 0))
        ends.setdefault((v, in_side), []).append((placed.y[u] + loop, a, 1))
    where: list[list] = [[None, None] for _ in tail]
    for (node, side), members in ends.items():
        members.sort()
        n = len(members)
        spacing = PORT_SPACING if n < 2 else min(PORT_SPACING, 2 * PORT_REACH / (n - 1))
        pill = shapes[node].pill
        for i, (_, a, end) in enumerate(members):
            gap = HEAD_GAP if end == 1 else 0.0
            x = placed.x[node] + (pill.x1 + gap if side == "right" else pill.x0 - gap)
            where[a][end] = (float(x), float(placed.y[node] + (i - (n - 1) / 2) * spacing))
    return [tuple(w) for w in where]


def _gaps(column, placed: Placement, shapes) -> list[tuple[float, float]]:
    """The free heights of a column, top to bottom, between its footprints (with PAD)."""
    edges = [-np.inf]
    for v in column:
        extent = shapes[v].extent
        edges += [placed.y[v] + extent.y0 - PAD, placed.y[v] + extent.y1 + PAD]
    edges.append(np.inf)
    return [(float(edges[i]), float(edges[i + 1])) for i in range(0, len(edges), 2)]


def _lanes(tail, head, ports, placed: Placement, shapes) -> dict[int, list[float]]:
    """Per arc, the height at which it crosses each intermediate column, in order.

    Each crossing takes the gap nearest to the straight line between the arc's ports;
    arcs in one gap get lanes at least :data:`LANE` apart where the gap allows,
    in the order of their straight lines' heights (so they do not cross there).
    """
    gaps = [_gaps(column, placed, shapes) for column in placed.columns]
    claims: dict[tuple[int, int], list] = {}
    for a, (u, v) in enumerate(zip(tail, head)):
        lu, lv = int(placed.layer[u]), int(placed.layer[v])
        step = 1 if lv > lu else -1
        (x0, y0), (x1, y1) = ports[a]
        for order, k in enumerate(range(lu + step, lv, step)):
            xk = placed.x[placed.columns[k][0]]
            ideal = y0 + (y1 - y0) * (xk - x0) / (x1 - x0)
            g = min(range(len(gaps[k])), key=lambda i: _distance(ideal, gaps[k][i]))
            claims.setdefault((k, g), []).append((ideal, a, order))
    lanes: dict[int, dict[int, float]] = {}
    for (k, g), members in claims.items():
        members.sort()
        heights = _pack([m[0] for m in members], *gaps[k][g])
        for (_, a, order), h in zip(members, heights):
            lanes.setdefault(a, {})[order] = h
    return {a: [by_order[i] for i in range(len(by_order))] for a, by_order in lanes.items()}


def _distance(y: float, gap: tuple[float, float]) -> float:
    return max(gap[0] - y, 0.0, y - gap[1])


def _pack(ideal: list[float], lo: float, hi: float) -> list[float]:
    """Heights within ``(lo, hi)`` as close to ``ideal`` (sorted) as a common spacing allows."""
    n = len(ideal)
    spacing = LANE if n * LANE <= hi - lo else (hi - lo) / n
    lo, hi = lo + spacing / 2, hi - spacing / 2
    out: list[float] = []
    for i, y in enumerate(ideal):
        y = min(max(y, lo + i * spacing), hi - (n - 1 - i) * spacing)
        out.append(max(y, out[-1] + spacing) if out else y)
    return out


def _bracket_reach(tail, head, placed: Placement, spread: float) -> dict[int, float]:
    """How far each arc within one column bulges into the channel on its right:
    the shortest innermost, so that nested ones do not cross."""
    by_column: dict[int, list] = {}
    for a, (u, v) in enumerate(zip(tail, head)):
        if placed.layer[u] == placed.layer[v]:
            by_column.setdefault(int(placed.layer[u]), []).append((abs(placed.y[u] - placed.y[v]), a))
    reach = {}
    for k, members in by_column.items():
        room = placed.left[k + 1] - placed.right[k] - 2 * PAD if k + 1 < len(placed.columns) else np.inf
        for i, (_, a) in enumerate(sorted(members)):
            reach[a] = float(min((30.0 + 14.0 * i) * spread, room / 0.75))
    return reach


def _route(a, u, v, ports, lanes, bracket, placed: Placement) -> Route:
    (px, py), (qx, qy) = ports
    lu, lv = int(placed.layer[u]), int(placed.layer[v])
    if bracket is not None:
        border = float(placed.right[lu] + PAD)
        # A loop also swells up and down, as a drop; it stays in the channel all the same.
        swell = LOOP_SWELL * bracket / 30.0 if u == v else 0.0
        c = ((border, py), (border + bracket, py - swell), (border + bracket, qy + swell), (border, qy))
        path = _line((px, py), (border, py)) + [c] + _line((border, qy), (qx, qy))
        return Route(path, _bezier_middle(c))
    step = 1 if lv > lu else -1
    near, far = (placed.left, placed.right) if step > 0 else (placed.right, placed.left)
    pad = PAD * step
    here = (float(far[lu] + pad), py)
    path: list[Segment] = _line((px, py), here)
    crossings = []
    for k, lane in zip(range(lu + step, lv, step), lanes):
        entry, leave = (float(near[k] - pad), lane), (float(far[k] + pad), lane)
        crossings.append(_crossing(here, entry))
        path += [crossings[-1], (entry, leave)]
        here = leave
    entry = (float(near[lv] - pad), qy)
    crossings.append(_crossing(here, entry))
    path += [crossings[-1]] + _line(entry, (qx, qy))
    longest = max(crossings, key=lambda c: abs(c[3][0] - c[0][0]) + abs(c[3][1] - c[0][1]))
    return Route(path, _bezier_middle(longest))


def _line(p: Point, q: Point) -> list[Segment]:
    return [(p, q)] if abs(p[0] - q[0]) + abs(p[1] - q[1]) > 0.05 else []


def _crossing(p: Point, q: Point) -> Segment:
    d = (q[0] - p[0]) * BEND
    return (p, (p[0] + d, p[1]), (q[0] - d, q[1]), q)


def _bezier_middle(c: Segment) -> Point:
    (x0, y0), (x1, y1), (x2, y2), (x3, y3) = c
    return (0.125 * x0 + 0.375 * (x1 + x2) + 0.125 * x3, 0.125 * y0 + 0.375 * (y1 + y2) + 0.125 * y3)
