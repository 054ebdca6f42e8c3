"""Single-arc closures: how much of the maximum flow each arc's closure costs.

The loss of an arc, from the residual network
-----------------------------------------------
Let f be a maximum s-t flow of value v, e = (u, w) an arc with f_e > 0, and R the
residual network of f without e's own two residual arcs. Then

    value_without(e) = v - f_e + min(f_e, g_e),    g_e = the maximum flow from u to w in R,

so ``loss(e) = f_e - min(f_e, g_e)``: reroute up to f_e from the arc's tail to its
head around it, and the rest is lost.

*At least.* Route r = min(f_e, g_e) units from u to w in R and take r off e: the
result psi is again a maximum flow of the whole network, with psi_e = f_e - r.
Decompose psi into s-t paths and cycles; those through e carry psi_e in total, and
dropping them leaves a flow without e of value >= v - psi_e.

*At most.* Suppose g_e < f_e (otherwise there is nothing to show) and let phi be any
flow of the network without e, of value v - L. Its difference delta = phi - f (on the
arcs other than e) is a flow of R whose net outflow (out minus in) is +f_e at u, -f_e
at w, -L at s and +L at t, added up where these nodes coincide. Take X, the source
side of a minimum u-w cut of R, of residual capacity g_e. The net flow of delta out of
X is at most g_e and equals f_e - L [s in X] + L [t in X]. With s outside X it would be
at least f_e > g_e, so s is in X and, for the same reason, t is not: hence
f_e - L <= g_e, that is L >= f_e - g_e. The same X is an s-t cut of the network without
e of capacity (v - f_e) + g_e = value_without(e): the certificate's cut.

Equivalently, ``loss(e)`` is the least flow e carries in any maximum flow; only arcs
that carry flow can matter.

Computing every loss without re-solving per arc
-----------------------------------------------
1. One maximum flow. Flows differ between maximum flows only by circulations of the
   residual network, which live inside its strongly connected components (whose
   structure is the same for every maximum flow). An arc joining two different
   components carries the same flow in every maximum flow: its loss is its flow, and
   the cut is the set of nodes the residual network reaches from s and u.
2. Rounds of rerouting: a min-cost flow of value v that charges the arcs still in
   question (random weights) moves the flow off most of them at once; an arc a round
   leaves without flow cannot lower the value. Rounds go on while one clears at least
   half of the arcs left: the rest mostly compete for the same spare capacity (the
   slack of the source's arcs, say), which one maximum flow cannot give to all.
3. Group tests on one residual network, built once as an OR-Tools max-flow graph:
   close a group of arcs and reroute all their flow from a super source at their tails
   to a super sink at their heads. A group that reroutes completely is cleared by that
   one solve; a group that does not is halved; a single arc gets g_e, its witness (the
   rerouted flow) and its cut (the final minimum cut). Every test starts from the same
   maximum flow, so groups never compete with one another.

On the benchmark's 100,000-arc random network (``tests/perf/bench_planning.py``), of
15,697 flow-carrying arcs step 1 settles 1,001, the rounds 13,754 and 95 group tests
the last 942.

Every maximum flow used as a witness and every cut is checked by
:class:`~service.solvers.closure_checks.ClosureChecks` before the answer is returned.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..deadline import Deadline, expired
from ..errors import FieldError, InputError, SolverFailure, SolveTimeout
from .certificates import check_max_flow, check_path
from .closure_checks import ClosureChecks
from .graph import Graph, components, pattern, reach_in, residual_arcs
from .resilience_residual import ResidualSolver
from .maxflow_graph import CapacityOverflow, check_capacity_sums, graph_engine, max_flow_graph
from .mincost_graph import GraphRangeError, solve_balanced, solver_bounds
from .scaling import common_scale

#: Reroute rounds (min-cost flows) go on while one clears at least this share of the
#: arcs still in question: after the first, the arcs left mostly compete for the same
#: spare capacity, and group tests on the residual network clear them faster.
ROUND_SHARE = 0.5
#: Arcs in the first group test; groups double while they pass.
GROUP_START = 16
#: Charges per unit on the arcs in question are SPREAD * (1 .. SPREAD): random, so
#: that arcs competing for the same spare capacity are cleared in turn.
SPREAD = 8


@dataclass
class ClosureLosses:
    """Per-arc results, arcs in request order (``loss`` 0 where a closure costs nothing).

    ``cuts`` maps each arc with a positive loss to the arcs (indices) of a checked cut
    of the network without it.
    """

    loss: np.ndarray
    cuts: dict[int, np.ndarray]
    stats: dict = field(default_factory=dict)


@dataclass
class ResilienceSolution:
    """``status`` ``optimal`` (``failing`` sorted worst first, ties by arc index) or
    ``unbounded`` (``unbounded_path`` set, no losses)."""

    status: str
    value: int | float | None
    flows: np.ndarray
    source_side: np.ndarray
    failing: np.ndarray
    loss: np.ndarray
    value_without: np.ndarray
    cuts: list
    engine: dict
    unbounded_path: np.ndarray | None = None
    stats: dict = field(default_factory=dict)


def arc_closures(num_nodes: int, tail: np.ndarray, head: np.ndarray, capacity: np.ndarray,
                 unlimited: np.ndarray | None, source: int, sink: int, *,
                 deadline: Deadline | None = None) -> tuple[ResilienceSolution, dict]:
    """The maximum flow and, for every arc whose closure lowers it, the value without it.

    Parameters
    ----------
    num_nodes : int
    tail, head : ndarray of int32
    capacity : ndarray
        Integers, or decimals with at most six places (solved exactly, scaled); 0 where
        ``unlimited``.
    unlimited : ndarray of bool or None
    source, sink : int
        Distinct node indices.
    deadline : Deadline, optional
        :class:`~service.errors.SolveTimeout` once it has passed; None: no limit.

    Returns
    -------
    (ResilienceSolution, certificate)

    Raises
    ------
    InputError
        Capacities that cannot be solved exactly (more than nine decimals, or sums
        beyond 64-bit integers), naming ``/arcs``.
    SolveTimeout, SelfCheckFailed

    Examples
    --------
    >>> import numpy as np
    >>> s, _ = arc_closures(4, np.array([0, 0, 1, 2, 1], np.int32), np.array([1, 2, 3, 3, 2], np.int32),
    ...                     np.array([5, 3, 4, 4, 2]), None, 0, 3)
    >>> s.value, s.failing.tolist(), s.value_without.tolist()
    (8, [0, 2, 3, 1, 4], [3, 4, 4, 5, 7])
    """
    scaled = common_scale(capacity)
    if scaled is None:
        raise InputError(FieldError("/arcs", "capacities have more than 6 decimal places or are too large once "
                                             "scaled; closures are solved exactly"))
    d, (cap,) = scaled
    try:
        big = check_capacity_sums(cap, unlimited)
    except CapacityOverflow as exc:
        raise InputError(FieldError("/arcs", f"{exc}; closures are solved exactly in 64-bit integers")) from None
    base = max_flow_graph(num_nodes, tail, head, cap, unlimited, source, sink)
    engine = graph_engine("SimpleMaxFlow + SimpleMinCostFlow", **({"decimal_scale": 10**d} if d else {}))
    if base.status == "unbounded":
        check_path(tail, head, unlimited, source, sink, base.unbounded_path)
        empty = np.zeros(0, dtype=np.int64)
        return (ResilienceSolution("unbounded", None, empty, np.zeros(0, bool), empty, empty, empty, [], engine,
                                   unbounded_path=base.unbounded_path),
                {"checked": True, "unbounded_path_arcs": int(base.unbounded_path.size)})
    certificate = check_max_flow(Graph(num_nodes, tail, head, cap, unlimited), source, sink, base.flows, base.value,
                                 base.source_side)
    checks = ClosureChecks(num_nodes, tail, head, cap, unlimited, source, sink, base.value)
    limited_cap = cap if unlimited is None else np.where(unlimited, big, cap)
    found = closure_losses(num_nodes, tail, head, limited_cap, unlimited, source, sink, base.flows, base.value,
                           checks, deadline=deadline)
    failing = np.flatnonzero(found.loss)
    failing = failing[np.lexsort((failing, -found.loss[failing]))]
    loss = found.loss[failing]
    certificate.update(checks.finish(failing, loss))
    value_without = base.value - loss
    solution = ResilienceSolution("optimal", base.value, base.flows, base.source_side, failing, loss, value_without,
                                  [found.cuts[int(a)] for a in failing], engine, stats=found.stats)
    if d:
        _unscale(solution, certificate, 10**d)
    return solution, certificate


def _unscale(solution: ResilienceSolution, certificate: dict, factor: int) -> None:
    solution.value = solution.value / factor
    solution.flows = solution.flows / factor
    solution.loss = solution.loss / factor
    solution.value_without = solution.value_without / factor
    for name in ("flow_value", "cut_capacity"):
        certificate[name] = certificate[name] / factor
    certificate["decimal_scale"] = factor


def closure_losses(num_nodes: int, tail: np.ndarray, head: np.ndarray, capacity: np.ndarray,
                   unlimited: np.ndarray | None, source: int, sink: int, flows: np.ndarray, value: int,
                   checks: ClosureChecks, *, deadline: Deadline | None = None) -> ClosureLosses:
    """Every arc's loss on closure (see the module doc), each witnessed through ``checks``.

    Parameters
    ----------
    capacity : ndarray of int64
        With a stand-in larger than any flow where ``unlimited``.
    flows : ndarray of int64
        A maximum flow of value ``value``.
    checks : ClosureChecks
        Receives every witness flow and cut, and checks it.
    deadline : Deadline, optional
        :class:`SolveTimeout` is raised once it has passed.
    """
    flows = np.where(tail == head, 0, flows)  # a self-loop's flow is a circulation: drop it
    checks.witness(flows)
    loss = np.zeros(tail.size, dtype=np.int64)
    carrying = np.flatnonzero(flows > 0)
    res_tail, res_head = residual_arcs(tail, head, capacity, unlimited, flows)
    count, comp = components(num_nodes, res_tail, res_head, strong=True)
    across = comp[tail[carrying]] != comp[head[carrying]]
    crossing, inside = carrying[across], carrying[~across]
    loss[crossing] = flows[crossing]
    cuts = _crossing_cuts(crossing, tail, source, comp, count, res_tail, res_head, value - flows, checks)
    psi, left = _reroute_rounds(num_nodes, tail, head, capacity, unlimited, source, sink, value, flows, inside,
                                 checks)
    stats = {"carrying": int(carrying.size), "crossing": int(crossing.size),
             "cleared_by_rounds": int(inside.size - left.size), "left_after_rounds": int(left.size)}
    if left.size:
        solver = ResidualSolver(num_nodes, tail, head, capacity, unlimited, psi, left)
        stats["group_tests"] = _group_tests(solver, left, psi, value, loss, cuts, checks, deadline)
    return ClosureLosses(loss, cuts, stats)


def _group_tests(solver, left, psi, value, loss, cuts, checks, deadline) -> int:
    """Close groups of arcs at once and reroute all their flow; split a group that fails.

    A group that reroutes completely is cleared by one solve (its witness shows a
    maximum flow avoiding all of it); groups grow while they pass and halve when they
    fail, and a single arc that fails gets its loss and its cut. Each test starts from
    the same maximum flow ``psi``, so groups never compete with one another.

    Returns
    -------
    int
        The number of tests (max-flow solves) made.
    """
    tests, size, at = 0, GROUP_START, 0
    order = left.tolist()
    while at < len(order):
        if expired(deadline):
            raise SolveTimeout("the closure losses were not all found within the time limit; submit the "
                               "request as a job (POST /v1/jobs) for a longer limit")
        group = np.array(order[at:at + size], dtype=np.int64)
        rerouted, witness, side = solver.reroute(group)
        tests += 1
        if witness is None:  # a group that did not reroute completely: try half of it
            size = max(1, size // 2)
            continue
        checks.witness(witness)
        at += group.size
        if side is None:
            size *= 2
        else:
            e = int(group[0])
            loss[e] = psi[e] - rerouted
            cuts[e] = checks.cut(e, side, value - int(loss[e]))
    return tests


def _crossing_cuts(crossing, tail, source, comp, count, res_tail, res_head, value_without, checks) -> dict:
    """Cuts for arcs between components: the nodes the residual network reaches from s and u.

    Removing such an arc changes nothing the residual network reaches from s or u (it
    is saturated, and its backward arc starts at w, which they do not reach).
    """
    cuts: dict[int, np.ndarray] = {}
    if not crossing.size:
        return cuts
    between = comp[res_tail] != comp[res_head]
    dag = pattern(count, comp[res_tail[between]], comp[res_head[between]])
    from_source = reach_in(dag, comp[source])
    by_start: dict[int, np.ndarray] = {}
    for e in crossing.tolist():
        start = int(comp[tail[e]])
        if start not in by_start:
            by_start[start] = (from_source | reach_in(dag, start))[comp]
        cuts[e] = checks.cut(e, by_start[start], int(value_without[e]))
    return cuts


def _reroute_rounds(num_nodes, tail, head, capacity, unlimited, source, sink, value, flows, inside, checks):
    """Min-cost flows of value ``value`` that move flow off the arcs in question.

    Returns the last maximum flow found and the arcs every round left carrying flow.
    """
    psi, left = flows, inside
    supply = np.zeros(num_nodes, dtype=np.int64)
    supply[source], supply[sink] = value, -value
    # Unit cost on unlimited arcs: an optimal flow then runs no cycle through one, so
    # none carries more than the value and the stand-in capacity never binds later.
    base = np.zeros(tail.size, dtype=np.int64) if unlimited is None else unlimited.astype(np.int64)
    rng = np.random.default_rng(0)  # fixed: the same request gets the same cuts
    while left.size:
        cost = base.copy()
        cost[left] = SPREAD * rng.integers(1, SPREAD + 1, left.size)
        try:
            bounds = solver_bounds(num_nodes, tail, head, capacity, None, cost, supply)
            moved = solve_balanced(num_nodes, tail, head, bounds.caps, cost, supply)
        except GraphRangeError:
            break  # the charges would overflow 64-bit costs: leave the rest to the exact step
        if moved is None:
            raise SolverFailure("a flow of the maximum value could not be routed again")
        checks.witness(moved)
        cleared = moved[left] == 0
        psi, left = moved, left[~cleared]
        if cleared.sum() < ROUND_SHARE * cleared.size:
            break
    return psi, left
