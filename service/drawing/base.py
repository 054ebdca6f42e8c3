"""What a diagram is drawn from, and what a per-kind drawer decides.

The drawing package knows no HTTP, no model and no solver: it draws a
:class:`DrawnNetwork` (numpy columns and plain ids) and an answer as a client sees it
(a JSON document). What differs between problem kinds (which nodes anchor the
layout, which arcs are marked, what the labels and the title say) is a
:class:`Drawer`; one module per drawn kind defines one.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

#: Marks an arc can carry; each has a CSS class ``<mark>-arc``, a colour and a legend line.
MARKS = ("cut", "binding", "proof", "closure", "widened")


@dataclass(frozen=True)
class DrawnNetwork:
    """A network as a diagram needs it.

    Attributes
    ----------
    ids : list
        Node ids as the client sent them (str or int); node ``i`` is ``ids[i]``.
    tail, head : ndarray of int
        Arc ends, as node indices.
    capacity : ndarray of float
        Per arc; ``inf`` where the arc has no limit.
    lower, cost : ndarray of float, optional
        Per arc; ``None`` when the problem has none.
    keys : list, optional
        Per arc, the client's label (str or None).
    supply : ndarray of float, optional
        Per node: supply (positive) or demand (negative).
    source, sink : int, optional
        Node indices of a max-flow question.
    transit : ndarray of int, optional
        Flows over time: periods per arc.
    period_capacity : ndarray of float, optional
        Flows over time: capacity per arc and departure period, shape (arcs, horizon).
    """

    ids: list
    tail: np.ndarray
    head: np.ndarray
    capacity: np.ndarray
    lower: np.ndarray | None = None
    cost: np.ndarray | None = None
    keys: list | None = None
    supply: np.ndarray | None = None
    source: int | None = None
    sink: int | None = None
    transit: np.ndarray | None = None
    period_capacity: np.ndarray | None = None
    _index: dict = field(default_factory=dict, init=False, repr=False, compare=False)

    @property
    def num_nodes(self) -> int:
        """How many nodes the network has (``len(ids)``)."""
        return len(self.ids)

    @property
    def num_arcs(self) -> int:
        """How many arcs the network has."""
        return int(self.tail.size)

    def index_of(self, node_id) -> int | None:
        """The index of a node id as it appears in an answer.

        Ids compare exactly, type included: ``"7"`` is not ``7``, ``True`` is not ``1``.

        Parameters
        ----------
        node_id : str or int
            An id as an answer gives it.

        Returns
        -------
        int or None
            The node's index; ``None`` if no node has that id.
        """
        if not self._index:
            self._index.update(((type(v), v), i) for i, v in enumerate(self.ids))
        return self._index.get((type(node_id), node_id))


@dataclass
class Marks:
    """What a drawer marks: ``arcs`` maps an arc index to one of :data:`MARKS`;
    ``side`` is per node, True on the source side of a cut (``None``: no cut);
    ``notes`` maps an arc index to text its label ends with (`` −40``: a closure's loss)."""

    arcs: dict = field(default_factory=dict)
    side: np.ndarray | None = None
    notes: dict = field(default_factory=dict)


def fmt(x) -> str:
    """A number as a label shows it.

    Parameters
    ----------
    x : number or None
        ``None`` or an infinite value means no limit.

    Returns
    -------
    str
        ``∞`` for no limit; an integer in full (groups of three split by a space from
        10 000 on); anything else to 4 significant digits.
    """
    if x is None:
        return "∞"
    x = float(x)
    if np.isinf(x):
        return "∞"
    if x.is_integer():
        return f"{int(x):,}".replace(",", " ") if abs(x) >= 10_000 else str(int(x))
    return f"{x:.4g}"


class Drawer:
    """What one problem kind shows: subclass it once per drawn kind.

    ``kind`` is the kind's name; ``mark_legend`` is the mark this kind's answers carry
    most and its legend text (``("cut", "minimum cut")``), always shown; ``shows_cost``
    says whether arc labels give the arc's cost.
    """

    kind: str = ""
    mark_legend: tuple[str, str] = ("", "")
    shows_cost: bool = False

    def anchors(self, net: DrawnNetwork) -> tuple[list[int], list[int]]:
        """Where the layout starts and ends.

        Parameters
        ----------
        net : DrawnNetwork

        Returns
        -------
        (left, right) : list of int
            Nodes of the left-most layer, and nodes of a right-most layer of their own.
        """
        raise NotImplementedError

    def marks(self, net: DrawnNetwork, result: dict, flows: np.ndarray | None) -> Marks:
        """What the answer marks on the picture.

        Parameters
        ----------
        net : DrawnNetwork
        result : dict
            The answer as JSON values.
        flows : ndarray of float, optional
            The answer's flow per arc (``None`` when it has none).

        Returns
        -------
        Marks
            The marked arcs, the cut sides and the notes of ``result``.
        """
        raise NotImplementedError

    def role(self, net: DrawnNetwork, v: int) -> tuple[str, str] | None:
        """What a terminal node is, as its tab says.

        Parameters
        ----------
        net : DrawnNetwork
        v : int
            A node index.

        Returns
        -------
        (caption, side) or None
            The role caption and the side of its tab (``"left"``/``"right"``);
            ``None`` for a node with no role (the default).
        """
        return None

    def headline(self, result: dict, marks: Marks) -> tuple[str, str]:
        """The diagram's title and subtitle.

        Parameters
        ----------
        result : dict
            The answer as JSON values.
        marks : Marks
            What :meth:`marks` found (the subtitle may count them).

        Returns
        -------
        (title, subtitle) : str
        """
        raise NotImplementedError

    def arc_label(self, net: DrawnNetwork, a: int, flow) -> str:
        """The label of one arc.

        Parameters
        ----------
        net : DrawnNetwork
        a : int
            The arc's index.
        flow : number or None
            Its flow in the answer (``?`` when unknown).

        Returns
        -------
        str
            ``flow/capacity``, ``flow/lower..capacity`` with a lower bound, and
            `` @cost`` after it when the kind shows costs and the arc has one.
        """
        text = fmt(flow) if flow is not None else "?"
        if net.lower is not None and net.lower[a] > 0:
            text += f"/{fmt(net.lower[a])}..{fmt(net.capacity[a])}"
        else:
            text += f"/{fmt(net.capacity[a])}"
        if self.shows_cost and net.cost is not None:
            text += f" @{fmt(net.cost[a])}"
        return text

    def legend_for_labels(self, net: DrawnNetwork) -> str:
        """How to read an arc label, for the legend.

        Parameters
        ----------
        net : DrawnNetwork

        Returns
        -------
        str
            The pattern of :meth:`arc_label` for this network (``flow/capacity``...).
        """
        lower = net.lower is not None and bool((net.lower > 0).any())
        text = "flow/lower..capacity" if lower else "flow/capacity"
        return text + (" @cost" if self.shows_cost and net.cost is not None else "")

    def potentials(self, net: DrawnNetwork, result: dict) -> list | None:
        """The node potentials of the answer, in the network's node order.

        Parameters
        ----------
        net : DrawnNetwork
        result : dict
            The answer; its ``potentials`` follow its ``node_ids`` (or the network's
            order when it has none).

        Returns
        -------
        list or None
            Per node, its potential (``None`` where not given); ``None`` when the
            answer has no potentials.
        """
        values = result.get("potentials")
        if not values:
            return None
        order = result.get("node_ids") or net.ids
        out = [None] * net.num_nodes
        for node_id, p in zip(order, values):
            k = net.index_of(node_id)
            if k is not None:
                out[k] = p
        return out
