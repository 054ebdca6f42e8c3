"""How a resilience answer is drawn: the max-flow picture with the worst closures marked."""

from __future__ import annotations

import numpy as np

from .base import DrawnNetwork, Marks, fmt
from .maxflow import MaxFlowDrawer

#: Closures marked on the picture, worst first (the answer lists them all, or ``top``).
MARKED = 3


class ResilienceDrawer(MaxFlowDrawer):
    """Marks the worst closures (``closure``, their label ending in ``−loss``) and the
    other arcs of the minimum cut (``cut``); colours nodes by their side of the cut."""

    kind = "resilience"
    mark_legend = ("closure", f"worst closures (label: − loss), up to {MARKED}")

    def marks(self, net: DrawnNetwork, result: dict, flows: np.ndarray | None) -> Marks:
        """The max-flow marks, then the worst closures (at most :data:`MARKED`).

        Parameters
        ----------
        net : DrawnNetwork
        result : dict
            The answer; its ``failures`` (worst first) are read.
        flows : ndarray, optional
            Unused.

        Returns
        -------
        Marks
            ``closure`` arcs (their note `` −loss``) over the minimum cut's arcs.
        """
        marks = super().marks(net, result, flows)
        for failure in (result.get("failures") or [])[:MARKED]:
            a = int(failure["arc"])
            marks.arcs[a] = "closure"
            marks.notes[a] = f" −{fmt(failure['loss'])}"
        return marks

    def headline(self, result: dict, marks: Marks) -> tuple[str, str]:
        """The value and what the worst closure leaves, and how many closures lower it.

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
        if status != "optimal":
            return super().headline(result, marks)
        failures = result.get("failures") or []
        total = result.get("failures_total", len(failures))
        if not failures:
            return f"Max flow {fmt(result.get('value'))}", "no single closure lowers it"
        worst = failures[0]
        return (f"Max flow {fmt(result.get('value'))}; worst closure leaves {fmt(worst['value_without'])}",
                f"{total} closures lower the value; the worst loses {fmt(worst['loss'])}")


DRAWER = ResilienceDrawer()
