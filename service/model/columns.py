"""Column-wise checks of JSON values, vectorised with numpy.

A column is a Python list as decoded from JSON (one value per arc). The checks run
over whole columns: a set of the element types, then numpy comparisons. Only when a
check fails do we walk the column to name the first offending element, so a valid
payload never pays for per-element Python work beyond the decode itself.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from ..errors import FieldError, InputError

#: Largest magnitude accepted for any number. Keeping every value below 2**62 leaves
#: head-room for the sums the solvers form; sums are guarded again before solving.
MAX_MAGNITUDE = 2**62
#: Floats hold integers exactly only up to 2**53.
EXACT_FLOAT_INT = 2**53

PointerFn = Callable[[int], str]
MAX_REPORTED_ERRORS = 20


@dataclass(frozen=True)
class NumberColumn:
    """A column of JSON numbers, typed: the one form every decoder hands the model.

    ``values`` is int64, or float64 where a number has a fraction; an object array
    only for integers beyond int64 (which :func:`check_numbers` then names). ``null``
    marks JSON nulls and ``invalid`` the entries that are no number at all (strings,
    booleans, lists, objects); both hold 0 in ``values``, and either is ``None`` when
    it marks nothing. :func:`numbers_of` types a decoded JSON array; the compiled body
    scanner makes the column directly. After :func:`check_numbers`, ``invalid`` is
    ``None``, ``values`` int64 when every value is integral (floats such as ``4.0``
    count as integral), and ``null`` set only when there is a null.
    """

    values: np.ndarray
    null: np.ndarray | None = None
    invalid: np.ndarray | None = None

    def __len__(self) -> int:
        return int(self.values.size)

    @property
    def integral(self) -> bool:
        """Whether the values are int64."""
        return self.values.dtype.kind == "i"


def first_errors(col: list, bad: Callable[[object], bool], where: PointerFn,
                  detail: str | Callable[[object], str]) -> InputError:
    """Name the first offending elements of a column.

    Parameters
    ----------
    col : sequence
        The values.
    bad : callable
        Whether a value is wrong.
    where : callable
        Maps an element index to its JSON Pointer.
    detail : str or callable
        The message, or a function of the value giving it.

    Returns
    -------
    InputError
        At most ``MAX_REPORTED_ERRORS`` errors, in index order.

    Examples
    --------
    >>> [e.pointer for e in first_errors([1, -2, 3, -4], lambda v: v < 0, lambda i: f"/c/{i}", "neg").errors]
    ['/c/1', '/c/3']
    """
    errors = []
    for i, v in enumerate(col):
        if bad(v):
            errors.append(FieldError(where(i), detail(v) if callable(detail) else detail))
            if len(errors) >= MAX_REPORTED_ERRORS:
                break
    return InputError(errors)


def mask_errors(mask: np.ndarray, where: PointerFn, detail: str) -> InputError:
    """Name the first offending elements of a boolean mask.

    Parameters
    ----------
    mask : ndarray of bool
        Where the column is wrong.
    where : callable
        Maps an element index to its JSON Pointer.
    detail : str
        The message for every named element.

    Returns
    -------
    InputError
        At most ``MAX_REPORTED_ERRORS`` errors, in index order.

    Examples
    --------
    >>> [e.pointer for e in mask_errors(np.array([False, True]), lambda i: f"/c/{i}", "bad").errors]
    ['/c/1']
    """
    idx = np.flatnonzero(mask)[:MAX_REPORTED_ERRORS]
    return InputError([FieldError(where(int(i)), detail) for i in idx])


_NUMBER_TYPES = (int, float)
_JSON_NUMBER_OR_NULL = {int, float, type(None)}


def numbers_of(values: list | np.ndarray) -> NumberColumn:
    """A decoded JSON array as a typed :class:`NumberColumn`, checks left to
    :func:`check_numbers`: what is no number is marked, never raised here.

    Parameters
    ----------
    values : list or ndarray
        The array as orjson decodes it, or as a typed array (the simdjson path and
        DIMACS files give numeric columns so).

    Returns
    -------
    NumberColumn

    Examples
    --------
    >>> col = numbers_of([3, None, "x"])
    >>> col.values.tolist(), col.null.tolist(), col.invalid.tolist()
    ([3, 0, 0], [False, True, False], [False, False, True])
    """
    if isinstance(values, np.ndarray):
        return NumberColumn(values)
    kinds = set(map(type, values))
    null = invalid = None
    if not kinds <= set(_NUMBER_TYPES):
        if type(None) in kinds:
            null = np.fromiter((v is None for v in values), dtype=bool, count=len(values))
        if not kinds <= _JSON_NUMBER_OR_NULL:
            invalid = np.fromiter((type(v) not in _JSON_NUMBER_OR_NULL for v in values), dtype=bool,
                                  count=len(values))
        values = [v if type(v) in _NUMBER_TYPES else 0 for v in values]
    try:
        typed = np.asarray(values, dtype=np.float64 if float in kinds else np.int64)
    except OverflowError:  # an integer beyond int64: kept exact for the range check to name
        typed = np.asarray(values, dtype=object)
    return NumberColumn(typed, null, invalid)


def check_numbers(col: NumberColumn, where: PointerFn, *, allow_null: bool = False,
                  minimum: float | None = None) -> NumberColumn:
    """Check a typed column of numbers, whichever decoder made it.

    Parameters
    ----------
    col : NumberColumn
        As :func:`numbers_of` or a fast decoder made it.
    where : callable
        Maps an element index to its JSON Pointer, for error messages.
    allow_null : bool
        Whether ``null`` is allowed (it means "no limit" for capacities).
    minimum : float, optional
        Smallest allowed value.

    Returns
    -------
    NumberColumn
        ``values`` int64 when every value is integral, float64 otherwise; ``null``
        only when some entry is null; ``invalid`` ``None``.

    Raises
    ------
    InputError
        Naming the first offending elements, in this order of checks: entries that are
        no number (and nulls where not allowed), non-finite values, values beyond
        ``MAX_MAGNITUDE``, values below ``minimum``.

    Examples
    --------
    >>> check_numbers(numbers_of([2.0, 3]), lambda i: f"/c/{i}").values
    array([2, 3])
    """
    bad = col.invalid
    if not allow_null and col.null is not None:
        bad = col.null if bad is None else bad | col.null
    if bad is not None and bad.any():
        raise mask_errors(bad, where, "must be a number or null" if allow_null else "must be a number")
    values = col.values
    if values.dtype.kind == "f":
        non_finite = ~np.isfinite(values)
        if non_finite.any():
            raise mask_errors(non_finite, where, "must be a finite number")
        _check_range(values, where, minimum)
        if np.all(np.floor(values) == values) and np.all(np.abs(values) <= EXACT_FLOAT_INT):
            values = values.astype(np.int64)
    else:
        _check_range(values, where, minimum)
    null = col.null if col.null is not None and col.null.any() else None
    return NumberColumn(values, null)


def number_column(
    col: list,
    where: PointerFn,
    *,
    allow_null: bool = False,
    minimum: float | None = None,
) -> NumberColumn:
    """Check a list of JSON numbers and return it as a numpy array.

    :func:`numbers_of`, then :func:`check_numbers`.

    Parameters
    ----------
    col : list
        Decoded JSON values.
    where : callable
        Maps an element index to its JSON Pointer, for error messages.
    allow_null : bool
        Whether ``null`` is allowed (it means "no limit" for capacities).
    minimum : float, optional
        Smallest allowed value.

    Returns
    -------
    NumberColumn

    Raises
    ------
    InputError
        Naming the first offending elements: booleans, strings, nulls where not
        allowed, values beyond ``MAX_MAGNITUDE`` or below ``minimum``.

    Examples
    --------
    >>> number_column([3, None, 4.0], lambda i: f"/c/{i}", allow_null=True).values
    array([3, 0, 4])
    """
    return check_numbers(numbers_of(col), where, allow_null=allow_null, minimum=minimum)


def _check_range(values: np.ndarray, where: PointerFn, minimum: float | None) -> None:
    too_big = np.abs(values) > MAX_MAGNITUDE
    if too_big.any():
        raise mask_errors(too_big, where, f"must be at most {MAX_MAGNITUDE} in magnitude")
    if minimum is not None:
        low = values < minimum
        if low.any():
            raise mask_errors(low, where, f"must be >= {minimum:g}")


def number_value(value: object, ptr: str, *, minimum: float | None = None) -> int | float:
    """Check one JSON number (same rules as :func:`number_column`).

    Parameters
    ----------
    value : object
        The decoded JSON value.
    ptr : str
        Its JSON Pointer.
    minimum : float, optional
        Smallest allowed value.

    Returns
    -------
    int or float

    Raises
    ------
    InputError
        At ``ptr``.

    Examples
    --------
    >>> number_value(4.0, "/x")
    4
    """
    col = number_column([value], lambda _i: ptr, minimum=minimum)
    return col.values[0].item()
