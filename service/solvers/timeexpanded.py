"""Networks over time and their time-expanded networks (Ford and Fulkerson, 1958).

Time runs in whole periods ``0 .. H-1``. A unit that leaves ``u`` at period ``p`` on
a lane (arc) with transit ``r`` reaches ``v`` at period ``p + r``, and the lane copy
exists only when ``p + r <= H - 1``. A lane's capacity holds per departure period.
Units may wait at a node from one period to the next (holdover), up to a limit per
node.

The time-expanded network has one node per (node, period), numbered period-major
(``p * n + v``), one arc per usable lane copy and one per holdover step. It is built
here in one vectorised pass: lanes are sorted by transit once, and the copies of
every arrival period are a prefix of that order (the lanes with ``r <= q``), so one
``np.repeat`` and one ``np.arange`` give every copy without a loop over periods.

Plain arrays in, plain arrays out; no HTTP and no problem model.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Every sum the solvers form stays below this in magnitude (a factor of two of
#: head-room in int64, as in the static solvers).
SAFE = 2**62

LANE = np.int8(0)
HOLD = np.int8(1)


class OverflowRisk(ValueError):
    """Capacities (or costs) summed over the horizon do not fit 64-bit arithmetic."""


@dataclass(frozen=True)
class TimedNetwork:
    """A network over time, in plain arrays (integers; see :mod:`service.solvers.flowovertime`
    for decimal scaling).

    Attributes
    ----------
    num_nodes : int
    horizon : int
        Number of periods ``H >= 1``.
    tail, head : ndarray of int64, shape (m,)
    transit : ndarray of int64, shape (m,)
        Whole periods, ``>= 0``.
    capacity : ndarray of int64, shape (m,) or (m, H)
        Per departure period; 0 where ``unlimited``.
    unlimited : ndarray of bool (same shape as ``capacity``) or None
    cost : ndarray of int64, shape (m,), or None
        Per unit moved on the lane.
    holdover : ndarray of int64, shape (n,), or None
        Units that may wait at a node from one period to the next; ``None`` means no
        limit anywhere; 0 where ``holdover_unlimited``.
    holdover_unlimited : ndarray of bool, shape (n,), or None
    holdover_cost : ndarray of int64, shape (n,), or None
        Per unit per period waited.
    """

    num_nodes: int
    horizon: int
    tail: np.ndarray
    head: np.ndarray
    transit: np.ndarray
    capacity: np.ndarray
    unlimited: np.ndarray | None = None
    cost: np.ndarray | None = None
    holdover: np.ndarray | None = None
    holdover_unlimited: np.ndarray | None = None
    holdover_cost: np.ndarray | None = None

    @property
    def num_arcs(self) -> int:
        """Number of lanes."""
        return int(self.tail.size)

    def lane_capacity(self, arc: np.ndarray, period: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Capacity and no-limit flag of lane copies ``(arc[i], period[i])``."""
        if self.capacity.ndim == 1:
            cap = self.capacity[arc]
            unl = np.zeros(arc.size, bool) if self.unlimited is None else self.unlimited[arc]
        else:
            cap = self.capacity[arc, period]
            unl = np.zeros(arc.size, bool) if self.unlimited is None else self.unlimited[arc, period]
        return cap, unl

    def holdover_limit(self, node: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Holdover limit and no-limit flag of the given nodes."""
        if self.holdover is None:
            return np.zeros(node.size, np.int64), np.ones(node.size, bool)
        unl = np.zeros(node.size, bool) if self.holdover_unlimited is None else self.holdover_unlimited[node]
        return self.holdover[node], unl

    def usable_periods(self) -> np.ndarray:
        """Per lane, how many departure periods reach their head within the horizon."""
        return np.maximum(self.horizon - self.transit, 0)


@dataclass
class Expansion:
    """The time-expanded network of a :class:`TimedNetwork`.

    Expanded node ``p * n + v`` is node ``v`` at period ``p``. Each expanded arc is a
    lane copy (``kind == LANE``, ``ref`` the lane, ``period`` its departure) or a
    holdover step (``kind == HOLD``, ``ref`` the node, from ``period`` to
    ``period + 1``). ``era`` is the period the arc arrives in: the arcs of the network
    with horizon ``h <= H`` are exactly those with ``era < h``. Copies whose capacity
    is 0 (a lane shut in that period, a node that cannot hold) are left out.
    """

    num_nodes: int  # n, of the network over time
    horizon: int
    tail: np.ndarray  # int32 expanded node
    head: np.ndarray
    capacity: np.ndarray  # int64; 0 where unlimited
    unlimited: np.ndarray  # bool
    kind: np.ndarray  # int8: LANE or HOLD
    ref: np.ndarray  # int64: lane or node index
    period: np.ndarray  # int64: departure period
    era: np.ndarray  # int64: arrival period
    cost: np.ndarray | None = None

    @property
    def num_expanded_nodes(self) -> int:
        """Number of expanded nodes: one copy of each node per period."""
        return self.num_nodes * self.horizon

    @property
    def num_arcs(self) -> int:
        """Number of expanded arcs (lane copies and holdover steps)."""
        return int(self.tail.size)

    def capped(self, big: int) -> np.ndarray:
        """Capacities with ``big`` standing in for no limit."""
        if not self.unlimited.any():
            return self.capacity
        return np.where(self.unlimited, big, self.capacity)

    def holdover_arcs(self, nodes: np.ndarray) -> np.ndarray:
        """Index of the holdover step of each given node from each period (``-1``: none), shape (k, H-1)."""
        where = np.full((self.num_nodes, max(self.horizon - 1, 0)), -1, dtype=np.int64)
        hold = np.flatnonzero(self.kind == HOLD)
        where[self.ref[hold], self.period[hold]] = hold
        return where[nodes]


def finite_total(net: TimedNetwork) -> int:
    """Sum of every finite capacity over the horizon: lane copies and holdover steps.

    Raises
    ------
    OverflowRisk
        When the sum reaches ``2**60`` (it bounds every flow value the solvers form),
        or the node-periods would not fit the int32 indices of the expanded arrays.
    """
    if net.num_nodes * net.horizon + 4 >= 2**31:
        raise OverflowRisk("the time-expanded network would have more than 2**31 node-periods")
    usable = net.usable_periods()
    finite = net.capacity if net.unlimited is None else np.where(net.unlimited, 0, net.capacity)
    if finite.ndim == 2:
        finite = np.where(np.arange(net.horizon)[None, :] < usable[:, None], finite, 0).sum(axis=1)
        usable = np.ones_like(usable)
    held = np.zeros(0, np.int64)
    if net.holdover is not None and net.horizon > 1:
        held = net.holdover if net.holdover_unlimited is None else np.where(net.holdover_unlimited, 0, net.holdover)
    steps = max(net.horizon - 1, 0)
    # Floats first: the exact int64 sums below are formed only once they provably fit.
    approx = float(finite.astype(np.float64) @ usable.astype(np.float64)) + float(held.astype(np.float64).sum()) * steps
    if approx >= SAFE / 4:
        raise OverflowRisk("the capacities over the horizon sum to more than 2**60")
    return int(finite @ usable) + int(held.sum()) * steps


def expand(net: TimedNetwork, *, with_cost: bool = False) -> Expansion:
    """Build the time-expanded network in one vectorised pass.

    Parameters
    ----------
    net : TimedNetwork
    with_cost : bool
        Also give every expanded arc its cost: the lane's ``cost`` for a lane copy,
        the node's ``holdover_cost`` for a holdover step.

    Returns
    -------
    Expansion
        Arcs sorted by ``era`` (lane copies of an era before its holdover steps).

    Examples
    --------
    >>> import numpy as np
    >>> net = TimedNetwork(2, 3, np.array([0]), np.array([1]), np.array([1]), np.array([4]))
    >>> x = expand(net)
    >>> x.tail.tolist(), x.head.tolist(), x.period.tolist(), x.era.tolist()
    ([0, 0, 1, 2, 2, 3], [3, 2, 3, 5, 4, 5], [0, 0, 0, 1, 1, 1], [1, 1, 1, 2, 2, 2])
    """
    n, horizon = net.num_nodes, net.horizon
    transit = net.transit.astype(np.int64, copy=False)
    # Lane copies, era by era: the lanes with transit <= q, in order of transit.
    by_transit = np.argsort(transit, kind="stable")
    per_era = np.searchsorted(transit[by_transit], np.arange(horizon), side="right")
    lane_count = int(per_era.sum())
    lane_era = np.repeat(np.arange(horizon, dtype=np.int64), per_era)
    rank = np.arange(lane_count, dtype=np.int64) - np.repeat(np.cumsum(per_era) - per_era, per_era)
    lane = by_transit[rank]
    lane_dep = lane_era - transit[lane]
    lane_cap, lane_unl = net.lane_capacity(lane, lane_dep)
    # Holdover steps (v, p) -> (v, p + 1), arriving in era p + 1.
    steps = max(horizon - 1, 0)
    node = np.tile(np.arange(n, dtype=np.int64), steps)
    hold_dep = np.repeat(np.arange(steps, dtype=np.int64), n)
    hold_cap, hold_unl = net.holdover_limit(node)
    blocks = {
        "kind": (np.full(lane_count, LANE), np.full(node.size, HOLD)),
        "ref": (lane, node),
        "period": (lane_dep, hold_dep),
        "era": (lane_era, hold_dep + 1),
        "capacity": (lane_cap.astype(np.int64, copy=False), hold_cap.astype(np.int64, copy=False)),
        "unlimited": (lane_unl, hold_unl),
        "tail": (lane_dep * n + net.tail[lane], hold_dep * n + node),
        "head": (lane_era * n + net.head[lane], (hold_dep + 1) * n + node),
    }
    if with_cost:
        lane_cost = np.zeros(lane_count, np.int64) if net.cost is None else net.cost[lane]
        hold_cost = np.zeros(node.size, np.int64) if net.holdover_cost is None else net.holdover_cost[node]
        blocks["cost"] = (lane_cost.astype(np.int64, copy=False), hold_cost.astype(np.int64, copy=False))
    # Both blocks are already sorted by era, so the stable sort is a linear merge of two runs.
    order = np.argsort(np.concatenate(blocks["era"]), kind="stable")
    keep = np.concatenate(blocks["unlimited"])[order] | (np.concatenate(blocks["capacity"])[order] > 0)
    order = order[keep]  # a lane shut in a period, a node that cannot hold: no arc at all
    arrays = {name: np.concatenate(pair)[order] for name, pair in blocks.items()}
    arrays["tail"] = arrays["tail"].astype(np.int32)
    arrays["head"] = arrays["head"].astype(np.int32)
    return Expansion(num_nodes=n, horizon=horizon, **arrays)


@dataclass
class Schedule:
    """A flow over time in the lanes' own terms (int64 arrays, non-zero entries).

    ``dep_*``: units leaving on lane ``dep_arc`` at period ``dep_period``;
    ``hold_*``: units waiting at node ``hold_node`` from ``hold_period`` to the next.
    """

    dep_arc: np.ndarray
    dep_period: np.ndarray
    dep_amount: np.ndarray
    hold_node: np.ndarray
    hold_period: np.ndarray
    hold_amount: np.ndarray

    @classmethod
    def from_flows(cls, x: Expansion, flows: np.ndarray) -> "Schedule":
        """The non-zero flows of the expanded arcs, sorted by period, then lane or node."""
        used = np.flatnonzero(flows[: x.num_arcs] > 0)
        lane = used[x.kind[used] == LANE]
        hold = used[x.kind[used] == HOLD]
        lane = lane[np.lexsort((x.ref[lane], x.period[lane]))]
        hold = hold[np.lexsort((x.ref[hold], x.period[hold]))]
        return cls(x.ref[lane], x.period[lane], flows[lane].astype(np.int64), x.ref[hold], x.period[hold],
                   flows[hold].astype(np.int64))
