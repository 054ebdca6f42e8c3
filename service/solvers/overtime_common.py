"""What the flows-over-time front functions share: the answer type, exact decimal
scaling of a timed network, own stock released late, and the 64-bit guard on totals
(see :mod:`service.solvers.flowovertime`)."""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from ..errors import FieldError, InputError
from .scaling import common_scale
from .timeexpanded import OverflowRisk, Schedule, TimedNetwork, finite_total


@dataclass
class OverTimeSolution:
    """A solved flow-over-time problem, in the lanes' own terms (already unscaled).

    ``status``: ``optimal``, ``infeasible`` (quickest or min-cost) or ``unbounded``
    (max-by-horizon along lanes without limits). ``cut``: dict with ``dep_arc``,
    ``dep_period``, ``hold_node``, ``hold_period``, ``capacity`` (and ``horizon``,
    the periods of the network it cuts).
    """

    status: str
    horizon: int
    engine: dict
    value: Any = None
    cost: Any = None
    arrivals: np.ndarray | None = None
    schedule: Schedule | None = None
    amounts: tuple | None = None  # (departure amounts, holdover amounts) in the caller's units
    cut: dict | None = None
    deliveries: dict | None = None
    releases: dict | None = None
    infeasibility: dict | None = None
    unbounded_path: dict | None = None
    certificate: dict = field(default_factory=dict)


# --- scaling --------------------------------------------------------------------------


@dataclass(frozen=True)
class Scale:
    quantity: int = 0  # decimal places of capacities, holdover, supplies, amount
    cost: int = 0

    def units(self, x):
        """Scaled integers back to the caller's units."""
        if not self.quantity:
            return x
        return x / 10.0**self.quantity if isinstance(x, np.ndarray) else x / 10**self.quantity

    def money(self, x):
        """A scaled cost total back to the caller's units.

        A total is quantities times unit costs, so it carries both scales: divided by
        ``10**(quantity + cost)``.
        """
        places = self.quantity + self.cost
        return x if not places else x / 10**places

    def describe(self) -> dict:
        """The scaling for a certificate: ``decimal_scale`` and ``cost_scale`` where not 1."""
        out = {}
        if self.quantity:
            out["decimal_scale"] = 10**self.quantity
        if self.cost:
            out["cost_scale"] = 10**self.cost
        return out


def to_integers(net: TimedNetwork, supply=None, amount=None):
    """Scale decimal data to exact integers.

    Returns
    -------
    (TimedNetwork, supply, amount, Scale)

    Raises
    ------
    InputError
        When some value needs more than nine decimals (naming the field).
    """
    quantities = {"capacity": net.capacity, "holdover": net.holdover, "supply": supply,
                  "amount": None if amount is None else np.asarray([amount])}
    costs = {"cost": net.cost, "holdover_cost": net.holdover_cost}
    if all(a is None or a.dtype.kind == "i" for a in (*quantities.values(), *costs.values())):
        return net, supply, amount, Scale()
    scaled_q = _common(quantities)
    scaled_c = _common(costs)
    d, (capacity, holdover, supply, amount_arr) = scaled_q
    e, (cost, holdover_cost) = scaled_c
    net = replace(net, capacity=capacity, holdover=holdover, cost=cost, holdover_cost=holdover_cost)
    return net, supply, None if amount_arr is None else int(amount_arr[0]), Scale(d, e)


#: Where each scaled field lives in a request, for the error that names it.
_FIELD_POINTERS = {"capacity": "/arcs", "cost": "/arcs", "holdover": "/nodes", "holdover_cost": "/nodes",
                   "supply": "/nodes", "amount": "/amount"}


def _common(arrays: dict):
    found = common_scale(*arrays.values())
    if found is None:
        name = next((k for k, a in arrays.items() if a is not None and common_scale(a) is None), None)
        name = name or next(k for k, a in arrays.items() if a is not None)
        raise InputError(FieldError(_FIELD_POINTERS[name],
                                    f"{name} values need more than 9 decimal places, or are too large once scaled "
                                    "to integers; round them"))
    return found


def release_late(flows: np.ndarray, hold: np.ndarray, release: np.ndarray) -> None:
    """Let own stock wait in the stock, not in the node's holdover (in place).

    A unit released in period ``p`` and held at its node into ``p + 1`` is the same
    unit released in ``p + 1``: at no extra cost, and free of the holdover limit.
    Rows are nodes; ``hold[:, p]`` the node's holdover arc from ``p`` (``-1``: none),
    ``release[:, p]`` the arc releasing its stock in ``p``. One vectorised step per
    period moves what can be moved.
    """
    for p in range(hold.shape[1]):
        has = hold[:, p] >= 0
        h, r, r_next = hold[has, p], release[has, p], release[has, p + 1]
        shift = np.minimum(flows[h], flows[r])
        flows[h] -= shift
        flows[r] -= shift
        flows[r_next] += shift


def _finite_total(net: TimedNetwork) -> int:
    try:
        return finite_total(net)
    except OverflowRisk as exc:
        raise InputError.at("/horizon", f"{exc}: too large for exact 64-bit arithmetic; shorten the horizon "
                                        "or lower the capacities") from None
