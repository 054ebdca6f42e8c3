"""Node ids: strings (1-200 characters) or non-negative integers, one kind per payload.

Interning maps every id to a dense int32 index, in the contract's order: the
request's ``nodes`` first, then nodes first seen in the arcs, in order of appearance
(``from`` before ``to`` within an arc).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import FieldError, InputError
from .columns import MAX_REPORTED_ERRORS, PointerFn

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
class Utf8Ids:
    """String ids as rows of zero-padded UTF-8 bytes, viewed as uint64 words.

    The object-form fast decoder hands ``from``/``to`` over this way, so that
    interning never builds a Python string per arc end. Iterating (only the error
    paths do) yields the ids as ``str``.
    """

    words: np.ndarray  # shape (count, width // 8), dtype uint64

    def __len__(self) -> int:
        return self.words.shape[0]

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [_decode_row(row) for row in self.words[i]]
        return _decode_row(self.words[i])

    def __iter__(self):
        return (_decode_row(row) for row in self.words)


def _decode_row(row: np.ndarray) -> str:
    # JSON strings cannot hold a raw NUL byte, so the zero padding strips exactly.
    return row.tobytes().rstrip(b"\0").decode("utf-8")


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


def _kinds(col: IdColumn) -> set:
    if isinstance(col.values, np.ndarray):  # typed columns from the fast decoder
        return {int} if col.values.dtype.kind == "i" else {float}
    if isinstance(col.values, Utf8Ids):
        return {str}
    return set(map(type, col.values))


def _check_kinds(columns: list[IdColumn]) -> type | None:
    seen = set().union(*(_kinds(c) for c in columns))
    if not seen:
        return None
    if not seen <= {str, int} or seen == {str, int}:
        majority = str if sum(isinstance(v, str) for c in columns for v in c.values[:1000]) else int
        allowed = {majority} if seen & {str, int} else set()
        errors = []
        for c in columns:
            for i, v in enumerate(c.values):
                if type(v) not in allowed:
                    errors.append(FieldError(c.where(i), _id_message(v, majority)))
                    if len(errors) >= MAX_REPORTED_ERRORS:
                        raise InputError(errors)
        raise InputError(errors)
    return seen.pop()


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
            raise InputError.at(c.where(0), "integer node ids must fit in 63 bits") from None
        if arr.size == 0:
            arr = arr.astype(np.int64)
        bad = arr < 0
        if bad.any():
            idx = np.flatnonzero(bad)[:MAX_REPORTED_ERRORS]
            raise InputError([FieldError(c.where(int(i)), "must be a non-negative integer") for i in idx])
        arrays.append(arr)
    return arrays


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
        if isinstance(t, Utf8Ids) and isinstance(h, Utf8Ids):
            lookup, tail, head = _intern_utf8(declared.values, t, h)
        else:  # at most one column arrived as UTF-8 rows
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


#: Widest declared id (in bytes) interned as words; wider ones intern as Python strings.
MAX_WORD_ID_BYTES = 64
_MIX = np.uint64(0x9E3779B97F4A7C15)


def _intern_utf8(declared: list, tails: Utf8Ids, heads: Utf8Ids):
    """:func:`_intern_strings` for ids that arrived as UTF-8 rows, without a Python
    string per arc end (see :func:`_group_rows`)."""
    encoded = [v.encode("utf-8") for v in declared]
    widest = max(map(len, encoded), default=0)
    if widest > MAX_WORD_ID_BYTES:
        return _intern_strings(declared, list(tails), list(heads))
    width = max(tails.words.shape[1], heads.words.shape[1], -(-widest // 8))
    rows = np.zeros((len(encoded) + 2 * len(tails), width), dtype=np.uint64)
    if encoded:
        padded = b"".join(e.ljust(8 * width, b"\0") for e in encoded)
        rows[: len(encoded)] = np.frombuffer(padded, dtype="<u8").reshape(len(encoded), width)
    ends = rows[len(encoded):]
    ends[0::2, : tails.words.shape[1]] = tails.words
    ends[1::2, : heads.words.shape[1]] = heads.words
    first, codes = _group_rows(rows)
    # One bytes object per node, not per arc end (numpy strips the zero padding), and
    # one decode for all of them: ids cannot hold a NUL byte, so it separates them.
    names = rows[first].view(f"S{8 * width}").ravel().tolist()
    ids = b"\0".join(names).decode("utf-8").split("\0") if names else []
    lookup = dict(zip(ids, range(len(ids))))
    n_decl = len(encoded)
    codes = codes.astype(np.int32)
    return lookup, codes[n_decl::2].copy(), codes[n_decl + 1 :: 2].copy()


def _group_rows(rows: np.ndarray, mix: np.uint64 = _MIX, rounds: int = 3) -> tuple[np.ndarray, np.ndarray]:
    """Number the distinct rows in order of first appearance.

    Returns
    -------
    (first, group)
        ``first[g]`` is the index of the first row of group ``g`` (ascending), and
        ``group[i]`` the group of row ``i``.

    Each row hashes to a slot of a table twice the size of the input; the earliest
    row in a slot owns it. A row equal to its slot's owner belongs to the owner's
    group, and that owner is the first occurrence of the row (every copy of a row
    shares its slot). Rows that differ from their slot's owner (a slot shared by
    different ids) are grouped again, by a different hash, ``rounds`` times, then
    exactly by sorting. The result never depends on the hash, only the speed does.
    """
    n = rows.shape[0]
    if n == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    if rounds == 0:
        _, first_of_unique, inverse = np.unique(rows, axis=0, return_index=True, return_inverse=True)
        rep = first_of_unique[inverse.ravel()]
    else:
        h = np.full(n, mix, dtype=np.uint64) * np.uint64(rounds)
        for j in range(rows.shape[1]):
            h ^= rows[:, j]
            h *= mix
            h ^= h >> np.uint64(29)
        bits = n.bit_length() + 1
        slot = (h >> np.uint64(64 - bits)).astype(np.int64)
        table = np.full(1 << bits, n, dtype=np.int64)
        np.minimum.at(table, slot, np.arange(n, dtype=np.int64))
        rep = table[slot]  # the earliest row in each row's slot
        differs = rows[:, 0] != rows[rep, 0]
        for j in range(1, rows.shape[1]):
            differs |= rows[:, j] != rows[rep, j]
        rest = np.flatnonzero(differs)
        if rest.size:
            sub_first, sub_group = _group_rows(rows[rest], mix, rounds - 1)
            rep[rest] = rest[sub_first[sub_group]]
    is_first = np.zeros(n, dtype=bool)
    is_first[rep] = True
    return np.flatnonzero(is_first), (np.cumsum(is_first) - 1)[rep]
