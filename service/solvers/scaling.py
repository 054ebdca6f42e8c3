"""Exact integer forms of numeric columns: decimal scaling and binary scaling.

A JSON number with a fraction arrives as a float64 (on both decode paths: orjson and
the compiled scanner convert with correct rounding). The decimal the client wrote is
recovered as the *shortest decimal that round-trips to that float64* (what Python's
``repr`` prints): it equals the written text whenever that text has at most 15
significant digits, and is within one ulp of it otherwise. A number
without a fraction is its exact binary value (JSON integers arrive as int64 anyway).

When every value of a problem has at most ``MAX_DECIMALS`` places in that sense,
multiplying by ``10**d`` gives integers exactly, the integer solvers give an exact
answer, and dividing back gives the exact decimal answer rounded once. Any other
float64 is a binary fraction ``m * 2**-e``; :func:`binary_scale` gives its exact
integers for the solvers that can use them (max-flow).

Integers that int64 cannot hold come back as numpy object arrays of Python ints: the
solvers either solve them exactly another way or refuse them with a 422.
"""

from __future__ import annotations

from decimal import Decimal

import numpy as np

MAX_DECIMALS = 9
#: Magnitudes at or above this are not kept in int64 (head-room for sums of two).
INT64_SAFE = 2**62
#: Candidates below this are recovered exactly by ``rint(v * 10**d)``: the product's
#: relative error (2**-52) stays under half a unit.
_RINT_EXACT = 2**51


def is_object(a: np.ndarray | None) -> bool:
    """Whether ``a`` holds Python ints (an exact form beyond int64)."""
    return a is not None and a.dtype == object


def _places_vectorised(f: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per value (each with a fraction): the fewest places ``d <= MAX_DECIMALS`` of a
    decimal that round-trips to it, and that decimal times ``10**d`` (float64, exact);
    -1 where undecided here (too many places, or too many digits to decide in float64)."""
    places = np.full(f.size, -1, dtype=np.int64)
    digits = np.zeros(f.size)
    todo = np.arange(f.size)
    for d in range(1, MAX_DECIMALS + 1):
        if not todo.size:
            break
        power = 10.0**d
        k = np.rint(f[todo] * power)
        # k / 10**d is the correctly rounded quotient, i.e. the float64 the decimal
        # k * 10**-d parses to: equality means that decimal round-trips.
        ok = (np.abs(k) < _RINT_EXACT) & (k / power == f[todo])
        places[todo[ok]] = d
        digits[todo[ok]] = k[ok]
        todo = todo[~ok]
    return places, digits


def _places_of(value: float) -> tuple[int, int]:
    """Places and scaled digits of the shortest round-trip decimal of one float (exact)."""
    text = Decimal(repr(float(value)))
    exponent = text.as_tuple().exponent
    places = max(0, -exponent)
    return places, int(text.scaleb(places))


def decimal_places(values: np.ndarray) -> int | None:
    """Places of the decimals the client wrote (see the module doc), or ``None`` when
    some value needs more than ``MAX_DECIMALS``.

    Examples
    --------
    >>> decimal_places(np.array([1.5, 2.25, 3.0]))
    2
    >>> decimal_places(np.array([99999999.99]))
    2
    """
    form = _decimal_form(np.asarray(values).reshape(-1))
    return None if form is None else form[0]


def _decimal_form(values: np.ndarray):
    """``(d, places, digits, frac)`` for a float array, or None (see :func:`decimal_places`)."""
    if values.dtype.kind != "f" or values.size == 0:
        return 0, None, None, None
    frac = np.flatnonzero(values != np.floor(values))
    if not frac.size:
        return 0, None, None, None
    places, digits = _places_vectorised(values[frac])
    undecided = np.flatnonzero(places < 0)
    big = {}
    for i in undecided.tolist():  # rare: 16-17 significant digits, or too many places
        p, k = _places_of(values[frac[i]])
        if p > MAX_DECIMALS:
            return None
        places[i] = p
        big[i] = k
    return int(places.max()), places, (digits, big), frac


def _as_ints(values: np.ndarray) -> np.ndarray:
    """Integral values (int64 or float64) as int64, or as Python ints beyond int64's safe range."""
    if values.dtype.kind == "i" or values.dtype == object:
        return values
    if values.size and float(np.abs(values).max()) >= INT64_SAFE:
        return np.array([int(v) for v in values.tolist()], dtype=object)
    return values.astype(np.int64)


def _times(ints: np.ndarray, factor: int) -> np.ndarray:
    """``ints * factor`` exactly: int64 while it fits, Python ints beyond."""
    if factor == 1:
        return ints
    if ints.dtype != object and factor < INT64_SAFE and (not ints.size or float(np.abs(ints).max()) * factor
                                                          < INT64_SAFE):
        return ints * np.int64(factor)
    return ints.astype(object) * factor


def scale_to_int(values: np.ndarray, d: int, form=None) -> np.ndarray:
    """``values * 10**d`` exactly, where every value has at most ``d`` places."""
    if values.dtype.kind != "f":
        return _times(_as_ints(values), 10**d)
    _, places, digits, frac = _decimal_form(values) if form is None else form
    if frac is None:
        return _times(_as_ints(values), 10**d)
    low, big = digits
    if float(np.abs(values).max()) * 10.0**d < INT64_SAFE:
        out = values.astype(np.int64) * np.int64(10**d)  # right for the integral values
        out[frac] = low.astype(np.int64) * 10 ** (d - places)
    else:
        out = np.array([int(v) * 10**d for v in values.tolist()], dtype=object)
        out[frac] = [int(k) * 10 ** (d - p) for k, p in zip(low.tolist(), places.tolist())]
    for i, k in big.items():
        out[frac[i]] = k * 10 ** (d - int(places[i]))
    return out


def common_scale(*arrays: np.ndarray | None) -> tuple[int, list] | None:
    """One decimal scale for several arrays, and the arrays scaled to exact integers.

    Returns ``(d, arrays)`` with each array int64, or an object array of Python ints
    where int64 cannot hold it; ``None`` when some array needs more than
    ``MAX_DECIMALS`` places.

    Examples
    --------
    >>> d, (a,) = common_scale(np.array([1000000000.5]))
    >>> d, a.tolist()
    (1, [10000000005])
    """
    # Arrays of any shape (per-period capacities are 2-D): read flat, answered in shape.
    flat = [None if a is None else np.asarray(a).reshape(-1) for a in arrays]
    forms = [None if a is None else _decimal_form(a) for a in flat]
    if any(a is not None and f is None for a, f in zip(flat, forms)):
        return None
    d = max((f[0] for f in forms if f is not None), default=0)
    return d, [None if a is None else scale_to_int(a, d, f).reshape(np.shape(original))
               for a, f, original in zip(flat, forms, arrays)]


def binary_scale(values: np.ndarray) -> tuple[int, np.ndarray]:
    """``(e, ints)`` with ``values == ints * 2**-e`` exactly (any finite float64).

    ``ints`` is int64 while it fits, Python ints beyond.

    Examples
    --------
    >>> e, ints = binary_scale(np.array([0.75, 2.0]))
    >>> e, ints.tolist()
    (2, [3, 8])
    """
    if values.dtype.kind != "f":
        return 0, _as_ints(values)
    nonzero = values[values != 0]
    if not nonzero.size:
        return 0, np.zeros(values.size, dtype=np.int64)
    mantissa, exponent = np.frexp(nonzero)
    m53 = np.ldexp(mantissa, 53).astype(np.int64)  # exact: |mantissa| < 1
    lowest = m53 & -m53
    trailing = np.frexp(lowest.astype(np.float64))[1] - 1
    e = max(0, int((53 - exponent - trailing).max()))
    top = float(np.abs(nonzero).max())
    if e <= 1000 and np.ldexp(top, e) < INT64_SAFE:
        return e, np.ldexp(values, e).astype(np.int64)  # scaling by 2**e is exact here
    ints = np.empty(values.size, dtype=object)
    for i, v in enumerate(values.tolist()):
        n, den = float(v).as_integer_ratio()  # den is a power of two dividing 2**e
        ints[i] = n * ((1 << e) // den)
    return e, ints


def divide(ints, denominator: int):
    """``ints / denominator`` rounded once to float64 (arrays or one number)."""
    if isinstance(ints, np.ndarray):
        if ints.dtype != object and (not ints.size or float(np.abs(ints).max()) <= 2**53) \
                and denominator <= 2**53:
            return ints / denominator  # both exact as float64: one correctly rounded division
        return np.array([int(x) / denominator for x in ints.tolist()], dtype=np.float64)
    return int(ints) / denominator


#: Integers at or beyond this are reported as the nearest double (JSON integers stop at int64).
JSON_INT = 2**63


def rescale(ints, numerator: int = 1, denominator: int = 1):
    """``ints * numerator / denominator`` in the caller's units, rounded once.

    Integers stay integers when the denominator is 1 and they fit a JSON integer
    (int64); anything else becomes float64 (arrays or one number).
    """
    if isinstance(ints, np.ndarray):
        if numerator != 1:
            ints = _times(ints, numerator)
        if denominator != 1:
            return divide(ints, denominator)
        if ints.dtype == object:
            big = bool(ints.size) and max(abs(int(x)) for x in ints.tolist()) >= JSON_INT
            return ints.astype(np.float64) if big else ints.astype(np.int64)
        return ints
    if isinstance(ints, (float, np.floating)):
        return float(ints) * numerator / denominator
    value = int(ints) * numerator
    if denominator != 1:
        return value / denominator
    return value if abs(value) < JSON_INT else float(value)
