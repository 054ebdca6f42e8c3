"""An SVG picture of a solved network: flows, the minimum cut or binding arcs, potentials.

:func:`render_diagram` draws from two documents only, the problem's request body and
the solve response, so it serves a fresh solve (``POST /v1/diagram.svg``) and a cached
one alike (:func:`solution_diagram`, for ``GET /v1/solutions/{digest}/diagram.svg``).

Layout: layered, left to right. Layer 0 holds the source (max-flow) or the supply
nodes (min-cost flow); every other node sits one layer right of its nearest
predecessor by breadth-first search along the arcs; the sink takes a layer of its own
at the right edge; nodes the search does not reach go to a last column. Within a
layer, nodes are ordered by the mean position of their neighbours in the layer before
(two sweeps), which keeps most arcs from crossing.

Marks (also as CSS classes, so a page or a test can find them): ``cut-arc`` for an arc
of the minimum cut, ``binding-arc`` for a min-cost arc at its capacity, ``proof-arc``
for an arc of an unbounded path or of an infeasibility proof, ``flow-arc`` and
``idle-arc`` for the rest; nodes are ``source-side`` or ``sink-side`` when a cut is
known, and a ``potential`` label shows each node's potential when the answer has them.

Diagrams are for small networks: above ``SLUICE_MAX_DIAGRAM_NODES`` nodes or
``SLUICE_MAX_DIAGRAM_ARCS`` arcs the answer is a 413 problem.
"""

from __future__ import annotations

import re
from time import perf_counter
from xml.sax import saxutils

import numpy as np
import orjson
from flask import Blueprint, Response, current_app
from marshmallow import RAISE, Schema, fields

from ..errors import FieldError, InputError, ProblemTooLarge
from ..kinds import KINDS
from ..kinds.nested import under
from ..model.arcs import Network, build_network, read_arcs
from ..model.columns import number_column
from ..model.nodes import read_nodes
from ..model.schemas import load_envelope
from .bounded import bounded_solve
from .jsonio import read_json_body

bp = Blueprint("diagram", __name__, url_prefix="/v1")

SVG_MEDIA_TYPE = "image/svg+xml"
#: Kinds that can be drawn: their requests carry ``arcs`` (and ``nodes``).
DIAGRAM_KINDS = ("maxflow", "mincostflow")

# An original palette: paper background, pine for the source side, clay for the sink
# side, ink-blue flow, ember for the cut, plum for binding arcs.
PAPER, GRID, INK, MUTED = "#fbfaf6", "#ece8de", "#23313f", "#8a8f98"
PINE_FILL, PINE = "#dcefe7", "#1f6f55"
CLAY_FILL, CLAY = "#f6e7d6", "#9c5a1f"
PLAIN_FILL, PLAIN = "#eef1f6", "#4a5a70"
FLOW, IDLE, EMBER, PLUM, PROOF = "#35598f", "#c5c8cc", "#d1451b", "#7b3fa0", "#b8860b"

COL_GAP, ROW_GAP, MARGIN, TOP = 230, 96, 40, 64
PILL_H, CHAR_W = 28, 6.9
MAX_LABEL = 22


class DiagramRequest(Schema):
    class Meta:
        unknown = RAISE

    kind = fields.String(required=True, metadata={"description": "maxflow or mincostflow."})
    problem = fields.Dict(required=True, metadata={"description": "The request body of POST /v1/{kind}."})


# --- layout ------------------------------------------------------------------------


def bfs_layers(num_nodes: int, tail: np.ndarray, head: np.ndarray, starts) -> np.ndarray:
    """Breadth-first distance (in arcs) from any of ``starts``; -1 where unreached."""
    layer = np.full(num_nodes, -1, dtype=np.int64)
    frontier = np.unique(np.asarray(list(starts), dtype=np.int64))
    depth = 0
    while frontier.size:
        layer[frontier] = depth
        nxt = head[np.isin(tail, frontier)]
        frontier = np.unique(nxt[layer[nxt] < 0])
        depth += 1
    return layer


def layered_layout(num_nodes: int, tail, head, sources, sinks) -> tuple[np.ndarray, np.ndarray]:
    """Layer (column) and rank (row within the column) of every node.

    Parameters
    ----------
    sources, sinks : sequence of int
        Nodes for the left edge and for a right-most column of their own.

    Returns
    -------
    (layer, rank) : ndarray of int
    """
    sinks = [s for s in sinks if s not in set(sources)]
    layer = bfs_layers(num_nodes, tail, head, sources or ([0] if num_nodes else []))
    inner = np.ones(num_nodes, dtype=bool)
    inner[list(sinks)] = False
    reached = (layer >= 0) & inner
    last = int(layer[reached].max()) if reached.any() else 0
    layer[~inner] = last + 1
    stray = (layer < 0)
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


# --- reading the two documents -----------------------------------------------------


def read_network(body: dict, max_nodes: int, max_arcs: int) -> tuple[Network, np.ndarray]:
    """The drawn network and the supply per node, with the diagram size limits.

    Raises
    ------
    ProblemTooLarge
        More nodes or arcs than a diagram is drawn for.
    """
    if not isinstance(body, dict) or "arcs" not in body:
        raise InputError.at("/arcs", "is required")
    raw = read_arcs(body["arcs"])
    if raw.count > max_arcs:
        raise ProblemTooLarge(FieldError("/arcs", f"has {raw.count} arcs; diagrams are drawn for at most "
                                                  f"{max_arcs} (SLUICE_MAX_DIAGRAM_ARCS)"))
    nodes = read_nodes(body.get("nodes"), extra_fields=("supply",))
    network = build_network(raw, nodes.ids, allow_lower=True)
    if network.num_nodes > max_nodes:
        raise ProblemTooLarge(FieldError("/nodes", f"has {network.num_nodes} nodes; diagrams are drawn for at "
                                                   f"most {max_nodes} (SLUICE_MAX_DIAGRAM_NODES)"))
    supply = np.zeros(network.num_nodes, dtype=np.float64)
    column = nodes.fields.get("supply")
    if column is not None:
        values = number_column(column.values, column.where).values
        supply[: values.size] = values
    return network, supply


def _index(network: Network, node_id):
    return network.nodes.index_of(node_id)


def _fmt(x) -> str:
    if x is None:
        return "∞"
    x = float(x)
    if x.is_integer():
        return f"{int(x):,}".replace(",", " ") if abs(x) >= 10_000 else str(int(x))
    return f"{x:.4g}"


#: What XML 1.0 cannot hold even as a character reference: the C0 controls but tab, LF
#: and CR (U+0000 above all), U+FFFE and U+FFFF. Node ids and arc keys are any JSON
#: string, so they may hold these.
_NOT_XML = re.compile("[^\t\n\r\u0020-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")


def _xml_safe(text: str) -> str:
    """``text`` with the characters XML cannot hold written as ``\\uXXXX`` (visible, as in JSON)."""
    return _NOT_XML.sub(lambda m: f"\\u{ord(m.group()):04x}", text)


def escape(text: str) -> str:
    """Text content for the SVG: XML-escaped, control characters written out."""
    return saxutils.escape(_xml_safe(text))


def quoteattr(text: str) -> str:
    """A quoted attribute value for the SVG (tab, LF and CR as character references)."""
    return saxutils.quoteattr(_xml_safe(text), {"\t": "&#9;", "\n": "&#10;", "\r": "&#13;"})


def _short(label: str) -> str:
    return label if len(label) <= MAX_LABEL else label[: MAX_LABEL - 1] + "…"


# --- drawing ---------------------------------------------------------------------


class _Canvas:
    def __init__(self):
        self.parts: list[str] = []

    def add(self, text: str) -> None:
        self.parts.append(text)


def _defs() -> str:
    markers = []
    for name, colour in (("flow", FLOW), ("idle", IDLE), ("cut", EMBER), ("binding", PLUM), ("proof", PROOF)):
        markers.append(
            f'<marker id="tip-{name}" viewBox="0 0 10 10" refX="9" refY="5" markerWidth="11" markerHeight="11" '
            f'markerUnits="userSpaceOnUse" orient="auto-start-reverse"><path d="M0,1 L10,5 L0,9 L3,5 Z" fill="{colour}"/></marker>')
    style = (f"text{{font-family:'DejaVu Sans',Verdana,sans-serif;fill:{INK}}}"
             ".arc-label{font-size:10.5px;paint-order:stroke;stroke:#fbfaf6;stroke-width:3px}"
             ".node-label{font-size:11.5px;font-weight:600}"
             f".potential{{font-size:10px;fill:{PLUM}}}"
             f".role{{font-size:9px;letter-spacing:1px;fill:{MUTED}}}"
             ".title{font-size:15px;font-weight:700}.subtitle{font-size:11.5px}"
             ".legend{font-size:10.5px}")
    return f"<defs>{''.join(markers)}<style>{style}</style></defs>"


def render_diagram(kind: str, body: dict, result: dict, *, max_nodes: int = 60, max_arcs: int = 200) -> str:
    """Draw a solved network as an SVG document, from its request body and response.

    Parameters
    ----------
    kind : {"maxflow", "mincostflow"}
    body : dict
        The problem's request body (as sent to ``POST /v1/{kind}``).
    result : dict
        The solve response for that body.
    max_nodes, max_arcs : int
        Size limits of a drawing.

    Returns
    -------
    str
        A standalone SVG document (``image/svg+xml``).

    Raises
    ------
    ProblemTooLarge
        Above the size limits.
    """
    network, supply = read_network(body, max_nodes, max_arcs)
    source = _index(network, body.get("source")) if kind == "maxflow" else None
    sink = _index(network, body.get("sink")) if kind == "maxflow" else None
    return draw_network(kind, network, result, supply=supply, source=source, sink=sink)


def draw_network(kind: str, network: Network, result: dict, *, supply=None, source: int | None = None,
                 sink: int | None = None) -> str:
    """Draw a solved, already normalised network (e.g. a stored one) as SVG.

    ``source``/``sink`` are node indices (max-flow); ``supply`` is per node
    (min-cost flow). The caller checks the size limits (see :func:`read_network`).
    """
    # Draw from the response as a client sees it (plain JSON values, ids as sent),
    # whether it comes fresh from a solver (numpy arrays) or from the result cache.
    result = orjson.loads(orjson.dumps(result, option=orjson.OPT_SERIALIZE_NUMPY))
    n, m = network.num_nodes, network.num_arcs
    supply = np.zeros(n) if supply is None else np.asarray(supply, dtype=np.float64)
    tail, head = network.tail.astype(np.int64), network.head.astype(np.int64)
    ids = [str(v) for v in network.nodes.ids]
    flows = result.get("flows")
    flows = None if flows is None else np.asarray(flows, dtype=np.float64)
    side = None
    marked: dict[int, str] = {}
    if kind == "maxflow":
        sources = [] if source is None else [source]
        sinks = [] if sink is None else [sink]
        cut = result.get("cut")
        if cut:
            side = np.zeros(n, dtype=bool)
            for v in cut.get("source_side", []):
                k = _index(network, v)
                if k is not None:
                    side[k] = True
            marked.update({int(a): "cut" for a in cut.get("arcs", [])})
        for a in (result.get("unbounded_path") or {}).get("arcs", []):
            marked[int(a)] = "proof"
    else:
        sources = np.flatnonzero(supply > 0).tolist()
        sinks = np.flatnonzero(supply < 0).tolist()
        if flows is not None:
            limited = ~network.unlimited if network.unlimited is not None else np.ones(m, dtype=bool)
            binding = limited & (np.abs(flows - network.capacity) <= 1e-9 * np.maximum(1, network.capacity)) \
                & (network.capacity > 0)
            marked.update({int(a): "binding" for a in np.flatnonzero(binding)})
        for a in (result.get("infeasibility") or {}).get("arcs", []):
            marked[int(a)] = "proof"
    potentials = _potentials(network, result)
    layer, rank = layered_layout(n, tail, head, sources, sinks)
    return _draw(kind, network, ids, supply, tail, head, flows, side, marked, potentials, layer, rank,
                 sources, sinks, result)


def _potentials(network: Network, result: dict):
    values = result.get("potentials")
    if not values:
        return None
    order = result.get("node_ids") or network.nodes.ids
    out = [None] * network.num_nodes
    for node_id, p in zip(order, values):
        k = _index(network, node_id)
        if k is not None:
            out[k] = p
    return out


def _positions(layer, rank, widths):
    columns = int(layer.max()) + 1 if layer.size else 1
    tallest = max((int((layer == k).sum()) for k in range(columns)), default=1)
    xs = MARGIN + 60 + layer * COL_GAP
    ys = np.zeros(layer.size)
    for k in range(columns):
        members = np.flatnonzero(layer == k)
        offset = (tallest - members.size) * ROW_GAP / 2
        ys[members] = TOP + 30 + offset + rank[members] * ROW_GAP
    width = MARGIN * 2 + 120 + (columns - 1) * COL_GAP + max(widths, default=60)
    height = TOP + 30 + (tallest - 1) * ROW_GAP + 110
    return xs.astype(float), ys, width, height


def _arc_path(x1, y1, w1, x2, y2, w2, bend: float, self_loop: bool):
    if self_loop:
        sx, sy = x1 + w1 / 2 - 6, y1 - PILL_H / 2
        return (f"M{sx:.1f},{sy:.1f} C{sx + 40:.1f},{sy - 46 - bend:.1f} {sx - 40:.1f},{sy - 46 - bend:.1f} "
                f"{sx - 14:.1f},{sy:.1f}", sx, sy - 40 - bend)
    if x2 > x1:
        sx, sy, ex, ey = x1 + w1 / 2, y1, x2 - w2 / 2 - 2, y2
    elif x2 < x1:
        sx, sy, ex, ey = x1 - w1 / 2, y1, x2 + w2 / 2 + 2, y2
    else:  # same column: from the bottom of one pill to the top of the other (or back up)
        down = 1 if y2 > y1 else -1
        shift = (10 + abs(bend)) * down
        sx, sy = x1 + shift, y1 + down * PILL_H / 2
        ex, ey = x2 + shift, y2 - down * (PILL_H / 2 + 2)
        reach = (24 + abs(bend)) * down
        path = (f"M{sx:.1f},{sy:.1f} C{sx + reach:.1f},{sy + 18 * down:.1f} {ex + reach:.1f},{ey - 18 * down:.1f} "
                f"{ex:.1f},{ey:.1f}")
        return path, (sx + ex) / 2 + reach * 0.75 + 18 * down, (sy + ey) / 2 + 4
    dx = (ex - sx) * 0.45
    if x2 < x1:  # backward: swing above or below
        dx = -(sx - ex) * 0.45
        bend += 60
    c1 = (sx + dx, sy + bend)
    c2 = (ex - dx, ey + bend)
    path = f"M{sx:.1f},{sy:.1f} C{c1[0]:.1f},{c1[1]:.1f} {c2[0]:.1f},{c2[1]:.1f} {ex:.1f},{ey:.1f}"
    mx = 0.125 * sx + 0.375 * c1[0] + 0.375 * c2[0] + 0.125 * ex
    my = 0.125 * sy + 0.375 * c1[1] + 0.375 * c2[1] + 0.125 * ey
    return path, mx, my


def _draw(kind, network, ids, supply, tail, head, flows, side, marked, potentials, layer, rank, sources, sinks,
          result) -> str:
    n, m = network.num_nodes, network.num_arcs
    widths = [max(46.0, CHAR_W * len(_short(v)) + 22) for v in ids]
    xs, ys, width, height = _positions(layer, rank, widths)
    canvas = _Canvas()
    canvas.add(f'<svg xmlns="http://www.w3.org/2000/svg" width="{width:.0f}" height="{height:.0f}" '
               f'viewBox="0 0 {width:.0f} {height:.0f}" role="img" class="sluice-diagram" '
               f'data-kind="{kind}" data-nodes="{n}" data-arcs="{m}">')
    canvas.add(_defs())
    canvas.add(f'<rect width="100%" height="100%" fill="{PAPER}"/>')
    for k in range(int(layer.max()) + 1 if n else 0):
        x = MARGIN + 60 + k * COL_GAP
        canvas.add(f'<line x1="{x}" y1="{TOP + 4}" x2="{x}" y2="{height - 64}" stroke="{GRID}" '
                   f'stroke-dasharray="2 6"/>')
    canvas.add(_title(kind, result, marked))
    top_flow = float(np.nanmax(np.abs(flows))) if flows is not None and flows.size else 0.0
    seen: dict[tuple, int] = {}
    labels = []
    for a in range(m):
        u, v = int(tail[a]), int(head[a])
        pair = (min(u, v), max(u, v))
        nth = seen.get(pair, 0)
        seen[pair] = nth + 1
        bend = (nth // 2 + 1) * 26 * (1 if nth % 2 else -1) if nth else 0.0
        path, lx, ly = _arc_path(xs[u], ys[u], widths[u], xs[v], ys[v], widths[v], bend, u == v)
        flow = None if flows is None else flows[a]
        mark = marked.get(a)
        css, colour, tip = _arc_style(mark, flow)
        thick = 1.4 if not flow or top_flow == 0 else 1.8 + 5.2 * abs(flow) / top_flow
        if mark:
            thick = max(thick, 3.2)
        dash = ' stroke-dasharray="5 4"' if css == "idle-arc" else ""
        key = network.keys[a] if network.keys is not None else None
        title = f"arc {a}{f' ({key})' if key else ''}: {ids[u]} → {ids[v]}"
        canvas.add(f'<g class="arc {css}" data-arc="{a}"><title>{escape(title)}</title>'
                   f'<path d="{path}" fill="none" stroke="{colour}" stroke-width="{thick:.2f}" '
                   f'stroke-linecap="round"{dash} marker-end="url(#tip-{tip})"/>'
                   f'{_notch(lx, ly, colour) if mark in ("cut", "binding") else ""}</g>')
        labels.append(_arc_label(network, a, flow, lx, ly, kind))
    canvas.add(f'<g class="arc-labels">{"".join(labels)}</g>')
    for v in range(n):
        canvas.add(_node(v, ids[v], xs[v], ys[v], widths[v], side, potentials, supply, kind, sources, sinks))
    canvas.add(_legend(kind, height, marked, potentials is not None, side is not None))
    canvas.add("</svg>")
    return "".join(canvas.parts)


def _arc_style(mark, flow):
    if mark == "cut":
        return "cut-arc", EMBER, "cut"
    if mark == "binding":
        return "binding-arc", PLUM, "binding"
    if mark == "proof":
        return "proof-arc", PROOF, "proof"
    if flow:
        return "flow-arc", FLOW, "flow"
    return "idle-arc", IDLE, "idle"


def _notch(x, y, colour) -> str:
    """Two short slashes across the arc: the mark of a cut or binding arc."""
    return "".join(f'<line x1="{x + d - 5:.1f}" y1="{y + 13:.1f}" x2="{x + d + 5:.1f}" y2="{y - 3:.1f}" '
                   f'stroke="{colour}" stroke-width="2.4" stroke-linecap="round" class="notch"/>'
                   for d in (-4, 4))


def _arc_label(network: Network, a: int, flow, x, y, kind) -> str:
    cap = None if network.unlimited is not None and network.unlimited[a] else network.capacity[a]
    text = f"{_fmt(flow) if flow is not None else '?'}/{_fmt(cap)}"
    if kind == "mincostflow" and network.cost is not None:
        text += f" @{_fmt(network.cost[a])}"
    return f'<text class="arc-label" x="{x:.1f}" y="{y - 6:.1f}" text-anchor="middle">{escape(text)}</text>'


def _node(v, label, x, y, w, side, potentials, supply, kind, sources, sinks) -> str:
    if side is not None:
        css, fill, stroke = ("source-side", PINE_FILL, PINE) if side[v] else ("sink-side", CLAY_FILL, CLAY)
    else:
        css, fill, stroke = "plain", PLAIN_FILL, PLAIN
    role = ""
    if kind == "maxflow" and v in sources:
        role = "SOURCE"
    elif kind == "maxflow" and v in sinks:
        role = "SINK"
    elif kind == "mincostflow" and supply[v]:
        role = f"{'SUPPLY' if supply[v] > 0 else 'DEMAND'} {_fmt(abs(supply[v]))}"
    weight = 3 if role else 1.6
    parts = [f'<g class="node {css}" data-node={quoteattr(label)}><title>{escape(label)}</title>',
             f'<rect x="{x - w / 2:.1f}" y="{y - PILL_H / 2:.1f}" width="{w:.1f}" height="{PILL_H}" '
             f'rx="{PILL_H / 2}" fill="{fill}" stroke="{stroke}" stroke-width="{weight}"/>']
    if role:
        # Terminals get a notched tab on their outer side: an original mark, not an icon.
        tab = x - w / 2 - 7 if role in ("SOURCE",) or role.startswith("SUPPLY") else x + w / 2 + 1
        parts.append(f'<rect x="{tab:.1f}" y="{y - 8:.1f}" width="6" height="16" rx="2" fill="{stroke}"/>')
        parts.append(f'<text class="role" x="{x:.1f}" y="{y - PILL_H / 2 - 5:.1f}" '
                     f'text-anchor="middle">{escape(role)}</text>')
    parts.append(f'<text class="node-label" x="{x:.1f}" y="{y + 4:.1f}" text-anchor="middle">'
                 f'{escape(_short(label))}</text>')
    if potentials is not None and potentials[v] is not None:
        parts.append(f'<text class="potential" x="{x:.1f}" y="{y + PILL_H / 2 + 13:.1f}" '
                     f'text-anchor="middle">π = {escape(_fmt(potentials[v]))}</text>')
    parts.append("</g>")
    return "".join(parts)


def _title(kind, result, marked) -> str:
    status = result.get("status", "")
    if kind == "maxflow":
        head = f"Max flow {_fmt(result.get('value'))}" if status == "optimal" else f"Max flow: {status}"
        cut = result.get("cut")
        sub = (f"minimum cut: {len(cut.get('arcs', []))} arcs, capacity {_fmt(cut.get('capacity'))}"
               if cut else "")
        if status == "unbounded":
            sub = "a path of arcs without limits joins the source to the sink"
    else:
        head = f"Min-cost flow: cost {_fmt(result.get('cost'))}" if status == "optimal" else f"Min-cost flow: {status}"
        binding = sum(1 for v in marked.values() if v == "binding")
        sub = f"{binding} arcs at capacity" if status == "optimal" else ""
    return (f'<text class="title" x="{MARGIN}" y="{MARGIN - 6}">{escape(head)}</text>'
            f'<text class="subtitle" x="{MARGIN}" y="{MARGIN + 12}" fill="{MUTED}">{escape(sub)}</text>')


def _legend(kind, height, marked, has_potentials, has_side) -> str:
    y = height - 30
    items = [(FLOW, "flow (width ∝ amount)", ""), (IDLE, "no flow", ' stroke-dasharray="5 4"')]
    if kind == "maxflow":
        items.append((EMBER, "minimum cut", ""))
    else:
        items.append((PLUM, "at capacity (binding)", ""))
    if any(v == "proof" for v in marked.values()):
        items.append((PROOF, "proof path", ""))
    out = [f'<g class="legend" transform="translate({MARGIN},{y})">']
    x = 0
    for colour, text, dash in items:
        out.append(f'<line x1="{x}" y1="0" x2="{x + 26}" y2="0" stroke="{colour}" stroke-width="3"{dash}/>'
                   f'<text class="legend" x="{x + 32}" y="4">{escape(text)}</text>')
        x += 44 + CHAR_W * len(text)
    if has_side:
        for fill, stroke, text in ((PINE_FILL, PINE, "source side"), (CLAY_FILL, CLAY, "sink side")):
            out.append(f'<rect x="{x}" y="-7" width="22" height="14" rx="7" fill="{fill}" stroke="{stroke}"/>'
                       f'<text class="legend" x="{x + 28}" y="4">{text}</text>')
            x += 40 + CHAR_W * len(text)
    if has_potentials:
        out.append(f'<text class="legend" x="{x}" y="4" fill="{PLUM}">π = node potential</text>')
    out.append("</g>")
    return "".join(out)


# --- HTTP ------------------------------------------------------------------------


def svg_response(svg: str) -> Response:
    return Response(svg, mimetype=SVG_MEDIA_TYPE, headers={"Cache-Control": "no-store"})


def solution_diagram(kind: str, problem_body: dict, result: dict) -> Response:
    """The diagram of an already solved problem, as a Flask response.

    For ``GET /v1/solutions/{digest}/diagram.svg``: pass the cached solution's kind,
    its request body and its response document. Raises ``ProblemTooLarge`` (413) above
    the diagram size limits and ``InputError`` (422) for a kind that is not drawn.
    """
    if kind not in DIAGRAM_KINDS:
        raise InputError.at("/kind", f"diagrams are drawn for {' and '.join(DIAGRAM_KINDS)}")
    settings = current_app.extensions["sluice"].settings
    return svg_response(render_diagram(kind, problem_body, result, max_nodes=settings.max_diagram_nodes,
                                       max_arcs=settings.max_diagram_arcs))


# --- diagrams of cached solutions -----------------------------------------------------

#: Suffix of the cache entry that keeps a small solved problem drawable by digest.
DRAWING_SUFFIX = ":drawing"


def drawing_record(kind_name: str, problem) -> bytes | None:
    """What ``GET /v1/solutions/{digest}/diagram.svg`` needs to draw a cached answer later.

    The result cache keeps answers, not problems; for the kinds that are drawn, a
    small record with the problem's request body (as columns) is kept beside the
    answer. Problems above the diagram limits keep only their size, so the route can
    answer 413 rather than 404. ``None`` for kinds that are not drawn.
    """
    network = getattr(problem, "network", None)
    if kind_name not in DIAGRAM_KINDS or network is None:
        return None
    settings = current_app.extensions["sluice"].settings
    if network.num_nodes > settings.max_diagram_nodes or network.num_arcs > settings.max_diagram_arcs:
        return orjson.dumps({"kind": kind_name, "too_large": {"nodes": network.num_nodes, "arcs": network.num_arcs}})
    from .networks import export_network

    body = export_network(network)
    ids = network.nodes.ids
    if kind_name == "maxflow":
        body["source"], body["sink"] = ids[problem.source], ids[problem.sink]
    supply = getattr(problem, "supply", None)
    if supply is not None:
        body["nodes"] = {"id": list(ids), "supply": np.asarray(supply).tolist()}
    return orjson.dumps({"kind": kind_name, "body": body}, option=orjson.OPT_SERIALIZE_NUMPY)


def cached_diagram(record: bytes, result: bytes) -> Response:
    """The SVG of a cached answer from its drawing record (see :func:`drawing_record`)."""
    doc = orjson.loads(record)
    if "too_large" in doc:
        size = doc["too_large"]
        settings = current_app.extensions["sluice"].settings
        raise ProblemTooLarge(FieldError("", f"the problem has {size['nodes']} nodes and {size['arcs']} arcs; "
                                             f"diagrams are drawn for at most {settings.max_diagram_nodes} nodes "
                                             f"and {settings.max_diagram_arcs} arcs"))
    return solution_diagram(doc["kind"], doc["body"], orjson.loads(result))


@bp.post("/diagram.svg")
def diagram():
    """Solve a small problem and draw the answer as SVG."""
    state = current_app.extensions["sluice"]
    envelope = load_envelope(DiagramRequest(), read_json_body())
    kind_name = envelope["kind"]
    if kind_name not in DIAGRAM_KINDS or kind_name not in KINDS:
        drawn = [k for k in DIAGRAM_KINDS if k in KINDS]
        raise InputError.at("/kind", f"must be one of {', '.join(drawn)}")
    body = envelope["problem"]
    kind = KINDS[kind_name]
    started = perf_counter()
    with under("/problem"):
        read_network(body, state.settings.max_diagram_nodes, state.settings.max_diagram_arcs)  # 413 before solving
        result = bounded_solve(kind, kind.parse(body, state.limits), state.limits)
    response = solution_diagram(kind_name, body, result)
    response.headers["Server-Timing"] = f"total;dur={(perf_counter() - started) * 1000:.1f}"
    return response
