"""Flows over time, the solver room: against references built here, theorems, and a worked example.

References: networkx on the time-expanded network built with plain loops
(``tests/overtime_reference.py``): ``maximum_flow_value`` (preflow-push),
``max_flow_min_cost`` (min-cost among maximum flows, with the arrival period as the
cost of each arrival), ``min_cost_flow`` / ``network_simplex``. Theorems: Ford and
Fulkerson's temporally repeated flows, the earliest-arrival property (Gale 1959) and
its equivalence with minimum total arrival time (Jarvis and Ratliff 1982). Every
schedule is walked unit by unit.
"""

from __future__ import annotations

from dataclasses import replace

import networkx as nx
import numpy as np
import pytest

from service.errors import InputError, SelfCheckFailed
from service.solvers import overtime_checks as checks
from service.solvers.flowovertime import max_by_horizon, min_cost, quickest
from service.solvers.timeexpanded import Schedule, TimedNetwork, expand
from tests.overtime_reference import explicit_expanded, lane_cap, random_network, replay_units

SEEDS = range(60)


def truncated(net: TimedNetwork, h: int) -> TimedNetwork:
    """The same network with only its first ``h`` periods."""
    cap = net.capacity if net.capacity.ndim == 1 else net.capacity[:, :h]
    unl = net.unlimited if net.unlimited is None or net.unlimited.ndim == 1 else net.unlimited[:, :h]
    return replace(net, horizon=h, capacity=cap, unlimited=unl)


def endpoints(net: TimedNetwork):
    return 0, net.num_nodes - 1


# --- the expansion --------------------------------------------------------------------


@pytest.mark.parametrize("seed", SEEDS)
def test_expansion_has_exactly_the_copies_of_the_loop_built_network(seed):
    net = random_network(np.random.default_rng(seed), unlimited=0.1)
    x = expand(net)
    n = net.num_nodes
    got = sorted((int(t) % n, int(t) // n, int(h) % n, int(h) // n, -1 if u else int(c))
                 for t, h, c, u in zip(x.tail, x.head, x.capacity, x.unlimited))
    want = []
    for p in range(net.horizon):
        for a in range(net.num_arcs):
            q = p + int(net.transit[a])
            cap = lane_cap(net, a, p)
            if q < net.horizon and cap != 0:
                want.append((int(net.tail[a]), p, int(net.head[a]), q, -1 if cap is None else cap))
        if p < net.horizon - 1:
            for v in range(n):
                cap = -1 if net.holdover is None or net.holdover_unlimited[v] else int(net.holdover[v])
                if cap != 0:
                    want.append((v, p, v, p + 1, cap))
    assert got == sorted(want)
    assert np.all(np.diff(x.era) >= 0), "arcs are sorted by the period they arrive in"
    assert np.array_equal(x.era, x.head // n)


# --- max by horizon -------------------------------------------------------------------


@pytest.mark.parametrize("seed", SEEDS)
def test_max_by_horizon_matches_networkx_and_is_earliest_arrival(seed):
    net = random_network(np.random.default_rng(seed))
    s, t = endpoints(net)
    sol = max_by_horizon(net, s, t)
    G = explicit_expanded(net, source=s, sink=t, arrival_cost=True)
    assert sol.value == nx.maximum_flow_value(G, "S", "T")
    # Among maximum flows, the least total arrival time (networkx max_flow_min_cost).
    best = nx.cost_of_flow(G, nx.max_flow_min_cost(G, "S", "T"))
    assert sol.certificate["total_arrival_time"] == best == sol.certificate["min_total_arrival_time"]
    # The arrivals profile against a separate solve for every shorter horizon.
    cumulative = np.cumsum(sol.arrivals)
    for h in range(1, net.horizon + 1):
        assert cumulative[h - 1] == max_by_horizon(truncated(net, h), s, t).value
    delivered = replay_units(net, sol.schedule, net.horizon, source=s, sink=t)
    assert sum(delivered.values()) == sol.value
    assert [delivered.get((t, p), 0) for p in range(net.horizon)] == sol.arrivals.tolist()
    assert sol.cut["capacity"] == sol.value


def ford_fulkerson_value(net: TimedNetwork, s: int, t: int) -> int:
    """max over static flows x of H|x| - sum(transit * x), by min-cost circulation (networkx).

    Periods 0 .. H-1; a path of total transit L used at every departure period
    0 .. H-1-L carries its flow H - L times, so a temporally repeated flow moves
    sum_P (H - L_P) x_P = H|x| - sum_a transit_a x_a (Ford and Fulkerson, 1958; with
    "arrive by period T" and departures 0 .. T - L it reads (T+1)|x| - sum transit x).
    Paths with L >= H contribute nothing, and the maximum never uses them.
    """
    G = nx.DiGraph()
    total = int(net.capacity.sum())
    for a in range(net.num_arcs):
        u, v = int(net.tail[a]), int(net.head[a])
        if u == v:
            continue  # a static loop carries nothing useful
        mid = ("lane", a)
        G.add_edge(u, mid, capacity=int(net.capacity[a]), weight=int(net.transit[a]))
        G.add_edge(mid, v, weight=0)
    G.add_edge(t, s, capacity=total, weight=-net.horizon)
    for node in G:
        G.nodes[node]["demand"] = 0
    cost, _ = nx.network_simplex(G)
    return -cost


@pytest.mark.parametrize("seed", SEEDS)
@pytest.mark.parametrize("waiting", ["unlimited", "none"])
def test_ford_fulkerson_temporally_repeated_flows(seed, waiting):
    """Constant capacities: the value is max_x H|x| - sum transit x, with unlimited waiting
    and (a known consequence: waiting does not help a single commodity) with none."""
    rng = np.random.default_rng(1000 + seed)
    net = random_network(rng, per_period=False, holdover=False, horizon=(2, 9), max_transit=3)
    if waiting == "none":
        net = replace(net, holdover=np.zeros(net.num_nodes, np.int64),
                      holdover_unlimited=np.zeros(net.num_nodes, bool))
    s, t = endpoints(net)
    sol = max_by_horizon(net, s, t)
    assert sol.value == ford_fulkerson_value(net, s, t)
    replay_units(net, sol.schedule, net.horizon, source=s, sink=t)


def test_unlimited_lanes_from_source_to_sink_are_unbounded():
    net = TimedNetwork(3, 4, np.array([0, 1]), np.array([1, 2]), np.array([1, 2]), np.array([0, 0]),
                       np.array([True, True]))
    sol = max_by_horizon(net, 0, 2)
    assert sol.status == "unbounded"
    assert sol.unbounded_path["dep_arc"].tolist() == [0, 1]
    assert sol.unbounded_path["dep_period"].tolist() == [0, 1]  # leaves at 0, then at 1: arrives at 3


def test_unlimited_lanes_too_slow_for_the_horizon_are_bounded():
    net = TimedNetwork(3, 3, np.array([0, 1, 0]), np.array([1, 2, 2]), np.array([1, 2, 0]), np.array([0, 0, 4]),
                       np.array([True, True, False]))
    sol = max_by_horizon(net, 0, 2)
    assert sol.status == "optimal" and sol.value == 12


# --- quickest -------------------------------------------------------------------------


@pytest.mark.parametrize("seed", SEEDS)
def test_quickest_matches_a_linear_scan(seed):
    rng = np.random.default_rng(2000 + seed)
    net = random_network(rng, horizon=(2, 9))
    s, t = endpoints(net)
    full = max_by_horizon(net, s, t).value
    for amount in sorted({1, max(1, full // 2), max(1, full), full + 1}):
        sol = quickest(net, s, t, amount)
        scan = next((h for h in range(1, net.horizon + 1) if max_by_horizon(truncated(net, h), s, t).value >= amount),
                    None)
        if scan is None:
            assert sol.status == "infeasible"
            assert sol.cut["capacity"] < amount
            continue
        assert sol.status == "optimal" and sol.horizon == scan and sol.value == amount
        delivered = replay_units(net, sol.schedule, scan, source=s, sink=t)
        assert sum(delivered.values()) == amount
        assert sol.cut["horizon"] == scan - 1 and sol.cut["capacity"] < amount


# --- min cost -------------------------------------------------------------------------


def balanced_supply(rng, n):
    supply = np.zeros(n, np.int64)
    a, b = rng.choice(n, 2, replace=False)
    k = int(rng.integers(1, 6))
    supply[a], supply[b] = k, -k
    if n > 3 and rng.random() < 0.5:
        c = next(i for i in range(n) if i not in (a, b))
        supply[c] = 2
        supply[b] -= 2
    return supply


@pytest.mark.parametrize("seed", SEEDS)
def test_min_cost_matches_networkx_on_the_expanded_network(seed):
    rng = np.random.default_rng(3000 + seed)
    net = random_network(rng, costs=True, m=(6, 16))
    supply = balanced_supply(rng, net.num_nodes)
    sol = min_cost(net, supply)
    G = explicit_expanded(net, supply=supply, costs=True)
    try:
        best = nx.cost_of_flow(G, nx.min_cost_flow(G))
    except nx.NetworkXUnfeasible:
        best = None
    if best is None:
        assert sol.status == "infeasible"
        proof = sol.infeasibility
        assert proof["net_supply"] > proof["outgoing_capacity"]
        return
    assert sol.status == "optimal" and sol.cost == best
    assert sol.certificate["gap"] == 0
    delivered = replay_units(net, sol.schedule, net.horizon, supply=supply)
    for v in np.flatnonzero(supply < 0):
        assert sum(x for (w, _), x in delivered.items() if w == v) == -supply[v]


# --- a worked example, checked by hand ------------------------------------------------

# A depot d, cross-docks a and b, a store s; periods 0..4.
#   lane 0: d -> a, transit 1, 2 per period     lane 3: b -> s, transit 1, 2 per period
#   lane 1: d -> b, transit 2, 1 per period     lane 4: a -> b, transit 0, 1 per period
#   lane 2: a -> s, transit 1, 1 per period     holdover: a 1 unit, b none
# By hand: nothing reaches s before period 2 (d -> a -> s takes 2). In period 2 at most
# a -> s (1) plus b -> s fed only by a -> b in period 1 (1): 2 units. From period 3 on,
# a -> s (1) plus b -> s (2, fed by d -> b two periods earlier and a -> b): 3 a period.
# So 0, 0, 2, 3, 3: 8 units by period 4, and every cap that binds is used in full, which
# leaves one schedule: a receives 2 in each of periods 1-3 and sends 1 to s and 1 to b.
D, A, B, S = 0, 1, 2, 3
WORKED = TimedNetwork(
    4, 5, tail=np.array([D, D, A, B, A]), head=np.array([A, B, S, S, B]), transit=np.array([1, 2, 1, 1, 0]),
    capacity=np.array([2, 1, 1, 2, 1]), cost=np.array([1, 3, 2, 1, 0]),
    holdover=np.array([0, 1, 0, 0]), holdover_unlimited=np.array([True, False, False, True]),
    holdover_cost=np.array([0, 1, 0, 0]))


def test_worked_example_by_hand():
    sol = max_by_horizon(WORKED, D, S)
    assert sol.value == 8
    assert sol.arrivals.tolist() == [0, 0, 2, 3, 3]
    deps = sorted(zip(sol.schedule.dep_arc.tolist(), sol.schedule.dep_period.tolist(),
                      sol.schedule.dep_amount.tolist()))
    assert deps == [(0, 0, 2), (0, 1, 2), (0, 2, 2),  # d -> a
                    (1, 0, 1), (1, 1, 1),             # d -> b
                    (2, 1, 1), (2, 2, 1), (2, 3, 1),  # a -> s
                    (3, 1, 1), (3, 2, 2), (3, 3, 2),  # b -> s
                    (4, 1, 1), (4, 2, 1), (4, 3, 1)]  # a -> b
    assert sol.schedule.hold_amount.size == 0
    assert sol.cut["capacity"] == 8
    assert sol.certificate["cut_capacities"].tolist() == [0, 0, 2, 5, 8]
    assert sol.certificate["total_arrival_time"] == 2 * 2 + 3 * 3 + 3 * 4
    replay_units(WORKED, sol.schedule, 5, source=D, sink=S)


def test_worked_example_quickest():
    five = quickest(WORKED, D, S, 5)
    assert (five.horizon, five.value) == (4, 5)  # 2 by period 2, 3 more by period 3
    assert five.cut["horizon"] == 3 and five.cut["capacity"] == 2
    assert quickest(WORKED, D, S, 6).horizon == 5
    nine = quickest(WORKED, D, S, 9)
    assert nine.status == "infeasible" and nine.cut["capacity"] == 8


def test_worked_example_min_cost():
    # d -> a -> b -> s costs 1 + 0 + 1 = 2 and runs 1 a period (a -> b), departing d at
    # 0, 1 or 2 to arrive by 4: three units at 2. The fourth goes d -> a -> s at 3.
    supply = np.array([4, 0, 0, -4])
    sol = min_cost(WORKED, supply)
    assert sol.status == "optimal" and sol.cost == 3 * 2 + 3
    assert sol.certificate["dual_bound"] == 9
    replay_units(WORKED, sol.schedule, 5, supply=supply)
    # 12 units cannot reach s by period 4 (8 can): the proof set must send out 4 more than can leave it.
    short = min_cost(WORKED, np.array([12, 0, 0, -12]))
    assert short.status == "infeasible"
    proof = short.infeasibility
    assert proof["net_supply"] - proof["outgoing_capacity"] == 12 - 8


# --- the checks can fail --------------------------------------------------------------


def worked_schedule():
    sol = max_by_horizon(WORKED, D, S)
    return sol, sol.schedule


def altered(schedule: Schedule, **changes) -> Schedule:
    return replace(schedule, **{k: np.asarray(v, dtype=np.int64) for k, v in changes.items()})


def test_the_replay_rejects_a_lane_over_capacity():
    sol, s = worked_schedule()
    amounts = s.dep_amount.copy()
    amounts[0] += 1
    with pytest.raises(SelfCheckFailed, match="capacity"):
        checks.check_through_flow(WORKED, altered(s, dep_amount=amounts), D, S, sol.arrivals, 5)


def test_the_replay_rejects_a_departure_arriving_after_the_horizon():
    sol, s = worked_schedule()
    periods = s.dep_period.copy()
    periods[np.flatnonzero((s.dep_arc == 2) & (s.dep_period == 3))] = 4  # a -> s leaving at 4 arrives at 5
    with pytest.raises(SelfCheckFailed, match="after the last period"):
        checks.check_through_flow(WORKED, altered(s, dep_period=periods), D, S, sol.arrivals, 5)


def test_the_replay_rejects_broken_conservation_and_wrong_arrivals():
    sol, s = worked_schedule()
    keep = np.ones(s.dep_arc.size, bool)
    keep[np.flatnonzero(s.dep_arc == 4)[0]] = False  # drop one a -> b transfer
    broken = altered(s, dep_arc=s.dep_arc[keep], dep_period=s.dep_period[keep], dep_amount=s.dep_amount[keep])
    with pytest.raises(SelfCheckFailed, match="conserved"):
        checks.check_through_flow(WORKED, broken, D, S, sol.arrivals, 5)
    with pytest.raises(SelfCheckFailed, match="arrivals"):
        checks.check_through_flow(WORKED, s, D, S, sol.arrivals + np.array([0, 0, 0, 0, 1]), 5)


def test_the_replay_rejects_holdover_over_its_limit():
    # Hold 2 at a (limit 1) instead of sending them on.
    net = WORKED
    s = Schedule(np.array([0]), np.array([0]), np.array([2]), np.array([A]), np.array([1]), np.array([2]))
    with pytest.raises(SelfCheckFailed, match="holdover"):
        checks.replay(net, s, 5)


def test_the_profile_check_rejects_a_maximum_flow_that_arrives_late():
    # s -> m (transit 0, 1 a period), m -> t (transit 0, 2 a period), m may hold; 2 periods.
    # The maximum is 2 units. One a period arrives as early as possible; holding the first
    # unit at m and sending both in period 1 moves as many, but later.
    net = TimedNetwork(3, 2, np.array([0, 1]), np.array([1, 2]), np.array([0, 0]), np.array([1, 2]))
    sol = max_by_horizon(net, 0, 2)
    assert sol.arrivals.tolist() == [1, 1]
    late = Schedule(np.array([0, 0, 1]), np.array([0, 1, 1]), np.array([1, 1, 2]),
                    np.array([1]), np.array([0]), np.array([1]))
    arrivals = np.array([0, 2])
    assert checks.check_through_flow(net, late, 0, 2, arrivals, 2)["value"] == 2  # feasible, maximum
    labels = np.array([[2, 2], [0, 0], [0, 0]])  # Y_q = the source's copies: cut s -> m, 1 then 2
    assert checks.check_arrival_profile(net, labels, 0, 2, sol.arrivals)["cut_capacities"].tolist() == [1, 2]
    with pytest.raises(SelfCheckFailed, match="by period 0, 0 units arrived"):
        checks.check_arrival_profile(net, labels, 0, 2, arrivals)


def test_the_profile_check_rejects_labels_that_are_not_cuts():
    sol, _ = worked_schedule()
    labels = np.full((4, 5), 5)  # the sink on every source side
    with pytest.raises(SelfCheckFailed, match="sink copy"):
        checks.check_arrival_profile(WORKED, labels, D, S, sol.arrivals)


def test_the_cut_check_rejects_a_set_that_is_no_cut_or_crosses_an_unlimited_lane():
    side = np.zeros((4, 5), bool)
    with pytest.raises(SelfCheckFailed, match="source copy"):
        checks.check_cut(WORKED, side, D, S, 5)
    side[D] = True
    assert checks.check_cut(WORKED, side, D, S, 5)["capacity"] == 11  # d -> a 4 x 2, d -> b 3 x 1
    side[B, 2] = True  # b holding from period 2 to 3 leaves the set: without a limit here
    waiting_b = replace(WORKED, holdover_unlimited=np.array([True, False, True, True]))
    with pytest.raises(SelfCheckFailed, match="without a capacity limit"):
        checks.check_cut(waiting_b, side, D, S, 5)


def test_the_min_cost_check_rejects_a_dearer_schedule():
    supply = np.array([4, 0, 0, -4])
    sol = min_cost(WORKED, supply)
    # Three on d -> a -> s (cost 3 each), one on d -> b -> s (cost 4): feasible, costs 13 > 9.
    s = Schedule(np.array([0, 1, 0, 2, 0, 2, 3, 2]), np.array([0, 0, 1, 1, 2, 2, 2, 3]), np.ones(8, np.int64),
                 *(np.zeros(0, np.int64),) * 3)
    figures, balance = checks.check_supplies_met(WORKED, s, supply)
    zeros = np.zeros((4, 5), np.int64)
    assert checks.schedule_cost(WORKED, s) == 13
    with pytest.raises(SelfCheckFailed, match="bound"):
        checks.check_min_cost_duals(WORKED, s, supply, balance, zeros, np.zeros(4, np.int64), np.zeros(4, np.int64))
    assert sol.cost == 9


def test_the_shortfall_check_rejects_a_set_that_proves_nothing():
    members = np.zeros((4, 5), bool)
    members[D] = True  # d can send out 11 in time: not less than 4
    with pytest.raises(SelfCheckFailed, match="shortfall"):
        checks.check_shortfall(WORKED, members, np.array([4, 0, 0, -4]))


# --- exact integers and decimals ------------------------------------------------------


def test_decimals_are_scaled_exactly():
    half = replace(WORKED, capacity=WORKED.capacity / 2, holdover=WORKED.holdover / 2)
    sol = max_by_horizon(half, D, S)
    assert sol.value == 4.0
    assert sol.arrivals.tolist() == [0, 0, 1, 1.5, 1.5]
    assert sol.certificate["decimal_scale"] == 10


def test_capacities_summing_past_64_bits_over_the_horizon_are_refused():
    net = TimedNetwork(2, 1000, np.array([0]), np.array([1]), np.array([0]), np.array([2**60]))
    with pytest.raises(InputError) as info:
        max_by_horizon(net, 0, 1)
    assert info.value.errors[0].pointer == "/horizon"


def test_the_unbounded_path_check_fails_on_a_path_with_a_limit():
    net = TimedNetwork(3, 4, np.array([0, 1]), np.array([1, 2]), np.array([1, 2]), np.array([0, 5]),
                       np.array([True, False]))
    path = {"dep_arc": np.array([0, 1]), "dep_period": np.array([0, 1]), "hold_node": np.zeros(0, np.int64),
            "hold_period": np.zeros(0, np.int64)}
    with pytest.raises(SelfCheckFailed, match="with a limit"):
        checks.check_unlimited_path(net, path, 0, 2)
    late = {**path, "dep_period": np.array([0, 2])}
    with pytest.raises(SelfCheckFailed):
        checks.check_unlimited_path(replace(net, unlimited=np.array([True, True])), late, 0, 2)


@pytest.mark.parametrize("horizon", [1, 2])
def test_edges_no_lanes_and_a_single_period(horizon):
    empty = TimedNetwork(2, horizon, np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0, np.int64),
                         np.zeros(0, np.int64))
    sol = max_by_horizon(empty, 0, 1)
    assert sol.value == 0 and sol.arrivals.tolist() == [0] * horizon and sol.cut["capacity"] == 0
    assert quickest(empty, 0, 1, 1).status == "infeasible"
    instant = TimedNetwork(2, horizon, np.array([0]), np.array([1]), np.array([0]), np.array([3]))
    sol = max_by_horizon(instant, 0, 1)
    assert sol.value == 3 * horizon and sol.arrivals.tolist() == [3] * horizon
    q = quickest(instant, 0, 1, 3)
    assert q.horizon == 1 and q.cut["horizon"] == 0 and q.cut["capacity"] == 0
