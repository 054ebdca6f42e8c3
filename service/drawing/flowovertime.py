"""How a flow-over-time answer is drawn: lanes against periods.

One row per lane and one column per period. A departure is a bar in the lane's row
at its departure period (height by amount), with a thin line on to the period it
arrives (transit); periods when a lane is shut (capacity 0) are hatched. Below the
lanes, one row per node that holds stock over: holdover as bands from a period to
the next. The cut's lane-periods and node-periods are outlined. At the bottom, the
units arriving at the sink (or the deliveries of a min-cost plan) per period.

Every text sits in a cell of its own (a row label, a period number, one amount per
bar or band, only where it fits), so no two texts meet and no bar leaves its cell.
"""

from __future__ import annotations

from collections import defaultdict

import numpy as np

from . import svg
from .base import DrawnNetwork, fmt
from .scene import FLOW, GRID, IDLE, MARGIN, MARK_COLOURS, PAPER, TOP, _style
from .text import FONTS, text_width

ROW_H, BAR_MAX, PAD = 30.0, 18.0, 3.0
MIN_PERIOD_W, MAX_PERIOD_W, CHART_W = 30.0, 64.0, 900.0
HOLD, SHUT = "#d9a441", "#e2ddd2"
CUT = MARK_COLOURS["cut"]
MAX_ROW_LABEL = 34


def _short(text: str) -> str:
    return text if len(text) <= MAX_ROW_LABEL else text[: MAX_ROW_LABEL - 1] + "…"


class FlowOverTimeDrawer:
    """Draws ``flowovertime`` answers (see the module docstring); not a network picture,
    so it renders the whole document itself (:meth:`render`)."""

    kind = "flowovertime"

    def render(self, net: DrawnNetwork, result: dict) -> str:
        """The whole document: lanes against periods, not a network picture.

        Parameters
        ----------
        net : DrawnNetwork
            With ``transit`` and ``period_capacity``.
        result : dict
            The answer as JSON values.

        Returns
        -------
        str
            A standalone SVG document.
        """
        horizon = int(result.get("horizon") or (net.period_capacity.shape[1] if net.period_capacity is not None
                                                else 1))
        chart = _Chart(net, result, horizon)
        return chart.document(*self.headline(result))

    def headline(self, result: dict) -> tuple[str, str]:
        """The diagram's title (what was asked and found) and subtitle (the horizon).

        Parameters
        ----------
        result : dict
            The answer.

        Returns
        -------
        (title, subtitle) : str
        """
        status, objective = result.get("status", ""), result.get("objective", "")
        period = f" ({result['period']})" if result.get("period") else ""
        horizon = f"horizon {result.get('horizon')} periods{period}"
        if status == "infeasible":
            return "Flows over time: demand cannot be met in time", horizon + "; the outlined node-periods prove it"
        if status == "unbounded":
            return "Flows over time: unbounded", horizon
        if objective == "min-cost":
            return f"Min-cost schedule: cost {fmt(result.get('cost'))}", horizon
        if objective == "quickest":
            return f"Quickest: {fmt(result.get('value'))} units in {result.get('horizon')} periods", horizon
        return f"Most by the horizon: {fmt(result.get('value'))} units, earliest arrival", horizon


class _Chart:
    def __init__(self, net: DrawnNetwork, result: dict, horizon: int):
        self.net, self.result, self.horizon = net, result, horizon
        m = net.num_arcs
        self.transit = np.zeros(m, dtype=np.int64) if net.transit is None else net.transit.astype(np.int64)
        self.departures = [(int(d["arc"]), int(d["period"]), float(d["amount"]))
                           for d in result.get("departures") or [] if 0 <= int(d["arc"]) < m]
        holds = defaultdict(list)
        for h in result.get("holdover") or []:
            k = net.index_of(h["node"])
            if k is not None:
                holds[k].append((int(h["period"]), float(h["amount"])))
        cut = result.get("cut") or result.get("infeasibility") or {}
        self.cut_lanes = {(int(c["arc"]), int(c["period"])) for c in cut.get("departures") or []}
        self.cut_nodes = set()
        for c in cut.get("holdover") or []:
            k = net.index_of(c["node"])
            if k is not None:
                self.cut_nodes.add((k, int(c["period"])))
                holds.setdefault(k, [])
        self.holds = dict(sorted(holds.items()))
        self.peak = max([a for _, _, a in self.departures] + [a for v in self.holds.values() for _, a in v] + [1.0])
        self.lane_labels = [self._lane_label(a) for a in range(m)]
        self.node_labels = [_short(f"{net.ids[k]} (waits)") for k in self.holds]
        font = FONTS["node-label"]
        self.label_w = max([text_width(t, font) for t in self.lane_labels + self.node_labels] + [40.0]) + 16
        self.period_w = float(np.clip(CHART_W / max(horizon, 1), MIN_PERIOD_W, MAX_PERIOD_W))
        self.x0 = MARGIN + self.label_w
        self.y0 = TOP + 24  # below the period numbers

    def _lane_label(self, a: int) -> str:
        net = self.net
        key = net.keys[a] if net.keys is not None and net.keys[a] is not None else None
        name = key if key else f"{net.ids[int(net.tail[a])]} → {net.ids[int(net.head[a])]}"
        return f"{_short(name)} ({int(self.transit[a])})"  # the transit stays when a long name is cut

    def x(self, period: float) -> float:
        """The x of the start of ``period`` (fractions for points within it).

        Parameters
        ----------
        period : float

        Returns
        -------
        float
        """
        return self.x0 + period * self.period_w

    def row_y(self, row: int) -> float:
        """The y of the top of a row (lanes first, then the nodes that hold over).

        Parameters
        ----------
        row : int

        Returns
        -------
        float
        """
        return self.y0 + row * ROW_H

    def document(self, title: str, subtitle: str) -> str:
        """The SVG document: periods, lanes, holdovers, arrivals and the legend.

        Parameters
        ----------
        title, subtitle : str
            From :meth:`FlowOverTimeDrawer.headline`.

        Returns
        -------
        str
            A standalone SVG document.
        """
        rows = self.net.num_arcs + len(self.holds)
        chart_bottom = self.row_y(rows)
        body = [self._periods(), *self._lanes(), *self._holdover(), *self._arrivals(chart_bottom)]
        legend_y = chart_bottom + 2 * ROW_H + 8
        legend, legend_w = self._legend(legend_y)
        width = max(self.x(self.horizon) + MARGIN, MARGIN * 2 + legend_w, MARGIN * 2 + text_width(title, FONTS["title"]),
                    MARGIN * 2 + text_width(subtitle, FONTS["subtitle"]))
        height = legend_y + 30
        head = (f'<svg xmlns="http://www.w3.org/2000/svg" width="{width:.0f}" height="{height:.0f}" '
                f'viewBox="0 0 {width:.0f} {height:.0f}" role="img" class="sluice-diagram" '
                f'data-kind="flowovertime" data-nodes="{self.net.num_nodes}" data-arcs="{self.net.num_arcs}" '
                f'data-horizon="{self.horizon}">')
        defs = (f'<defs><pattern id="shut" width="6" height="6" patternUnits="userSpaceOnUse" '
                f'patternTransform="rotate(45)"><rect width="6" height="6" fill="{SHUT}"/>'
                f'<line x1="0" y1="0" x2="0" y2="6" stroke="{IDLE}" stroke-width="2"/></pattern>'
                f'<style>{_style()}</style></defs>')
        return "".join([head, defs, svg.element("rect", width="100%", height="100%", fill=PAPER),
                        svg.text(title, MARGIN, MARGIN - 6, "title", anchor="start"),
                        svg.text(subtitle, MARGIN, MARGIN + 12, "subtitle", anchor="start"),
                        *body, legend, "</svg>"])

    def _periods(self) -> str:
        font = FONTS["role"]
        widest = text_width(str(self.horizon - 1), font) + 6
        step = max(1, int(np.ceil(widest / self.period_w)))
        out = ['<g class="periods">']
        for p in range(self.horizon + 1):
            out.append(svg.element("line", x1=self.x(p), y1=self.y0 - 4, x2=self.x(p),
                                   y2=self.row_y(self.net.num_arcs + len(self.holds)), stroke=GRID))
            if p < self.horizon and p % step == 0:
                out.append(svg.text(str(p), self.x(p + 0.5), self.y0 - 8, "role"))
        out.append("</g>")
        return "".join(out)

    def _row(self, row: int, label: str, css: str, attrs: dict, cells: list[str]) -> str:
        y = self.row_y(row)
        parts = [svg.element("line", x1=MARGIN, y1=y + ROW_H, x2=self.x(self.horizon), y2=y + ROW_H, stroke=GRID),
                 svg.text(label, MARGIN, y + ROW_H / 2 + 4, "node-label", anchor="start"), *cells]
        return svg.element("g", "".join(parts), class_=f"row {css}", **attrs)

    def _bar_h(self, amount: float) -> float:
        return 4.0 + (BAR_MAX - 4.0) * abs(amount) / self.peak

    def _amount(self, amount: float, x: float, width: float, y: float) -> str:
        text = fmt(amount)
        if text_width(text, FONTS["arc-label"]) > width - 2:
            return ""  # the amount is in the bar's title (a tooltip) instead
        return svg.text(text, x + width / 2, y + ROW_H / 2 + 4, "arc-label")

    def _lanes(self) -> list[str]:
        by_lane = defaultdict(list)
        for a, p, amount in self.departures:
            by_lane[a].append((p, amount))
        cap = self.net.period_capacity
        rows = []
        for a in range(self.net.num_arcs):
            y, cells = self.row_y(a), []
            if cap is not None:
                for p in np.flatnonzero(cap[a, : self.horizon] == 0).tolist():
                    cells.append(svg.element("rect", x=self.x(p), y=y + 1, width=self.period_w, height=ROW_H - 2,
                                             fill="url(#shut)", class_="shut"))
            for p, amount in by_lane[a]:
                h, w = self._bar_h(amount), self.period_w - 2 * PAD
                arrive = p + int(self.transit[a])
                if arrive > p:  # the journey, from the bar to the arrival period
                    cells.append(svg.element("line", x1=self.x(p + 1) - PAD, y1=y + ROW_H - 5,
                                             x2=self.x(min(arrive, self.horizon - 1) + 0.5), y2=y + ROW_H - 5,
                                             stroke=FLOW, stroke_width=1, stroke_opacity=0.35))
                tip = svg.element("title", svg.escape(f"{fmt(amount)} leave in period {p}, arrive in {arrive}"))
                cells.append(svg.element("rect", tip, x=self.x(p) + PAD, y=y + (ROW_H - h) / 2, width=w, height=h,
                                         rx=2, fill=FLOW, fill_opacity=0.28, stroke=FLOW, class_="departure",
                                         data_period=p))
                cells.append(self._amount(amount, self.x(p) + PAD, w, y))
            cells += self._cut_cells(y, [p for (arc, p) in self.cut_lanes if arc == a])
            rows.append(self._row(a, self.lane_labels[a], "lane", {"data_arc": a}, cells))
        return rows

    def _cut_cells(self, y: float, periods: list[int]) -> list[str]:
        return [svg.element("rect", x=self.x(p) + 1, y=y + 1, width=self.period_w - 2, height=ROW_H - 2, fill="none",
                            stroke=CUT, stroke_width=2, class_="cut", data_period=p)
                for p in sorted(periods) if 0 <= p < self.horizon]

    def _holdover(self) -> list[str]:
        rows = []
        for i, (k, holds) in enumerate(self.holds.items()):
            row = self.net.num_arcs + i
            y, cells = self.row_y(row), []
            for p, amount in holds:  # waiting from p to p + 1: a band across the period boundary
                h, x = self._bar_h(amount), self.x(p + 0.5)
                tip = svg.element("title", svg.escape(f"{fmt(amount)} wait from period {p} to {p + 1}"))
                cells.append(svg.element("rect", tip, x=x + PAD, y=y + (ROW_H - h) / 2, width=self.period_w - 2 * PAD,
                                         height=h, fill=HOLD, fill_opacity=0.45, stroke=HOLD, class_="holdover",
                                         data_period=p))
                cells.append(self._amount(amount, x + PAD, self.period_w - 2 * PAD, y))
            cells += self._cut_cells(y, [p for (v, p) in self.cut_nodes if v == k])
            rows.append(self._row(row, self.node_labels[i], "node-row", {"data_node": svg.exact(str(self.net.ids[k]))},
                                  cells))
        return rows

    def _arrivals(self, y: float) -> list[str]:
        arrivals = self.result.get("arrivals")
        label = "arrive at the sink"
        if not arrivals and self.result.get("deliveries"):
            per = defaultdict(float)
            for d in self.result["deliveries"]:
                per[int(d["period"])] += float(d["amount"])
            arrivals, label = [per.get(p, 0.0) for p in range(self.horizon)], "demand met"
        if not arrivals:
            return []
        cells = [svg.text(label, MARGIN, y + ROW_H / 2 + 4, "legend", anchor="start")]
        for p, amount in enumerate(arrivals[: self.horizon]):
            if amount:
                cells.append(self._amount(amount, self.x(p), self.period_w, y))
        return [svg.element("g", "".join(cells), class_="arrivals")]

    def _legend(self, y: float) -> tuple[str, float]:
        font, x = FONTS["legend"], 0.0
        items = [(FLOW, "departure (bar height ∝ units; line: in transit)"), (HOLD, "holdover (waiting)"),
                 (SHUT, "lane shut"), (CUT, "cut")]
        out = [f'<g class="legend" transform="translate({svg.num(MARGIN)},{svg.num(y)})">']
        for colour, text in items:
            fill = "none" if colour == CUT else colour
            out.append(svg.element("rect", x=x, y=-7.0, width=22, height=14, rx=2, fill=fill, stroke=colour,
                                   stroke_width=2 if colour == CUT else 1)
                       + svg.text(text, x + 28, 4.0, "legend", anchor="start"))
            x += 28 + text_width(text, font) + 16
        note = "row label: lane (transit periods)"
        out.append(svg.text(note, x, 4.0, "legend", anchor="start"))
        out.append("</g>")
        return "".join(out), x + text_width(note, font)


DRAWER = FlowOverTimeDrawer()
