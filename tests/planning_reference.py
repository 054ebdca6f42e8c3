"""Outside references for the planning kinds (expansion, resilience), shared by their tests.

* networkx.maximum_flow_value re-solved without each arc (resilience);
* networkx.network_simplex on the network with a parallel added-capacity arc per
  widenable lane (expansion, per-unit charges);
* scipy.optimize.milp (HiGHS) on the fixed-charge model (expansion, one-off charges);
* networkx.maximum_flow_value on the fully widened network (expansion, infeasible);
* a plain-loop replay of an expansion plan (not the service's vectorised checks).
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from scipy.optimize import Bounds, LinearConstraint, milp

from service.solvers.expansion import Lanes
from tests.references import max_flow_value, min_cost_flow


def nx_values_without(n, tail, head, cap, unlimited, s, t) -> np.ndarray:
    """networkx.maximum_flow_value re-solved once per arc, with that arc removed
    (tests/references.max_flow_value: parallel arcs merged, no capacity = unlimited)."""
    arcs = [{"from": int(u), "to": int(v), "capacity": None if unlimited is not None and unlimited[a] else int(c)}
            for a, (u, v, c) in enumerate(zip(tail, head, cap))]
    return np.array([max_flow_value(arcs[:closed] + arcs[closed + 1:], s, t) for closed in range(len(arcs))])


def replay(lanes: Lanes, solution) -> None:
    """The plan, checked by hand with plain loops (not the service's vectorised code)."""
    net = np.zeros(lanes.num_nodes)
    for a in range(lanes.tail.size):
        flow, add = solution.flows[a], solution.additions[a]
        assert add >= 0 and flow >= 0
        if not lanes.widenable[a] or (lanes.unlimited is not None and lanes.unlimited[a]):
            assert add == 0, f"lane {a} widened but may not be"
        elif not lanes.expand_unlimited[a]:
            assert add <= lanes.expand_max[a], f"lane {a} widened beyond expand_max"
        if lanes.unlimited is None or not lanes.unlimited[a]:
            assert flow <= lanes.capacity[a] + add + 1e-9, f"lane {a} over its widened capacity"
        net[lanes.tail[a]] += flow
        net[lanes.head[a]] -= flow
    s, t = lanes.source, lanes.sink
    if s != t:
        assert net[s] == pytest.approx(lanes.target) and net[t] == pytest.approx(-lanes.target)
    inner = [v for v in range(lanes.num_nodes) if v not in (s, t)]
    assert np.allclose(net[inner], 0)
    fixed = 0 if lanes.expand_fixed is None else sum(
        lanes.expand_fixed[a] for a in range(lanes.tail.size) if solution.additions[a] > 0)
    assert solution.cost == pytest.approx(float(np.dot(lanes.expand_cost, solution.additions)) + fixed)


def nx_augmented_cost(lanes: Lanes):
    """networkx.network_simplex (tests/references.min_cost_flow) on the network with an
    added-capacity arc per lane; ``None`` when networkx finds it unfeasible."""
    arcs = []
    for a in range(lanes.tail.size):
        u, v = int(lanes.tail[a]), int(lanes.head[a])
        free = lanes.unlimited is not None and lanes.unlimited[a]
        arcs.append((u, v, None if free else int(lanes.capacity[a]), 0))
        if lanes.widenable[a] and not free:
            arcs.append((u, v, None if lanes.expand_unlimited[a] else int(lanes.expand_max[a]),
                         int(lanes.expand_cost[a])))
    supplies = {lanes.source: lanes.target}
    supplies[lanes.sink] = supplies.get(lanes.sink, 0) - lanes.target
    try:
        cost, _ = min_cost_flow(arcs, supplies, range(lanes.num_nodes))
    except nx.NetworkXUnfeasible:
        return None
    return cost


def nx_fully_widened_value(lanes: Lanes):
    """networkx.maximum_flow_value with every lane widened as far as it may be."""
    arcs = []
    for a in range(lanes.tail.size):
        free = (lanes.unlimited is not None and lanes.unlimited[a]) or (lanes.widenable[a] and lanes.expand_unlimited[a])
        cap = None if free else int(lanes.capacity[a] + (lanes.expand_max[a] if lanes.widenable[a] else 0))
        arcs.append({"from": int(lanes.tail[a]), "to": int(lanes.head[a]), "capacity": cap})
    return max_flow_value(arcs, lanes.source, lanes.sink)


def scipy_fixed_charge_cost(lanes: Lanes):
    """scipy.optimize.milp (HiGHS) on the fixed-charge model: x (today's capacity),
    y (added), z (0/1 per lane with a one-off charge), target as supply and demand."""
    m = lanes.tail.size
    unlimited = np.zeros(m, bool) if lanes.unlimited is None else lanes.unlimited
    w = np.flatnonzero(lanes.widenable & ~unlimited)
    k = w.size
    big = float(lanes.target)
    x_up = np.where(unlimited, big, lanes.capacity).astype(float)
    y_up = np.where(lanes.expand_unlimited[w], big, lanes.expand_max[w]).astype(float)
    c = np.concatenate([np.zeros(m), lanes.expand_cost[w], lanes.expand_fixed[w]]).astype(float)
    ends = np.concatenate([lanes.tail, lanes.tail[w]]), np.concatenate([lanes.head, lanes.head[w]])
    cols = np.arange(m + k)
    rows = np.concatenate([ends[0], ends[1]])
    vals = np.concatenate([np.ones(m + k), -np.ones(m + k)])
    a_flow = sp.csr_matrix((vals, (rows, np.concatenate([cols, cols]))), shape=(lanes.num_nodes, m + 2 * k))
    b = np.zeros(lanes.num_nodes)
    b[lanes.source] += lanes.target
    b[lanes.sink] -= lanes.target
    # y_j - y_up_j z_j <= 0
    a_link = sp.hstack([sp.csr_matrix((k, m)), sp.identity(k), -sp.diags(y_up)]).tocsr()
    res = milp(c, constraints=[LinearConstraint(a_flow, b, b), LinearConstraint(a_link, -np.inf, 0)],
               bounds=Bounds(np.zeros(m + 2 * k), np.concatenate([x_up, y_up, np.ones(k)])),
               integrality=np.concatenate([np.zeros(m + k), np.ones(k)]))
    return res.fun if res.status == 0 else None
