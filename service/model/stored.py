"""The optional columns a stored network carries for the planning and over-time kinds.

A stored network is the arrays of :class:`service.model.arcs.Network`; the kinds that
need more per lane or per node (expansion: ``expand_cost``, ``expand_max``,
``expand_fixed``; flows over time: ``transit`` and node ``holdover``,
``holdover_cost``) find them in ``Network.extra``::

    {"arcs": {name: [value per arc]}, "nodes": {name: [value per node]}}

checked when the network is stored and kept as JSON values (``null`` where allowed),
so a network without them stores, hashes and exports exactly as before. A what-if on
these kinds rebuilds the body the client would have posted whole (:func:`body_of`) and
reads it with the kind's own parser, so both answer alike by construction.
"""

from __future__ import annotations

import numpy as np

from .arccolumns import EXPANSION_FIELDS
from .arcs import Network
from .columns import number_column
from .ids import IdColumn
from .overtime import transit_column

STORED_ARC_FIELDS = EXPANSION_FIELDS + ("transit",)
STORED_NODE_FIELDS = ("holdover", "holdover_cost")
#: The value of an optional column where an arc or node leaves it out.
DEFAULTS = {"expand_cost": None, "expand_max": None, "expand_fixed": 0, "transit": 0,
            "holdover": None, "holdover_cost": 0}
NULLABLE = {"expand_cost", "expand_max", "holdover"}


def as_json(values: np.ndarray, null: np.ndarray | None) -> list:
    """A checked numeric column as JSON values, ``None`` where null."""
    out = values.tolist()
    if null is not None and null.any():
        for i in np.flatnonzero(null).tolist():
            out[i] = None
    return out


def checked_column(name: str, col: IdColumn) -> list:
    """One optional column checked as its kind checks it (naming bad entries), as JSON values."""
    if name == "transit":
        return transit_column(col, len(col.values)).tolist()
    checked = number_column(col.values, col.where, allow_null=name in NULLABLE, minimum=0)
    return as_json(checked.values, checked.null)


def read_extra(arc_columns: dict, node_columns: dict, declared: int, num_nodes: int) -> dict | None:
    """``Network.extra`` from the optional columns of a stored-network body (None when there are none).

    Node columns cover the ``declared`` nodes; the others get the default.
    """
    arcs = {name: checked_column(name, col) for name, col in arc_columns.items()}
    nodes = {}
    for name, col in node_columns.items():
        values = checked_column(name, col)
        nodes[name] = values + [DEFAULTS[name]] * (num_nodes - declared)
    if not arcs and not nodes:
        return None
    return {"arcs": arcs, "nodes": nodes}


def arc_column(network: Network, name: str) -> list | None:
    """A stored network's optional arc column ``name``, or ``None`` when it has none.

    Returns
    -------
    list or None
        JSON values, one per arc (``None`` where null).
    """
    extra = network.extra or {}
    return extra.get("arcs", {}).get(name)


def node_column(network: Network, name: str) -> list | None:
    """A stored network's optional node column ``name``, or ``None`` when it has none.

    Returns
    -------
    list or None
        JSON values, one per node (``None`` where null).
    """
    extra = network.extra or {}
    return extra.get("nodes", {}).get(name)


def _ids(network: Network, index: np.ndarray) -> list:
    dtype = np.int64 if network.nodes.kind is int else object
    return np.asarray(network.nodes.ids, dtype=dtype)[index].tolist()


def body_of(network: Network, arc_fields: tuple[str, ...] = (), node_fields: tuple[str, ...] = ()) -> dict:
    """``nodes`` and columnar ``arcs`` as the JSON decoder gives them (lists), with the
    optional columns ``arc_fields`` and ``node_fields`` the network carries.

    Per-period capacities set by a what-if (``extra["periods"]``: arc -> list) replace
    the arc's single capacity.
    """
    arcs: dict = {"from": _ids(network, network.tail), "to": _ids(network, network.head)}
    periods = (network.extra or {}).get("periods")
    capacity = as_json(network.capacity, network.unlimited)  # null: no limit
    for arc, values in (periods or {}).items():
        capacity[arc] = values
    arcs["capacity"] = capacity
    if network.cost is not None:
        arcs["cost"] = network.cost.tolist()
    if network.lower is not None:
        arcs["lower"] = network.lower.tolist()
    if network.keys is not None:
        arcs["key"] = network.keys
    for name in arc_fields:
        column = arc_column(network, name)
        if column is not None:
            arcs[name] = column
    ids = list(network.nodes.ids)
    columns = {name: node_column(network, name) for name in node_fields}
    columns = {name: values for name, values in columns.items() if values is not None}
    nodes = {"id": ids, **columns} if columns else ids
    return {"nodes": nodes, "arcs": arcs}
