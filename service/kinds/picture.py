"""How a drawn kind's problems become pictures: :attr:`Kind.picture <service.kinds.base.Kind.picture>`.

A :class:`Picture` says, for one kind, which drawer of :mod:`service.drawing` draws its
answers, how a parsed problem becomes the :class:`~service.drawing.DrawnNetwork` that
``POST /v1/diagram.svg`` draws, and what is kept of it beside a cached answer so that
``GET /v1/solutions/{digest}/diagram.svg`` draws it later. The HTTP layer asks the
declaration and never looks at a problem's shape.

The kept records are a stored format (answers written by a running version are drawn
after an upgrade), so their two forms stay as they are:

- a network picture keeps the problem's request body as columns,
  ``{"body": {"nodes"?, "arcs", "source"?, "sink"?}}``, read back by :func:`drawn_body`;
- a flow over time keeps its drawn form itself, ``{"timed": {...}}``
  (:func:`timed_record`), read back by :func:`drawn_timed`.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import partial
from typing import Any, Callable

import numpy as np

from ..drawing import Drawer, DrawnNetwork, FlowOverTimeDrawer
from ..errors import InputError
from ..model.arcs import Network, export_network, read_network
from ..model.columns import number_column


@dataclass(frozen=True)
class Picture:
    """How a kind's answers are drawn.

    Attributes
    ----------
    drawer : Drawer or FlowOverTimeDrawer
        One of the drawers of :mod:`service.drawing`, whose ``kind`` is the kind's name.
    drawn : callable
        ``drawn(problem) -> DrawnNetwork``: what ``POST /v1/diagram.svg`` draws.
    record : callable
        ``record(problem) -> dict``: the JSON-able part of the drawing record kept beside
        a cached answer, ``{"body": ...}`` or ``{"timed": ...}`` (the service adds
        ``"kind"``).
    """

    drawer: Drawer | FlowOverTimeDrawer
    drawn: Callable[[Any], DrawnNetwork]
    record: Callable[[Any], dict]


def network_picture(drawer: Drawer, *, ends: Callable[[Any], tuple] | None = None,
                    supply: Callable[[Any], Any] | None = None) -> Picture:
    """The picture of a kind whose problem holds a :class:`~service.model.arcs.Network` as ``network``.

    Parameters
    ----------
    drawer : Drawer
        The kind's drawer.
    ends : callable, optional
        ``ends(problem) -> (source, sink)``, node positions (:func:`problem_ends`,
        :func:`lanes_ends`); ``None``: the problem has neither.
    supply : callable, optional
        ``supply(problem) -> array``, the supply of each node (:func:`problem_supply`);
        ``None``: the problem has none.

    Returns
    -------
    Picture
    """
    return Picture(drawer, partial(_drawn_network_problem, ends=ends, supply=supply),
                   partial(_body_record, ends=ends, supply=supply))


def problem_ends(problem) -> tuple[int, int]:
    """The ``source`` and ``sink`` a problem holds: for :func:`network_picture`.

    Parameters
    ----------
    problem : dataclass
        A problem with ``source`` and ``sink`` node positions (max flow, resilience).

    Returns
    -------
    tuple of int
    """
    return problem.source, problem.sink


def lanes_ends(problem) -> tuple[int, int]:
    """The ``source`` and ``sink`` a problem keeps with its ``lanes`` (an expansion).

    Parameters
    ----------
    problem : dataclass
        A problem with ``lanes`` holding ``source`` and ``sink`` node positions.

    Returns
    -------
    tuple of int
    """
    return problem.lanes.source, problem.lanes.sink


def problem_supply(problem):
    """The ``supply`` of each node a problem holds (min-cost flow): for :func:`network_picture`.

    Parameters
    ----------
    problem : dataclass
        A problem with a ``supply`` array.

    Returns
    -------
    numpy.ndarray
    """
    return problem.supply


def _drawn_network_problem(problem, *, ends, supply) -> DrawnNetwork:
    source, sink = (None, None) if ends is None else ends(problem)
    return drawn_network(problem.network, supply=None if supply is None else supply(problem),
                         source=source, sink=sink)


def _body_record(problem, *, ends, supply) -> dict:
    """``{"body": ...}``: the problem's request body as columns, with its supplies and ends."""
    network = problem.network
    body = export_network(network)
    ids = network.nodes.ids
    for end, index in zip(("source", "sink"), (None, None) if ends is None else ends(problem)):
        if index is not None:
            body[end] = ids[index]
    supplies = None if supply is None else supply(problem)
    if supplies is not None:
        body["nodes"] = {"id": list(ids), "supply": np.asarray(supplies).tolist()}
    return {"body": body}


def drawn_network(network: Network, *, supply=None, source: int | None = None,
                  sink: int | None = None) -> DrawnNetwork:
    """The plain form of a normalised network that :mod:`service.drawing` draws.

    Parameters
    ----------
    network : Network
        The problem's network.
    supply : array_like, optional
        The supply of each node.
    source, sink : int, optional
        Node positions.

    Returns
    -------
    DrawnNetwork
    """
    ids = _plain_ids(network.nodes)
    capacity = network.capacity.astype(np.float64)
    if network.unlimited is not None:
        capacity[network.unlimited] = np.inf
    return DrawnNetwork(ids, network.tail.astype(np.int64), network.head.astype(np.int64), capacity,
                        lower=_floats(network.lower), cost=_floats(network.cost), keys=network.keys,
                        supply=_floats(supply), source=source, sink=sink)


def _floats(values) -> np.ndarray | None:
    return None if values is None else np.asarray(values, dtype=np.float64)


def _plain_ids(nodes) -> list:
    """The node ids as a list of plain Python values (integer ids may be held in a numpy array)."""
    return np.asarray(nodes.ids).tolist() if nodes.kind is int else list(nodes.ids)


def drawn_body(body: dict, *, max_nodes: int, max_arcs: int) -> DrawnNetwork:
    """The network picture of a request body (or the ``body`` of a kept record).

    Parameters
    ----------
    body : dict
        ``{"nodes"?, "arcs", "source"?, "sink"?}``; the nodes' ``supply`` column, when
        there is one, gives the supplies (else zero).
    max_nodes, max_arcs : int
        Size limits of a drawing.

    Returns
    -------
    DrawnNetwork

    Raises
    ------
    InputError
        A body that does not hold a network.
    ProblemTooLarge
        Above the size limits.
    """
    if not isinstance(body, dict) or "arcs" not in body:
        raise InputError.at("/arcs", "is required")
    network, nodes = read_network(body["arcs"], body.get("nodes"), max_arcs=max_arcs, max_nodes=max_nodes)
    supply = np.zeros(network.num_nodes)
    column = nodes.fields.get("supply")
    if column is not None:
        values = number_column(column.values, column.where).values
        supply[: values.size] = values
    ends = {end: network.nodes.index_of(body[end]) for end in ("source", "sink") if end in body}
    return drawn_network(network, supply=supply, **ends)


def timed_picture(drawer: FlowOverTimeDrawer) -> Picture:
    """The picture of a flow-over-time kind: lanes against periods, kept in its drawn form.

    Parameters
    ----------
    drawer : FlowOverTimeDrawer
        The kind's drawer.

    Returns
    -------
    Picture
    """
    return Picture(drawer, _drawn_over_time, _timed_kept)


def _drawn_over_time(problem) -> DrawnNetwork:
    return drawn_timed(timed_record(problem))


def _timed_kept(problem) -> dict:
    return {"timed": timed_record(problem)}


def timed_record(problem) -> dict:
    """A flow-over-time problem as plain JSON values: what its lanes-against-periods picture needs.

    Parameters
    ----------
    problem : FlowOverTimeProblem
        With its timed ``network``, ``nodes``, ``keys``, ``source`` and ``sink``.

    Returns
    -------
    dict
        ``ids``, ``tail``, ``head``, ``transit``, ``capacity`` per lane and period (null
        for no limit), ``keys``, ``source`` and ``sink``.
    """
    net = problem.network
    m, horizon = net.num_arcs, net.horizon
    capacity = np.broadcast_to(np.asarray(net.capacity, dtype=np.float64).reshape(m, -1), (m, horizon)).copy()
    if net.unlimited is not None:
        capacity[np.broadcast_to(net.unlimited.reshape(m, -1), (m, horizon))] = np.nan
    return {"ids": _plain_ids(problem.nodes),
            "tail": net.tail.tolist(), "head": net.head.tolist(), "transit": net.transit.tolist(),
            "capacity": [[None if np.isnan(c) else c for c in row] for row in capacity.tolist()],
            "keys": problem.keys,
            "source": problem.source, "sink": problem.sink}


def drawn_timed(record: dict) -> DrawnNetwork:
    """The flow-over-time picture of a record made by :func:`timed_record`.

    Each lane is drawn with its largest capacity over the periods and keeps its capacities per
    period; a null capacity (no limit) becomes infinity.

    Parameters
    ----------
    record : dict
        As :func:`timed_record` made it (or as kept in a drawing record).

    Returns
    -------
    DrawnNetwork
    """
    capacity = np.array([[np.inf if c is None else c for c in row] for row in record["capacity"]],
                        dtype=np.float64).reshape(len(record["tail"]), -1)
    return DrawnNetwork(record["ids"], np.asarray(record["tail"], dtype=np.int64),
                        np.asarray(record["head"], dtype=np.int64),
                        capacity.max(axis=1) if capacity.size else np.zeros(len(record["tail"])),
                        keys=record["keys"], source=record["source"], sink=record["sink"],
                        transit=np.asarray(record["transit"], dtype=np.int64), period_capacity=capacity)
