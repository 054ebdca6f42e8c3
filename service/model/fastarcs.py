"""A compiled one-pass decode of request bodies, with the arcs as numpy columns.

A body of 100k arcs holds 100k JSON objects (or 300k array elements) and, with
string node ids, 200k strings. Decoding all of that into Python objects and then
reading the fields back out costs several times the solve. The compiled scanner
(:mod:`service.model._arcscan`, Cython, built at install time) walks the bytes once,
checks the JSON grammar as it goes and writes the arcs straight into int64 columns;
string ids are interned on the way (one Python string per distinct id). The other
top-level members (``source``, ``nodes``, ``options``, ...) are decoded by orjson from
their byte spans, which also checks them.

It takes a conservative subset of bodies, the ones whose answer provably equals the
ordinary decode (orjson, then the model reading the lists):

* the body is one JSON object, with distinct top-level keys and one ``arcs`` member;
* ``arcs`` is an array of flat arc objects or an object of flat arrays (columns),
  whose keys are ``from``, ``to``, ``capacity``, ``cost``, ``lower``, ``key``, each at
  most once (and ``from`` and ``to`` in every arc object, or as columns of one length);
* ``from``/``to`` are all integers or all strings without escapes;
* ``capacity``, ``cost`` and ``lower`` are numbers (integers of at most 18 digits, or
  with a fraction or an exponent, of at most 64 bytes and within a double's range),
  and only ``capacity`` may be ``null``. A column with any fraction becomes float64,
  as the ordinary path makes it; Python's correctly rounded conversion reads each
  such number, which orjson's agrees with;
* ``key`` labels are strings without escapes, or ``null``.

Anything else returns ``None`` and takes the ordinary path, which also writes the
error messages: escapes in the arcs, invalid JSON or UTF-8, numbers the subset
leaves out, and any failure of this module's own. Tests decode generated and mutated
bodies both ways and compare everything the model produces (``tests/test_fastarcs.py``).
"""

from __future__ import annotations

import logging
import secrets

import numpy as np
import orjson

from .arccolumns import NUMBER_FIELDS, ArcColumns
from .columns import NumberColumn
from .interning import ArcEnds

try:
    from . import _arcscan
except ImportError:  # not built (no C compiler at install): every body takes the ordinary path
    _arcscan = None

log = logging.getLogger("sluice.model")

#: Below this size orjson and lists are as fast, and the ordinary path is the one
#: small requests have always taken.
MIN_BYTES = 16 * 1024
#: Seeds the scanner's hash of string ids, so a body cannot be crafted to collide.
_SEED = secrets.randbits(64)


def available() -> bool:
    """Whether the compiled scanner is installed.

    Returns
    -------
    bool
        ``False`` where it could not be built (no C compiler): every body then takes
        the ordinary path.

    Examples
    --------
    >>> available() in (True, False)
    True
    """
    return _arcscan is not None


def decode_arcs_body(raw: bytes, min_bytes: int = MIN_BYTES) -> dict | None:
    """Decode a request body with its ``arcs`` as columns.

    Parameters
    ----------
    raw : bytes
        The request body.
    min_bytes : int
        Smaller bodies are left to the ordinary path.

    Returns
    -------
    dict or None
        The decoded body, its ``arcs`` an :class:`~service.model.arccolumns.ArcColumns`
        (numbers int64, float64 where one has a fraction; string node ids interned).
        ``None`` when the body is outside the subset (see the module doc) or the
        scanner is not installed.

    Examples
    --------
    >>> body = b'{"source": "a", "sink": "b", "arcs": [{"from": "a", "to": "b", "capacity": 5}]}'
    >>> decoded = decode_arcs_body(body, min_bytes=0)
    >>> decoded["arcs"].ends.names, decoded["arcs"].numbers["capacity"].values.tolist()
    (['a', 'b'], [5])
    """
    if _arcscan is None or len(raw) < min_bytes or type(raw) is not bytes:
        return None
    try:
        scanned = _arcscan.scan(raw, _SEED)
        return None if scanned is None else _assemble(raw, *scanned)
    except MemoryError:
        raise
    except Exception:  # noqa: BLE001 - a bug here must cost speed, not the request
        log.exception("compiled body scan failed; decoding this body the ordinary way")
        return None


def _assemble(raw: bytes, form: str, members: list, columns: dict, names: list | None,
              fractions: dict) -> dict | None:
    out = {}
    view = memoryview(raw)
    for key, start, stop in members:
        try:
            name = key.decode("utf-8")
            if name in out:
                return None  # duplicate top-level keys: the ordinary path decides
            out[name] = orjson.loads(view[start:stop])
        except (UnicodeDecodeError, orjson.JSONDecodeError):
            return None
    keys = columns.pop("key", None)
    arrays = {field: np.frombuffer(data, dtype=np.int64) for field, data in columns.items()}
    if "from" not in arrays or "to" not in arrays or len({a.size for a in arrays.values()}) > 1 or (
            keys is not None and len(keys) != arrays["from"].size):
        return None  # columns missing or of unequal lengths: the ordinary path names them
    ends = ArcEnds(arrays["from"], arrays["to"]) if names is None else \
        ArcEnds(arrays["from"].astype(np.int32), arrays["to"].astype(np.int32), names)
    numbers = {field: _numbers(arrays[field], fractions.get(field)) for field in NUMBER_FIELDS if field in arrays}
    out["arcs"] = ArcColumns(arrays["from"].size, ends, numbers, keys, form)
    return out


def _numbers(values: np.ndarray, fractions: tuple | None) -> NumberColumn:
    null = values == _arcscan.NULL_VALUE
    if fractions is not None:
        # As the ordinary path's np.asarray of ints and floats: every value a double
        # (a fraction's row holds 0 until here, so it is never taken for a null).
        rows, parsed = fractions
        values = values.astype(np.float64)
        values[np.frombuffer(rows, dtype=np.int64)] = np.frombuffer(parsed, dtype=np.float64)
    if null.any():
        values[null] = 0
        return NumberColumn(values, null)
    return NumberColumn(values)
