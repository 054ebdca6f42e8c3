"""Networks over time: lanes with transit times and per-period capacities, nodes with holdover.

The arcs are read by :func:`service.model.arcs.read_arcs` (both forms) with the
fields of this kind; this module checks the columns it adds:

* ``transit``: whole periods ``>= 0`` (default 0);
* ``capacity``: per departure period, a number, ``null`` (no limit) or a list of
  ``horizon`` numbers or nulls; all numbers, or one list per arc, stay one array;
  a mixture becomes an ``(arcs, horizon)`` array with the single numbers repeated;
* node ``holdover`` (``null`` or absent: no limit), ``holdover_cost`` and ``supply``.

Columns are checked whole (numpy) and walked element by element only to name an error.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import chain

import numpy as np

from ..errors import FieldError, InputError
from .columns import MAX_REPORTED_ERRORS, NullableNumbers, number_column
from .ids import IdColumn

#: The arc fields of a network over time (``lower`` bounds have no meaning per period here).
TIMED_ARC_FIELDS = ("from", "to", "capacity", "transit", "cost", "key")
NODE_FIELDS = ("holdover", "holdover_cost", "supply")
NODE_DEFAULTS = {"holdover": None, "holdover_cost": 0, "supply": 0}
#: Transit beyond this many periods could overflow the period arithmetic; no horizon reaches it.
MAX_TRANSIT = 2**31 - 1


@dataclass(frozen=True)
class Capacity:
    """Per-period capacities: ``values`` shape (m,) or (m, horizon); ``null`` marks no limit (or None)."""

    values: np.ndarray
    null: np.ndarray | None


def transit_column(col: IdColumn | None, count: int) -> np.ndarray:
    """Whole periods ``>= 0`` per arc (0 when the column is absent).

    Raises
    ------
    InputError
        A value that is not a number, negative, fractional or beyond ``MAX_TRANSIT``.
    """
    if col is None:
        return np.zeros(count, dtype=np.int64)
    values = number_column(col.values, col.where, minimum=0).values
    if values.dtype.kind == "f":
        bad = values != np.floor(values)
        raise InputError([FieldError(col.where(int(i)), "must be a whole number of periods")
                          for i in np.flatnonzero(bad)[:MAX_REPORTED_ERRORS]])
    too_long = values > MAX_TRANSIT
    if too_long.any():
        raise InputError([FieldError(col.where(int(i)), f"must be at most {MAX_TRANSIT}")
                          for i in np.flatnonzero(too_long)[:MAX_REPORTED_ERRORS]])
    return values


def capacity_column(col: IdColumn | None, count: int, horizon: int) -> Capacity:
    """Capacities per departure period.

    Raises
    ------
    InputError
        A value that is neither a number, ``null`` nor a list; a list whose length is
        not ``horizon``; a bad number inside a list (named ``/arcs/3/capacity/5`` or
        ``/arcs/capacity/3/5``).
    """
    if col is None:
        return Capacity(np.zeros(count, dtype=np.int64), np.ones(count, dtype=bool))
    values = col.values
    if isinstance(values, (np.ndarray, NullableNumbers)) or list not in set(map(type, values)):
        checked = number_column(values, col.where, allow_null=True, minimum=0)
        return Capacity(checked.values, checked.null)
    rows = [i for i, v in enumerate(values) if type(v) is list]
    lengths = np.fromiter(map(len, (values[i] for i in rows)), dtype=np.int64, count=len(rows))
    wrong = np.flatnonzero(lengths != horizon)
    if wrong.size:
        raise InputError([FieldError(col.where(rows[int(k)]), f"has {lengths[k]} entries; a capacity list needs one "
                                                              f"per period: horizon is {horizon}")
                          for k in wrong[:MAX_REPORTED_ERRORS]])
    singles = [i for i, v in enumerate(values) if type(v) is not list]
    single = number_column([values[i] for i in singles], lambda k: col.where(singles[k]), allow_null=True,
                           minimum=0)
    flat = list(chain.from_iterable(values[i] for i in rows))
    listed = number_column(flat, lambda k: f"{col.where(rows[k // horizon])}/{k % horizon}", allow_null=True,
                           minimum=0)
    dtype = np.result_type(single.values.dtype, listed.values.dtype)
    out = np.zeros((count, horizon), dtype=dtype)
    null = np.zeros((count, horizon), dtype=bool)
    out[singles] = single.values[:, None]
    out[rows] = listed.values.reshape(len(rows), horizon)
    if single.null is not None:
        null[singles] = single.null[:, None]
    if listed.null is not None:
        null[rows] = listed.null.reshape(len(rows), horizon)
    return Capacity(out, null if null.any() else None)


def node_column(fields: dict, name: str, count: int, num_nodes: int, *, allow_null: bool = False,
                minimum: float | None = None):
    """A per-node field for all ``num_nodes`` nodes (declared nodes come first; the rest get the default).

    Returns
    -------
    (values, null)
        ``values`` of length ``num_nodes`` (the default where not given) and the mask
        of ``null`` entries (or None), or ``(None, None)`` when no node gives the field.
    """
    col = fields.get(name)
    if col is None:
        return None, None
    checked = number_column(col.values, col.where, allow_null=allow_null, minimum=minimum)
    values = np.zeros(num_nodes, dtype=checked.values.dtype)
    values[:count] = checked.values
    null = None
    if allow_null:
        null = np.zeros(num_nodes, dtype=bool)
        null[count:] = NODE_DEFAULTS[name] is None
        if checked.null is not None:
            null[:count] = checked.null
    return values, null
