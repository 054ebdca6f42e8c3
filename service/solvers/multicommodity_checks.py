"""The multi-commodity flow plan checked from its flows alone (:mod:`.multicommodity`).

Every figure holds to ``lp_checks.REL`` times its own magnitude; a failed check raises
:class:`~service.errors.SelfCheckFailed` (a bug, never a 200).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from ..errors import SelfCheckFailed
from . import lp_checks
from .certificates import throughput

if TYPE_CHECKING:
    from .lp import LPResult
    from .graph import Graph
    from .multicommodity import Commodities

#: Relative slack of the delivery held in the second (cost) model of max-throughput.
HOLD_SLACK = 1e-9


def flow_tolerance(total: float) -> float:
    """Absolute slack of a total (of demand or delivery): ``REL`` times its magnitude."""
    return lp_checks.REL * abs(total)


def check_flows(net: Graph, com: Commodities, flows: np.ndarray, delivered: np.ndarray, prices: np.ndarray,
                lp_certificate: dict) -> dict:
    """Re-check a multi-commodity plan from the flows alone.

    Conservation of every commodity at every node (net outflow = delivered at the
    source, -delivered at the sink, 0 elsewhere), non-negative flows, shared
    capacities, delivery within demand, the cost recomputed, and complementary
    slackness of the capacity prices (a priced arc is full). Each holds to ``REL``
    times its own magnitude: a commodity at a node against its throughput there and
    its delivery, an arc against its capacity (or the flow it carries), a delivery
    against its demand. The LP certificate (residuals, duality gap) is merged in.

    Raises
    ------
    SelfCheckFailed
    """
    K, n, m = com.count, net.num_nodes, net.num_arcs
    rel = lp_checks.REL
    offset = (n * np.arange(K))[:, None]
    tails, heads = (offset + net.tail[None, :]).ravel(), (offset + net.head[None, :]).ravel()
    balance = np.bincount(tails, flows.ravel(), K * n) - np.bincount(heads, flows.ravel(), K * n)
    through = throughput(K * n, tails, heads, flows.ravel())
    expected = np.zeros(K * n)
    np.add.at(expected, n * np.arange(K) + com.sources, delivered)
    np.add.at(expected, n * np.arange(K) + com.sinks, -delivered)
    node_allowed = rel * (through + np.abs(expected))
    off = np.abs(balance - expected)
    total = flows.sum(axis=0)
    upper = net.capacity.astype(np.float64)
    if net.unlimited is not None:
        upper[net.unlimited] = np.inf
    arc_size = np.where(np.isfinite(upper), upper, np.abs(flows).sum(axis=0))
    arc_allowed = rel * arc_size
    over = lp_checks.bound_violation(total, np.zeros(m), upper)
    negative = np.maximum(-flows, 0).max(axis=0) if flows.size else np.zeros(m)
    short = np.maximum(delivered - com.demands, 0.0)
    if (off > node_allowed).any():
        raise SelfCheckFailed(f"self-check failed: a commodity's flow is not conserved (imbalance "
                              f"{float(off.max()):g})")
    if (over > arc_allowed).any() or (negative > arc_allowed).any():
        raise SelfCheckFailed(f"self-check failed: an arc's shared capacity is exceeded by "
                              f"{float(max(over.max(), negative.max())):g}")
    if (short > rel * com.demands).any():
        raise SelfCheckFailed("self-check failed: a commodity is delivered beyond its demand")
    priced = prices > 0
    slack = np.abs(total - upper)
    if (slack[priced] > arc_allowed[priced]).any():
        raise SelfCheckFailed("self-check failed: an arc with a positive capacity price is not full")
    cost = float(net.cost @ total)
    return {
        "checked": True,
        "cost": cost,
        "max_imbalance": float(off.max()) if off.size else 0.0,
        "max_capacity_excess": float(max(over.max(initial=0.0), negative.max(initial=0.0))),
        "primal_residual": lp_certificate["primal_residual"],
        "dual_residual": lp_certificate["dual_residual"],
        "dual_bound": lp_certificate["dual_objective"],
        "gap": lp_certificate["gap"],
        "duals_unique": lp_certificate["duals_unique"],
        "degenerate": lp_certificate["degenerate"],
        "tolerance": max(float(node_allowed.max(initial=0.0)), float(arc_allowed.max(initial=0.0))),
        "relative_tolerance": rel,
        "cost_tolerance": lp_certificate["tolerance"]["gap"],
    }


def check_throughput(certificate: dict, first: LPResult, delivered: np.ndarray) -> dict:
    """The plan delivers the proven most (the delivery model's dual bound)."""
    bound = first.certificate["dual_objective"]
    total = float(delivered.sum())
    tol = first.certificate["tolerance"]["gap"] + HOLD_SLACK * max(1.0, abs(bound))
    if total < bound - tol:
        raise SelfCheckFailed(f"self-check failed: the plan delivers {total:g}, less than the proven most {bound:g}")
    return {**certificate, "delivered_total": total, "delivery_bound": bound,
            "delivery_gap": first.certificate["gap"], "prices_unique": first.certificate["duals_unique"]}
