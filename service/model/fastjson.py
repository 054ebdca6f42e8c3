"""A fast decode for columnar payloads of numbers, fractions included.

The compiled scanner (:mod:`service.model.fastarcs`) takes most large bodies; this
path serves the numeric columnar ones it leaves aside (escapes, longer numbers) and
callers that keep JSON values (jobs, which re-serialise the body). It gives plain JSON
values with numeric arrays as numpy arrays, which serialise back as JSON arrays;
:func:`service.model.arccolumns.read_arcs` turns them into the model's column form
without a copy. A columnar body with
integer node ids is mostly long JSON arrays of numbers; simdjson parses the document
once and hands each numeric array over as a typed buffer. Only such bodies take this
path, and only when the result provably equals the ordinary decode (see
:func:`decode_columnar`); everything else goes through orjson.
"""

from __future__ import annotations

import numpy as np
import simdjson

#: The UTF-8 byte-order mark. RFC 8259 (section 8.1) forbids senders to add one and lets
#: parsers ignore it; Sluice refuses it on every decode path (orjson's 400).
UTF8_BOM = b"\xef\xbb\xbf"


def looks_columnar(raw: bytes) -> bool:
    """Cheap pre-check that a body has numeric columnar arcs.

    Looks only near the first ``"arcs"`` key (usually close to the start), so an
    object-form body is not scanned end to end; a wrong guess either way only costs
    speed, never correctness (see :func:`decode_columnar`).

    Parameters
    ----------
    raw : bytes
        The request body.

    Returns
    -------
    bool

    Examples
    --------
    >>> looks_columnar(b'{"arcs": {"from": [1], "to": [2]}}'), looks_columnar(b'{"arcs": [{"from": 1}]}')
    (True, False)
    """
    at = raw.find(b'"arcs"')
    if at < 0 or raw[at + 6: at + 16].lstrip(b" \t\r\n:")[:1] != b"{":
        return False
    at = raw.find(b'"from"', at)
    return at >= 0 and raw[at + 6: at + 16].lstrip(b" \t\r\n:[")[:1] in b"0123456789-" and \
        b"[" in raw[at + 6: at + 16]


def _numeric(array) -> np.ndarray | list:
    """A JSON array of numbers as int64 or float64; else the plain list."""
    for code, dtype in (("i", np.int64), ("d", np.float64)):
        try:
            values = np.frombuffer(array.as_buffer(of_type=code), dtype=dtype)
        except (TypeError, ValueError, RuntimeError):
            continue
        # as_buffer flattens nested arrays: only a flat array keeps its length.
        if values.size == len(array):
            return values
        break
    return array.as_list()


def _count_lists(value) -> int:
    """The lists in a decoded value, nested ones included.

    A walk with its own stack, not recursion: simdjson takes up to 1,024 levels of
    nesting, more than Python's recursion limit allows a recursive walk.
    """
    count, todo = 0, [value]
    while todo:
        item = todo.pop()
        if isinstance(item, list):
            count += 1
            todo.extend(v for v in item if isinstance(v, (list, dict)))
        elif isinstance(item, dict):
            todo.extend(v for v in item.values() if isinstance(v, (list, dict)))
    return count


def _python(value):
    if isinstance(value, simdjson.Object):
        return value.as_dict()
    if isinstance(value, simdjson.Array):
        return value.as_list()
    return value


def parse_envelope(raw: bytes, arcs_type):
    """simdjson's parse of a body that is an object with distinct top-level keys and an
    ``arcs`` member of ``arcs_type``.

    simdjson skips a leading UTF-8 byte-order mark, which orjson refuses: such a body
    goes to orjson, so a BOM gets one verdict (400) whichever decoder would take it.

    Parameters
    ----------
    raw : bytes
        The request body.
    arcs_type : type
        ``simdjson.Object`` or ``simdjson.Array``.

    Returns
    -------
    tuple or None
        ``(doc, keys, arcs)``, or ``None`` at any doubt.

    Examples
    --------
    >>> parse_envelope(b'{"arcs": {"from": [1]}}', simdjson.Object)[1]
    ['arcs']
    """
    if raw.startswith(UTF8_BOM):
        return None
    try:
        doc = simdjson.Parser().parse(raw)
    except Exception:  # noqa: BLE001 - any refusal just means "use the ordinary decoder"
        return None
    if not isinstance(doc, simdjson.Object):
        return None
    keys = list(doc.keys())
    arcs = doc.get("arcs")
    if len(set(keys)) != len(keys) or not isinstance(arcs, arcs_type):
        return None
    return doc, keys, arcs


def decode_columnar(raw: bytes):
    """Decode a columnar body, with numeric arc columns as numpy arrays.

    The result is trusted only if every ``[`` byte in the body is accounted for by an
    array we decoded: a bracket inside a string, a nested array inside a column or a
    duplicate key all make the counts differ and send the body down the ordinary path.

    Parameters
    ----------
    raw : bytes
        The request body.

    Returns
    -------
    dict or None
        The decoded body; ``None`` when it does not qualify or any doubt remains, so
        the caller decodes it the ordinary way (which also writes the error messages).

    Examples
    --------
    >>> decode_columnar(b'{"arcs": {"from": [1], "to": [2]}}')["arcs"]["to"]
    array([2])
    """
    parsed = parse_envelope(raw, simdjson.Object)
    if parsed is None:
        return None
    doc, keys, arcs = parsed
    out, arrays = {}, 0
    for key in keys:
        if key != "arcs":
            out[key] = _python(doc[key])
            arrays += _count_lists(out[key])
    columns = {}
    column_keys = list(arcs.keys())
    if len(set(column_keys)) != len(column_keys):
        return None
    for key in column_keys:
        value = arcs[key]
        columns[key] = _numeric(value) if isinstance(value, simdjson.Array) else _python(value)
        if key in ("from", "to") and isinstance(columns[key], np.ndarray) and columns[key].dtype.kind != "i":
            return None  # a fraction or a 64-bit id: only the decoded values tell which entry it is
        arrays += 1 if isinstance(columns[key], np.ndarray) else _count_lists(columns[key])
    out["arcs"] = columns
    if raw.count(b"[") != arrays:
        return None
    return out
