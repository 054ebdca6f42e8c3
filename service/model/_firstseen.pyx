# cython: language_level=3, boundscheck=False, wraparound=False, initializedcheck=False
"""Integer node ids numbered in order of first mention, in one pass (compiled).

:func:`service.model.interning._intern_ints` calls it on the dense path and keeps a numpy
version for installs without a C compiler; the two must agree exactly (tested).
"""

import numpy as np

from libc.stdint cimport int32_t, int64_t


cdef inline int32_t number(int64_t v, int64_t top, int32_t* rank, int64_t* ids, int32_t* count) noexcept nogil:
    """The number of id ``v``, given the next one when it is new; -1 when ``v`` is outside
    ``[0, top]`` (then nothing is indexed)."""
    if v < 0 or v > top:
        return -1
    if rank[v] < 0:
        rank[v] = count[0]
        ids[count[0]] = v
        count[0] += 1
    return rank[v]


def first_seen(const int64_t[::1] declared, const int64_t[::1] tails, const int64_t[::1] heads, int64_t top):
    """Number the ids in the order declared, from, to, from, to, ...

    Parameters
    ----------
    declared, tails, heads : int64 arrays
        Every value in ``[0, top]`` (checked here: a value outside raises, it is
        never used as an index).
    top : int
        The largest id; a table of ``top + 1`` int32 is allocated.

    Returns
    -------
    (ids, tail, head)
        ``ids`` the distinct ids in order of first mention (int64); ``tail`` and
        ``head`` the int32 index of each arc end in ``ids``.

    Raises
    ------
    ValueError
        An id outside ``[0, top]``, or ``tails`` and ``heads`` of different lengths.
    """
    cdef Py_ssize_t m = tails.shape[0], n_decl = declared.shape[0], i
    if heads.shape[0] != m:
        raise ValueError("tails and heads differ in length")
    if top < 0:
        raise ValueError("top must be non-negative")
    rank_arr = np.full(top + 1, -1, dtype=np.int32)
    ids_arr = np.empty(min(top + 1, n_decl + 2 * m), dtype=np.int64)
    tail_arr = np.empty(m, dtype=np.int32)
    head_arr = np.empty(m, dtype=np.int32)
    cdef int32_t[::1] rank_view = rank_arr
    cdef int64_t[::1] ids_view = ids_arr
    cdef int32_t[::1] tail = tail_arr
    cdef int32_t[::1] head = head_arr
    cdef int32_t* rank = &rank_view[0]
    cdef int64_t* ids = &ids_view[0] if ids_view.shape[0] else NULL
    cdef int32_t count = 0, got = 0
    with nogil:
        for i in range(n_decl):
            got = number(declared[i], top, rank, ids, &count)
            if got < 0:
                break
        if got >= 0:
            for i in range(m):
                got = number(tails[i], top, rank, ids, &count)
                if got < 0:
                    break
                tail[i] = got
                got = number(heads[i], top, rank, ids, &count)
                if got < 0:
                    break
                head[i] = got
    if got < 0:
        raise ValueError(f"an id lies outside [0, {top}]")
    return ids_arr[:count], tail_arr, head_arr
