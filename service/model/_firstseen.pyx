# cython: language_level=3, boundscheck=False, wraparound=False, initializedcheck=False
"""Integer node ids numbered in order of first mention, in one pass (compiled).

:func:`service.model.ids._intern_ints` calls it on the dense path and keeps a numpy
version for installs without a C compiler; the two must agree exactly (tested).
"""

import numpy as np

from libc.stdint cimport int32_t, int64_t


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
    """
    cdef Py_ssize_t m = tails.shape[0], n_decl = declared.shape[0], i
    if heads.shape[0] != m:
        raise ValueError("tails and heads differ in length")
    rank_arr = np.full(top + 1, -1, dtype=np.int32)
    ids_arr = np.empty(min(top + 1, n_decl + 2 * m), dtype=np.int64)
    tail_arr = np.empty(m, dtype=np.int32)
    head_arr = np.empty(m, dtype=np.int32)
    cdef int32_t[::1] rank = rank_arr
    cdef int64_t[::1] ids = ids_arr
    cdef int32_t[::1] tail = tail_arr
    cdef int32_t[::1] head = head_arr
    cdef int32_t count = 0
    cdef int64_t v
    with nogil:
        for i in range(n_decl):
            v = declared[i]
            if v < 0 or v > top:
                with gil:
                    raise ValueError(f"id {v} outside [0, {top}]")
            if rank[v] < 0:
                rank[v] = count
                ids[count] = v
                count += 1
        for i in range(m):
            v = tails[i]
            if v < 0 or v > top:
                with gil:
                    raise ValueError(f"id {v} outside [0, {top}]")
            if rank[v] < 0:
                rank[v] = count
                ids[count] = v
                count += 1
            tail[i] = rank[v]
            v = heads[i]
            if v < 0 or v > top:
                with gil:
                    raise ValueError(f"id {v} outside [0, {top}]")
            if rank[v] < 0:
                rank[v] = count
                ids[count] = v
                count += 1
            head[i] = rank[v]
    return ids_arr[:count], tail_arr, head_arr
