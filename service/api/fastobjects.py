"""A vectorised decode of object-form arcs, straight from the bytes into columns.

An object-form body of 100k arcs holds 100k JSON objects and 300k values. Decoding
it into dicts and then reading the fields back out costs several times the solve,
all of it Python object traffic. This module reads the ``arcs`` array of such a body
with numpy instead: one pass finds every quote, brace, colon and comma, and the
arcs' keys and values are read off those positions without building a Python object
per arc. When every arc is written with the same members in the same order (as
serialisers write them), the positions repeat with one period and each member is a
column of that grid (:func:`_uniform_columns`); otherwise a general reader matches
each member to its arc (:func:`_mixed_columns`). Tests check that both agree.

It takes only a conservative subset of bodies, and only when the answer provably
equals the ordinary decode:

* simdjson has accepted the whole body as JSON (so every byte is where the grammar
  allows it) and the body holds no backslash (so every ``"`` delimits a string);
* ``arcs`` is an array of flat objects whose keys are known arc fields, each at most
  once per arc, with ``from`` and ``to`` in every arc;
* ``from``/``to`` are all integers or all strings of 1-64 bytes; ``capacity``,
  ``cost`` and ``lower`` are integers of at most 18 digits, and only ``capacity`` may
  be ``null``.

Anything else (floats, escapes, arc keys, errors of any kind) returns ``None`` and
takes the ordinary path, which also writes the error messages. Tests decode
generated bodies both ways and compare (``tests/test_fastobjects.py``).
"""

from __future__ import annotations

import logging

import numpy as np
import simdjson
from numpy.lib.stride_tricks import sliding_window_view

from ..model.arcs import ObjectArcs
from ..model.columns import NullableInts
from ..model.ids import Utf8Ids
from .fastjson import _python, parse_envelope

log = logging.getLogger("sluice.api")

#: Bodies smaller than this decode faster with orjson than with a dozen numpy passes.
MIN_BYTES = 64 * 1024
#: Longest string id this path takes, in bytes (longer ones take the ordinary path).
MAX_ID_BYTES = 64
#: Longest number token (with its surrounding white space) this path reads.
MAX_TOKEN_BYTES = 32
MAX_DIGITS = 18
#: Zero bytes after the body, so that fixed-width reads may run past its end.
PAD = 72
#: At most this many ``"arcs"`` strings are looked at to find the top-level member.
MAX_ARCS_KEYS = 16

# Events are the bytes that give the arcs array its shape; each is its own code.
QUOTE, LBRACE, RBRACE, COLON, COMMA, LBRACKET, RBRACKET = b'"{}:,[]'
#: bytes.translate table: 1 for those bytes, 0 otherwise (read as numpy booleans).
_SPECIAL_TABLE = bytes(1 if b in b'"{}:,[]' else 0 for b in range(256))

#: Which event may follow which inside an array of flat objects with scalar values,
#: indexed by ``first << 8 | second``. simdjson has already accepted the body as
#: JSON; this only rules out nesting.
_FOLLOWS = np.zeros(1 << 16, dtype=bool)
for _a, _b in [(LBRACKET, LBRACE), (LBRACKET, RBRACKET), (LBRACE, QUOTE), (LBRACE, RBRACE), (QUOTE, QUOTE),
               (QUOTE, COLON), (QUOTE, COMMA), (QUOTE, RBRACE), (COLON, QUOTE), (COLON, COMMA), (COLON, RBRACE),
               (COMMA, QUOTE), (COMMA, LBRACE), (RBRACE, COMMA), (RBRACE, RBRACKET)]:
    _FOLLOWS[_a << 8 | _b] = True


#: The change of nesting depth at each event.
_STEP = np.zeros(256, dtype=np.int64)
_STEP[[LBRACE, LBRACKET]], _STEP[[RBRACE, RBRACKET]] = 1, -1


def _follows(code: np.ndarray) -> bool:
    """Whether every event in ``code`` may follow the one before it."""
    return bool(_FOLLOWS[(code[:-1].astype(np.uint16) << 8) | code[1:]].all())


FIELDS = ("from", "to", "capacity", "cost", "lower")
#: Each field name as the little-endian word of its bytes.
_FIELD_WORDS = [np.uint64(int.from_bytes(f.encode(), "little")) for f in FIELDS]
#: _LOW_BYTES[n]: a mask of the low n bytes of a word.
_LOW_BYTES = np.array([(1 << (8 * n)) - 1 for n in range(9)], dtype=np.uint64)
#: Bytes that may appear in a number or null token with its white space.
_BAD = np.ones(256, dtype=bool)
_BAD[list(b"0123456789- \t\r\nnul")] = False
_SPACE, _ZERO, _MINUS, _N = (np.uint8(ord(c)) for c in " 0-n")
_SPACE_WORD = np.uint64(ord(" "))
_WHITE = np.zeros(256, dtype=bool)
_WHITE[list(b" \t\r\n")] = True
# Words for reading eight ASCII digits at once.
_EIGHT, _FOUR = np.uint64(8), np.uint64(4)
_ZERO_WORD = np.uint64(0x3030303030303030)
_ZERO_BYTES = (_ZERO_WORD & _LOW_BYTES)  # n low bytes of "0" digits
_HIGH_NIBBLES = np.uint64(0xF0F0F0F0F0F0F0F0)
_SIXES = np.uint64(0x0606060606060606)
_THREES = np.uint64(0x3333333333333333)


class _Refuse(Exception):
    """This body is not for the fast path (never an error of the body itself)."""


def looks_like_objects(raw: bytes) -> bool:
    """Cheap pre-check, near the first ``"arcs"`` key only, that a body may qualify.

    It looks at the first arc: an array of objects without fractions or arc keys. A
    wrong guess either way costs only speed (see :func:`decode_objects`).
    """
    if len(raw) < MIN_BYTES or b"\\" in raw:
        return False
    at = raw.find(b'"arcs"')
    value = raw[at + 6: at + 64].lstrip(b" \t\r\n:")
    if at < 0 or value[:1] != b"[" or value[1:].lstrip(b" \t\r\n")[:1] != b"{":
        return False
    first = raw[at: raw.find(b"}", at)]
    return b"." not in first and b'"key"' not in first


def decode_objects(raw: bytes, min_bytes: int = MIN_BYTES) -> dict | None:
    """Decode a body whose ``arcs`` are objects, with the arcs as numpy columns.

    Returns
    -------
    dict or None
        The decoded body with ``arcs`` as an :class:`~service.model.arcs.ObjectArcs`,
        or ``None`` when the body is outside this path's subset (see the module doc).
        Bodies under ``min_bytes`` are left to orjson, which is faster on them.
    """
    if len(raw) < min_bytes or b"\\" in raw:
        return None
    parsed = parse_envelope(raw, simdjson.Array)
    if parsed is None:
        return None
    doc, keys, arcs = parsed
    try:
        columns = _arc_columns(raw, len(arcs))
    except _Refuse:
        return None
    except Exception:  # noqa: BLE001 - a bug here must cost speed, not the request
        log.exception("object-form fast decode failed; decoding this body the ordinary way")
        return None
    out = {key: _python(doc[key]) for key in keys if key != "arcs"}
    out["arcs"] = columns
    return out


def _arc_columns(raw: bytes, count: int) -> ObjectArcs:
    buf = np.frombuffer(raw + bytes(PAD), dtype=np.uint8)
    pos, code = _events(raw, buf)
    pos, code = _arcs_events(raw, pos, code)
    words = np.ndarray((buf.size - 7,), dtype="<u8", buffer=buf, strides=(1,))  # a word at every byte
    columns = _uniform_columns(buf, words, pos, code, count)
    if columns is None:
        columns = _mixed_columns(buf, words, pos, code, count)
    return ObjectArcs(columns, count)


def _uniform_columns(buf, words, pos, code, count: int) -> dict | None:
    """The columns when every arc has the same members in the same order, as
    serialisers write them; None otherwise (then :func:`_mixed_columns` reads them).

    The events of such an array repeat with one period, so each member is a column of
    a (count, period) grid of byte positions: no search, no per-field sorting.
    """
    # "[", then each arc's events and a comma, except that "]" ends the last arc.
    if count == 0 or (code.size - 1) % count:
        return None
    period = (code.size - 1) // count  # events per arc, with the comma after it
    row = code[1: 1 + period]
    if not (period >= 4 and row[0] == LBRACE and row[-2] == RBRACE and row[-1] == COMMA
            and _follows(row)):
        return None
    grid = code[1:].copy()
    grid[-1] = COMMA  # the closing "]" stands in for the last arc's comma
    if not (grid.reshape(count, period) == row).all():
        return None
    at = _EventColumns(pos, period, count)
    members = np.flatnonzero(row == COLON).tolist()
    fields = [_uniform_field(words, at[c - 2] + 1, at[c - 1]) for c in members]
    if None in fields or len(set(fields)) < len(fields) or not {0, 1} <= set(fields):
        return None
    columns = {}
    for c, f in zip(members, fields):
        name = FIELDS[f]
        if row[c + 1] == QUOTE:  # a string: only ids may be one
            if f > 1:
                return None
            columns[name] = _strings(buf, at[c + 1] + 1, at[c + 2])
            continue
        values, null = _numbers(buf, words, at[c] + 1, at[c + 1])
        if null.any():
            if name != "capacity":
                return None
            columns[name] = NullableInts(values, null)
        else:
            columns[name] = values
    if type(columns["from"]) is not type(columns["to"]):
        return None
    return columns


class _EventColumns:
    """``at[j][i]``: the byte of the j-th event of arc i (a strided view)."""

    def __init__(self, pos: np.ndarray, period: int, count: int):
        self.pos, self.period, self.count = pos, period, count

    def __getitem__(self, j: int) -> np.ndarray:
        return self.pos[1 + j:: self.period][: self.count]


def _uniform_field(words, start, stop) -> int | None:
    """The field every one of these keys names, or None when they differ."""
    try:
        first = int(_field_of(words, start[:1], stop[:1])[0])
    except _Refuse:
        return None
    length = stop - start
    if (length != len(FIELDS[first])).any():
        return None
    same = (words[start] & _LOW_BYTES[len(FIELDS[first])]) == _FIELD_WORDS[first]
    return first if same.all() else None


def _mixed_columns(buf, words, pos, code, count: int) -> dict:
    """The columns of any array of flat arc objects (members in any order, optional
    ones absent in some arcs)."""
    if not _follows(code):
        raise _Refuse
    opening = np.flatnonzero(code == LBRACE)
    if opening.size != count:  # every element an object
        raise _Refuse
    colon = np.flatnonzero(code == COLON)
    if colon.size == 0:
        raise _Refuse
    field = _field_of(words, pos[colon - 2] + 1, pos[colon - 1])
    members = np.diff(np.searchsorted(colon, opening), append=colon.size)
    arc = np.repeat(np.arange(count, dtype=np.int32), members)  # the arc of each member
    present = _presence(arc, field, count)
    string = code[colon + 1] == QUOTE
    scalar = ~string
    values, null = _numbers(buf, words, pos[colon[scalar]] + 1, pos[colon[scalar] + 1])
    value_of = np.zeros(colon.size, dtype=np.int64)
    value_of[scalar] = values
    null_of = np.zeros(colon.size, dtype=bool)
    null_of[scalar] = null
    columns = {}
    for f, name in enumerate(FIELDS[2:], start=2):
        if not present[f].any():
            continue
        rows = np.flatnonzero(field == f)
        if string[rows].any() or (name != "capacity" and null_of[rows].any()):
            raise _Refuse
        columns[name] = _fill(value_of[rows], null_of[rows], arc[rows], present[f], name, count)
    ends = [np.flatnonzero(field == f) for f in (0, 1)]
    if string[ends[0]].all() and string[ends[1]].all():
        at = [colon[rows] + 1 for rows in ends]  # the opening quotes
        columns["from"], columns["to"] = (_strings(buf, pos[a] + 1, pos[a + 1]) for a in at)
    elif scalar[ends[0]].all() and scalar[ends[1]].all() and not (null_of[ends[0]].any() or null_of[ends[1]].any()):
        columns["from"], columns["to"] = value_of[ends[0]], value_of[ends[1]]
    else:
        raise _Refuse
    return columns


def _events(raw: bytes, buf: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Positions and classes of the quotes and of the structural bytes outside strings."""
    pos = np.flatnonzero(np.frombuffer(raw.translate(_SPECIAL_TABLE), dtype=bool))
    code = buf[pos]
    # With no backslash in the body every quote delimits a string, so quotes pair up
    # in order. Usually no structural byte sits inside a string (ids seldom hold
    # commas or braces): then no event needs dropping.
    quote = code == QUOTE
    quotes = int(np.count_nonzero(quote))
    if quotes % 2:
        raise _Refuse
    # In valid JSON a structural byte always separates two strings, so adjacent
    # quote events are the two ends of one string with nothing inside to drop.
    if int(np.count_nonzero(quote[:-1] & quote[1:])) == quotes // 2:
        return pos, code
    odd = (np.cumsum(quote, dtype=np.uint8) & 1).astype(bool)
    keep = quote | ~odd  # an event is inside a string after an odd count of quotes
    return pos[keep], code[keep]


def _arcs_events(raw: bytes, pos: np.ndarray, code: np.ndarray):
    """The events from the ``[`` of the top-level ``arcs`` member to its ``]``."""
    found, at, tries = [], raw.find(b'"arcs"'), 0
    while at >= 0 and tries < MAX_ARCS_KEYS:
        tries += 1
        i = int(np.searchsorted(pos, at))
        if (i + 3 < code.size and pos[i] == at and code[i] == QUOTE and pos[i + 1] == at + 5
                and code[i + 2] == COLON and code[i + 3] == LBRACKET and _STEP[code[:i]].sum() == 1):
            found.append(i + 3)
            break  # simdjson saw no duplicate top-level keys: this is the one
        at = raw.find(b'"arcs"', at + 1)
    if len(found) != 1:
        raise _Refuse
    start = found[0]
    end = start + int(np.argmax(code[start:] == RBRACKET))
    if code[end] != RBRACKET:
        raise _Refuse
    return pos[start: end + 1], code[start: end + 1]


def _field_of(words: np.ndarray, start: np.ndarray, stop: np.ndarray) -> np.ndarray:
    """Index into FIELDS of each key; refuses unknown keys (the ordinary path names them)."""
    length = stop - start
    if length.max() > 8:
        raise _Refuse
    key = words[start] & _LOW_BYTES[length]
    field = np.full(key.size, -1, dtype=np.int64)
    for f, word in enumerate(_FIELD_WORDS):
        field[key == word] = f
    if (field < 0).any():
        raise _Refuse
    return field


def _presence(arc: np.ndarray, field: np.ndarray, count: int) -> np.ndarray:
    """``present[f, i]``: arc ``i`` has field ``f``. Refuses duplicates and missing ends."""
    seen = np.bincount(field * count + arc, minlength=len(FIELDS) * count)
    if seen.max(initial=0) > 1:
        raise _Refuse
    present = seen.reshape(len(FIELDS), count).astype(bool)
    if not (present[0].all() and present[1].all()):
        raise _Refuse
    return present


def _numbers(buf, words, start, stop) -> tuple[np.ndarray, np.ndarray]:
    """Integer tokens (or ``null``) between each ``start`` and ``stop``, white space around.

    Tokens of 1-8 plain digits, after at most one space (nearly all of them), are read
    eight bytes at a time; the rest (signs, nulls, longer numbers, more white space)
    one byte column at a time.
    """
    length = stop - start
    word = words[start]
    # In valid JSON a byte <= 0x20 outside strings is white space (Python's ": ").
    lead = ((word & _LOW_BYTES[1]) <= _SPACE_WORD) & (length > 0)
    word = np.where(lead, word >> _EIGHT, word)
    length = length - lead
    plain = (length >= 1) & (length <= 8 - lead)
    # Left-pad each token with "0" digits to eight bytes (the first byte is the low
    # one): the shift drops whatever followed the token in the word.
    pad = np.where(plain, 8 - length, 0).astype(np.uint64)
    x = (word << (pad * _EIGHT)) | _ZERO_BYTES[pad]
    plain &= ((x & _HIGH_NIBBLES) | (((x + _SIXES) & _HIGH_NIBBLES) >> _FOUR)) == _THREES
    values = _eight_digits(x - _ZERO_WORD).astype(np.int64)
    null = np.zeros(start.size, dtype=bool)
    rest = np.flatnonzero(~plain)
    if rest.size:
        values[rest], null[rest] = _digit_columns(buf, *_strip(buf, start[rest], stop[rest]))
    return values, null


def _strip(buf, start, stop):
    """Move token bounds past white space (a few rounds; what is left is read bytewise)."""
    start, stop = start.copy(), stop.copy()
    for _ in range(4):
        lead = _WHITE[buf[start]] & (start < stop)
        if not lead.any():
            break
        start += lead
    for _ in range(4):
        trail = _WHITE[buf[stop - 1]] & (stop > start)
        if not trail.any():
            break
        stop -= trail
    return start, stop


def _eight_digits(x: np.ndarray) -> np.ndarray:
    """Eight digit values, one per byte, most significant first, as one number."""
    x = (x * np.uint64(10) + (x >> np.uint64(8))) & np.uint64(0x00FF00FF00FF00FF)
    x = (x * np.uint64(100) + (x >> np.uint64(16))) & np.uint64(0x0000FFFF0000FFFF)
    return (x * np.uint64(10000) + (x >> np.uint64(32))) & np.uint64(0xFFFFFFFF)


def _digit_columns(buf, start, stop):
    length = stop - start
    width = int(length.max(initial=0))
    if width > MAX_TOKEN_BYTES:
        raise _Refuse
    value = np.zeros(start.size, dtype=np.int64)
    digits = np.zeros(start.size, dtype=np.int64)
    negative = np.zeros(start.size, dtype=bool)
    null = np.zeros(start.size, dtype=bool)
    bad = np.zeros(start.size, dtype=bool)
    # Horner's rule, one byte column at a time; bytes past a token count as spaces.
    for j in range(width):
        byte = np.where(length > j, buf[start + j], _SPACE)
        digit_value = byte - _ZERO  # uint8: anything below "0" wraps above 9
        digit = digit_value < 10
        value = np.where(digit, value * 10 + digit_value, value)
        digits += digit
        negative |= byte == _MINUS
        null |= byte == _N
        bad |= _BAD[byte]
    # Only digits, a minus sign and white space (or null): floats and booleans refuse.
    if bad.any() or digits.max(initial=0) > MAX_DIGITS or (digits[~null] == 0).any():
        raise _Refuse
    value[negative] = -value[negative]
    value[null] = 0
    return value, null


def _fill(values, null, arcs, present, name: str, count: int):
    """A full column. An arc without the field gets the ordinary path's default: no
    limit for ``capacity`` (as if null), 0 for ``cost`` and ``lower``."""
    if present.all():
        return NullableInts(values, null) if null.any() else values
    full = np.zeros(count, dtype=np.int64)
    full[arcs] = values
    if name != "capacity":
        return full
    missing = ~present
    missing[arcs] = null
    return NullableInts(full, missing)


def _strings(buf: np.ndarray, start: np.ndarray, stop: np.ndarray) -> Utf8Ids:
    length = stop - start
    if length.size and (length.min() < 1 or length.max() > MAX_ID_BYTES):
        raise _Refuse
    width = -(-int(length.max(initial=1)) // 8) * 8
    words = sliding_window_view(buf, width)[start].view("<u8")
    for k in range(width // 8):
        words[:, k] &= _LOW_BYTES[np.clip(length - 8 * k, 0, 8)]
    return Utf8Ids(words)


def string_columns(raw: bytes):
    """A reader of the string columns of a columnar body, for
    :func:`~service.api.fastjson.decode_columnar`.

    Returns
    -------
    callable
        ``column(key, count)``: the node ids ``arcs.from`` or ``arcs.to`` (``count``
        strings) as :class:`Utf8Ids`, read straight from the bytes, or None when that
        is not a flat array of strings of 1-64 bytes, or the body holds a backslash
        (then the caller keeps simdjson's list). The body's events are found once, on
        first use.
    """
    found: dict = {}

    def column(key: str, count: int) -> Utf8Ids | None:
        if key not in ("from", "to") or len(raw) < MIN_BYTES or b"\\" in raw:
            return None
        try:
            if "events" not in found:
                buf = np.frombuffer(raw + bytes(PAD), dtype=np.uint8)
                pos, code = _events(raw, buf)
                found["events"] = (buf, pos, code, np.cumsum(_STEP[code]))
            return _string_column(raw, *found["events"], key.encode(), count)
        except _Refuse:
            return None
        except Exception:  # noqa: BLE001 - a bug here must cost speed, not the request
            log.exception("columnar string fast decode failed; keeping simdjson's list")
            return None

    return column


def _string_column(raw: bytes, buf, pos, code, depth, key: bytes, count: int) -> Utf8Ids:
    """The member ``arcs.<key>`` as UTF-8 rows (``depth[i]``: the nesting after event i)."""
    # The member: a key of two quotes, a colon, "[" inside the top-level "arcs" object.
    colons = np.flatnonzero((code == COLON) & (depth == 2))
    colons = colons[(colons >= 2) & (colons + 1 < code.size)]
    hits = [int(c) for c in colons if code[c + 1] == LBRACKET and raw[pos[c - 2] + 1: pos[c - 1]] == key
            and _inside_arcs(raw, pos, code, depth, c)]
    if len(hits) != 1:
        raise _Refuse
    start = hits[0] + 1  # the "["
    if start + 3 * count >= code.size:
        raise _Refuse
    inner = code[start + 1: start + 3 * count]  # '"', '"', ',' per string, then the "]"
    if (inner.size != 3 * count - 1 or code[start + 3 * count] != RBRACKET or (inner[0::3] != QUOTE).any()
            or (inner[1::3] != QUOTE).any() or (inner[2::3] != COMMA).any()):
        raise _Refuse
    return _strings(buf, pos[start + 1: start + 3 * count: 3] + 1, pos[start + 2: start + 3 * count: 3])


def _inside_arcs(raw: bytes, pos, code, depth, colon: int) -> bool:
    """Whether the member at ``colon`` (depth 2) belongs to the top-level ``arcs``."""
    openings = np.flatnonzero((code[:colon] == LBRACE) & (depth[:colon] == 2))
    if openings.size == 0:
        return False
    key_colon = int(openings[-1]) - 1  # the top-level key's colon sits right before its "{"
    return (key_colon >= 2 and code[key_colon] == COLON and depth[key_colon] == 1
            and raw[pos[key_colon - 2] + 1: pos[key_colon - 1]] == b"arcs")
