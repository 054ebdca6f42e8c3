"""How a min-cost flow answer is drawn: supplies and demands, binding arcs, costs, potentials."""

from __future__ import annotations

import numpy as np

from .base import Drawer, DrawnNetwork, Marks, fmt

#: An arc is at capacity when its flow is within this share of the capacity (at least 1).
BINDING_TOLERANCE = 1e-9


class MinCostFlowDrawer(Drawer):
    """Marks arcs at their capacity (``binding``) and the arcs of an infeasibility proof
    (``proof``); supply nodes anchor the left edge, demand nodes the right."""

    kind = "mincostflow"
    mark_legend = ("binding", "at capacity (binding)")
    shows_cost = True

    def anchors(self, net: DrawnNetwork) -> tuple[list[int], list[int]]:
        """Supply nodes on the left, demand nodes on the right.

        Parameters
        ----------
        net : DrawnNetwork

        Returns
        -------
        (left, right) : list of int
            Nodes with a positive supply, and nodes with a demand (negative supply).
        """
        supply = self._supply(net)
        return np.flatnonzero(supply > 0).tolist(), np.flatnonzero(supply < 0).tolist()

    def marks(self, net: DrawnNetwork, result: dict, flows: np.ndarray | None) -> Marks:
        """Arcs at their capacity, and the arcs of an infeasibility proof.

        Parameters
        ----------
        net : DrawnNetwork
        result : dict
            The answer; its ``infeasibility`` is read.
        flows : ndarray of float, optional
            The plan's flow per arc: an arc within :data:`BINDING_TOLERANCE` of its
            (finite, positive) capacity is ``binding``.

        Returns
        -------
        Marks
            ``binding`` and ``proof`` arcs.
        """
        marks = Marks()
        if flows is not None:
            cap = net.capacity
            binding = np.isfinite(cap) & (cap > 0) & (np.abs(flows - cap) <= BINDING_TOLERANCE * np.maximum(1, cap))
            marks.arcs.update({int(a): "binding" for a in np.flatnonzero(binding)})
        for a in (result.get("infeasibility") or {}).get("arcs", []):
            marks.arcs[int(a)] = "proof"
        return marks

    def role(self, net: DrawnNetwork, v: int) -> tuple[str, str] | None:
        """``SUPPLY n`` (tab on the left) or ``DEMAND n`` (on the right).

        Parameters
        ----------
        net : DrawnNetwork
        v : int
            A node index.

        Returns
        -------
        (caption, side) or None
            ``None`` for a node without supply or demand.
        """
        s = self._supply(net)[v]
        if not s:
            return None
        return (f"SUPPLY {fmt(s)}", "left") if s > 0 else (f"DEMAND {fmt(-s)}", "right")

    def headline(self, result: dict, marks: Marks) -> tuple[str, str]:
        """The cost (or the status), and how many arcs are at capacity.

        Parameters
        ----------
        result : dict
            The answer.
        marks : Marks
            Its ``binding`` arcs are counted.

        Returns
        -------
        (title, subtitle) : str
        """
        status = result.get("status", "")
        if status != "optimal":
            return f"Min-cost flow: {status}", ""
        binding = sum(1 for m in marks.arcs.values() if m == "binding")
        return f"Min-cost flow: cost {fmt(result.get('cost'))}", f"{binding} arcs at capacity"

    @staticmethod
    def _supply(net: DrawnNetwork) -> np.ndarray:
        return np.zeros(net.num_nodes) if net.supply is None else net.supply


DRAWER = MinCostFlowDrawer()
