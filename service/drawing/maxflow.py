"""How a max-flow answer is drawn: source and sink, the minimum cut and its two sides."""

from __future__ import annotations

import numpy as np

from .base import Drawer, DrawnNetwork, Marks, fmt


class MaxFlowDrawer(Drawer):
    """Marks the arcs of the minimum cut (``cut``) and of an unbounded path (``proof``);
    colours every node by its side of the cut."""

    kind = "maxflow"
    mark_legend = ("cut", "minimum cut")

    def anchors(self, net: DrawnNetwork) -> tuple[list[int], list[int]]:
        """The source on the left, the sink on the right.

        Parameters
        ----------
        net : DrawnNetwork

        Returns
        -------
        (left, right) : list of int
            ``[source]`` and ``[sink]`` (empty when not given).
        """
        return ([] if net.source is None else [net.source]), ([] if net.sink is None else [net.sink])

    def marks(self, net: DrawnNetwork, result: dict, flows: np.ndarray | None) -> Marks:
        """The minimum cut's arcs and sides, and the arcs of an unbounded path.

        Parameters
        ----------
        net : DrawnNetwork
        result : dict
            The answer; its ``cut`` and ``unbounded_path`` are read.
        flows : ndarray, optional
            Unused (the cut is in the answer).

        Returns
        -------
        Marks
            ``cut`` and ``proof`` arcs; ``side`` True on the cut's source side.
        """
        marks = Marks()
        cut = result.get("cut")
        if cut:
            marks.side = np.zeros(net.num_nodes, dtype=bool)
            for v in cut.get("source_side", []):
                k = net.index_of(v)
                if k is not None:
                    marks.side[k] = True
            marks.arcs.update({int(a): "cut" for a in cut.get("arcs", [])})
        for a in (result.get("unbounded_path") or {}).get("arcs", []):
            marks.arcs[int(a)] = "proof"
        return marks

    def role(self, net: DrawnNetwork, v: int) -> tuple[str, str] | None:
        """``SOURCE`` (tab on the left) or ``SINK`` (on the right).

        Parameters
        ----------
        net : DrawnNetwork
        v : int
            A node index.

        Returns
        -------
        (caption, side) or None
            ``None`` for the other nodes.
        """
        if v == net.source:
            return "SOURCE", "left"
        if v == net.sink:
            return "SINK", "right"
        return None

    def headline(self, result: dict, marks: Marks) -> tuple[str, str]:
        """The value (or the status), and the minimum cut's size and capacity.

        Parameters
        ----------
        result : dict
            The answer.
        marks : Marks
            Unused.

        Returns
        -------
        (title, subtitle) : str
        """
        status = result.get("status", "")
        if status == "unbounded":
            return "Max flow: unbounded", "a path of arcs without limits joins the source to the sink"
        head = f"Max flow {fmt(result.get('value'))}" if status == "optimal" else f"Max flow: {status}"
        cut = result.get("cut")
        sub = f"minimum cut: {len(cut.get('arcs', []))} arcs, capacity {fmt(cut.get('capacity'))}" if cut else ""
        return head, sub


DRAWER = MaxFlowDrawer()
