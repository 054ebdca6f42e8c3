"""DIMACS max-flow and min-cost flow files written from a normalised network.

The formats are described in :mod:`service.model.dimacs`, which reads them; a file
written here reads back into the same network (node ids in comments, unlimited arcs
under a stated stand-in capacity).
"""

from __future__ import annotations

import json

import numpy as np

from .arcs import Network
from .dimacs import FORMATS


def _text(values: np.ndarray) -> list:
    """Numbers as DIMACS tokens: integers plainly, decimals in shortest round-trip form."""
    return values.tolist() if values.dtype.kind == "i" else [repr(v) if not v.is_integer() else str(int(v))
                                                                for v in values.tolist()]


def stand_in_capacity(network: Network, supply: np.ndarray | None = None) -> int | float:
    """The capacity written for arcs without a limit: more than any bounded problem can
    put on one arc (all finite capacities, lower bounds and positive supplies, plus 1).

    Parameters
    ----------
    network : Network
    supply : ndarray, optional
        Supply per node (min-cost flow).

    Returns
    -------
    int or float

    Examples
    --------
    >>> from service.model.arcs import read_network
    >>> net, _ = read_network({"from": [1, 2], "to": [2, 3], "capacity": [4, None]}, None,
    ...                       max_arcs=9, max_nodes=9)
    >>> stand_in_capacity(net)
    5
    """
    cap = network.capacity if network.unlimited is None else network.capacity[~network.unlimited]
    total = cap.sum() if cap.size else 0
    if network.lower is not None:
        total = total + network.lower.sum()
    if supply is not None and supply.size:
        total = total + supply[supply > 0].sum()
    total = total + 1
    return int(total) if float(total).is_integer() else float(total)


def to_dimacs(network: Network, fmt: str, *, source: int | None = None, sink: int | None = None,
              supply: np.ndarray | None = None, title: str | None = None) -> str:
    """Write a network as a DIMACS max-flow or min-cost flow file.

    Parameters
    ----------
    network : Network
    fmt : {"max", "min"}
    source, sink : int, optional
        Node indices; required for ``"max"``.
    supply : ndarray, optional
        Supply per node for ``"min"`` (default all zero).
    title : str, optional
        A first comment line.

    Returns
    -------
    str
        Node ``i`` (0-based index) is written as ``i + 1``; comment lines give each
        node's original id unless the ids already are ``1..n`` in order. Arcs without a
        limit get :func:`stand_in_capacity`, stated in a comment.

    Raises
    ------
    ValueError
        ``"max"`` without source and sink, or with lower bounds or costs that the
        format cannot hold.

    Examples
    --------
    >>> from service.model.arcs import read_network
    >>> net, _ = read_network({"from": [1], "to": [2], "capacity": [4]}, None, max_arcs=9, max_nodes=9)
    >>> print(to_dimacs(net, "max", source=0, sink=1), end="")
    p max 2 1
    n 1 s
    n 2 t
    a 1 2 4
    """
    if fmt not in FORMATS:
        raise ValueError(f"unknown DIMACS format {fmt!r}")
    n, m = network.num_nodes, network.num_arcs
    out = [f"c {title}"] if title else []
    ids = network.nodes.ids
    if list(ids) != list(range(1, n + 1)):
        out += [f"c node {i + 1} is {json.dumps(v)}" for i, v in enumerate(ids)]
    capacity = network.capacity
    if network.unlimited is not None and network.unlimited.any():
        big = stand_in_capacity(network, supply)
        capacity = np.where(network.unlimited, big, capacity)
        out.append(f"c arcs without a capacity limit are written with capacity {big}")
    out.append(f"p {fmt} {n} {m}")
    tail, head = (network.tail.astype(np.int64) + 1).tolist(), (network.head.astype(np.int64) + 1).tolist()
    if fmt == "max":
        if source is None or sink is None:
            raise ValueError("a max-flow file needs a source and a sink")
        if network.lower is not None:
            raise ValueError("the max-flow format has no lower bounds")
        out += [f"n {source + 1} s", f"n {sink + 1} t"]
        out += list(map("a {} {} {}".format, tail, head, _text(capacity)))
    else:
        if supply is not None:
            nz = np.flatnonzero(supply)
            out += list(map("n {} {}".format, (nz + 1).tolist(), _text(supply[nz])))
        lower = network.lower if network.lower is not None else np.zeros(m, dtype=np.int64)
        cost = network.cost if network.cost is not None else np.zeros(m, dtype=np.int64)
        out += list(map("a {} {} {} {} {}".format, tail, head, _text(lower), _text(capacity), _text(cost)))
    return "\n".join(out) + "\n"
