"""The shared min-cost reference (tests/references.py) checked against two outside sources.

* networkx's own worked example in the ``network_simplex`` docstring (networkx 3.x,
  read from the installed source): cost 24, flows a->b 4, a->c 1, b->d 4, c->d 1;
* scipy.optimize.linprog (HiGHS) on the same LP, for random networks with parallel
  arcs and self-loops, the two cases the reference settles itself.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import linprog

from tests.references import min_cost_flow, min_cost_flow_cost


def test_networkx_docstring_example():
    arcs = [("a", "b", 4, 3), ("a", "c", 10, 6), ("b", "d", 9, 1), ("c", "d", 5, 2)]
    assert min_cost_flow(arcs, {"a": 5, "d": -5}) == (24, [4, 1, 4, 1])
    as_objects = [{"from": u, "to": v, "capacity": c, "cost": k} for u, v, c, k in arcs]
    assert min_cost_flow_cost(as_objects, {"a": 5, "d": -5}) == 24


def test_unlimited_negative_self_loop_is_unbounded_and_others_are_settled():
    arcs = [("a", "b", 4, 3), ("b", "b", 2, -5), ("b", "b", None, 1), ("b", "d", 9, 1)]
    # The limited negative loop is filled (2 x -5), the positive one carries nothing.
    assert min_cost_flow(arcs, {"a": 3, "d": -3}) == (3 * 4 - 10, [3, 2, 0, 3])
    assert min_cost_flow_cost(arcs + [("d", "d", None, -1)], {"a": 3, "d": -3}) == "unbounded"
    assert min_cost_flow_cost(arcs, {"a": 5, "d": -5}) == "infeasible"


@pytest.mark.parametrize("seed", range(20))
def test_random_networks_agree_with_highs(seed):
    rng = np.random.default_rng(700 + seed)
    n, m = 6, 30  # dense enough that most draws are feasible (14 of these 20)
    tail, head = rng.integers(0, n, m), rng.integers(0, n, m)  # self-loops and parallel arcs alike
    cap, cost = rng.integers(0, 10, m), rng.integers(-3, 9, m)
    supply = np.zeros(n, np.int64)
    for a, b in rng.integers(0, n, (3, 2)):
        q = int(rng.integers(1, 6))
        supply[a] += q
        supply[b] -= q
    arcs = list(zip(tail.tolist(), head.tolist(), cap.tolist(), cost.tolist()))
    got = min_cost_flow_cost(arcs, dict(enumerate(supply.tolist())), range(n))
    a_eq = np.zeros((n, m))
    np.add.at(a_eq, (tail, np.arange(m)), 1)
    np.add.at(a_eq, (head, np.arange(m)), -1)  # a self-loop's column is 0: it only costs
    ref = linprog(cost, A_eq=a_eq, b_eq=supply, bounds=list(zip(np.zeros(m), cap)), method="highs")
    if ref.status == 2:
        assert got == "infeasible"
        return
    assert ref.status == 0 and got == pytest.approx(ref.fun, abs=1e-9)
    value, flows = min_cost_flow(arcs, dict(enumerate(supply.tolist())), range(n))
    flows = np.asarray(flows)
    assert np.all((flows >= 0) & (flows <= cap)) and np.array_equal(a_eq @ flows, supply)
    assert value == int(np.dot(cost, flows))
