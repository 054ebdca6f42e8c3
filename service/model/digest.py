"""Content hashes of normalised problems.

The digest covers everything that can change an answer: the problem kind, the
normalised arrays (dtype, shape and bytes), node ids, the answer-changing options and
the solver version. Two requests that normalise to the same problem get the same
digest, whatever their payload form or key order.
"""

from __future__ import annotations

import hashlib

import numpy as np
import orjson

#: Bump when normalisation or the response shape changes, so old digests retire.
DIGEST_VERSION = b"sluice-digest-1"


def problem_digest(kind: str, *parts) -> str:
    """The content digest of a normalised problem: ``sha256:<64 hex digits>``.

    Each part is hashed behind a tag saying what it is: an array as its dtype and
    shape, then its memory in C order (so equal bytes of another dtype or shape hash
    differently), ``None`` as a marker of its own, anything else as JSON with sorted
    keys (so key order in the request does not matter).

    Parameters
    ----------
    kind : str
        The problem kind, so equal arrays of two kinds get different digests.
    *parts : numpy.ndarray, None or JSON-serialisable value
        Everything else that can change the answer, in a fixed order per kind.

    Returns
    -------
    str
    """
    h = hashlib.sha256(DIGEST_VERSION)
    h.update(kind.encode())
    for part in parts:
        if isinstance(part, np.ndarray):
            h.update(f"|a:{part.dtype.str}:{part.shape}|".encode())
            h.update(memoryview(np.ascontiguousarray(part)).cast("B"))  # the array's memory, not a copy
        elif part is None:
            h.update(b"|none|")
        else:
            h.update(b"|j|")
            h.update(orjson.dumps(part, option=orjson.OPT_SORT_KEYS))
    return "sha256:" + h.hexdigest()
