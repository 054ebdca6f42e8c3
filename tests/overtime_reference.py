"""References for flows over time, built independently of the service's solvers.

* :func:`explicit_expanded`: the time-expanded network (Ford and Fulkerson, 1958) built
  with plain Python loops over periods and lanes, as a networkx graph. Each lane copy
  gets a node of its own in the middle, so parallel lanes stay apart in a DiGraph.
* :func:`replay_units`: walks a schedule one unit at a time from the source's stock (or
  a supply) to the sink (or a demand), checking every step against the lanes, their
  transit and the horizon, and that the steps use up the schedule exactly.
* :func:`random_network`: small random networks over time for property tests.
"""

from __future__ import annotations

from collections import defaultdict

import networkx as nx
import numpy as np

from service.solvers.timeexpanded import TimedNetwork


def lane_cap(net: TimedNetwork, a: int, p: int):
    """Capacity of lane ``a`` departing in period ``p`` (None = no limit)."""
    cap = net.capacity[a] if net.capacity.ndim == 1 else net.capacity[a, p]
    unl = net.unlimited is not None and bool(net.unlimited[a] if net.unlimited.ndim == 1 else net.unlimited[a, p])
    return None if unl else int(cap)


def hold_cap(net: TimedNetwork, v: int):
    if net.holdover is None or (net.holdover_unlimited is not None and net.holdover_unlimited[v]):
        return None
    return int(net.holdover[v])


def _edge(G, u, v, cap, weight=0):
    attrs = {"weight": int(weight)}
    if cap is not None:
        attrs["capacity"] = cap
    G.add_edge(u, v, **attrs)


def explicit_expanded(net: TimedNetwork, horizon: int | None = None, *, source=None, sink=None, supply=None,
                      arrival_cost: bool = False, costs: bool = False) -> nx.DiGraph:
    """The time-expanded network with ``horizon`` periods, loop by loop.

    Nodes ``("n", v, p)``; lane copies through ``("lane", a, p)``; with ``source`` and
    ``sink``, a super source ``"S"`` feeding every source copy and every sink copy
    feeding ``"T"`` (cost = its period with ``arrival_cost``); with ``supply``, a node
    ``("own", v)`` per supply (demand ``-supply``, edges to every period) and
    ``("due", w)`` per demand, fed by every period. ``costs`` puts lane and holdover
    costs on the edges.
    """
    H = net.horizon if horizon is None else horizon
    G = nx.DiGraph()
    for v in range(net.num_nodes):
        for p in range(H):
            G.add_node(("n", v, p))
    for p in range(H):
        for a in range(net.num_arcs):
            q = p + int(net.transit[a])
            if q > H - 1:
                continue
            mid = ("lane", a, p)
            c = 0 if not costs or net.cost is None else net.cost[a]
            _edge(G, ("n", int(net.tail[a]), p), mid, lane_cap(net, a, p), c)
            _edge(G, mid, ("n", int(net.head[a]), q), None)
        if p < H - 1:
            for v in range(net.num_nodes):
                c = 0 if not costs or net.holdover_cost is None else net.holdover_cost[v]
                _edge(G, ("n", v, p), ("n", v, p + 1), hold_cap(net, v), c)
    if source is not None:
        for p in range(H):
            _edge(G, "S", ("n", source, p), None)
            _edge(G, ("n", sink, p), "T", None, p if arrival_cost else 0)
    if supply is not None:
        for v, b in enumerate(supply):
            if b > 0:
                G.add_node(("own", v), demand=-int(b))
                for p in range(H):
                    _edge(G, ("own", v), ("n", v, p), None)
            elif b < 0:
                G.add_node(("due", v), demand=-int(b))
                for p in range(H):
                    _edge(G, ("n", v, p), ("due", v), None)
    return G


def replay_units(net: TimedNetwork, schedule, horizon: int, *, source=None, sink=None, supply=None) -> dict:
    """Walk the schedule unit by unit; return units delivered per (node, period).

    Every unit starts at the source's stock (any period) or a supply node's stock,
    takes one step at a time (a departure on a lane from where it stands, or a
    holdover to the next period at the same node), and ends at the sink (or a demand
    node). Asserts that each step exists, lands within the horizon, and that the walks
    use every scheduled unit exactly once, apart from closed loops of zero-transit
    lanes, which carry no unit anywhere.
    """
    out = defaultdict(list)  # (v, p) -> [[remaining, step, (v', p')], ...]
    for a, p, x in zip(schedule.dep_arc.tolist(), schedule.dep_period.tolist(), schedule.dep_amount.tolist()):
        q = p + int(net.transit[a])
        assert 0 <= p and q <= horizon - 1, f"lane {a} leaves at {p} and arrives at {q}, beyond the horizon"
        cap = lane_cap(net, a, p)
        assert cap is None or x <= cap, f"lane {a} in period {p}: {x} > {cap}"
        out[(int(net.tail[a]), p)].append([x, ("lane", a, p), (int(net.head[a]), q)])
    for v, p, x in zip(schedule.hold_node.tolist(), schedule.hold_period.tolist(), schedule.hold_amount.tolist()):
        assert 0 <= p < horizon - 1, f"holdover at node {v} from period {p} leaves the horizon"
        cap = hold_cap(net, v)
        assert cap is None or x <= cap, f"holdover at node {v} in period {p}: {x} > {cap}"
        out[(v, p)].append([x, ("hold", v, p), (v, p + 1)])
    balance = defaultdict(int)  # units leaving minus arriving, per node-period
    for here, steps in out.items():
        for x, _, there in steps:
            balance[here] += x
            balance[there] -= x
    if source is not None:
        starts = {k: b for k, b in balance.items() if k[0] == source and b > 0}
        ends = {k: -b for k, b in balance.items() if k[0] == sink and b < 0}
    else:
        starts = {k: b for k, b in balance.items() if supply[k[0]] > 0 and b > 0}
        ends = {k: -b for k, b in balance.items() if supply[k[0]] < 0 and b < 0}
    delivered = defaultdict(int)
    for start, count in starts.items():
        for _ in range(count):
            here = start
            while ends.get(here, 0) == 0:  # a unit stops at the first end with room for it
                step = next((s for s in out[here] if s[0] > 0), None)
                assert step is not None, f"a unit is stuck at node {here[0]} in period {here[1]}"
                step[0] -= 1
                here = step[2]
            ends[here] -= 1
            delivered[here] += 1
    leftover = {k: [s for s in v if s[0] > 0] for k, v in out.items()}
    leftover = {k: v for k, v in leftover.items() if v}
    if leftover:
        # Only a circulation may remain: every node-period balanced.
        bal = defaultdict(int)
        for here, steps in leftover.items():
            for x, step, there in steps:
                assert step[0] == "lane" and net.transit[step[1]] == 0, "units left over outside a zero-transit loop"
                bal[here] += x
                bal[there] -= x
        assert not any(bal.values()), "scheduled units were never walked"
    assert all(v == 0 for v in ends.values()), "some arrivals were never reached by a unit"
    return dict(delivered)


def random_network(rng: np.random.Generator, *, n=(3, 7), m=(4, 14), horizon=(2, 7), per_period=None,
                   holdover=None, unlimited=0.0, costs=False, max_transit=2) -> TimedNetwork:
    """A small random network over time."""
    n = int(rng.integers(*n))
    m = int(rng.integers(*m))
    H = int(rng.integers(*horizon))
    tail = rng.integers(0, n, m)
    head = rng.integers(0, n, m)
    transit = rng.integers(0, max_transit + 1, m)
    lists = rng.random() < 0.5 if per_period is None else per_period
    shape = (m, H) if lists else (m,)
    capacity = rng.integers(0, 5, shape)
    unl = None
    if unlimited:
        unl = rng.random(shape) < unlimited
        capacity = np.where(unl, 0, capacity)
    hold = hold_unl = None
    with_hold = rng.random() < 0.7 if holdover is None else holdover
    if with_hold:
        hold = rng.integers(0, 3, n)
        hold_unl = rng.random(n) < 0.3
        hold = np.where(hold_unl, 0, hold)
    cost = rng.integers(0, 6, m) if costs else None
    hcost = rng.integers(0, 3, n) if costs else None
    return TimedNetwork(n, H, tail, head, transit, capacity, unl, cost, hold, hold_unl, hcost)
