"""Node ids: strings (1-200 characters) or non-negative integers, one kind per payload.

The id column, the interned nodes of a network (:class:`NodeIndex`) and how an error
message shows an id; :mod:`service.model.interning` numbers them.
"""

from __future__ import annotations

import json
import unicodedata
from dataclasses import dataclass
from itertools import islice
from operator import itemgetter

import numpy as np

from .columns import PointerFn

MAX_ID_LENGTH = 200


@dataclass(frozen=True)
class IdColumn:
    """A list of ids as decoded from JSON, with a function naming each element."""

    values: list
    where: PointerFn


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
        """The index of a node id.

        Parameters
        ----------
        node_id : object
            A decoded JSON value.

        Returns
        -------
        int or None
            ``None`` when no node has that id (ids of the other kind included).

        Examples
        --------
        >>> NodeIndex(["a", "b"], str).index_of("b"), NodeIndex([3, 5], int).index_of("5")
        (1, None)
        """
        if type(node_id) is not self.kind:
            return None
        if self.lookup is not None:
            return self.lookup.get(node_id)
        if self.kind is int:
            hits = np.flatnonzero(np.asarray(self.ids, dtype=np.int64) == node_id)
            return int(hits[0]) if hits.size else None
        self.lookup = {v: i for i, v in enumerate(self.ids)}
        return self.lookup.get(node_id)


#: How many known ids an error message searches for a look-alike (error path only).
LOOKALIKE_SCAN = 1_000_000


def shown_id(value: object) -> str:
    """An id as an error message shows it: its repr and, when it holds anything but
    printable ASCII, its code points as JSON escapes, since two ids can look the same
    and differ there ("Zürich" as one code point or as "u" plus a combining diaeresis).

    Parameters
    ----------
    value : object
        The id as decoded.

    Returns
    -------
    str

    Examples
    --------
    >>> shown_id("hub-a")
    "'hub-a'"
    >>> print(shown_id("Zu\\u0308rich"))
    'Zu\u0308rich' ("Zu\\u0308rich", not in NFC form)
    """
    text = repr(value)
    if isinstance(value, str) and not (value.isascii() and value.isprintable()):
        nfc = "" if unicodedata.is_normalized("NFC", value) else ", not in NFC form"
        text += f" ({json.dumps(value)}{nfc})"
    return text


def lookalike(value: object, known) -> str:
    """A clause naming a known id that differs from ``value`` only in Unicode
    normalisation (NFKC), or ``""``. Ids are compared exactly, code point by code point;
    this only explains an "unknown" error whose id prints like a known one.

    Parameters
    ----------
    value : object
        The unknown id.
    known : iterable
        The known ids (the first ``LOOKALIKE_SCAN`` are searched).

    Returns
    -------
    str

    Examples
    --------
    >>> lookalike("Zu\u0308rich", ["Z\u00fcrich"]).startswith("; the known id")
    True
    """
    if not isinstance(value, str):
        return ""
    target, plain = unicodedata.normalize("NFKC", value), value.isascii()
    for other in islice(known, LOOKALIKE_SCAN):
        if (isinstance(other, str) and other != value and not (plain and other.isascii())
                and unicodedata.normalize("NFKC", other) == target):
            return (f"; the known id {shown_id(other)} differs from it only in Unicode normalisation "
                    f"(ids are compared exactly)")
    return ""


def ids_of(nodes: NodeIndex, indices: np.ndarray):
    """Node ids for an array of node indices, without a per-node Python loop.

    Parameters
    ----------
    nodes : NodeIndex
        The network's nodes.
    indices : ndarray of int
        Node indices.

    Returns
    -------
    ndarray or list
        An int64 array for integer ids, a list of strings for string ids.

    Examples
    --------
    >>> ids_of(NodeIndex(["a", "b", "c"], str), np.array([2, 0]))
    ['c', 'a']
    """
    if nodes.kind is int:
        return np.asarray(nodes.ids, dtype=np.int64)[indices]
    if indices.size == 0:
        return []
    if indices.size == 1:
        return [nodes.ids[int(indices[0])]]
    return list(itemgetter(*indices.tolist())(nodes.ids))
