"""What-if changes to a normalised network, applied column-wise.

``changes`` is a list of objects, each naming one arc by ``arc`` (its index in the
stored network) or ``key`` (its client label) and giving at least one of
``capacity`` (a number >= 0, or null for no limit), ``cost`` (a number) and
``closed`` (true: the arc carries no flow; capacity and lower bound become 0).
Each arc may be named once per request.

The stored network is never modified: changed columns are fresh copies and unchanged
columns are shared (the stored arrays are read-only anyway).
"""

from __future__ import annotations

from dataclasses import replace
from itertools import chain, compress
from operator import methodcaller
from typing import Callable

import numpy as np

from ..errors import FieldError, InputError
from .arcs import Network, zeros_as_absent
from .columns import EXACT_FLOAT_INT, MAX_REPORTED_ERRORS, number_column
from .ids import IdColumn
from .stored import DEFAULTS, STORED_ARC_FIELDS, STORED_NODE_FIELDS, arc_column, as_json, checked_column, node_column

#: Arc changes: capacity, cost, closed and the optional columns (expand_*, transit).
ARC_EFFECTS = ("capacity", "cost", "closed") + STORED_ARC_FIELDS
#: Node changes (``node`` names the node): the over-time node columns.
NODE_EFFECTS = STORED_NODE_FIELDS
CHANGE_FIELDS = ("arc", "key") + ARC_EFFECTS + ("node",) + NODE_EFFECTS


def apply_changes(
    network: Network,
    changes: object,
    *,
    key_index: dict | Callable[[], dict] | None = None,
    base: str = "/changes",
    periods: bool = False,
) -> Network:
    """Return ``network`` with ``changes`` applied, as a new :class:`Network`.

    Parameters
    ----------
    network : Network
        The stored, normalised network; its arrays are not modified.
    changes : list of dict or None
        As decoded from JSON.
    key_index : dict or callable returning a dict, optional
        ``{arc key: arc index}``; a callable is only called when a change uses ``key``.
    base : str
        JSON Pointer of the ``changes`` member, for error messages.
    periods : bool
        Whether ``capacity`` may be a list of per-period capacities (flows over time);
        those go to ``extra["periods"]`` (arc -> list), with the change's pointer in
        ``extra["period_where"]`` for the kind's length check.

    Returns
    -------
    Network
        ``network`` itself when there are no changes.

    Raises
    ------
    InputError
        Naming the offending entries, e.g. ``/changes/3/arc``.

    Examples
    --------
    >>> import numpy as np
    >>> from service.model.ids import NodeIndex
    >>> net = Network(NodeIndex(["a", "b"], str), np.array([0], np.int32), np.array([1], np.int32),
    ...               np.array([5]), None, None, None, ["lane-1"])
    >>> apply_changes(net, [{"key": "lane-1", "capacity": 2}], key_index={"lane-1": 0}).capacity
    array([2])
    """
    if changes is None:
        return network
    if not isinstance(changes, list):
        raise InputError.at(base, "must be a list of change objects")
    if not changes:
        return network
    if set(map(type, changes)) - {dict}:
        i = next(i for i, c in enumerate(changes) if type(c) is not dict)
        raise InputError.at(f"{base}/{i}", "must be a change object")
    unknown = set(chain.from_iterable(changes)) - set(CHANGE_FIELDS)
    if unknown:
        i, name = next((i, k) for i, c in enumerate(changes) for k in c if k in unknown)
        raise InputError.at(f"{base}/{i}/{_escape(name)}", "unknown field: a change has arc or key, and "
                                                           f"{', '.join(ARC_EFFECTS)}; or node, and "
                                                           f"{' or '.join(NODE_EFFECTS)}")
    on_node = [i for i, c in enumerate(changes) if "node" in c]
    on_arc = [i for i, c in enumerate(changes) if "node" not in c]
    extra = _copy_extra(network.extra)
    if on_node:
        _node_changes(network, _Columns([changes[i] for i in on_node], base, on_node), extra)
    if on_arc:
        network = _arc_changes(network, [changes[i] for i in on_arc], base, on_arc, key_index, periods, extra)
    return replace(network, extra=extra if any(extra.values()) else None)


def _copy_extra(extra: dict | None) -> dict:
    """A what-if's own copy of the optional columns (the stored lists are shared until changed)."""
    extra = extra or {}
    return {"arcs": dict(extra.get("arcs", {})), "nodes": dict(extra.get("nodes", {}))}


def _arc_changes(network: Network, changes: list, base: str, rows: list, key_index, periods: bool,
                 extra: dict) -> Network:
    changes = _split_period_capacity(changes, base, rows, periods)
    cols = _Columns(changes, base, rows)
    target = _targets(cols, network, key_index)
    _reject_repeats(cols, target)
    cap = cols.numbers("capacity", allow_null=True, minimum=0)
    cost = cols.numbers("cost")
    closed = cols.booleans("closed")
    _check_effect(cols)
    for name in STORED_ARC_FIELDS:
        _set_column(extra["arcs"], name, cols, target, arc_column(network, name), network.num_arcs)
    listed, values = cols.values("capacity_periods")
    if listed.size:
        extra["periods"] = dict(zip(target[listed].tolist(), values))
        extra["period_where"] = {int(target[j]): cols.at(j, "capacity") for j in listed}
    capacity, unlimited, lower = _new_capacity(network, cols, target, cap, closed)
    new_cost = network.cost if cost is None else \
        zeros_as_absent(_assign(network.cost, network.num_arcs, target[cost[0]], cost[1]))
    return replace(network, capacity=capacity, unlimited=unlimited, cost=new_cost, lower=lower)


def _split_period_capacity(changes: list, base: str, rows: list, periods: bool) -> list:
    """Changes with a list ``capacity`` get it checked and moved to ``capacity_periods``."""
    listed = [j for j, c in enumerate(changes) if type(c.get("capacity")) is list]
    if not listed:
        return changes
    where = f"{base}/{rows[listed[0]]}/capacity"
    if not periods:
        raise InputError.at(where, "must be a number or null: per-period capacities are for flows over time")
    changes = list(changes)
    for j in listed:
        change = dict(changes[j])
        values = change.pop("capacity")
        at = f"{base}/{rows[j]}/capacity"
        checked = number_column(values, lambda k, at=at: f"{at}/{k}", allow_null=True, minimum=0)
        change["capacity_periods"] = as_json(checked.values, checked.null)
        changes[j] = change
    return changes


def _set_column(columns: dict, name: str, cols: "_Columns", target: np.ndarray, current: list | None,
                count: int) -> None:
    rows, values = cols.values(name)
    if not rows.size:
        return
    checked = checked_column(name, IdColumn(values, cols.where(name, rows)))
    column = list(current) if current is not None else [DEFAULTS[name]] * count
    for at, value in zip(target[rows].tolist(), checked):
        column[at] = value
    columns[name] = column


def _node_changes(network: Network, cols: "_Columns", extra: dict) -> None:
    """``{"node": id, "holdover": ...}`` changes: the node columns of flows over time."""
    for j, change in enumerate(cols.changes):
        wrong = [k for k in change if k not in ("node",) + NODE_EFFECTS]
        if wrong:
            raise InputError.at(cols.at(j, _escape(wrong[0])), "a node change gives only "
                                                              f"{' or '.join(NODE_EFFECTS)}")
        if len(change) == 1:
            raise InputError.at(cols.at(j), f"must give {' or '.join(NODE_EFFECTS)}")
    _, ids = cols.values("node")
    found = [network.nodes.index_of(v) if isinstance(v, (str, int)) and type(v) is not bool else None for v in ids]
    if None in found:
        j = found.index(None)
        raise InputError.at(cols.at(j, "node"), "no node of the stored network has this id")
    target = np.asarray(found, dtype=np.int64)
    order = np.argsort(target, kind="stable")
    repeat = np.flatnonzero(target[order][1:] == target[order][:-1])
    if repeat.size:
        first, again = int(order[repeat[0]]), int(order[repeat[0] + 1])
        raise InputError.at(cols.at(again, "node"), f"this node is already changed by {cols.at(first)}")
    for name in NODE_EFFECTS:
        _set_column(extra["nodes"], name, cols, target, node_column(network, name), network.num_nodes)


def _escape(name: str) -> str:
    return str(name).replace("~", "~0").replace("/", "~1")


class _Columns:
    """The changes split into columns, with presence masks (one C-level pass each)."""

    def __init__(self, changes: list, base: str, rows: list | None = None):
        self.changes = changes
        self.base = base
        self.count = len(changes)
        self.rows = rows  # each change's index in the request (when these are some of them)
        self._has: dict = {}

    def has(self, name: str) -> np.ndarray:
        """Which changes have the member ``name`` (computed once per name).

        Returns
        -------
        numpy.ndarray of bool
            One entry per change.
        """
        if name not in self._has:
            self._has[name] = np.fromiter(map(methodcaller("__contains__", name), self.changes), bool, self.count)
        return self._has[name]

    def values(self, name: str) -> tuple[np.ndarray, list]:
        """(indices of the changes having ``name``, their values)."""
        has = self.has(name)
        return np.flatnonzero(has), list(compress(map(methodcaller("get", name), self.changes), has))

    def where(self, name: str, rows: np.ndarray):
        """A pointer function for the values :meth:`values` returned for ``name``.

        Parameters
        ----------
        name : str
        rows : numpy.ndarray
            The change indices of those values.

        Returns
        -------
        callable
            Maps a position among the values to the JSON Pointer of that member.
        """
        return lambda j: self.at(rows[j], name)

    def at(self, row: int, name: str | None = None) -> str:
        """The JSON Pointer of a change, or of its member ``name``.

        Parameters
        ----------
        row : int
            Index among these changes; mapped through ``rows`` to the change's index in
            the request when the changes are a subset of it.
        name : str, optional

        Returns
        -------
        str
        """
        row = int(row) if self.rows is None else self.rows[int(row)]
        return f"{self.base}/{row}" + (f"/{name}" if name else "")

    def numbers(self, name: str, **kwargs):
        """The changes that give ``name``, and its values checked as JSON numbers.

        Parameters
        ----------
        name : str
        **kwargs
            Passed to :func:`~service.model.columns.number_column` (``allow_null``,
            ``minimum``).

        Returns
        -------
        tuple of (numpy.ndarray, NumberColumn), or None
            ``None`` when no change gives ``name``.

        Raises
        ------
        InputError
            Naming the first offending values.
        """
        rows, values = self.values(name)
        if not rows.size:
            return None
        checked = number_column(values, self.where(name, rows), **kwargs)
        return rows, checked

    def booleans(self, name: str):
        """The changes that give ``name``, and its values, which must be JSON booleans.

        Returns
        -------
        tuple of (numpy.ndarray, numpy.ndarray of bool), or None
            ``None`` when no change gives ``name``.

        Raises
        ------
        InputError
            Naming the first value that is not ``true`` or ``false``.
        """
        rows, values = self.values(name)
        if not rows.size:
            return None
        if set(map(type, values)) - {bool}:
            j = next(j for j, v in enumerate(values) if type(v) is not bool)
            raise InputError.at(self.at(rows[j], name), "must be true or false")
        return rows, np.asarray(values, dtype=bool)


def _errors(rows, name: str | None, detail: str, cols: _Columns) -> InputError:
    return InputError([FieldError(cols.at(r, name), detail) for r in rows[:MAX_REPORTED_ERRORS]])


def _targets(cols: _Columns, network: Network, key_index) -> np.ndarray:
    """The arc index each change names, validated."""
    has_arc, has_key = cols.has("arc"), cols.has("key")
    both = np.flatnonzero(has_arc & has_key)
    if both.size:
        raise _errors(both, "key", "give arc or key, not both", cols)
    neither = np.flatnonzero(~has_arc & ~has_key)
    if neither.size:
        raise _errors(neither, None, "must name an arc by arc (its index) or key", cols)
    target = np.empty(cols.count, dtype=np.int64)
    rows, values = cols.values("arc")
    if rows.size:
        target[rows] = _arc_indices(cols, rows, values, network.num_arcs)
    rows, values = cols.values("key")
    if rows.size:
        target[rows] = _key_indices(cols, rows, values, network, key_index)
    return target


def _arc_indices(cols: _Columns, rows: np.ndarray, values: list, num_arcs: int) -> np.ndarray:
    if set(map(type, values)) - {int}:
        j = next(j for j, v in enumerate(values) if type(v) is not int)
        raise InputError.at(cols.at(rows[j], "arc"), "must be an arc index (an integer)")
    try:
        idx = np.asarray(values, dtype=np.int64)
    except OverflowError:
        raise InputError.at(cols.at(rows[0], "arc"), "is out of range") from None
    bad = np.flatnonzero((idx < 0) | (idx >= num_arcs))
    if bad.size:
        raise _errors(rows[bad], "arc", f"must be an arc index from 0 to {num_arcs - 1}", cols)
    return idx


def _key_indices(cols: _Columns, rows: np.ndarray, values: list, network: Network, key_index) -> np.ndarray:
    if set(map(type, values)) - {str}:
        j = next(j for j, v in enumerate(values) if type(v) is not str)
        raise InputError.at(cols.at(rows[j], "key"), "must be an arc key (a string)")
    if network.keys is None:
        raise _errors(rows, "key", "the network has no arc keys; name arcs by index with arc", cols)
    index = key_index() if callable(key_index) else key_index
    if index is None:
        index = {k: i for i, k in enumerate(network.keys) if k is not None}
    found = list(map(index.get, values))
    if None in found:
        missing = [j for j, v in enumerate(found) if v is None]
        raise _errors(rows[missing], "key", "no arc has this key", cols)
    return np.asarray(found, dtype=np.int64)


def _reject_repeats(cols: _Columns, target: np.ndarray) -> None:
    order = np.argsort(target, kind="stable")
    repeat = np.flatnonzero(target[order][1:] == target[order][:-1])
    if repeat.size:
        first, again = int(order[repeat[0]]), int(order[repeat[0] + 1])
        name = "arc" if cols.has("arc")[again] else "key"
        raise InputError.at(cols.at(again, name), f"arc {int(target[again])} is already changed by {cols.at(first)}")


def _check_effect(cols: _Columns) -> None:
    effects = np.logical_or.reduce([cols.has(name) for name in ARC_EFFECTS + ("capacity_periods",)])
    none = np.flatnonzero(~effects)
    if none.size:
        raise _errors(none, None, f"must give {', '.join(ARC_EFFECTS)}", cols)
    capacity = cols.has("capacity") | cols.has("capacity_periods")
    both = np.flatnonzero(capacity & cols.has("closed"))
    if both.size:
        raise _errors(both, "closed", "cannot be combined with capacity (a closed arc has capacity 0)", cols)


def _new_capacity(network: Network, cols: _Columns, target: np.ndarray, cap, closed):
    capacity, unlimited, lower = network.capacity, network.unlimited, network.lower
    shut = np.empty(0, dtype=np.int64) if closed is None else target[closed[0][closed[1]]]
    if cap is None and not shut.size:
        return capacity, unlimited, lower
    m = network.num_arcs
    unl = np.zeros(m, dtype=bool) if unlimited is None else unlimited.copy()
    if cap is not None:
        rows, checked = cap
        arcs = target[rows]
        capacity = capacity.astype(np.result_type(capacity.dtype, checked.values.dtype), copy=True)
        capacity[arcs] = checked.values
        unl[arcs] = False if checked.null is None else checked.null
        if lower is not None:
            low = lower[arcs]
            bad = np.flatnonzero(~unl[arcs] & (capacity[arcs] < low))
            if bad.size:
                raise InputError([FieldError(cols.at(rows[j], "capacity"),
                                             f"must not be below the arc's lower bound {low[j]}")
                                  for j in bad[:MAX_REPORTED_ERRORS]])
    else:
        capacity = capacity.copy()
    if shut.size:
        capacity[shut] = 0
        unl[shut] = False
        if lower is not None:
            lower = lower.copy()
            lower[shut] = 0
            lower = lower if lower.any() else None
    return _integral(capacity), (unl if unl.any() else None), lower


def _assign(column: np.ndarray | None, m: int, arcs: np.ndarray, checked) -> np.ndarray:
    values = checked.values
    current = np.zeros(m, dtype=np.int64) if column is None else column
    out = current.astype(np.result_type(current.dtype, values.dtype), copy=True)
    out[arcs] = values
    return _integral(out)


def _integral(values: np.ndarray) -> np.ndarray:
    """Floats that are all whole numbers become int64, as the request parser does."""
    if values.dtype.kind == "f" and np.all(np.floor(values) == values) and np.all(np.abs(values) <= EXACT_FLOAT_INT):
        return values.astype(np.int64)
    return values
