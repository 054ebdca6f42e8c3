"""Reusable checks of flow solutions, written independently of the service's code.

Every solver's tests run these over their answers (as networkx's flow tests do), so
a wrong answer fails here even if the service's own certificate were wrong too.
"""

from __future__ import annotations

import math

import numpy as np


def as_array(values) -> np.ndarray:
    return np.asarray([np.nan if v is None else v for v in values], dtype=float)


def assert_capacities(flows, capacities, lower=None, tol=0.0) -> None:
    """0 (or lower) <= flow <= capacity on every arc; None capacity = no limit."""
    f = np.asarray(flows, dtype=float)
    low = np.zeros_like(f) if lower is None else np.asarray(lower, dtype=float)
    assert np.all(f >= low - tol), "a flow is below its lower bound"
    cap = as_array(capacities)
    limited = ~np.isnan(cap)
    assert np.all(f[limited] <= cap[limited] + tol), "a flow exceeds its capacity"


def assert_conservation(n_nodes, tails, heads, flows, supply=None, tol=0.0) -> np.ndarray:
    """Outflow - inflow == supply at every node (supply defaults to 0). Returns the net outflow."""
    f = np.asarray(flows, dtype=float)
    net = np.zeros(n_nodes)
    for t, h, x in zip(tails, heads, f):  # a plain loop: deliberately not the service's vectorised code
        net[t] += x
        net[h] -= x
    expected = np.zeros(n_nodes) if supply is None else np.asarray(supply, dtype=float)
    assert np.allclose(net, expected, atol=tol, rtol=0), f"conservation fails: {net - expected}"
    return net


def assert_max_flow(n_nodes, tails, heads, capacities, source, sink, flows, value, tol=0.0) -> None:
    """A feasible s-t flow of the stated value."""
    assert_capacities(flows, capacities, tol=tol)
    net = np.zeros(n_nodes)
    for t, h, x in zip(tails, heads, flows):
        net[t] += x
        net[h] -= x
    inner = [i for i in range(n_nodes) if i not in (source, sink)]
    assert np.allclose(net[inner], 0, atol=tol), "flow is not conserved at an inner node"
    assert math.isclose(net[source], value, abs_tol=tol + 1e-9), "net outflow at the source != value"
    assert math.isclose(-net[sink], value, abs_tol=tol + 1e-9), "net inflow at the sink != value"


def assert_cut(tails, heads, capacities, source_side: set, source, sink, value, tol=0.0) -> None:
    """The cut separates s from t and its capacity equals the flow value (max-flow min-cut)."""
    assert source in source_side and sink not in source_side
    total = 0.0
    for t, h, c in zip(tails, heads, capacities):
        if t in source_side and h not in source_side:
            assert c is not None, "an unlimited arc crosses the cut"
            total += c
    assert math.isclose(total, value, abs_tol=tol + 1e-9), f"cut capacity {total} != flow value {value}"


def assert_integral(values) -> None:
    """Integrality theorem: integer capacities admit an integral maximum flow."""
    assert all(float(v).is_integer() for v in values), "a flow is not integral"


def assert_exact_max_flow(n_nodes, tails, heads, capacities, source, sink, flows, value, source_side,
                          rounding: float = 0.0) -> None:
    """The max-flow checks in exact rational arithmetic (fractions.Fraction of every
    number), for answers at any magnitude. ``rounding`` allows each figure the relative
    error of rounding exact values to doubles once (e.g. 2**-53 per number); 0 for
    integer answers, which must hold exactly."""
    from fractions import Fraction

    def close(a, b, scale):
        return abs(a - b) <= Fraction(rounding) * scale

    flows = [Fraction(int(x)) if isinstance(x, (int, np.integer)) else Fraction(float(x)) for x in flows]
    caps = [None if c is None else Fraction(c) for c in capacities]
    net = [Fraction(0)] * n_nodes
    through = [Fraction(0)] * n_nodes
    for t, h, x, c in zip(tails, heads, flows, caps):
        assert x >= 0 or close(x, 0, abs(x)), "a flow is negative"
        assert c is None or x <= c or close(x, c, c), "a flow exceeds its capacity"
        net[t] += x
        net[h] -= x
        through[t] += abs(x)
        through[h] += abs(x)
    for i in range(n_nodes):
        if i not in (source, sink):
            assert close(net[i], 0, 2 * through[i]), f"flow is not conserved at node {i}"
    exact_value = Fraction(value)
    assert close(net[source], exact_value, 2 * through[source] + abs(exact_value)), "net outflow at the source != value"
    cut = Fraction(0)
    for t, h, c in zip(tails, heads, caps):
        if t in source_side and h not in source_side:
            assert c is not None, "an unlimited arc crosses the cut"
            cut += c
    assert source in source_side and sink not in source_side
    assert close(cut, exact_value, cut), f"cut capacity {cut} != flow value {value}"
