"""Arcs in object form or columnar form, normalised into numpy arrays.

Object form: ``[{"from": a, "to": b, "capacity": 80, ...}, ...]``.
Columnar form: ``{"from": [...], "to": [...], "capacity": [...], ...}``.
Both are read column by column: one C-level pass per field, never a per-arc schema.
"""

from __future__ import annotations

from dataclasses import dataclass
from operator import itemgetter

import numpy as np

from ..errors import FieldError, InputError, ProblemTooLarge
from .columns import MAX_REPORTED_ERRORS, NullableNumbers, NumberColumn, number_column
from .ids import MAX_ID_LENGTH, IdColumn, InternedIds, NodeIndex, intern_ids

ARC_FIELDS = ("from", "to", "capacity", "cost", "lower", "key")
#: Arc fields only some kinds read (they ask for them by name): lane widening terms.
EXPANSION_FIELDS = ("expand_cost", "expand_max", "expand_fixed")
REQUIRED = ("from", "to")
#: Value used for an absent optional field.
DEFAULTS = {"capacity": None, "cost": 0, "lower": 0, "key": None, "transit": 0, "expand_cost": None,
            "expand_max": None, "expand_fixed": 0}


@dataclass(frozen=True)
class RawArcs:
    """The arcs' columns as decoded lists, each with its pointer function."""

    columns: dict  # field -> IdColumn-like (values, where)
    count: int
    form: str  # "objects" or "columns"


@dataclass(frozen=True)
class ObjectArcs:
    """Object-form arcs already split into columns (numpy arrays, :class:`NullableNumbers`
    or :class:`~service.model.ids.InternedIds`) by the API's compiled body scanner.
    Pointers still name ``/arcs/<i>/<field>``, as for the list of objects they came
    from."""

    columns: dict
    count: int


def read_arcs(raw: object, *, base: str = "/arcs", max_arcs: int | None = None,
              fields: tuple[str, ...] = ARC_FIELDS) -> RawArcs:
    """Split the ``arcs`` member into columns, checking its shape.

    ``fields`` are the arc fields the problem kind takes (``from`` and ``to`` first).

    Raises
    ------
    InputError
        Wrong shape, unknown or missing fields, columns of unequal length.
    ProblemTooLarge
        More than ``max_arcs`` arcs.
    """
    if isinstance(raw, ObjectArcs):
        _foreign_columns(raw, base, fields)
        arcs = RawArcs({name: IdColumn(values, _object_where(base, name)) for name, values in raw.columns.items()},
                       raw.count, "objects")
    elif isinstance(raw, list):
        arcs = _read_objects(raw, base, fields)
    elif isinstance(raw, dict):
        arcs = _read_columns(raw, base, fields)
    else:
        raise InputError.at(base, "must be a list of arc objects or an object of columns")
    if max_arcs is not None and arcs.count > max_arcs:
        raise ProblemTooLarge(FieldError(base, f"has {arcs.count} arcs; the limit is {max_arcs}"))
    return arcs


_ABSENT = object()


def _foreign_columns(raw: ObjectArcs, base: str, fields: tuple[str, ...]) -> None:
    """A scanned column this kind does not take is an unknown field, as on the ordinary path.

    The scanner fills an absent number with its default, so the arc named is the first
    with a value other than 0 (the first arc when every value is 0).
    """
    for name in raw.columns:
        if name not in fields:
            values = np.asarray(getattr(raw.columns[name], "values", raw.columns[name]))
            i = int(np.flatnonzero(values)[0]) if values.dtype.kind in "if" and values.any() else 0
            raise InputError.at(f"{base}/{i}/{_escape(name)}", "unknown field")


def _read_objects(raw: list, base: str, fields: tuple[str, ...] = ARC_FIELDS) -> RawArcs:
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
            columns[name] = IdColumn(values, _object_where(base, name))
            unaccounted -= present
    if unaccounted:
        i, key = next((i, k) for i, a in enumerate(raw) for k in a if k not in fields)
        raise InputError.at(f"{base}/{i}/{_escape(key)}", "unknown field")
    return RawArcs(columns, len(raw), "objects")


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


def _read_columns(raw: dict, base: str, fields: tuple[str, ...] = ARC_FIELDS) -> RawArcs:
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
        if not isinstance(values, (list, np.ndarray, InternedIds, NullableNumbers)):
            raise InputError.at(f"{base}/{name}", "must be a list")
        if count is None:
            count = len(values)
        elif len(values) != count:
            raise InputError.at(f"{base}/{name}", f"has {len(values)} entries; {base}/from has {count}")
        columns[name] = IdColumn(values, _column_where(base, name))
    return RawArcs(columns, count or 0, "columns")


def _escape(name: str) -> str:
    return str(name).replace("~", "~0").replace("/", "~1")


def _object_where(base: str, name: str):
    return lambda i: f"{base}/{i}/{name}"


def _column_where(base: str, name: str):
    return lambda i: f"{base}/{name}/{i}"


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
        return len(self.nodes)

    @property
    def num_arcs(self) -> int:
        return int(self.tail.size)

    @property
    def integral(self) -> bool:
        return all(a is None or a.dtype.kind == "i" for a in (self.capacity, self.cost, self.lower))

    def capacity_or(self, big) -> np.ndarray:
        """Capacities with unlimited arcs set to ``big``."""
        if self.unlimited is None or not self.unlimited.any():
            return self.capacity
        cap = self.capacity.astype(np.result_type(self.capacity.dtype, type(big)), copy=True)
        cap[self.unlimited] = big
        return cap


def build_network(raw: RawArcs, declared: IdColumn, *, allow_lower: bool = True) -> Network:
    """Normalise decoded arcs and declared node ids into a :class:`Network`.

    Raises
    ------
    InputError
        Any bad id or number, naming the field by JSON Pointer.
    """
    cols = raw.columns
    nodes, tail, head = intern_ids(declared, cols["from"], cols["to"])
    capacity, unlimited = _capacity(cols.get("capacity"), raw.count)
    cost = zeros_as_absent(_optional(cols.get("cost"), minimum=None))
    lower = zeros_as_absent(_optional(cols.get("lower"), minimum=0))
    if lower is not None:
        if not allow_lower:
            i = int(np.flatnonzero(lower)[0])
            raise InputError.at(cols["lower"].where(i), "lower bounds are not supported by this problem kind")
        else:
            _check_lower(lower, capacity, unlimited, cols["lower"])
    keys = read_keys(cols.get("key"))
    return Network(nodes, tail, head, capacity, unlimited, cost, lower, keys)


def zeros_as_absent(values: np.ndarray | None) -> np.ndarray | None:
    """``None`` for a column of zeros: an explicit default is the default left out, so
    both normalise (and hash) alike."""
    return None if values is None or not values.any() else values


def read_network(arcs_raw, nodes_raw, *, max_arcs: int, max_nodes: int, allow_lower: bool = True,
                 node_fields: tuple[str, ...] = ("supply",)):
    """Read, check and normalise the ``arcs`` and ``nodes`` members of a request.

    Returns
    -------
    (Network, RawNodes)
        The network, and the nodes as read (for per-node fields such as ``supply``).

    Raises
    ------
    InputError, ProblemTooLarge
        Naming the offending field by JSON Pointer.
    """
    network, nodes, _ = read_network_with(arcs_raw, nodes_raw, max_arcs=max_arcs, max_nodes=max_nodes,
                                          allow_lower=allow_lower, node_fields=node_fields)
    return network, nodes


def read_network_with(arcs_raw, nodes_raw, *, max_arcs: int, max_nodes: int, allow_lower: bool = True,
                      node_fields: tuple[str, ...] = ("supply",), arc_fields: tuple[str, ...] = (),
                      node_defaults: dict | None = None):
    """:func:`read_network`, also accepting the arc fields ``arc_fields``.

    Returns
    -------
    (Network, RawNodes, dict)
        As :func:`read_network`, and the extra fields' columns as read (those no arc
        has are absent), for the kind to check.
    """
    from .nodes import read_nodes

    arcs = read_arcs(arcs_raw, max_arcs=max_arcs, fields=ARC_FIELDS + arc_fields)
    nodes = read_nodes(nodes_raw, extra_fields=node_fields, defaults=node_defaults)
    network = build_network(arcs, nodes.ids, allow_lower=allow_lower)
    if network.num_nodes > max_nodes:
        raise ProblemTooLarge(FieldError("/nodes", f"has {network.num_nodes} nodes; the limit is {max_nodes}"))
    return network, nodes, {name: arcs.columns[name] for name in arc_fields if name in arcs.columns}


def _capacity(col: IdColumn | None, count: int):
    if col is None:
        return np.zeros(count, dtype=np.int64), np.ones(count, dtype=bool)
    checked: NumberColumn = number_column(col.values, col.where, allow_null=True, minimum=0)
    return checked.values, checked.null


def _optional(col: IdColumn | None, *, minimum):
    if col is None:
        return None
    return number_column(col.values, col.where, minimum=minimum).values


def _check_lower(lower, capacity, unlimited, col: IdColumn) -> None:
    bad = lower > capacity
    if unlimited is not None:
        bad &= ~unlimited
    if bad.any():
        idx = np.flatnonzero(bad)[:MAX_REPORTED_ERRORS]
        raise InputError([FieldError(col.where(int(i)), "must not exceed the arc's capacity") for i in idx])


def read_keys(col: IdColumn | None) -> list | None:
    """Arc keys: strings of 1-200 characters or null, unique (None when the column is absent)."""
    if col is None:
        return None
    values = col.values
    kinds = set(map(type, values))
    if kinds <= {type(None)}:  # every label null: as if no arc had one
        return None
    if not kinds <= {str, type(None)}:
        i = next(i for i, v in enumerate(values) if v is not None and type(v) is not str)
        raise InputError.at(col.where(i), "must be a string or null")
    labels = [v for v in values if v is not None]
    if len(set(labels)) == len(labels) and all(1 <= len(v) <= MAX_ID_LENGTH for v in labels):
        return values
    seen: dict = {}
    for i, v in enumerate(values):
        if v is None:
            continue
        if not 1 <= len(v) <= MAX_ID_LENGTH:
            raise InputError.at(col.where(i), "must be 1-200 characters long")
        if v in seen:
            raise InputError.at(col.where(i), f"duplicate arc key {v!r} (first at arc {seen[v]})")
        seen[v] = i
    return values
