"""Interning: every node id to a dense int32 index, in the contract's order.

The request's ``nodes`` come first, then nodes first seen in the arcs, in order of
appearance (``from`` before ``to`` within an arc). The arcs' ends arrive as
:class:`ArcEnds`, whichever decoder read them; the checks of the ids (one kind per
payload, lengths, ranges, duplicates) run here, on every path alike.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import FieldError, InputError
from .columns import MAX_REPORTED_ERRORS, PointerFn, first_errors, mask_errors
from .ids import MAX_ID_LENGTH, IdColumn, NodeIndex

try:  # compiled at install (setup.py); without a C compiler the numpy path below serves
    from ._firstseen import first_seen
except ImportError:
    first_seen = None

#: Dense lookup tables for integer ids are used while the largest id is at most this
#: many times the number of ids seen (plus a constant); beyond that we sort.
DENSE_FACTOR = 8


@dataclass(frozen=True)
class ArcEnds:
    """The arcs' ``from`` and ``to`` ids, typed: the one form every decoder hands the model.

    Integer ids: ``tail`` and ``head`` are int64 arrays of the ids themselves. String
    ids: int32 codes into ``names``, the distinct ids in order of first mention
    (``from`` before ``to`` within an arc), so interning never builds a Python string
    per arc end. Ids that are not all of one kind (or integers beyond int64), which
    only a JSON body can send, stay as decoded in object arrays: the model names them
    in its error. :func:`ends_of` types decoded JSON arrays; the compiled body scanner
    makes the ends directly.
    """

    tail: np.ndarray
    head: np.ndarray
    names: list | None = None

    @classmethod
    def empty(cls) -> ArcEnds:
        """The ends of no arcs (no kind of id either).

        Returns
        -------
        ArcEnds

        Examples
        --------
        >>> ArcEnds.empty().kinds()
        set()
        """
        return cls(np.zeros(0, dtype=np.int32), np.zeros(0, dtype=np.int32), [])

    def kinds(self) -> set:
        """The Python types of the ids.

        Returns
        -------
        set
            ``{int}`` or ``{str}``; empty when there are no arcs; several types (or
            others) only for ids kept as decoded.

        Examples
        --------
        >>> ends_of([1, "b"], [2, 3]).kinds() == {int, str}
        True
        """
        if not self.tail.size:
            return set()
        if self.names is not None:
            return {str}
        return _end_kinds(self.tail) | _end_kinds(self.head)

    def columns(self, where_from: PointerFn, where_to: PointerFn) -> tuple[IdColumn, IdColumn]:
        """Both ends as Python ids with their pointers: for naming errors only.

        Parameters
        ----------
        where_from, where_to : callable
            Map an arc's index to the JSON Pointer of its ``from`` and ``to`` id.

        Returns
        -------
        (IdColumn, IdColumn)

        Examples
        --------
        >>> tails, heads = ends_of(["a"], ["b"]).columns(lambda i: f"/f/{i}", lambda i: f"/t/{i}")
        >>> tails.values, heads.where(0)
        (['a'], '/t/0')
        """
        return IdColumn(self._python(self.tail), where_from), IdColumn(self._python(self.head), where_to)

    def _python(self, end: np.ndarray) -> list:
        if self.names is not None:
            return list(map(self.names.__getitem__, end.tolist()))
        return end.tolist()


def _end_kinds(end: np.ndarray) -> set:
    return set(map(type, end)) if end.dtype == object else {int}


def ends_of(tails: list | np.ndarray, heads: list | np.ndarray) -> ArcEnds:
    """Decoded JSON arrays of ``from`` and ``to`` ids as :class:`ArcEnds`, checks left
    to :func:`intern_ids` (which also knows the declared nodes).

    Parameters
    ----------
    tails, heads : list or ndarray
        The columns as orjson decodes them, or int64 arrays (the simdjson path and
        DIMACS files give integer columns so), of equal length.

    Returns
    -------
    ArcEnds

    Examples
    --------
    >>> ends = ends_of(["b", "a"], ["a", "c"])
    >>> ends.names, ends.tail.tolist(), ends.head.tolist()
    (['b', 'a', 'c'], [0, 1], [1, 2])
    """
    kinds = _kinds(tails) | _kinds(heads)
    if not kinds:
        return ArcEnds.empty()
    if kinds == {str}:
        order = dict.fromkeys(_interleave(tails, heads))
        lookup = dict(zip(order, range(len(order))))
        tail = np.fromiter(map(lookup.__getitem__, tails), dtype=np.int32, count=len(tails))
        head = np.fromiter(map(lookup.__getitem__, heads), dtype=np.int32, count=len(heads))
        return ArcEnds(tail, head, list(lookup))
    if kinds == {int}:
        return ArcEnds(_int_or_objects(tails), _int_or_objects(heads))
    return ArcEnds(_objects(tails), _objects(heads))


def _kinds(values: list | np.ndarray) -> set:
    if isinstance(values, np.ndarray):
        return set() if not values.size else {int} if values.dtype.kind == "i" else {float}
    return set(map(type, values))


def _int_or_objects(values: list | np.ndarray) -> np.ndarray:
    try:
        return np.asarray(values, dtype=np.int64)
    except OverflowError:  # beyond int64: kept exact for intern_ids to name
        return _objects(values)


def _objects(values: list | np.ndarray) -> np.ndarray:
    values = values.tolist() if isinstance(values, np.ndarray) else values
    return np.fromiter(values, dtype=object, count=len(values))


def _check_kinds(declared: IdColumn, ends: ArcEnds, where_from: PointerFn, where_to: PointerFn) -> type | None:
    seen = set(map(type, declared.values)) | ends.kinds()
    if not seen:
        return None
    if len(seen) > 1 or not seen <= {str, int}:
        raise _kind_errors([declared, *ends.columns(where_from, where_to)])
    return seen.pop()


def _kind_errors(columns: list[IdColumn]) -> InputError:
    """Name the ids that do not fit: anything but a string or an integer, and the ids
    of the less common kind when both appear (on a tie, the kind of the first id wins)."""
    counts, first = {str: 0, int: 0}, None
    for c in columns:
        for v in c.values:
            kind = type(v)
            if kind in counts:
                counts[kind] += 1
                first = first or kind
    majority = str if counts[str] > counts[int] or (counts[str] == counts[int] and first is str) else int
    errors = []
    for c in columns:
        for i, v in enumerate(c.values):
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


def _int_ids(values: list | np.ndarray, where: PointerFn) -> np.ndarray:
    try:
        arr = np.asarray(values, dtype=np.int64)
    except OverflowError:
        raise first_errors(values, lambda v: v < 0 or v >= 2**63, where, _int_id_message) from None
    bad = arr < 0
    if bad.any():
        raise mask_errors(bad, where, "must be a non-negative integer")
    return arr


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


def intern_ids(declared: IdColumn, ends: ArcEnds, where_from: PointerFn,
               where_to: PointerFn) -> tuple[NodeIndex, np.ndarray, np.ndarray]:
    """Intern declared node ids and the arcs' end points.

    Parameters
    ----------
    declared : IdColumn
        The request's ``nodes`` ids (may be empty). Duplicates are an error.
    ends : ArcEnds
        The arcs' ``from`` and ``to`` ids.
    where_from, where_to : callable
        Map an arc's index to the JSON Pointer of its ``from`` and ``to`` id.

    Returns
    -------
    (NodeIndex, tail, head)
        ``tail`` and ``head`` are int32 arrays of node indices.

    Raises
    ------
    InputError
        Mixed id kinds, bad ids, or duplicate declared nodes.

    Examples
    --------
    >>> at = lambda i: f"/arcs/{i}"
    >>> nodes, tail, head = intern_ids(IdColumn(["c"], at), ends_of(["a", "b"], ["b", "c"]), at, at)
    >>> nodes.ids, tail.tolist(), head.tolist()
    (['c', 'a', 'b'], [1, 2], [2, 0])
    """
    kind = _check_kinds(declared, ends, where_from, where_to) or str
    if len(set(declared.values)) < len(declared.values):
        _raise_duplicates(declared)
    if kind is str:
        lookup, tail, head = _intern_codes(declared.values, ends)
        # Lengths are checked once per distinct id, not once per arc end.
        if _bad_length(lookup):
            _check_strings([declared, *ends.columns(where_from, where_to)])
        index = NodeIndex(list(lookup), str, lookup)
    else:
        ids, tail, head = _intern_ints(_int_ids(declared.values, declared.where), _int_ids(ends.tail, where_from),
                                       _int_ids(ends.head, where_to))
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


def _intern_codes(declared: list, ends: ArcEnds):
    """Number string ids already coded in order of first mention: only the declared
    nodes, which come first, renumber them."""
    names = ends.names if ends.names is not None else []
    if not declared:  # the first-mention numbering is already the contract's order
        return dict(zip(names, range(len(names)))), ends.tail, ends.head
    order = dict.fromkeys(declared)
    order.update(dict.fromkeys(names))
    lookup = dict(zip(order, range(len(order))))
    rank = np.fromiter(map(lookup.__getitem__, names), dtype=np.int32, count=len(names))
    return lookup, rank[ends.tail], rank[ends.head]
