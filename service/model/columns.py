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
class NullableNumbers:
    """A typed column (int64, or float64 where a number has a fraction) with JSON nulls
    marked (their value slot is 0), as the compiled body scanner hands it over."""

    values: np.ndarray
    null: np.ndarray

    def __len__(self) -> int:
        return int(self.values.size)


@dataclass(frozen=True)
class NumberColumn:
    """A checked numeric column.

    ``values`` is int64 when every value is integral (floats such as ``4.0`` count as
    integral), float64 otherwise; ``null`` marks JSON nulls (their value slot is 0).
    """

    values: np.ndarray
    null: np.ndarray | None

    @property
    def integral(self) -> bool:
        return self.values.dtype.kind == "i"


def first_errors(col: list, bad: Callable[[object], bool], where: PointerFn,
                  detail: str | Callable[[object], str]) -> InputError:
    """Name the first offending elements (``detail`` may depend on the value)."""
    errors = []
    for i, v in enumerate(col):
        if bad(v):
            errors.append(FieldError(where(i), detail(v) if callable(detail) else detail))
            if len(errors) >= MAX_REPORTED_ERRORS:
                break
    return InputError(errors)


def mask_errors(mask: np.ndarray, where: PointerFn, detail: str) -> InputError:
    idx = np.flatnonzero(mask)[:MAX_REPORTED_ERRORS]
    return InputError([FieldError(where(int(i)), detail) for i in idx])


def number_column(
    col: list,
    where: PointerFn,
    *,
    allow_null: bool = False,
    minimum: float | None = None,
) -> NumberColumn:
    """Check a list of JSON numbers and return it as a numpy array.

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
    if isinstance(col, np.ndarray):
        return _typed_column(col, where, minimum)
    if isinstance(col, NullableNumbers):
        if not allow_null and col.null.any():
            raise mask_errors(col.null, where, "must be a number")
        return NumberColumn(_typed_column(col.values, where, minimum).values, col.null if col.null.any() else None)
    kinds = set(map(type, col))
    allowed = {int, float, type(None)} if allow_null else {int, float}
    if not kinds <= allowed:
        wanted = "a number or null" if allow_null else "a number"
        raise first_errors(col, lambda v: type(v) not in allowed, where, f"must be {wanted}")
    null = None
    if type(None) in kinds:
        null = np.fromiter((v is None for v in col), dtype=bool, count=len(col))
        col = [0 if v is None else v for v in col]
    if float in kinds:
        values = np.asarray(col, dtype=np.float64)
        _check_range(values, where, minimum)
        if np.all(np.floor(values) == values) and np.all(np.abs(values) <= EXACT_FLOAT_INT):
            values = values.astype(np.int64)
    else:
        try:
            values = np.asarray(col, dtype=np.int64)
        except OverflowError:
            raise first_errors(
                col, lambda v: abs(v) > MAX_MAGNITUDE, where, f"must be at most {MAX_MAGNITUDE} in magnitude"
            ) from None
        if values.size == 0:
            values = values.astype(np.int64)
        _check_range(values, where, minimum)
    return NumberColumn(values, null)


def _typed_column(values: np.ndarray, where: PointerFn, minimum: float | None) -> NumberColumn:
    """A column that arrived as a typed array (the columnar fast path): no type
    checks needed, only range and finiteness."""
    if values.dtype.kind == "f":
        bad = ~np.isfinite(values)
        if bad.any():
            raise mask_errors(bad, where, "must be a finite number")
        _check_range(values, where, minimum)
        if np.all(np.floor(values) == values) and np.all(np.abs(values) <= EXACT_FLOAT_INT):
            values = values.astype(np.int64)
        return NumberColumn(values, None)
    _check_range(values, where, minimum)
    return NumberColumn(values, None)


def _check_range(values: np.ndarray, where: PointerFn, minimum: float | None) -> None:
    too_big = np.abs(values) > MAX_MAGNITUDE
    if too_big.any():
        raise mask_errors(too_big, where, f"must be at most {MAX_MAGNITUDE} in magnitude")
    if minimum is not None:
        low = values < minimum
        if low.any():
            raise mask_errors(low, where, f"must be >= {minimum:g}")


def number_value(value: object, ptr: str, *, minimum: float | None = None) -> int | float:
    """Check one JSON number (same rules as :func:`number_column`)."""
    col = number_column([value], lambda _i: ptr, minimum=minimum)
    return col.values[0].item()
