"""Exact decimal scaling: solve data with a few decimals as integers.

JSON numbers such as ``12.5`` are decimals. When every value of a problem has at
most ``MAX_DECIMALS`` decimal places, multiplying by ``10**d`` turns them into
integers exactly, the integer solvers give an exact answer, and dividing back gives
the exact decimal answer (up to the last float64 rounding of the division).
"""

from __future__ import annotations

import numpy as np

MAX_DECIMALS = 6
#: After scaling, values must stay integers that float64 represents exactly.
EXACT_LIMIT = 2**53


def decimal_places(values: np.ndarray) -> int | None:
    """Smallest d <= MAX_DECIMALS such that every value times 10**d is an integer.

    Returns ``None`` when no such d exists or the scaled values would leave the range
    where float64 holds integers exactly.

    Examples
    --------
    >>> decimal_places(np.array([1.5, 2.25, 3.0]))
    2
    """
    if values.dtype.kind == "i" or values.size == 0:
        return 0
    for d in range(MAX_DECIMALS + 1):
        scaled = values * 10.0**d
        rounded = np.rint(scaled)
        # 1e-9 relative slack absorbs the binary representation of decimal literals.
        if np.all(np.abs(scaled - rounded) <= 1e-9 * np.maximum(1.0, np.abs(scaled))):
            return d if np.abs(rounded).max() < EXACT_LIMIT else None
    return None


def scale_to_int(values: np.ndarray, d: int) -> np.ndarray:
    if values.dtype.kind == "i":
        return values * (10**d) if d else values
    return np.rint(values * 10.0**d).astype(np.int64)


def common_scale(*arrays: np.ndarray | None, limit: int = 2**62) -> tuple[int, list] | None:
    """One decimal scale for several arrays, and the arrays scaled to int64.

    Returns ``None`` when some array needs more than ``MAX_DECIMALS`` decimals or a
    scaled magnitude would exceed ``limit``.
    """
    places = [decimal_places(a) for a in arrays if a is not None]
    if any(p is None for p in places):
        return None
    d = max(places, default=0)
    for a in arrays:
        if a is not None and a.size and int(np.abs(a).max()) * 10**d >= limit:
            return None
    return d, [None if a is None else scale_to_int(a, d) for a in arrays]
