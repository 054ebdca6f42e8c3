"""The arc-flow model of whole-unit multi-commodity flow, as sparse arrays.

One model serves both engines (CP-SAT and SCIP) and both modes:

``integral``
    Variable ``x[k*m + a]`` is the whole number of units of commodity ``k`` on arc
    ``a``. Conservation ``A x_k = d_k (e_s - e_t)``; shared capacity
    ``sum_k x[k, a] <= u_a``.
``single_path``
    ``x[k*m + a]`` is binary: whether commodity ``k`` uses arc ``a``; the flow is
    ``d_k x``. Conservation ``A x_k = e_s - e_t``; capacity
    ``sum_k d_k x[k, a] <= u_a``. With non-negative costs any binary solution is one
    simple path plus cycles, and dropping the cycles costs nothing and frees capacity,
    so the model's optimum is the best single-path plan (the cycles are dropped when
    the plan is read back: :func:`read_plan`).

For ``max-throughput`` one delivery column per commodity follows the flow columns:
``t_k`` in ``[0, d_k]`` (integral) or binary ``y_k`` (single path: all of the demand
on one path, or none of it), with ``A x_k = t_k (e_s - e_t)``.

Costs enter as integers (the client's decimals scaled by ``10**scale``), so CP-SAT
sees the exact objective and plans are compared exactly.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from .glop import incidence_matrix
from .graph import Graph
from .multicommodity import Commodities
from .scaling import decimal_places, scale_to_int

#: Largest magnitude of any integer in the model (CP-SAT works in int64 and needs
#: headroom for its own sums; scaled objective terms are also kept exact in float64).
INT_LIMIT = 2**50


@dataclass
class WholeModel:
    """``min/max c @ x`` s.t. ``row_lower <= A x <= row_upper``, ``col_lower <= x <= col_upper``, x integer."""

    c: np.ndarray  # int64 (scaled costs, or delivery weights)
    matrix: sp.csr_matrix  # integer coefficients
    row_lower: np.ndarray  # int64; -INT_LIMIT for "no lower bound"
    row_upper: np.ndarray
    col_lower: np.ndarray  # int64
    col_upper: np.ndarray
    maximize: bool

    @property
    def num_vars(self) -> int:
        """Number of integer variables (columns)."""
        return int(self.c.size)


@dataclass
class WholeData:
    """A whole-unit problem in integers: the network, the commodities and the mode."""

    net: Graph
    com: Commodities
    demands: np.ndarray  # int64
    cost: np.ndarray  # int64, scaled by 10**scale
    scale: int
    single_path: bool
    throughput: bool

    @property
    def shape(self) -> tuple[int, int]:
        """``(commodities, arcs)``: the shape of the flow array."""
        return self.com.count, self.net.num_arcs

    @property
    def weight(self) -> np.ndarray:
        """Units per model unit of each commodity: its demand (single path: a column is
        "on the path or not"), else 1."""
        return self.demands if self.single_path else np.ones(self.com.count, dtype=np.int64)

    @property
    def upper(self) -> np.ndarray:
        """Per-arc capacity as int64, INT_LIMIT where unlimited."""
        cap = self.net.capacity.astype(np.int64)
        if self.net.unlimited is not None:
            cap = np.where(self.net.unlimited, INT_LIMIT, cap)
        return cap

    @property
    def limited(self) -> np.ndarray:
        """Boolean mask of the arcs with a capacity."""
        return limited_mask(self.net)


def limited_mask(net: Graph) -> np.ndarray:
    """Boolean mask of the arcs with a capacity (all of them when ``unlimited`` is None)."""
    return np.ones(net.num_arcs, dtype=bool) if net.unlimited is None else ~net.unlimited


def cost_scale(cost: np.ndarray) -> tuple[int, np.ndarray] | None:
    """Decimal places of the costs and the costs scaled to int64; None when a cost needs
    more than six decimals or the scaled costs leave the exact range."""
    places = decimal_places(np.asarray(cost, dtype=np.float64))
    if places is None:
        return None
    scaled = scale_to_int(np.asarray(cost, dtype=np.float64), places)
    if scaled.size and int(np.abs(scaled).max()) >= INT_LIMIT:
        return None
    return places, scaled


#: Largest objective magnitude (scaled cost of any plan) solved: float64 holds every
#: integer up to here exactly, so the engines' objective values and bounds are exact.
OBJECTIVE_LIMIT = 2**53


def whole_data_issue(capacity: np.ndarray, limited: np.ndarray, cost: np.ndarray, demands: np.ndarray,
                     single_path: bool) -> tuple[str, int, str] | None:
    """The first value that whole-unit solving cannot take exactly, or None.

    Returns
    -------
    (field, index, reason)
        ``field`` is ``capacity`` or ``cost`` (``index`` an arc), ``demand`` (a
        commodity), or ``objective`` (index -1: the costs times the flows could leave
        the exact range).
    """
    for field, values, where in (("capacity", capacity, limited), ("demand", demands, None)):
        values = np.asarray(values, dtype=np.float64)
        bad = (values != np.trunc(values)) | (values > INT_LIMIT)
        if where is not None:
            bad &= where
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            why = "whole number" if values[i] == np.trunc(values[i]) else None
            return field, i, ("must be at most 2**50 for whole-unit plans" if why else
                              "must be a whole number for whole-unit plans (integral or single_path)")
    cost = np.asarray(cost, dtype=np.float64)
    micro = cost * 1e6  # the rule of scaling.decimal_places at six decimals
    bad = np.abs(micro - np.rint(micro)) > 1e-9 * np.maximum(1.0, np.abs(micro))
    if bad.any():
        return "cost", int(np.flatnonzero(bad)[0]), "must have at most 6 decimals for whole-unit plans"
    if single_path and (cost < 0).any():
        return "cost", int(np.flatnonzero(cost < 0)[0]), "must be >= 0 with single_path (a path cannot take a " \
                                                          "detour to earn on a negative-cost lane)"
    scaled = cost_scale(cost)
    demand = float(np.sum(demands))
    room = np.where(limited, np.minimum(np.asarray(capacity, dtype=np.float64), demand), demand)
    if scaled is None or float(np.abs(scaled[1]).astype(np.float64) @ room) >= OBJECTIVE_LIMIT:
        return "objective", -1, "the costs times the flows could exceed 2**53 (in the costs' smallest decimal)"
    return None


def flow_upper(data: WholeData) -> np.ndarray:
    """Upper bound of every flow column, shape (K, m), in model units.

    Integral, costs >= 0: ``min(u_a, d_k)`` (an optimal plan has an acyclic flow per
    commodity, and an acyclic flow never puts more than ``d_k`` on an arc). With a
    negative cost a commodity may circulate around a capacity-limited cycle, so a
    limited arc keeps ``u_a`` and an unlimited one ``d_k`` plus every limited
    capacity (a bounded optimum needs a limited arc on every cycle it uses).
    Single path: 1, or 0 where the demand exceeds the capacity.
    """
    K, m = data.shape
    upper = data.upper
    d = data.demands[:, None]
    if data.single_path:
        return (d <= upper[None, :]).astype(np.int64)
    if (data.cost >= 0).all():
        return np.minimum(d, upper[None, :])
    spare = int(data.net.capacity[data.limited].astype(np.int64).sum())
    return np.where(data.limited[None, :], upper[None, :], np.minimum(d + spare, INT_LIMIT))


def no_detours(data: WholeData, ub: np.ndarray) -> np.ndarray:
    """Fix to 0 what no best plan uses: arcs into a commodity's source or out of its sink,
    and self-loops (single path only: a simple path has none). Valid with costs >= 0
    (an optimal plan is acyclic per commodity); single path requires them."""
    if not (data.cost >= 0).all():
        return ub
    net, com = data.net, data.com
    into_source = net.head[None, :] == com.sources[:, None]
    out_of_sink = net.tail[None, :] == com.sinks[:, None]
    drop = into_source | out_of_sink
    if data.single_path:
        drop |= (net.tail == net.head)[None, :]
    return np.where(drop, 0, ub)


def build_model(data: WholeData) -> WholeModel:
    """The arc-flow model of ``data`` (see the module doc)."""
    net, com = data.net, data.com
    K, m = data.shape
    n = net.num_nodes
    ub = no_detours(data, flow_upper(data))
    weight = data.weight
    # Conservation, commodity-major: row k*n + v.
    incidence = incidence_matrix(n, net.tail, net.head)
    conservation = sp.kron(sp.identity(K, format="csr"), incidence, format="csr")
    # Single path: one unit of path per commodity (none for a zero demand).
    unit = (data.demands > 0).astype(np.int64) if data.single_path else data.demands
    rhs = np.zeros(K * n, dtype=np.int64)
    offset = n * np.arange(K)
    # Self-flow problems (source == sink) are refused upstream, so no cancellation here.
    rhs[offset + com.sources] = unit
    rhs[offset + com.sinks] = -unit
    # Shared capacities: only rows that can bind.
    limited = np.flatnonzero(data.limited)
    most = (ub[:, limited] * weight[:, None]).sum(axis=0)
    binding = limited[most > data.upper[limited]]
    rows = np.tile(np.arange(binding.size), K)
    cols = (binding[None, :] + m * np.arange(K)[:, None]).ravel()
    vals = np.repeat(weight, binding.size)
    extra = K if data.throughput else 0
    capacity = sp.csr_matrix((vals, (rows, cols)), shape=(binding.size, K * m + extra))
    cap_upper = data.upper[binding]
    if data.throughput:
        # A x_k - t_k (e_s - e_t) = 0 for every k.
        deliver = sp.csr_matrix(
            (np.concatenate([-np.ones(K), np.ones(K)]).astype(np.int64),
             (np.concatenate([offset + com.sources, offset + com.sinks]), np.concatenate([np.arange(K)] * 2))),
            shape=(K * n, K))
        conservation = sp.hstack([conservation, deliver], format="csr")
        rhs = np.zeros(K * n, dtype=np.int64)
        delivery_upper = (data.demands > 0).astype(np.int64) if data.single_path else data.demands
        col_upper = np.concatenate([ub.ravel(), delivery_upper])
        c = np.concatenate([np.zeros(K * m, dtype=np.int64), weight])
    else:
        col_upper = ub.ravel()
        c = flow_costs(data)
    matrix = sp.vstack([conservation, capacity], format="csr")
    matrix.eliminate_zeros()  # self-loops cancel in the incidence matrix
    matrix.data = matrix.data.astype(np.int64)
    return WholeModel(
        c=c.astype(np.int64), matrix=matrix,
        row_lower=np.concatenate([rhs, np.full(binding.size, -INT_LIMIT, dtype=np.int64)]),
        row_upper=np.concatenate([rhs, cap_upper]),
        col_lower=np.zeros(col_upper.size, dtype=np.int64), col_upper=col_upper.astype(np.int64),
        maximize=data.throughput,
    )


def flow_costs(data: WholeData) -> np.ndarray:
    """Objective coefficients of the flow columns for the cost phase (scaled costs, per model unit)."""
    return (data.cost[None, :] * data.weight[:, None]).ravel()


def cost_phase(model: WholeModel, data: WholeData, delivered: int) -> WholeModel:
    """The second phase of max-throughput: deliver at least ``delivered`` (model units,
    i.e. weighted by demand for single path), at least cost."""
    K, m = data.shape
    floor = sp.csr_matrix((data.weight, (np.zeros(K, dtype=np.int64), K * m + np.arange(K))),
                          shape=(1, model.num_vars))
    return WholeModel(
        c=np.concatenate([flow_costs(data), np.zeros(K, dtype=np.int64)]),
        matrix=sp.vstack([model.matrix, floor], format="csr"),
        row_lower=np.append(model.row_lower, delivered), row_upper=np.append(model.row_upper, INT_LIMIT),
        col_lower=model.col_lower, col_upper=model.col_upper, maximize=False,
    )


def trivial_bound(model: WholeModel) -> int:
    """A bound on the objective from the variable bounds alone (always valid)."""
    if model.maximize:
        return int(np.where(model.c > 0, model.c * model.col_upper, 0).sum())
    return int(np.where(model.c < 0, model.c * model.col_upper, 0).sum())
