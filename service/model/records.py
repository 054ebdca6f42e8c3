"""Records given as a list of objects (for people) or an object of columns (for machines).

The LP's variables, constraints and sparse matrix entries are all read this way
(:mod:`service.model.linear`): per-field value lists with a pointer function each,
then the checks shared by them (ids, bounds).
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import chain, repeat
from operator import is_not, methodcaller

import numpy as np

from ..errors import FieldError, InputError, pointer
from .columns import MAX_REPORTED_ERRORS, number_column
from .ids import MAX_ID_LENGTH

#: Records are named by ``id``, as nodes, arcs' ends and commodities are; ``name``, the
#: first spelling, is still read as an alias of it.
ID, ID_ALIAS = "id", "name"
#: Stands for a field an object-form record does not give (and has no default for).
ABSENT = object()


@dataclass
class Records:
    """Records (variables, constraints, matrix entries) split into per-field columns."""

    columns: dict  # field -> (values list, where)
    count: int
    form: str  # "objects" | "columns"


def read_records(raw, base: str, allowed: tuple, defaults: dict, what: str) -> Records:
    """Split a list of objects or an object of columns into per-field value lists.

    Parameters
    ----------
    raw : list or dict
        The member as decoded.
    base : str
        Its JSON Pointer.
    allowed : tuple of str
        The fields a record may have.
    defaults : dict
        Object form: the value of an absent field (:data:`ABSENT` when not listed).
    what : str
        What one record is, for messages ("variable", "constraint", "entry").

    Returns
    -------
    Records

    Raises
    ------
    InputError
        Wrong shape, unknown fields, columns of unequal length.

    Examples
    --------
    >>> records = read_records({"id": ["x"], "lower": [1]}, "/variables", ("id", "lower"), {}, "variable")
    >>> records.count, records.form, records.columns["lower"][1](0)
    (1, 'columns', '/variables/lower/0')
    """
    if isinstance(raw, list):
        if set(map(type, raw)) - {dict}:
            i = next(i for i, v in enumerate(raw) if type(v) is not dict)
            raise InputError.at(f"{base}/{i}", f"must be a {what} object")
        present = set(chain.from_iterable(raw))
        unknown = present - set(allowed)
        if unknown:
            i, name = next((i, k) for i, v in enumerate(raw) for k in v if k in unknown)
            raise InputError.at(pointer(base[1:], i, name), "unknown field")
        columns = {}
        for name in allowed:
            if name in present:
                values = list(map(methodcaller("get", name, defaults.get(name, ABSENT)), raw))
                columns[name] = (values, _object_where(base, name))
        return Records(columns, len(raw), "objects")
    if isinstance(raw, dict):
        unknown = set(raw) - set(allowed)
        if unknown:
            raise InputError.at(pointer(base[1:], sorted(unknown)[0]), "unknown field")
        count = None
        columns = {}
        for name in allowed:
            if name not in raw:
                continue
            values = raw[name]
            if not isinstance(values, list):
                raise InputError.at(f"{base}/{name}", "must be a list")
            if count is None:
                count, first = len(values), name
            elif len(values) != count:
                raise InputError.at(f"{base}/{name}", f"has {len(values)} entries; {base}/{first} has {count}")
            columns[name] = (values, _column_where(base, name))
        return Records(columns, count or 0, "columns")
    raise InputError.at(base, f"must be a list of {what} objects or an object of columns")


def _object_where(base, name):
    return lambda i: f"{base}/{i}/{name}"


def _column_where(base, name):
    return lambda i: f"{base}/{name}/{i}"


def fold_id_alias(records: Records, base: str) -> Records:
    """Read ``name`` as ``id``: each record (or the columns) gives one of the two; error
    pointers keep the spelling the client sent.

    Parameters
    ----------
    records : Records
        As :func:`read_records` made them (changed in place).
    base : str
        The member's JSON Pointer.

    Returns
    -------
    Records

    Raises
    ------
    InputError
        A record giving both.

    Examples
    --------
    >>> records = read_records([{"name": "x"}], "/variables", ("id", "name"), {}, "variable")
    >>> fold_id_alias(records, "/variables").columns["id"][0]
    ['x']
    """
    if ID_ALIAS not in records.columns:
        return records
    names, name_where = records.columns.pop(ID_ALIAS)
    if ID not in records.columns:
        records.columns[ID] = (names, name_where)
        return records
    ids, id_where = records.columns[ID]
    both = 0 if records.form == "columns" else next(
        (i for i, (a, b) in enumerate(zip(ids, names)) if a is not ABSENT and b is not ABSENT), None)
    if both is not None:
        where = f"{base}/{ID_ALIAS}" if records.form == "columns" else name_where(both)
        raise InputError.at(where, "give id or name (its older spelling), not both")
    merged = [b if a is ABSENT else a for a, b in zip(ids, names)]
    records.columns[ID] = (merged, lambda i: (name_where if ids[i] is ABSENT else id_where)(i))
    return records


def record_ids(records: Records, base: str, what: str) -> tuple[list, dict]:
    """The records' ``id`` column, checked: present, strings of 1-200 characters, distinct.

    Parameters
    ----------
    records : Records
    base : str
        The member's JSON Pointer.
    what : str
        What one record is, for messages.

    Returns
    -------
    (ids, lookup)
        The ids, and id -> position.

    Raises
    ------
    InputError
        Naming the first offending id.

    Examples
    --------
    >>> record_ids(read_records([{"id": "x"}, {"id": "y"}], "/v", ("id",), {}, "variable"), "/v", "variable")
    (['x', 'y'], {'x': 0, 'y': 1})
    """
    if ID not in records.columns:
        where = (lambda i: f"{base}/{i}/{ID}") if records.form == "objects" else (lambda i: f"{base}/{ID}")
        raise InputError.at(where(0), "is required")
    names, where = records.columns[ID]
    if ABSENT in names:
        i = next(i for i, v in enumerate(names) if v is ABSENT)
        raise InputError.at(where(i), "is required")
    if set(map(type, names)) - {str}:
        i = next(i for i, v in enumerate(names) if type(v) is not str)
        raise InputError.at(where(i), f"must be a {what} id: a string of 1-{MAX_ID_LENGTH} characters")
    lengths = np.fromiter(map(len, names), dtype=np.int64, count=len(names))
    bad = (lengths < 1) | (lengths > MAX_ID_LENGTH)
    if bad.any():
        idx = np.flatnonzero(bad)[:MAX_REPORTED_ERRORS]
        raise InputError([FieldError(where(int(i)), f"must be 1-{MAX_ID_LENGTH} characters long") for i in idx])
    lookup = dict(zip(names, range(len(names))))
    if len(lookup) < len(names):
        seen: dict = {}
        for i, v in enumerate(names):
            if v in seen:
                raise InputError.at(where(i), f"duplicate {what} id {v!r} (first at {seen[v]})")
            seen[v] = i
    return names, lookup


def bound(records: Records, name: str, absent: float, null: float) -> np.ndarray:
    """A bound column as float64: ``absent`` where the column is not given, ``null``
    where an entry is JSON null (object-form defaults are filled in when reading).

    Parameters
    ----------
    records : Records
    name : str
        The field.
    absent, null : float
        The bound where the column is missing, and where an entry is null.

    Returns
    -------
    ndarray of float64

    Raises
    ------
    InputError
        An entry that is no finite number (or null).

    Examples
    --------
    >>> bound(read_records({"id": ["x", "y"], "upper": [3, None]}, "/v", ("id", "upper"), {}, "variable"),
    ...       "upper", 9.0, 8.0).tolist()
    [3.0, 8.0]
    """
    if name not in records.columns:
        return np.full(records.count, absent)
    values, where = records.columns[name]
    col = number_column(values, where, allow_null=True)
    out = col.values.astype(np.float64)
    if col.null is not None:
        out[col.null] = null
    return out


def present(records: Records, name: str) -> np.ndarray:
    """Where a bound field holds a number (not absent, not null).

    Parameters
    ----------
    records : Records
    name : str
        The field.

    Returns
    -------
    ndarray of bool

    Examples
    --------
    >>> present(read_records([{"upper": 1}, {}], "/v", ("upper",), {"upper": None}, "variable"), "upper").tolist()
    [True, False]
    """
    if name not in records.columns:
        return np.zeros(records.count, dtype=bool)
    values, _ = records.columns[name]
    return np.fromiter(map(is_not, values, repeat(None)), dtype=bool, count=len(values))
