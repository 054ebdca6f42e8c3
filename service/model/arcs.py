"""A normalised network: dense node indices and one numpy array per arc field.

:func:`read_network` reads the ``arcs`` and ``nodes`` members of a request into a
:class:`Network`, checking every value on the way, and :func:`export_network` is its
inverse (the ``nodes`` and columnar ``arcs`` a stored network is read back as). Arcs
arrive as :class:`~service.model.arccolumns.ArcColumns` whichever decoder read them.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import FieldError, InputError, ProblemTooLarge
from .arccolumns import ARC_FIELDS, ArcColumns, read_arcs
from .columns import MAX_REPORTED_ERRORS, NumberColumn, PointerFn, check_numbers
from .ids import MAX_ID_LENGTH, IdColumn, NodeIndex, ids_of
from .interning import intern_ids
from .nodes import read_nodes


@dataclass
class Network:
    """A normalised network: dense node indices and one numpy array per arc field.

    ``capacity`` holds 0 where ``unlimited`` is set (``None``: no arc is unlimited).
    ``cost`` and ``lower`` are ``None`` when all zero, given or not, and ``keys`` when
    no arc has a label: explicit defaults normalise as omitted ones do.
    """

    nodes: NodeIndex
    tail: np.ndarray
    head: np.ndarray
    capacity: np.ndarray
    unlimited: np.ndarray | None
    cost: np.ndarray | None
    lower: np.ndarray | None
    keys: list | None
    #: Optional per-arc and per-node columns of the planning and over-time kinds
    #: (see :mod:`service.model.stored`); None when there are none.
    extra: dict | None = None

    @property
    def num_nodes(self) -> int:
        """How many nodes the network has."""
        return len(self.nodes)

    @property
    def num_arcs(self) -> int:
        """How many arcs the network has."""
        return int(self.tail.size)

    @property
    def integral(self) -> bool:
        """Whether capacities, costs and lower bounds are all integers."""
        return all(a is None or a.dtype.kind == "i" for a in (self.capacity, self.cost, self.lower))

    def capacity_or(self, big) -> np.ndarray:
        """Capacities with unlimited arcs set to ``big``.

        Parameters
        ----------
        big : int or float
            Stands for "no limit".

        Returns
        -------
        ndarray
            The capacities themselves when no arc is unlimited, else a copy.

        Examples
        --------
        >>> net, _ = read_network({"from": [1, 2], "to": [2, 3], "capacity": [4, None]}, None,
        ...                       max_arcs=9, max_nodes=9)
        >>> net.capacity_or(100).tolist()
        [4, 100]
        """
        if self.unlimited is None or not self.unlimited.any():
            return self.capacity
        cap = self.capacity.astype(np.result_type(self.capacity.dtype, type(big)), copy=True)
        cap[self.unlimited] = big
        return cap


def build_network(arcs: ArcColumns, declared: IdColumn, *, allow_lower: bool = True) -> Network:
    """Check decoded arcs and declared node ids and normalise them into a :class:`Network`.

    Parameters
    ----------
    arcs : ArcColumns
        As :func:`~service.model.arccolumns.read_arcs` or a fast decoder made them.
    declared : IdColumn
        The request's ``nodes`` ids.
    allow_lower : bool
        Whether the problem kind takes lower bounds.

    Returns
    -------
    Network

    Raises
    ------
    InputError
        Any bad id or number, naming the field by JSON Pointer: the ids first, then
        ``capacity``, ``cost``, ``lower`` and ``key``.

    Examples
    --------
    >>> net = build_network(read_arcs({"from": ["a"], "to": ["b"]}), read_nodes(None).ids)
    >>> net.nodes.ids, net.unlimited.tolist()
    (['a', 'b'], [True])
    """
    nodes, tail, head = intern_ids(declared, arcs.ends, arcs.where("from"), arcs.where("to"))
    numbers = arcs.numbers
    capacity, unlimited = _capacity(numbers.get("capacity"), arcs.where("capacity"), arcs.count)
    cost = zeros_as_absent(_optional(numbers.get("cost"), arcs.where("cost"), minimum=None))
    lower = zeros_as_absent(_optional(numbers.get("lower"), arcs.where("lower"), minimum=0))
    if lower is not None:
        if not allow_lower:
            i = int(np.flatnonzero(lower)[0])
            raise InputError.at(arcs.where("lower")(i), "lower bounds are not supported by this problem kind")
        _check_lower(lower, capacity, unlimited, arcs.where("lower"))
    keys = read_keys(arcs.keys, arcs.where("key"))
    return Network(nodes, tail, head, capacity, unlimited, cost, lower, keys)


def zeros_as_absent(values: np.ndarray | None) -> np.ndarray | None:
    """``None`` for a column of zeros: an explicit default is the default left out, so
    both normalise (and hash) alike.

    Parameters
    ----------
    values : ndarray or None

    Returns
    -------
    ndarray or None

    Examples
    --------
    >>> zeros_as_absent(np.zeros(3)) is None
    True
    """
    return None if values is None or not values.any() else values


def read_network(arcs_raw, nodes_raw, *, max_arcs: int, max_nodes: int, allow_lower: bool = True,
                 node_fields: tuple[str, ...] = ("supply",)):
    """Read, check and normalise the ``arcs`` and ``nodes`` members of a request.

    Parameters
    ----------
    arcs_raw : list, dict or ArcColumns
        The ``arcs`` member as decoded (see :func:`~service.model.arccolumns.read_arcs`).
    nodes_raw : list, dict or None
        The ``nodes`` member as decoded.
    max_arcs, max_nodes : int
        The size limits.
    allow_lower : bool
        Whether the problem kind takes lower bounds.
    node_fields : tuple of str
        Per-node fields besides ``id`` that ``nodes`` may carry.

    Returns
    -------
    (Network, RawNodes)
        The network, and the nodes as read (for per-node fields such as ``supply``).

    Raises
    ------
    InputError, ProblemTooLarge
        Naming the offending field by JSON Pointer.

    Examples
    --------
    >>> net, _ = read_network([{"from": 1, "to": 2, "capacity": 4}], None, max_arcs=10, max_nodes=10)
    >>> net.nodes.ids, net.capacity.tolist()
    ([1, 2], [4])
    """
    network, nodes, _ = read_network_with(arcs_raw, nodes_raw, max_arcs=max_arcs, max_nodes=max_nodes,
                                          allow_lower=allow_lower, node_fields=node_fields)
    return network, nodes


def read_network_with(arcs_raw, nodes_raw, *, max_arcs: int, max_nodes: int, allow_lower: bool = True,
                      node_fields: tuple[str, ...] = ("supply",), arc_fields: tuple[str, ...] = (),
                      node_defaults: dict | None = None):
    """:func:`read_network`, also accepting the arc fields ``arc_fields`` (beyond ``ARC_FIELDS``).

    Parameters
    ----------
    node_defaults : dict, optional
        The value of a node field a node object leaves out (0 unless given).

    Returns
    -------
    (Network, RawNodes, dict)
        As :func:`read_network`, and the extra fields' columns as decoded, each an
        :class:`~service.model.ids.IdColumn` with its pointers (those no arc has are
        absent), for the kind to check.
    """
    arcs = read_arcs(arcs_raw, max_arcs=max_arcs, fields=ARC_FIELDS + arc_fields)
    nodes = read_nodes(nodes_raw, extra_fields=node_fields, defaults=node_defaults)
    network = build_network(arcs, nodes.ids, allow_lower=allow_lower)
    if network.num_nodes > max_nodes:
        raise ProblemTooLarge(FieldError("/nodes", f"has {network.num_nodes} nodes; the limit is {max_nodes}"))
    return network, nodes, {name: arcs.column(name) for name in arc_fields if name in arcs.others}


def export_network(net: Network) -> dict:
    """``nodes`` and columnar ``arcs`` of a network, as a request would give them: the
    inverse of :func:`read_network` (reading the result back gives the same arrays), with
    the optional columns of a stored network (``net.extra``) as a PUT body gives them.

    Parameters
    ----------
    net : Network

    Returns
    -------
    dict
        ``{"nodes": [...], "arcs": {"from": [...], "to": [...], "capacity": [...], ...}}``,
        with numpy arrays where the values are numbers (orjson writes them as lists)
        and ``null`` capacities for arcs without a limit.

    Examples
    --------
    >>> net, _ = read_network([{"from": "a", "to": "b"}], None, max_arcs=10, max_nodes=10)
    >>> export_network(net)
    {'nodes': ['a', 'b'], 'arcs': {'from': ['a'], 'to': ['b'], 'capacity': [None]}}
    """
    arcs: dict = {"from": ids_of(net.nodes, net.tail), "to": ids_of(net.nodes, net.head)}
    if net.unlimited is None:
        arcs["capacity"] = net.capacity
    else:
        capacity = net.capacity.astype(object)
        capacity[net.unlimited] = None  # JSON null: no limit
        arcs["capacity"] = capacity.tolist()
    if net.cost is not None:
        arcs["cost"] = net.cost
    if net.lower is not None:
        arcs["lower"] = net.lower
    if net.keys is not None:
        arcs["key"] = net.keys
    nodes = np.asarray(net.nodes.ids, dtype=np.int64) if net.nodes.kind is int else net.nodes.ids
    if net.extra is not None:  # the optional columns, so that a PUT of this gives the same digest
        arcs.update(net.extra["arcs"])
        if net.extra["nodes"]:
            nodes = {"id": nodes, **net.extra["nodes"]}
    return {"nodes": nodes, "arcs": arcs}


def _capacity(col: NumberColumn | None, where: PointerFn, count: int):
    if col is None:
        return np.zeros(count, dtype=np.int64), np.ones(count, dtype=bool)
    checked = check_numbers(col, where, allow_null=True, minimum=0)
    return checked.values, checked.null


def _optional(col: NumberColumn | None, where: PointerFn, *, minimum):
    if col is None:
        return None
    return check_numbers(col, where, minimum=minimum).values


def _check_lower(lower, capacity, unlimited, where: PointerFn) -> None:
    bad = lower > capacity
    if unlimited is not None:
        bad &= ~unlimited
    if bad.any():
        idx = np.flatnonzero(bad)[:MAX_REPORTED_ERRORS]
        raise InputError([FieldError(where(int(i)), "must not exceed the arc's capacity") for i in idx])


def read_keys(values: list | None, where: PointerFn) -> list | None:
    """Arc keys: strings of 1-200 characters or null, unique (None when the column is absent)."""
    if values is None:
        return None
    kinds = set(map(type, values))
    if kinds <= {type(None)}:  # every label null: as if no arc had one
        return None
    if not kinds <= {str, type(None)}:
        i = next(i for i, v in enumerate(values) if v is not None and type(v) is not str)
        raise InputError.at(where(i), "must be a string or null")
    labels = [v for v in values if v is not None]
    if len(set(labels)) == len(labels) and all(1 <= len(v) <= MAX_ID_LENGTH for v in labels):
        return values
    seen: dict = {}
    for i, v in enumerate(values):
        if v is None:
            continue
        if not 1 <= len(v) <= MAX_ID_LENGTH:
            raise InputError.at(where(i), "must be 1-200 characters long")
        if v in seen:
            raise InputError.at(where(i), f"duplicate arc key {v!r} (first at arc {seen[v]})")
        seen[v] = i
    return values
