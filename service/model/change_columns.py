"""What-if changes read column by column (:mod:`.changes`): presence masks, values and
the JSON Pointer of every member, so each check is one vectorised pass.
"""

from __future__ import annotations

from itertools import compress
from operator import methodcaller

import numpy as np

from ..errors import InputError
from .columns import number_column


class ChangeColumns:
    """The changes split into columns, with presence masks (one C-level pass each)."""

    def __init__(self, changes: list, base: str, rows: list | None = None):
        self.changes = changes
        self.base = base
        self.count = len(changes)
        self.rows = rows  # each change's index in the request (when these are some of them)
        self._has: dict = {}

    def has(self, name: str) -> np.ndarray:
        """Which changes have the member ``name`` (computed once per name).

        Returns
        -------
        numpy.ndarray of bool
            One entry per change.
        """
        if name not in self._has:
            self._has[name] = np.fromiter(map(methodcaller("__contains__", name), self.changes), bool, self.count)
        return self._has[name]

    def values(self, name: str) -> tuple[np.ndarray, list]:
        """(indices of the changes having ``name``, their values)."""
        has = self.has(name)
        return np.flatnonzero(has), list(compress(map(methodcaller("get", name), self.changes), has))

    def where(self, name: str, rows: np.ndarray):
        """A pointer function for the values :meth:`values` returned for ``name``.

        Parameters
        ----------
        name : str
        rows : numpy.ndarray
            The change indices of those values.

        Returns
        -------
        callable
            Maps a position among the values to the JSON Pointer of that member.
        """
        return lambda j: self.at(rows[j], name)

    def at(self, row: int, name: str | None = None) -> str:
        """The JSON Pointer of a change, or of its member ``name``.

        Parameters
        ----------
        row : int
            Index among these changes; mapped through ``rows`` to the change's index in
            the request when the changes are a subset of it.
        name : str, optional

        Returns
        -------
        str
        """
        row = int(row) if self.rows is None else self.rows[int(row)]
        return f"{self.base}/{row}" + (f"/{name}" if name else "")

    def numbers(self, name: str, **kwargs):
        """The changes that give ``name``, and its values checked as JSON numbers.

        Parameters
        ----------
        name : str
        **kwargs
            Passed to :func:`~service.model.columns.number_column` (``allow_null``,
            ``minimum``).

        Returns
        -------
        tuple of (numpy.ndarray, NumberColumn), or None
            ``None`` when no change gives ``name``.

        Raises
        ------
        InputError
            Naming the first offending values.
        """
        rows, values = self.values(name)
        if not rows.size:
            return None
        checked = number_column(values, self.where(name, rows), **kwargs)
        return rows, checked

    def booleans(self, name: str):
        """The changes that give ``name``, and its values, which must be JSON booleans.

        Returns
        -------
        tuple of (numpy.ndarray, numpy.ndarray of bool), or None
            ``None`` when no change gives ``name``.

        Raises
        ------
        InputError
            Naming the first value that is not ``true`` or ``false``.
        """
        rows, values = self.values(name)
        if not rows.size:
            return None
        if set(map(type, values)) - {bool}:
            j = next(j for j, v in enumerate(values) if type(v) is not bool)
            raise InputError.at(self.at(rows[j], name), "must be true or false")
        return rows, np.asarray(values, dtype=bool)
