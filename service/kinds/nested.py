"""Errors of a document nested inside another (verify's ``problem``, a batch item).

The model and the kinds name fields by JSON Pointer from the root of the document
they parse; when that document sits inside a larger request the pointers get the
enclosing path in front.
"""

from __future__ import annotations

from contextlib import contextmanager

from ..errors import FieldError, InputError


def prefixed(exc: InputError, prefix: str) -> InputError:
    """An error of a nested document as an error of the enclosing request.

    Parameters
    ----------
    exc : InputError
    prefix : str
        The JSON Pointer of the nested document (``/problem``, ``/items/3/problem``).

    Returns
    -------
    InputError
        A copy of ``exc`` (same class, so same status) with every pointer under ``prefix``.
    """
    errors = [FieldError(prefix + e.pointer, e.detail) for e in exc.errors]
    first = errors[0] if errors else None
    detail = f"{first.pointer}: {first.detail}" if first else exc.detail
    out = type(exc).__new__(type(exc))
    InputError.__init__(out, errors, detail)
    return out


@contextmanager
def under(prefix: str):
    """Re-raise any :class:`InputError` from the block with pointers under ``prefix``.

    Parameters
    ----------
    prefix : str
        The JSON Pointer of the nested document.

    Raises
    ------
    InputError
        :func:`prefixed` of the block's error.
    """
    try:
        yield
    except InputError as exc:
        raise prefixed(exc, prefix) from None
