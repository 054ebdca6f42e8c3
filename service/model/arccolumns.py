"""The arcs as typed columns: the one form in which every decoder hands arcs to the model.

Object form: ``[{"from": a, "to": b, "capacity": 80, ...}, ...]``.
Columnar form: ``{"from": [...], "to": [...], "capacity": [...], ...}``.
:func:`read_arcs` reads either, as orjson (or the simdjson path) decoded it, column by
column: one C-level pass per field, never a per-arc schema. The compiled body scanner
(:mod:`service.model.fastarcs`) makes an :class:`ArcColumns` straight from the bytes.
Nothing here checks a value: :func:`service.model.arcs.build_network` does, on every
path alike, in one order.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from operator import itemgetter

import numpy as np

from ..errors import FieldError, InputError, ProblemTooLarge
from .columns import MAX_REPORTED_ERRORS, NumberColumn, PointerFn, numbers_of
from .ids import IdColumn
from .interning import ArcEnds, ends_of

ARC_FIELDS = ("from", "to", "capacity", "cost", "lower", "key")
#: Arc fields only some kinds read (they ask for them by name): lane widening terms.
EXPANSION_FIELDS = ("expand_cost", "expand_max", "expand_fixed")
REQUIRED = ("from", "to")
NUMBER_FIELDS = ("capacity", "cost", "lower")
#: Value used for an absent optional field.
DEFAULTS = {"capacity": None, "cost": 0, "lower": 0, "key": None, "transit": 0, "expand_cost": None,
            "expand_max": None, "expand_fixed": 0}


@dataclass(frozen=True)
class ArcColumns:
    """The arcs of a request as typed columns, whichever decoder read them.

    ``numbers`` holds the ``capacity``, ``cost`` and ``lower`` columns given (by at
    least one arc, in the object form), ``keys`` the ``key`` labels as decoded (or
    ``None``). ``form`` says how a pointer names an arc's field: ``/arcs/<i>/<field>``
    for the object form, ``/arcs/<field>/<i>`` for the columnar one. ``others`` holds,
    as decoded, the columns of any further field the kind asked for (``transit``,
    ``expand_cost``, ...; or a ``capacity`` it reads itself, such as per-period lists),
    for the kind to check.
    """

    count: int
    ends: ArcEnds
    numbers: dict[str, NumberColumn]
    keys: list | None
    form: str = "objects"  # or "columns"
    base: str = "/arcs"
    others: dict[str, list | np.ndarray] = field(default_factory=dict)

    def where(self, field: str) -> PointerFn:
        """The JSON Pointer of ``field`` in each arc, as a function of the arc's index.

        Parameters
        ----------
        field : str
            One of ``ARC_FIELDS``.

        Returns
        -------
        callable

        Examples
        --------
        >>> arcs = read_arcs({"from": [1], "to": [2]})
        >>> arcs.where("to")(0)
        '/arcs/to/0'
        """
        base = self.base
        if self.form == "objects":
            return lambda i: f"{base}/{i}/{field}"
        return lambda i: f"{base}/{field}/{i}"

    def column(self, name: str) -> IdColumn | None:
        """Field ``name`` as a column with its pointers: as decoded when in ``others``,
        else the typed numbers or the keys (``None`` when no arc gives it).

        Examples
        --------
        >>> arcs = read_arcs({"from": [1], "to": [2], "transit": [3]}, fields=ARC_FIELDS + ("transit",))
        >>> arcs.column("transit").values, arcs.column("transit").where(0)
        ([3], '/arcs/transit/0')
        """
        values = self.others.get(name, self.numbers.get(name))
        if values is None and name == "key":
            values = self.keys
        return None if values is None else IdColumn(values, self.where(name))


def read_arcs(raw: object, *, base: str = "/arcs", max_arcs: int | None = None,
              fields: tuple[str, ...] = ARC_FIELDS, as_decoded: tuple[str, ...] = ()) -> ArcColumns:
    """The ``arcs`` member as :class:`ArcColumns`, its shape checked.

    Parameters
    ----------
    raw : list, dict or ArcColumns
        As decoded: a list of arc objects or an object of columns (lists, or typed
        numpy arrays from the simdjson path or a DIMACS file), or the columns a fast
        decoder already made.
    base : str
        The member's JSON Pointer.
    max_arcs : int, optional
        The most arcs a request may have.
    fields : tuple of str
        The arc fields the problem kind takes (``from`` and ``to`` first); any other is
        an unknown field. Those beyond ``ARC_FIELDS`` go to ``others``.
    as_decoded : tuple of str
        Fields of ``NUMBER_FIELDS`` the kind reads itself (per-period ``capacity``
        lists): kept in ``others`` as decoded. A fast decoder's typed column stays in
        ``numbers`` (it holds only numbers and nulls).

    Returns
    -------
    ArcColumns

    Raises
    ------
    InputError
        Wrong shape, unknown or missing fields, columns of unequal length.
    ProblemTooLarge
        More than ``max_arcs`` arcs.

    Examples
    --------
    >>> arcs = read_arcs([{"from": "a", "to": "b", "capacity": 5}])
    >>> arcs.count, arcs.ends.names, arcs.numbers["capacity"].values.tolist()
    (1, ['a', 'b'], [5])
    """
    if isinstance(raw, ArcColumns):
        _foreign_columns(raw, fields)
        columns, count = None, raw.count
    elif isinstance(raw, list):
        columns, count, form = _read_objects(raw, base, fields), len(raw), "objects"
    elif isinstance(raw, dict):
        columns, form = _read_columns(raw, base, fields), "columns"
        count = len(columns["from"])
    else:
        raise InputError.at(base, "must be a list of arc objects or an object of columns")
    if max_arcs is not None and count > max_arcs:
        raise ProblemTooLarge(FieldError(base, f"has {count} arcs; the limit is {max_arcs}"))
    return raw if columns is None else _typed(columns, count, form, base, as_decoded)


def _typed(columns: dict, count: int, form: str, base: str, as_decoded: tuple[str, ...]) -> ArcColumns:
    keys = columns.get("key")
    numbers = {name: numbers_of(columns[name]) for name in NUMBER_FIELDS
               if name in columns and name not in as_decoded}
    others = {name: values for name, values in columns.items()
              if name not in numbers and name not in ("from", "to", "key")}
    return ArcColumns(count, ends_of(columns["from"], columns["to"]), numbers,
                      keys.tolist() if isinstance(keys, np.ndarray) else keys, form, base, others)


def _foreign_columns(arcs: ArcColumns, fields: tuple[str, ...]) -> None:
    """A scanned column this kind does not take is an unknown field, as on the ordinary path.

    The scanner fills an absent number with its default, so the arc named is the first
    with a value other than 0 (the first arc when every value is 0).
    """
    for name, col in arcs.numbers.items():
        if name not in fields:
            given = col.values != 0 if col.null is None else (col.values != 0) | col.null
            i = int(np.flatnonzero(given)[0]) if given.any() else 0
            raise InputError.at(arcs.where(name)(i), "unknown field")
    if arcs.keys is not None and "key" not in fields:
        i = next((i for i, v in enumerate(arcs.keys) if v is not None), 0)
        raise InputError.at(arcs.where("key")(i), "unknown field")


_ABSENT = object()


def _read_objects(raw: list, base: str, fields: tuple[str, ...]) -> dict:
    if set(map(type, raw)) - {dict}:
        i = next(i for i, a in enumerate(raw) if type(a) is not dict)
        raise InputError.at(f"{base}/{i}", "must be an arc object")
    # Count keys instead of collecting them: every key must be accounted for by a
    # known field, or some arc carries an unknown one (then we go and find it).
    unaccounted = sum(map(len, raw))
    columns = {}
    for name in fields:
        if name not in REQUIRED and unaccounted == 0:
            break
        values, present = _object_column(raw, name, base)
        if present or name in REQUIRED:  # an empty arc list still has its (empty) columns
            columns[name] = values
            unaccounted -= present
    if unaccounted:
        i, key = next((i, k) for i, a in enumerate(raw) for k in a if k not in fields)
        raise InputError.at(f"{base}/{i}/{_escape(key)}", "unknown field")
    return columns


def _object_column(raw: list, name: str, base: str) -> tuple[list, int]:
    """One field of every arc object, and how many arcs carry it."""
    try:
        return list(map(itemgetter(name), raw)), len(raw)
    except KeyError:
        pass
    if name in REQUIRED:
        missing = [i for i, a in enumerate(raw) if name not in a][:MAX_REPORTED_ERRORS]
        raise InputError([FieldError(f"{base}/{i}/{name}", "is required") for i in missing])
    values = [a.get(name, _ABSENT) for a in raw]
    present = len(values) - values.count(_ABSENT)
    default = DEFAULTS[name]
    return [default if v is _ABSENT else v for v in values], present


def _read_columns(raw: dict, base: str, fields: tuple[str, ...]) -> dict:
    unknown = set(raw) - set(fields)
    if unknown:
        raise InputError.at(f"{base}/{_escape(sorted(unknown)[0])}", "unknown field")
    for name in REQUIRED:
        if name not in raw:
            raise InputError.at(f"{base}/{name}", "is required")
    count = None
    columns = {}
    for name in fields:
        if name not in raw:
            continue
        values = raw[name]
        if not isinstance(values, (list, np.ndarray)):
            raise InputError.at(f"{base}/{name}", "must be a list")
        if count is None:
            count = len(values)
        elif len(values) != count:
            raise InputError.at(f"{base}/{name}", f"has {len(values)} entries; {base}/from has {count}")
        columns[name] = values
    return columns


def _escape(name: str) -> str:
    return str(name).replace("~", "~0").replace("/", "~1")
