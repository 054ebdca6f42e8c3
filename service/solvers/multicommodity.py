"""Multi-commodity flow on GLOP: several commodities share the arcs' capacities.

The model is built in one go with scipy.sparse: one copy of the node-arc incidence
matrix per commodity (a Kronecker product with the identity) for flow conservation,
and one shared row per capacity-limited arc summing that arc's flow over every
commodity. Flow variables are commodity-major: variable ``k*m + a`` is commodity
``k`` on arc ``a``.

Objectives
----------
``min-cost``
    Every commodity's demand is met at least total cost.
``max-throughput``
    The most total delivery (each commodity up to its demand), ties broken at least
    cost. Solved lexicographically: first maximise delivery; then hold the delivery
    at that optimum and minimise cost (when round-off makes holding it exactly
    infeasible, it is held less a relative 1e-9). No weighting of delivery against
    cost is needed, so no "big enough" weight can be wrong.

Capacity prices are what one more unit of an arc's capacity is worth, as a
non-negative number: for ``min-cost`` the cost saved (the negated dual of the
capacity row, in the LP convention of :mod:`service.solvers.lp`); for
``max-throughput`` the extra delivery (the dual of the capacity row in the delivery
model). Bottlenecks are the arcs whose price is positive.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

from ..deadline import Deadline
from ..errors import SelfCheckFailed, SolverFailure
from . import lp_checks
from .front import maximum_flow
from .graph import Graph
from .glop import beyond_range, incidence_matrix, lp_engine
from .lp import LPModel, LPResult, settle_feasible, solve_certified
from .multicommodity_checks import HOLD_SLACK, check_flows, check_throughput, flow_tolerance


@dataclass
class Commodities:
    sources: np.ndarray  # node index per commodity
    sinks: np.ndarray
    demands: np.ndarray  # float64

    @property
    def count(self) -> int:
        """Number of commodities."""
        return int(self.sources.size)


@dataclass
class MultiCommoditySolution:
    status: str  # optimal | infeasible | unbounded | time_limit
    cost: float | None = None
    delivered: np.ndarray | None = None
    flows: np.ndarray | None = None  # (K, m)
    capacity_prices: np.ndarray | None = None
    bottlenecks: np.ndarray | None = None
    infeasibility: dict | None = None
    unbounded: dict | None = None
    certificate: dict = field(default_factory=lambda: {"checked": False})
    engine: dict = field(default_factory=lp_engine)


def _conservation(net: Graph, com: Commodities) -> sp.csr_matrix:
    incidence = incidence_matrix(net.num_nodes, net.tail, net.head)
    return sp.kron(sp.identity(com.count, format="csr"), incidence, format="csr")


def _capacity_rows(net: Graph, k: int, extra_cols: int = 0) -> sp.csr_matrix:
    limited = net.limited
    m, L = net.num_arcs, limited.size
    rows = np.tile(np.arange(L), k)
    cols = (limited[None, :] + m * np.arange(k)[:, None]).ravel()
    return sp.csr_matrix((np.ones(k * L), (rows, cols)), shape=(L, k * m + extra_cols))


def min_cost_model(net: Graph, com: Commodities) -> LPModel:
    """All demand met at least cost: ``A_k f_k = b_k`` for every k, ``sum_k f_k <= u``."""
    K, n, m = com.count, net.num_nodes, net.num_arcs
    supply = np.zeros(K * n)
    offset = n * np.arange(K)
    np.add.at(supply, offset + com.sources, com.demands)
    np.add.at(supply, offset + com.sinks, -com.demands)
    cap = net.capacity[net.limited].astype(np.float64)
    return LPModel(
        c=np.tile(net.cost, K),
        matrix=sp.vstack([_conservation(net, com), _capacity_rows(net, K)], format="csr"),
        row_lower=np.concatenate([supply, np.full(cap.size, -np.inf)]),
        row_upper=np.concatenate([supply, cap]),
        col_lower=np.zeros(K * m),
        col_upper=np.full(K * m, np.inf),
    )


def throughput_model(net: Graph, com: Commodities) -> LPModel:
    """Most delivery: variables f (K*m) then t (K), ``A_k f_k = t_k (e_s - e_t)``, ``0 <= t_k <= d_k``."""
    K, n, m = com.count, net.num_nodes, net.num_arcs
    offset = n * np.arange(K)
    deliver = sp.csr_matrix(
        (np.concatenate([-np.ones(K), np.ones(K)]),
         (np.concatenate([offset + com.sources, offset + com.sinks]), np.concatenate([np.arange(K)] * 2))),
        shape=(K * n, K),
    )
    cap = net.capacity[net.limited].astype(np.float64)
    return LPModel(
        c=np.concatenate([np.zeros(K * m), np.ones(K)]),
        matrix=sp.vstack([sp.hstack([_conservation(net, com), deliver]), _capacity_rows(net, K, K)], format="csr"),
        row_lower=np.concatenate([np.zeros(K * n), np.full(cap.size, -np.inf)]),
        row_upper=np.concatenate([np.zeros(K * n), cap]),
        col_lower=np.zeros(K * m + K),
        col_upper=np.concatenate([np.full(K * m, np.inf), com.demands]),
        maximize=True,
    )


def hold_delivery(model: LPModel, net: Graph, com: Commodities, delivered: float, slack: float) -> LPModel:
    """The cost model of max-throughput: the delivery model with ``sum_k t_k`` held at
    least at ``delivered`` (less ``slack``, relative) and the objective switched to cost."""
    K, m = com.count, net.num_arcs
    hold = sp.csr_matrix((np.ones(K), (np.zeros(K, dtype=np.int64), K * m + np.arange(K))), shape=(1, K * m + K))
    floor = delivered - slack * max(1.0, abs(delivered))
    return LPModel(
        c=np.concatenate([np.tile(net.cost, K), np.zeros(K)]),
        matrix=sp.vstack([model.matrix, hold], format="csr"),
        row_lower=np.append(model.row_lower, floor),
        row_upper=np.append(model.row_upper, np.inf),
        col_lower=model.col_lower, col_upper=model.col_upper,
    )


def multicommodity_flow(net: Graph, com: Commodities, *, objective: str = "min-cost",
                        deadline: Deadline | None = None) -> MultiCommoditySolution:
    """Solve and certify a multi-commodity flow problem.

    Parameters
    ----------
    net : Graph
        Arcs with shared capacities and per-unit costs.
    com : Commodities
        Source, sink and demand of each commodity (node indices).
    objective : {"min-cost", "max-throughput"}
    deadline : Deadline, optional
        When all solves together must end (status ``time_limit`` then); None: no limit.

    Returns
    -------
    MultiCommoditySolution
        Infeasible ``min-cost`` answers carry ``infeasibility``: the commodities left
        short in a maximum-delivery plan, those that cannot be met even alone, and
        the arcs that bind (positive delivery price).

    Raises
    ------
    InputError
        When GLOP cannot solve or certify the data (their magnitudes span too far):
        the spans, and the span it is measured to take.
    """
    try:
        return _solve(net, com, objective, deadline)
    except SolverFailure as exc:  # a failed certificate too: the data's range, said clearly
        raise beyond_range(exc, "/arcs", capacities=net.capacity[net.limited].astype(np.float64),
                           costs=net.cost, demands=com.demands) from None


def _solve(net: Graph, com: Commodities, objective: str, deadline: Deadline | None) -> MultiCommoditySolution:
    if objective == "max-throughput":
        return _max_throughput(net, com, deadline)
    model = min_cost_model(net, com)
    result = solve_certified(model, deadline=deadline, dual_simplex=True, prove=False)
    if result.status == "optimal":
        return multicommodity_answer(net, com, result)
    if result.status == "time_limit":
        return _timed_out(result)
    # GLOP says infeasible or unbounded. The delivery model settles which: its dual
    # bound proves how much can be delivered at most.
    best = solve_certified(throughput_model(net, com), deadline=deadline)
    if best.status != "optimal":
        return _delivery_model_failed(best)
    total = float(com.demands.sum())
    if best.certificate["dual_objective"] < total - flow_tolerance(total):
        return _explain_infeasible(net, com, best, total)
    start = best.x[:com.count * net.num_arcs]
    settled = settle_feasible(model, start, deadline, said=result.status, dual_simplex=True)
    if settled.status == "unbounded":
        return _unbounded(net, com, settled)
    if settled.status == "optimal":
        return multicommodity_answer(net, com, settled)
    return _timed_out(settled)


def multicommodity_answer(net: Graph, com: Commodities, result: LPResult) -> MultiCommoditySolution:
    """The certified answer of an optimal min-cost model: every demand met.

    Capacity prices are the capacity rows' duals with the sign flipped (raising a
    capacity can only lower the cost), then checked with the flows by
    :func:`check_flows`.

    Parameters
    ----------
    net : Graph
    com : Commodities
    result : LPResult
        An optimal solve of :func:`min_cost_model`.

    Returns
    -------
    MultiCommoditySolution

    Raises
    ------
    SelfCheckFailed
        A capacity price is negative beyond the dual tolerance, or the flows fail
        their check.
    """
    K, m = com.count, net.num_arcs
    flows = result.x.reshape(K, m)
    prices = _prices(net, -result.duals[K * net.num_nodes:], result.certificate)
    delivered = com.demands.copy()  # every demand met; the check only reads it
    certificate = check_flows(net, com, flows, delivered, prices, result.certificate)
    return _answer(result, flows, delivered, prices, certificate)


def _timed_out(result: LPResult) -> MultiCommoditySolution:
    return MultiCommoditySolution("time_limit", certificate=result.certificate)


def _delivery_model_failed(result: LPResult) -> MultiCommoditySolution:
    if result.status == "time_limit":
        return _timed_out(result)
    raise SolverFailure(f"the delivery model is always feasible and bounded, yet it came back {result.status}")


def _max_throughput(net: Graph, com: Commodities, deadline: Deadline | None) -> MultiCommoditySolution:
    K, m, n = com.count, net.num_arcs, net.num_nodes
    model = throughput_model(net, com)
    # Primal simplex here: measured far faster than the dual on this model (3 s against
    # over 60 s at 10k arcs x 20 commodities), the reverse of the cost models.
    first = solve_certified(model, deadline=deadline)
    if first.status != "optimal":
        return _delivery_model_failed(first)
    prices = _prices(net, first.duals[K * n:], first.certificate)
    held = hold_delivery(model, net, com, first.objective, 0.0)
    second = solve_certified(held, deadline=deadline, dual_simplex=True, prove=False)
    if second.status == "infeasible":  # round-off at the held optimum: give it room
        held = hold_delivery(model, net, com, first.objective, HOLD_SLACK)
        second = solve_certified(held, deadline=deadline, dual_simplex=True, prove=False)
    if second.status in ("infeasible", "unbounded"):
        # The delivery plan is feasible for the held model, so only unbounded is possible.
        second = settle_feasible(held, first.x, deadline, said=second.status, dual_simplex=True)
    if second.status == "unbounded":
        return _unbounded(net, com, second)
    if second.status != "optimal":
        return _timed_out(second)
    flows = second.x[:K * m].reshape(K, m)
    delivered = second.x[K * m:]
    certificate = check_flows(net, com, flows, delivered, prices, second.certificate)
    certificate = check_throughput(certificate, first, delivered)
    return _answer(second, flows, delivered, prices, certificate)


def _answer(result: LPResult, flows, delivered, prices, certificate) -> MultiCommoditySolution:
    return MultiCommoditySolution(
        "optimal", cost=certificate["cost"], delivered=delivered, flows=flows, capacity_prices=prices,
        bottlenecks=np.flatnonzero(prices > 0), certificate=certificate, engine=result.engine,
    )


def _prices(net: Graph, row_prices: np.ndarray, certificate: dict) -> np.ndarray:
    """Per-arc capacity prices (0 on unlimited arcs), with dual noise below the dual
    tolerance set to exactly 0 so that "positive" means positive."""
    prices = np.zeros(net.num_arcs)
    prices[net.limited] = row_prices
    tol = certificate["tolerance"]["dual"]
    if (prices < -tol).any():
        raise SelfCheckFailed("self-check failed: a capacity price is negative")
    prices[np.abs(prices) <= tol] = 0.0
    return np.maximum(prices, 0.0)


def _explain_infeasible(net: Graph, com: Commodities, best: LPResult, total: float) -> MultiCommoditySolution:
    """Infeasible min-cost, proved by the delivery model: no plan delivers more than its
    dual bound, which is below the total demand. Which commodities fall short in that
    best plan, which cannot be met even alone, and which arcs bind (positive price)."""
    K, m, n = com.count, net.num_arcs, net.num_nodes
    delivered = best.x[K * m:]
    shortfall = np.where(com.demands - delivered > lp_checks.REL * com.demands, com.demands - delivered, 0.0)
    prices = _prices(net, best.duals[K * n:], best.certificate)
    short = np.flatnonzero(shortfall > 0)
    # Only a commodity left short in a best plan can fail on its own: one max-flow each.
    alone = []
    for k in short.tolist():
        flow, _ = maximum_flow(net, int(com.sources[k]), int(com.sinks[k]))
        if flow.value is not None and flow.value < com.demands[k]:  # an exact max-flow
            alone.append(k)
    info = {"short": short, "shortfall": shortfall, "max_delivered": float(best.objective),
            "binding": np.flatnonzero(prices > 0), "alone": np.asarray(alone, dtype=np.int64)}
    lp = best.certificate
    certificate = {"checked": True, "total_demand": total, "delivery_bound": lp["dual_objective"],
                   "primal_residual": lp["primal_residual"], "dual_residual": lp["dual_residual"],
                   "gap": lp["gap"], "tolerance": flow_tolerance(total), "relative_tolerance": lp_checks.REL}
    return MultiCommoditySolution("infeasible", infeasibility=info, certificate=certificate, engine=best.engine)


def _unbounded(net: Graph, com: Commodities, result: LPResult) -> MultiCommoditySolution:
    K, m = com.count, net.num_arcs
    direction = result.ray[:K * m].reshape(K, m)
    moving = np.flatnonzero(np.abs(direction).max(axis=1) > 0)
    k = int(moving[0]) if moving.size else 0
    info = {"commodity": k, "arcs": np.flatnonzero(direction[k] > 0)}
    return MultiCommoditySolution("unbounded", unbounded=info, certificate=result.certificate, engine=result.engine)
