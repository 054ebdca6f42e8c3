"""The service's own checks of capacity expansion answers.

Recomputed from the problem data and the answer alone, exactly (integers, or Python
integers where int64 could overflow), independently of the solvers:

* a plan replays: the flows carry the target from the source to the sink within the
  widened capacities, additions only on lanes that may be widened and within their
  ``expand_max``, and its cost is recomputed from the additions;
* an infeasibility proof holds: a cut separating the source from the sink whose
  capacity with every lane fully widened is below the target (no flow can exceed a
  cut, so no plan exists).
"""

from __future__ import annotations

import numpy as np

from ..errors import SelfCheckFailed
from .certificates import node_balance
from .mincost_checks import exact_dot


def _fail(what: str) -> None:
    raise SelfCheckFailed(f"self-check failed: {what}")


def _num(x):
    return x.item() if hasattr(x, "item") else x


def plan_cost(additions, expand_cost, expand_fixed):
    """Per-unit charges on the additions plus each widened lane's one-off charge."""
    cost = exact_dot(expand_cost, additions)
    if expand_fixed is not None:
        cost += exact_dot(expand_fixed, (additions > 0).astype(np.int64))
    return cost


def check_plan(num_nodes, tail, head, capacity, unlimited, widenable, expand_cost, expand_max, expand_unlimited,
               expand_fixed, source: int, sink: int, target, flows, additions) -> dict:
    """Replay an expansion plan.

    Parameters
    ----------
    capacity : ndarray
        Today's capacities (ignored where ``unlimited``).
    widenable : ndarray of bool
        Lanes that may be widened (an ``expand_cost`` was given).
    expand_cost, expand_max : ndarray
        Per-unit charge and the most that may be added (ignored where
        ``expand_unlimited``); 0 on lanes that cannot be widened.
    expand_fixed : ndarray or None
        One-off charge for widening a lane at all.
    flows, additions : ndarray
        The answer, aligned with the arcs.

    Returns
    -------
    dict
        ``cost`` (recomputed), ``value``, ``widened`` (lanes with an addition),
        ``max_imbalance``, ``max_capacity_excess``.

    Raises
    ------
    SelfCheckFailed
        When any condition fails.
    """
    if (additions < 0).any():
        _fail(f"arc {int(np.flatnonzero(additions < 0)[0])} has a negative addition")
    barred = ~widenable if unlimited is None else ~widenable | unlimited
    if (additions[barred] != 0).any():
        _fail(f"arc {int(np.flatnonzero(barred & (additions != 0))[0])} was widened but may not be")
    over_max = widenable & ~expand_unlimited & (additions > expand_max)
    if over_max.any():
        _fail(f"arc {int(np.flatnonzero(over_max)[0])} was widened beyond its expand_max")
    above = flows - (capacity + additions)
    if unlimited is not None:
        above = np.where(unlimited, 0, above)
    excess = np.maximum(np.maximum(above, -flows), 0)
    max_excess = _num(excess.max()) if excess.size else 0
    if max_excess > 0:
        _fail(f"a flow leaves [0, widened capacity] by {max_excess}")
    balance = node_balance(num_nodes, tail, head, flows)
    if -balance[source] != target or balance[sink] != target:
        _fail(f"the flows carry {_num(-balance[source])} from the source, not the target {target}")
    balance[[source, sink]] = 0
    max_imbalance = _num(np.abs(balance).max()) if balance.size else 0
    if max_imbalance:
        _fail(f"flow is not conserved at a node (off by {max_imbalance})")
    return {"cost": plan_cost(additions, expand_cost, expand_fixed), "value": _num(target),
            "widened": int((additions > 0).sum()), "max_imbalance": max_imbalance,
            "max_capacity_excess": max_excess}


def check_shortfall_cut(tail, head, full_capacity, full_unlimited, source: int, sink: int, source_side, target) -> dict:
    """Check that a cut proves the target out of reach even with every lane fully widened.

    Returns
    -------
    dict
        ``cut_capacity`` (fully widened) and ``shortfall`` (target minus it, > 0).
    """
    if not source_side[source] or source_side[sink]:
        _fail("the cut does not separate the source from the sink")
    crossing = source_side[tail] & ~source_side[head]
    if full_unlimited is not None and (crossing & full_unlimited).any():
        _fail("the cut contains an arc that can be widened without limit")
    capacity = exact_dot(full_capacity[crossing], np.ones(int(crossing.sum()), dtype=np.int64))
    if capacity >= target:
        _fail(f"the cut's fully widened capacity {capacity} is not below the target {target}")
    return {"cut_capacity": capacity, "shortfall": target - capacity}
