"""How an expansion answer is drawn: the flows under the plan, the added capacity on
the widened lanes, and (infeasible) the cut that full widening cannot pass."""

from __future__ import annotations

import numpy as np

from .base import DrawnNetwork, Marks, fmt
from .maxflow import MaxFlowDrawer


class ExpansionDrawer(MaxFlowDrawer):
    """Marks widened lanes (``widened``, their label ending in ``+added``) and, when no
    plan exists, the arcs of the proving cut (``cut``)."""

    kind = "expansion"
    mark_legend = ("widened", "widened lane (label: + capacity added)")

    def marks(self, net: DrawnNetwork, result: dict, flows: np.ndarray | None) -> Marks:
        """The max-flow marks, then the widened lanes with the capacity added to each.

        Parameters
        ----------
        net : DrawnNetwork
        result : dict
            The answer; its ``widened`` and ``additions`` are read.
        flows : ndarray, optional
            Unused.

        Returns
        -------
        Marks
            ``widened`` arcs (their note `` +added``) over the ``cut`` of an infeasible
            target.
        """
        marks = super().marks(net, result, flows)
        additions = result.get("additions")
        for a in result.get("widened") or []:
            a = int(a)
            marks.arcs[a] = "widened"
            if additions is not None and 0 <= a < len(additions):
                marks.notes[a] = f" +{fmt(additions[a])}"
        return marks

    def headline(self, result: dict, marks: Marks) -> tuple[str, str]:
        """The plan's cost and how many lanes it widens, or why the target is out of reach.

        Parameters
        ----------
        result : dict
            The answer.
        marks : Marks
            Its ``widened`` arcs are counted.

        Returns
        -------
        (title, subtitle) : str
        """
        status = result.get("status", "")
        target = fmt(result.get("target"))
        if status == "infeasible":
            return (f"Expansion: target {target} out of reach",
                    f"even full widening carries {fmt(result.get('value'))}: see the cut")
        widened = sum(1 for m in marks.arcs.values() if m == "widened")
        sub = f"{widened} lanes widened to carry {target}"
        if status == "feasible":
            sub += f" (not proved cheapest: gap {fmt(result.get('gap'))})"
        return f"Expansion: cost {fmt(result.get('cost'))}", sub


DRAWER = ExpansionDrawer()
