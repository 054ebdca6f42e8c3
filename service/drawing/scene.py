"""A whole diagram: lay out, route, place the labels, write the SVG document.

Marks are also CSS classes, so a page or a test can find them: ``cut-arc``,
``binding-arc``, ``proof-arc``, ``flow-arc`` and ``idle-arc`` on an arc's group,
``lower-bounded`` on an arc with a positive lower bound; ``source-side`` or
``sink-side`` on a node when a cut is known, else ``plain``. Texts are of class
``title``, ``subtitle``, ``role``, ``node-label``, ``potential``, ``arc-label`` and
``legend`` (their fonts are :data:`.text.FONTS`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..solvers.graph import Graph
from . import svg
from .base import Drawer, DrawnNetwork, Marks, fmt
from .geometry import Box, bounds, sample, union
from .labels import Placer
from .layout import Footprint, layered_layout, place
from .routing import Route, route_all
from .text import ASCENT, DESCENT, FONT_FAMILY, FONTS, text_box, text_width

# An original palette: paper background, pine for the source side, clay for the sink
# side, ink-blue flow, ember for the cut, plum for binding arcs.
PAPER, GRID, INK, MUTED = "#fbfaf6", "#ece8de", "#23313f", "#8a8f98"
PINE_FILL, PINE = "#dcefe7", "#1f6f55"
CLAY_FILL, CLAY = "#f6e7d6", "#9c5a1f"
PLAIN_FILL, PLAIN = "#eef1f6", "#4a5a70"
FLOW, IDLE = "#35598f", "#c5c8cc"
MARK_COLOURS = {"cut": "#d1451b", "binding": "#7b3fa0", "proof": "#b8860b", "closure": "#c0306a",
                "widened": "#13877f"}
#: Legend text of a mark shown beside a drawer's own (``Drawer.mark_legend``).
MARK_TEXTS = {"cut": "minimum cut", "binding": "at capacity (binding)", "proof": "proof path",
              "closure": "closure that lowers the value", "widened": "widened lane"}
#: Marks drawn with two slashes across the arc as well as their colour.
NOTCHED = ("cut", "binding")

MARGIN, TOP = 40.0, 64.0
PILL_H, TAB_W = 28.0, 6.0
MAX_LABEL = 22
#: Room factors tried in turn until every label finds a free spot.
SPREADS = (1.0, 1.3, 1.7, 2.2, 3.0)
#: Drawn behind each arc label (a paper-coloured stroke), so labels keep this much apart.
HALO = 1.5


@dataclass(frozen=True)
class NodeShape:
    """A node's drawn parts relative to its centre, and the footprint they make."""

    label: str
    width: float
    role: str | None
    tab: str | None
    potential: str | None
    footprint: Footprint


def draw(drawer: Drawer, net: DrawnNetwork, result: dict) -> str:
    """The SVG document of an answer drawn on its network.

    Parameters
    ----------
    drawer : Drawer
        What the kind shows (anchors, marks, labels, title).
    net : DrawnNetwork
    result : dict
        The answer as JSON values.

    Returns
    -------
    str
        A standalone SVG document.
    """
    flows = result.get("flows")
    flows = None if flows is None else np.asarray(flows, dtype=np.float64)
    marks = drawer.marks(net, result, flows)
    potentials = drawer.potentials(net, result)
    shapes = [_shape(drawer, net, v, potentials) for v in range(net.num_nodes)]
    widths = _stroke_widths(net, flows, marks)
    layer, rank = layered_layout(Graph(net.num_nodes, net.tail, net.head), *drawer.anchors(net))
    texts = [drawer.arc_label(net, a, None if flows is None else flows[a]) + marks.notes.get(a, "")
             for a in range(net.num_arcs)]
    for spread in SPREADS:
        placed = place(layer, rank, [s.footprint for s in shapes], spread)
        routes = route_all(net.tail, net.head, placed, [s.footprint for s in shapes], spread)
        strokes = [sample(r.path, 3.0) for r in routes]
        labels, notches, missing = _place_labels(placed, shapes, routes, strokes, texts, widths, marks)
        if not missing:
            break
    return _write(drawer, net, result, marks, shapes, placed, routes, strokes, widths, labels, notches, texts)


def _short(label: str) -> str:
    return label if len(label) <= MAX_LABEL else label[: MAX_LABEL - 1] + "…"


def _shape(drawer: Drawer, net: DrawnNetwork, v: int, potentials) -> NodeShape:
    label = _short(svg.shown(str(net.ids[v])))
    width = max(46.0, text_width(label, FONTS["node-label"]) + 22)
    role = drawer.role(net, v)
    caption, tab = role if role else (None, None)
    pill = Box.around(0, 0, width, PILL_H)
    if tab == "left":
        pill = Box(pill.x0 - TAB_W - 1, pill.y0, pill.x1, pill.y1)
    elif tab == "right":
        pill = Box(pill.x0, pill.y0, pill.x1 + TAB_W + 1, pill.y1)
    parts = [pill]
    if caption:
        parts.append(text_box(caption, FONTS["role"], 0, -PILL_H / 2 - 5))
    potential = None
    if potentials is not None and potentials[v] is not None:
        potential = f"π = {fmt(potentials[v])}"
        parts.append(text_box(potential, FONTS["potential"], 0, PILL_H / 2 + 13))
    return NodeShape(label, width, caption, tab, potential, Footprint(pill, tuple(parts)))


def _stroke_widths(net: DrawnNetwork, flows, marks: Marks) -> np.ndarray:
    if flows is None or not flows.size or not np.nanmax(np.abs(flows)):
        widths = np.full(net.num_arcs, 1.4)
    else:
        widths = np.where(flows != 0, 1.8 + 5.2 * np.abs(flows) / np.nanmax(np.abs(flows)), 1.4)
    for a in marks.arcs:
        if 0 <= a < net.num_arcs:
            widths[a] = max(widths[a], 3.2)
    return widths


#: The box of the two slashes drawn across a cut or binding arc (see :func:`_arc`).
NOTCH_W, NOTCH_H = 19.0, 15.0


def _place_labels(placed, shapes, routes: list[Route], strokes, texts, widths, marks: Marks):
    """Label boxes per arc (without the halo), the centre of each notch (by arc), and
    how many labels and notches found no free spot. Labels go first; each notch then takes the
    free spot on its arc nearest the arc's middle."""
    taken = [part.shifted(placed.x[v], placed.y[v]) for v, s in enumerate(shapes) for part in s.footprint.parts]
    placer = Placer(taken, strokes)
    font = FONTS["arc-label"]
    height = (ASCENT + DESCENT) * font.size
    labels, missing = [None] * len(routes), 0
    for a in sorted(range(len(routes)), key=lambda a: (len(strokes[a]), a)):
        width = text_width(texts[a], font)
        box = placer.place(a, width + 2 * HALO, height + 2 * HALO, strokes[a], routes[a].middle,
                           widths[a] / 2 + 1.5)
        if box is None:
            missing += 1
            mx, my = routes[a].middle
            box = Box.around(mx, my, width + 2 * HALO, height + 2 * HALO)
        labels[a] = box.grown(-HALO)
    notches = {}
    for a in sorted(a for a, m in marks.arcs.items() if m in NOTCHED and 0 <= a < len(routes)):
        box = placer.place_mark(a, NOTCH_W, NOTCH_H, strokes[a], routes[a].middle)
        missing += box is None
        notches[a] = routes[a].middle if box is None else ((box.x0 + box.x1) / 2, (box.y0 + box.y1) / 2)
    return labels, notches, missing


def _style() -> str:
    rules = [f"text{{font-family:{FONT_FAMILY};fill:{INK}}}"]
    extra = {"arc-label": f"paint-order:stroke;stroke:{PAPER};stroke-width:{2 * HALO}px;stroke-linejoin:round",
             "potential": f"fill:{MARK_COLOURS['binding']}", "role": f"fill:{MUTED}", "subtitle": f"fill:{MUTED}"}
    for css, font in FONTS.items():
        rule = f"font-size:{font.size}px"
        if font.weight != 400:
            rule += f";font-weight:{font.weight}"
        if font.spacing:
            rule += f";letter-spacing:{font.spacing}px"
        if css in extra:
            rule += ";" + extra[css]
        rules.append(f".{css}{{{rule}}}")
    return "".join(rules)


def _defs() -> str:
    markers = []
    for name, colour in (("flow", FLOW), ("idle", IDLE), *MARK_COLOURS.items()):
        tip = svg.element("path", d="M0,1 L10,5 L0,9 L3,5 Z", fill=colour)
        markers.append(svg.element("marker", tip, id=f"tip-{name}", viewBox="0 0 10 10", refX=9, refY=5,
                                   markerWidth=11, markerHeight=11, markerUnits="userSpaceOnUse",
                                   orient="auto-start-reverse"))
    return f"<defs>{''.join(markers)}<style>{_style()}</style></defs>"


def _arc_style(mark, flow) -> tuple[str, str, str]:
    if mark in MARK_COLOURS:
        return f"{mark}-arc", MARK_COLOURS[mark], mark
    if flow:
        return "flow-arc", FLOW, "flow"
    return "idle-arc", IDLE, "idle"


def _write(drawer, net, result, marks, shapes, placed, routes, strokes, widths, labels, notches, texts) -> str:
    extent = [s.footprint.extent.shifted(placed.x[v], placed.y[v]) for v, s in enumerate(shapes)]
    extent += [bounds(p).grown(4) for p in strokes if len(p)] + [b for b in labels if b is not None]
    content = union(extent) if extent else Box(0, 0, 0, 0)
    dx, dy = MARGIN - content.x0, TOP + 6 - content.y0
    legend, legend_width = _legend(drawer, net, marks, shapes, TOP + 6 + content.y1 - content.y0 + 40)
    title, subtitle = drawer.headline(result, marks)
    width = MARGIN * 2 + max(content.x1 - content.x0, legend_width, text_width(title, FONTS["title"]),
                             text_width(subtitle, FONTS["subtitle"]))
    height = TOP + 6 + (content.y1 - content.y0) + 70
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{width:.0f}" height="{height:.0f}" '
           f'viewBox="0 0 {width:.0f} {height:.0f}" role="img" class="sluice-diagram" '
           f'data-kind="{svg.escape(drawer.kind)}" data-nodes="{net.num_nodes}" data-arcs="{net.num_arcs}">',
           _defs(), svg.element("rect", width="100%", height="100%", fill=PAPER)]
    for column in placed.columns:
        x = float(placed.x[column[0]] + dx)
        out.append(svg.element("line", x1=x, y1=TOP + 4, x2=x, y2=float(TOP + 6 + content.y1 - content.y0),
                               stroke=GRID, stroke_dasharray="2 6"))
    out.append(svg.text(title, MARGIN, MARGIN - 6, "title", anchor="start"))
    out.append(svg.text(subtitle, MARGIN, MARGIN + 12, "subtitle", anchor="start"))
    flows = result.get("flows")
    for a in range(net.num_arcs):
        out.append(_arc(net, a, routes[a], widths[a], marks.arcs.get(a), None if flows is None else flows[a],
                        notches.get(a), dx, dy))
    font = FONTS["arc-label"]
    out.append('<g class="arc-labels">' + "".join(
        svg.text(texts[a], (box.x0 + box.x1) / 2 + dx, box.y0 + ASCENT * font.size + dy, "arc-label",
                 data_arc=a) for a, box in enumerate(labels)) + "</g>")
    for v, shape in enumerate(shapes):
        out.append(_node(net, v, shape, placed.x[v] + dx, placed.y[v] + dy, marks.side))
    out.append(legend)
    out.append("</svg>")
    return "".join(out)


def _arc(net: DrawnNetwork, a: int, route: Route, width: float, mark, flow, notch, dx: float, dy: float) -> str:
    css, colour, tip = _arc_style(mark, flow)
    u, v = int(net.tail[a]), int(net.head[a])
    lower = net.lower is not None and net.lower[a] > 0
    key = net.keys[a] if net.keys is not None else None
    title = f"arc {a}{f' ({key})' if key else ''}: {net.ids[u]} → {net.ids[v]}"
    if lower:
        title += f", at least {fmt(net.lower[a])}"
    path = [tuple((x + dx, y + dy) for x, y in segment) for segment in route.path]
    body = svg.element("title", svg.escape(title)) + svg.element(
        "path", d=svg.path_data(path), fill="none", stroke=colour, stroke_width=f"{width:.2f}",
        stroke_linecap="round", stroke_dasharray="5 4" if css == "idle-arc" else None,
        marker_end=f"url(#tip-{tip})")
    if notch is not None:
        x, y = notch[0] + dx, notch[1] + dy
        body += "".join(svg.element("line", x1=x + d - 4, y1=y + 6, x2=x + d + 4, y2=y - 6, stroke=colour,
                                    stroke_width="2.4", stroke_linecap="round", class_="notch")
                        for d in (-4.0, 4.0))
    classes = f"arc {css}" + (" lower-bounded" if lower else "")
    return svg.element("g", body, class_=classes, data_arc=a)


def _node(net: DrawnNetwork, v: int, shape: NodeShape, x: float, y: float, side) -> str:
    if side is not None:
        css, fill, stroke = ("source-side", PINE_FILL, PINE) if side[v] else ("sink-side", CLAY_FILL, CLAY)
    else:
        css, fill, stroke = "plain", PLAIN_FILL, PLAIN
    w = shape.width
    parts = [svg.element("title", svg.escape(str(net.ids[v]))),
             svg.element("rect", x=float(x - w / 2), y=float(y - PILL_H / 2), width=float(w), height=PILL_H,
                         rx=PILL_H / 2, fill=fill, stroke=stroke, stroke_width=3 if shape.role else 1.6)]
    if shape.role:
        # Terminals get a notched tab on their outer side: an original mark, not an icon.
        tab = x - w / 2 - TAB_W - 1 if shape.tab == "left" else x + w / 2 + 1
        parts.append(svg.element("rect", x=float(tab), y=float(y - 8), width=TAB_W, height=16, rx=2, fill=stroke))
        parts.append(svg.text(shape.role, x, y - PILL_H / 2 - 5, "role"))
    parts.append(svg.text(shape.label, x, y + 4, "node-label"))
    if shape.potential:
        parts.append(svg.text(shape.potential, x, y + PILL_H / 2 + 13, "potential"))
    return svg.element("g", "".join(parts), class_=f"node {css}", data_node=svg.exact(str(net.ids[v])))


def _legend(drawer: Drawer, net: DrawnNetwork, marks: Marks, shapes, y: float) -> tuple[str, float]:
    mark, mark_text = drawer.mark_legend
    lines = [(FLOW, "flow (width ∝ amount)", None), (IDLE, "no flow", "5 4"), (MARK_COLOURS[mark], mark_text, None)]
    for other in MARK_TEXTS:
        if other != mark and other in marks.arcs.values():
            lines.append((MARK_COLOURS[other], MARK_TEXTS[other], None))
    font = FONTS["legend"]
    out, x = [f'<g class="legend" transform="translate({svg.num(MARGIN)},{svg.num(y)})">'], 0.0
    for colour, text, dash in lines:
        out.append(svg.element("line", x1=x, y1=0.0, x2=x + 26, y2=0.0, stroke=colour, stroke_width=3,
                               stroke_dasharray=dash) + svg.text(text, x + 32, 4.0, "legend", anchor="start"))
        x += 32 + text_width(text, font) + 16
    if marks.side is not None:
        for fill, stroke, text in ((PINE_FILL, PINE, "source side"), (CLAY_FILL, CLAY, "sink side")):
            out.append(svg.element("rect", x=x, y=-7.0, width=22, height=14, rx=7, fill=fill, stroke=stroke)
                       + svg.text(text, x + 28, 4.0, "legend", anchor="start"))
            x += 28 + text_width(text, font) + 16
    notes = [drawer.legend_for_labels(net)]
    if any(s.potential for s in shapes):
        notes.append("π = node potential")
    for note in notes:
        out.append(svg.text(note, x, 4.0, "legend", anchor="start"))
        x += text_width(note, font) + 16
    out.append("</g>")
    return "".join(out), x
