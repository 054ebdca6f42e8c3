"""Integer node ids numbered by first mention: the compiled pass against the numpy path
and against the rule itself, written out in plain Python."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import service.model.interning as interning
from service.model._firstseen import first_seen


def by_the_rule(declared, tails, heads):
    """The contract's order, spelled out: declared nodes, then each arc's from, then its to."""
    order: dict[int, int] = {}
    for v in [*declared, *(x for pair in zip(tails, heads) for x in pair)]:
        order.setdefault(v, len(order))
    return list(order), [order[v] for v in tails], [order[v] for v in heads]


def numpy_path(declared, tails, heads):
    saved, interning.first_seen = interning.first_seen, None
    try:
        return interning._intern_ints(declared, tails, heads)
    finally:
        interning.first_seen = saved


def test_the_compiled_pass_is_installed():
    # `pip install` builds it; without it every integer-id payload takes the slower numpy path.
    assert interning.first_seen is not None


@settings(max_examples=300, deadline=None)
@given(st.lists(st.integers(0, 60), max_size=8, unique=True),
       st.lists(st.tuples(st.integers(0, 60), st.integers(0, 60)), max_size=40))
def test_compiled_and_numpy_paths_follow_the_rule(declared, arcs):
    d = np.array(declared, dtype=np.int64)
    t = np.array([a for a, _ in arcs], dtype=np.int64)
    h = np.array([b for _, b in arcs], dtype=np.int64)
    expected = by_the_rule(declared, t.tolist(), h.tolist())
    for ids, tail, head in (interning._intern_ints(d, t, h), numpy_path(d, t, h)):
        assert (ids, tail.tolist(), head.tolist()) == expected
        assert tail.dtype == head.dtype == np.int32


def test_a_large_random_network_agrees_with_the_numpy_path():
    rng = np.random.default_rng(8)
    t, h = rng.integers(0, 50_000, 300_000), rng.integers(0, 50_000, 300_000)
    d = rng.permutation(80_000)[:500].astype(np.int64)  # some declared ids no arc mentions
    fast, slow = interning._intern_ints(d, t, h), numpy_path(d, t, h)
    assert fast[0] == slow[0] and np.array_equal(fast[1], slow[1]) and np.array_equal(fast[2], slow[2])


@pytest.mark.parametrize("bad", [-1, 11])
def test_an_id_outside_the_table_raises_instead_of_indexing(bad):
    ok = np.array([0, 3], dtype=np.int64)
    for args in ((np.array([bad]), ok, ok), (ok[:0], np.array([1, bad]), ok), (ok[:0], ok, np.array([2, bad]))):
        with pytest.raises(ValueError, match="outside"):
            first_seen(*(a.astype(np.int64) for a in args), 10)
