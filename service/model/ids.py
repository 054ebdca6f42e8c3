"""Node ids: strings (1-200 characters) or non-negative integers, one kind per payload.

Interning maps every id to a dense int32 index, in the contract's order: the
request's ``nodes`` first, then nodes first seen in the arcs, in order of appearance
(``from`` before ``to`` within an arc).
"""

from __future__ import annotations

import json
import unicodedata
from dataclasses import dataclass
from itertools import islice

import numpy as np

from ..errors import FieldError, InputError
from .columns import MAX_REPORTED_ERRORS, PointerFn, first_errors, mask_errors

try:  # compiled at install (setup.py); without a C compiler the numpy path below serves
    from ._firstseen import first_seen
except ImportError:
    first_seen = None

MAX_ID_LENGTH = 200
#: Dense lookup tables for integer ids are used while the largest id is at most this
#: many times the number of ids seen (plus a constant); beyond that we sort.
DENSE_FACTOR = 8


@dataclass(frozen=True)
class IdColumn:
    """A list of ids as decoded from JSON, with a function naming each element."""

    values: list
    where: PointerFn


@dataclass(frozen=True)
class InternedIds:
    """String ids already interned by the compiled body scanner: element ``i`` is
    ``names[codes[i]]``, and ``names`` holds the distinct ids in order of first
    mention (``from`` before ``to`` within an arc). The ``from`` and ``to`` columns of
    one body share one ``names`` list, so interning never builds a Python string per
    arc end. Iterating (only the error paths do) yields the ids as ``str``.
    """

    codes: np.ndarray  # int32
    names: list

    def __len__(self) -> int:
        return int(self.codes.size)

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [self.names[c] for c in self.codes[i].tolist()]
        return self.names[self.codes[i]]

    def __iter__(self):
        return map(self.names.__getitem__, self.codes.tolist())


@dataclass
class NodeIndex:
    """Interned node ids: ``ids[i]`` is the id of node ``i``."""

    ids: list
    kind: type  # str or int
    lookup: dict | None = None  # id -> index, built on demand

    def __len__(self) -> int:
        return len(self.ids)

    def __getstate__(self) -> dict:
        # A solver process gets the ids without the lookup: rebuilding that dict on
        # demand costs less than pickling it both ways (tens of ms at 100k nodes).
        return {**self.__dict__, "lookup": None}

    def index_of(self, node_id: object) -> int | None:
        if type(node_id) is not self.kind:
            return None
        if self.lookup is not None:
            return self.lookup.get(node_id)
        if self.kind is int:
            hits = np.flatnonzero(np.asarray(self.ids, dtype=np.int64) == node_id)
            return int(hits[0]) if hits.size else None
        self.lookup = {v: i for i, v in enumerate(self.ids)}
        return self.lookup.get(node_id)


#: How many known ids an error message searches for a look-alike (error path only).
LOOKALIKE_SCAN = 1_000_000


def shown_id(value: object) -> str:
    """An id as an error message shows it: its repr and, when it holds anything but
    printable ASCII, its code points as JSON escapes, since two ids can look the same
    and differ there ("Zürich" as one code point or as "u" plus a combining diaeresis).

    Examples
    --------
    >>> shown_id("hub-a")
    "'hub-a'"
    >>> print(shown_id("Zu\\u0308rich"))
    'Zu\u0308rich' ("Zu\\u0308rich", not in NFC form)
    """
    text = repr(value)
    if isinstance(value, str) and not (value.isascii() and value.isprintable()):
        nfc = "" if unicodedata.is_normalized("NFC", value) else ", not in NFC form"
        text += f" ({json.dumps(value)}{nfc})"
    return text


def lookalike(value: object, known) -> str:
    """A clause naming a known id that differs from ``value`` only in Unicode
    normalisation (NFKC), or ``""``. Ids are compared exactly, code point by code point;
    this only explains an "unknown" error whose id prints like a known one."""
    if not isinstance(value, str):
        return ""
    target, plain = unicodedata.normalize("NFKC", value), value.isascii()
    for other in islice(known, LOOKALIKE_SCAN):
        if (isinstance(other, str) and other != value and not (plain and other.isascii())
                and unicodedata.normalize("NFKC", other) == target):
            return (f"; the known id {shown_id(other)} differs from it only in Unicode normalisation "
                    f"(ids are compared exactly)")
    return ""


def _kinds(col: IdColumn) -> set:
    if isinstance(col.values, np.ndarray):  # typed columns from the fast decoder
        return {int} if col.values.dtype.kind == "i" else {float}
    if isinstance(col.values, InternedIds):
        return {str} if len(col.values) else set()
    return set(map(type, col.values))


def _check_kinds(columns: list[IdColumn]) -> type | None:
    seen = set().union(*(_kinds(c) for c in columns))
    if not seen:
        return None
    if len(seen) > 1 or not seen <= {str, int}:
        raise _kind_errors(columns)
    return seen.pop()


def _python_values(col: IdColumn):
    """The column's ids as Python objects (numpy scalars are neither str nor int)."""
    return col.values.tolist() if isinstance(col.values, np.ndarray) else col.values


def _kind_errors(columns: list[IdColumn]) -> InputError:
    """Name the ids that do not fit: anything but a string or an integer, and the ids
    of the less common kind when both appear (on a tie, the kind of the first id wins)."""
    counts, first = {str: 0, int: 0}, None
    for c in columns:
        for v in _python_values(c):
            kind = type(v)
            if kind in counts:
                counts[kind] += 1
                first = first or kind
    majority = str if counts[str] > counts[int] or (counts[str] == counts[int] and first is str) else int
    errors = []
    for c in columns:
        for i, v in enumerate(_python_values(c)):
            if type(v) is not majority:
                errors.append(FieldError(c.where(i), _id_message(v, majority)))
                if len(errors) >= MAX_REPORTED_ERRORS:
                    return InputError(errors)
    return InputError(errors)


def _id_message(value: object, majority: type) -> str:
    if type(value) in (str, int):
        kind = "strings" if majority is str else "integers"
        return f"node ids in one payload must all be {kind}"
    return "must be a node id: a string of 1-200 characters or a non-negative integer"


def _bad_length(ids) -> bool:
    lengths = np.fromiter(map(len, ids), dtype=np.int64, count=len(ids))
    return bool(lengths.size) and (lengths.min() < 1 or lengths.max() > MAX_ID_LENGTH)


def _check_strings(columns: list[IdColumn]) -> None:
    for c in columns:
        if not c.values:
            continue
        lengths = np.fromiter(map(len, c.values), dtype=np.int64, count=len(c.values))
        bad = (lengths < 1) | (lengths > MAX_ID_LENGTH)
        if bad.any():
            idx = np.flatnonzero(bad)[:MAX_REPORTED_ERRORS]
            raise InputError([FieldError(c.where(int(i)), "must be 1-200 characters long") for i in idx])


def _int_arrays(columns: list[IdColumn]) -> list[np.ndarray]:
    arrays = []
    for c in columns:
        try:
            arr = np.asarray(c.values, dtype=np.int64)
        except OverflowError:
            raise first_errors(c.values, lambda v: v < 0 or v >= 2**63, c.where, _int_id_message) from None
        if arr.size == 0:
            arr = arr.astype(np.int64)
        bad = arr < 0
        if bad.any():
            raise mask_errors(bad, c.where, "must be a non-negative integer")
        arrays.append(arr)
    return arrays


def _int_id_message(value: int) -> str:
    return "must be a non-negative integer" if value < 0 else "integer node ids must fit in 63 bits"


def _interleave(a: np.ndarray | list, b: np.ndarray | list):
    """a0, b0, a1, b1, ...: the order in which an arc list mentions its nodes."""
    if isinstance(a, np.ndarray):
        out = np.empty(a.size + b.size, dtype=a.dtype)
    else:
        out = [None] * (len(a) + len(b))
    out[0::2] = a
    out[1::2] = b
    return out


def intern_ids(declared: IdColumn, tails: IdColumn, heads: IdColumn) -> tuple[NodeIndex, np.ndarray, np.ndarray]:
    """Intern declared node ids and the arcs' end points.

    Parameters
    ----------
    declared : IdColumn
        The request's ``nodes`` ids (may be empty). Duplicates are an error.
    tails, heads : IdColumn
        The arcs' ``from`` and ``to`` ids, of equal length.

    Returns
    -------
    (NodeIndex, tail, head)
        ``tail`` and ``head`` are int32 arrays of node indices.

    Raises
    ------
    InputError
        Mixed id kinds, bad ids, or duplicate declared nodes.
    """
    columns = [declared, tails, heads]
    kind = _check_kinds(columns) or str
    if len(set(declared.values)) < len(declared.values):
        _raise_duplicates(declared)
    if kind is str:
        t, h = tails.values, heads.values
        if isinstance(t, InternedIds) and isinstance(h, InternedIds) and t.names is h.names:
            lookup, tail, head = _intern_codes(declared.values, t, h)
        else:
            lookup, tail, head = _intern_strings(declared.values, list(t), list(h))
        # Lengths are checked once per distinct id, not once per arc end.
        if _bad_length(lookup):
            _check_strings(columns)
        index = NodeIndex(list(lookup), str, lookup)
    else:
        d, t, h = _int_arrays(columns)
        ids, tail, head = _intern_ints(d, t, h)
        index = NodeIndex(ids, int)
    if len(index) >= 2**31:
        raise InputError.at("/nodes", "too many nodes")
    return index, tail, head


def _raise_duplicates(declared: IdColumn) -> None:
    seen = set()
    for i, v in enumerate(declared.values):
        if v in seen:
            raise InputError.at(declared.where(i), f"duplicate node id {v!r}")
        seen.add(v)


def _intern_strings(declared: list, tails: list, heads: list):
    order = dict.fromkeys(declared)
    order.update(dict.fromkeys(_interleave(tails, heads)))
    lookup = dict(zip(order, range(len(order))))
    tail = np.fromiter(map(lookup.__getitem__, tails), dtype=np.int32, count=len(tails))
    head = np.fromiter(map(lookup.__getitem__, heads), dtype=np.int32, count=len(heads))
    return lookup, tail, head


def _intern_ints(declared: np.ndarray, tails: np.ndarray, heads: np.ndarray):
    size = declared.size + tails.size + heads.size
    if size == 0:
        return [], tails.astype(np.int32), heads.astype(np.int32)
    top = max(int(a.max()) for a in (declared, tails, heads) if a.size)
    if top <= DENSE_FACTOR * size + 1_000_000:
        if first_seen is not None:  # one compiled pass: about 5 ms at 1M arcs against 18 ms below
            ids, tail, head = first_seen(*(np.ascontiguousarray(a, dtype=np.int64) for a in (declared, tails, heads)),
                                         top)
            return ids.tolist(), tail, head
        # The position of each id's first mention in the order declared, from, to,
        # from, to, ...: without building that interleaved sequence.
        first = np.full(top + 1, size, dtype=np.int64)
        np.minimum.at(first, declared, np.arange(declared.size, dtype=np.int64))
        mentions = declared.size + 2 * np.arange(tails.size, dtype=np.int64)
        np.minimum.at(first, tails, mentions)
        mentions += 1
        np.minimum.at(first, heads, mentions)
        present = np.flatnonzero(first < size)
        ids = present[np.argsort(first[present], kind="stable")]
        rank = np.empty(top + 1, dtype=np.int32)
        rank[ids] = np.arange(ids.size, dtype=np.int32)
        return ids.tolist(), rank[tails], rank[heads]
    seq = np.concatenate([declared, _interleave(tails, heads)])
    uniq, first, inverse = np.unique(seq, return_index=True, return_inverse=True)
    order = np.argsort(first, kind="stable")
    rank = np.empty(uniq.size, dtype=np.int32)
    rank[order] = np.arange(uniq.size, dtype=np.int32)
    codes = rank[inverse]
    n_decl = declared.size
    return uniq[order].tolist(), codes[n_decl::2].copy(), codes[n_decl + 1 :: 2].copy()


def _intern_codes(declared: list, tails: InternedIds, heads: InternedIds):
    """:func:`_intern_strings` for ids the body scanner has already interned: only
    the declared nodes, which come first, renumber them."""
    order = dict.fromkeys(declared)
    order.update(dict.fromkeys(tails.names))
    lookup = dict(zip(order, range(len(order))))
    if not declared:  # the scanner's numbering is already the contract's order
        return lookup, tails.codes, heads.codes
    rank = np.fromiter(map(lookup.__getitem__, tails.names), dtype=np.int32, count=len(tails.names))
    return lookup, rank[tails.codes], rank[heads.codes]
