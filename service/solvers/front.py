"""Engine choice and certification for max-flow."""

from __future__ import annotations

from typing import Literal

import numpy as np

from ..deadline import Deadline
from . import certificates
from .graph import Graph
from .maxflow_graph import CapacityOverflow, MaxFlowSolution, check_capacity_sums, max_flow_graph
from .maxflow_lp import LP_TOLERANCE, max_flow_lp
from .maxflow_wide import max_flow_wide
from .scaling import binary_scale, common_scale, is_object, rescale

EngineChoice = Literal["auto", "graph", "lp"]


def maximum_flow(
    graph: Graph,
    source: int,
    sink: int,
    *,
    engine: EngineChoice = "auto",
    deadline: Deadline | None = None,
) -> tuple[MaxFlowSolution, dict]:
    """Solve and certify a max-flow problem.

    Engine choice: ``auto`` and ``graph`` answer exactly whatever the numbers:
    integers as they are, decimals (at most ``MAX_DECIMALS`` places as written) scaled
    by ``10**d``, any other float64 by its exact binary value scaled by ``2**e``; on
    OR-Tools in int64 when every sum fits, by wide-integer phases
    (:mod:`service.solvers.maxflow_wide`) otherwise. ``lp`` uses GLOP, certified to
    a tolerance relative to each arc's and node's own magnitude.

    Parameters
    ----------
    graph : Graph
        ``capacity`` (0 where ``unlimited``) and ``unlimited`` are read; ``cost`` and
        ``lower`` are ignored.
    source, sink : int
        Node positions.
    engine : {"auto", "graph", "lp"}
    deadline : Deadline, optional
        When the LP engine must stop.

    Returns
    -------
    (MaxFlowSolution, certificate)

    Raises
    ------
    InputError
        ``engine="lp"`` on capacities whose range GLOP cannot certify.
    SelfCheckFailed
        When the answer fails its certificate (a bug).

    Examples
    --------
    >>> import numpy as np
    >>> g = Graph(3, np.array([0, 1]), np.array([1, 2]), np.array([5, 3]))
    >>> solution, certificate = maximum_flow(g, 0, 2)
    >>> int(solution.value), certificate["checked"]
    (3, True)
    """
    if engine == "lp":
        solution = max_flow_lp(graph, source, sink, deadline=deadline)
        return solution, certify_max_flow(solution, graph, source, sink)
    return _exact_route(graph, source, sink)


def exact_capacities(capacity: np.ndarray) -> tuple[np.ndarray, int, dict]:
    """Capacities as exact integers, the denominator that gives them back, and how
    they were scaled (for the certificate): decimals by ``10**d``, other fractions by
    their binary exponent."""
    decimal = common_scale(capacity)
    if decimal is not None:
        d, (ints,) = decimal
        return ints, 10**d, ({"decimal_scale": 10**d} if d else {})
    e, ints = binary_scale(capacity)
    return ints, 2**e, {"binary_exponent": e}


def _exact_route(graph: Graph, source: int, sink: int):
    solution, certificate, _, denominator, scaled = exact_max_flow(graph, source, sink)
    _report(solution, certificate, denominator, scaled)
    return solution, certificate


def exact_max_flow(graph: Graph, source: int, sink: int):
    """Solve on exact integers and certify exactly (Python ints where int64 overflows).

    Parameters
    ----------
    graph : Graph
        With ``capacity`` (0 where ``unlimited``) and ``unlimited``.
    source, sink : int

    Returns
    -------
    (solution, certificate, ints, denominator, scaled)
        The answer and its certificate in the integers ``ints`` (the capacities times
        ``denominator``), before any rounding; ``scaled`` names the scaling.
    """
    n, tail, head, unlimited = graph.num_nodes, graph.tail, graph.head, graph.unlimited
    ints, denominator, scaled = exact_capacities(graph.capacity)
    if _fits_int64(ints, unlimited):
        solution = max_flow_graph(n, tail, head, ints, unlimited, source, sink)
    else:
        ints = ints.astype(object)  # the certificate's sums in Python integers too
        solution = max_flow_wide(n, tail, head, ints, unlimited, source, sink)
    certificate = certify_max_flow(solution, graph.replace(capacity=ints), source, sink)
    return solution, certificate, ints, denominator, scaled


def _fits_int64(ints: np.ndarray, unlimited) -> bool:
    if is_object(ints):
        return False
    try:
        check_capacity_sums(ints, unlimited)
    except CapacityOverflow:
        return False
    return True


def _report(solution: MaxFlowSolution, certificate: dict, denominator: int, scaled: dict) -> None:
    """The exact integer answer in the caller's units: divided by the scale (one
    rounding per number), integers kept exact wherever JSON integers hold them."""
    solution.flows = rescale(solution.flows, 1, denominator)
    if solution.value is not None:
        solution.value = rescale(solution.value, 1, denominator)
    for name in ("flow_value", "cut_capacity"):
        if name in certificate:
            certificate[name] = rescale(certificate[name], 1, denominator)
    certificate.update(scaled)
    solution.engine = dict(solution.engine, **scaled)


def certify_max_flow(solution: MaxFlowSolution, graph: Graph, source: int, sink: int) -> dict:
    """Check a max-flow answer and return its certificate.

    A finite answer is checked by the max-flow min-cut theorem
    (:func:`~service.solvers.certificates.check_max_flow`): exactly, or, when the LP
    engine answered, in float64 to ``LP_TOLERANCE`` relative to each figure's own
    magnitude. An unbounded answer is checked by its path of arcs without a limit.

    Parameters
    ----------
    solution : MaxFlowSolution
    graph : Graph
        With the capacities the solution was computed on (scaled integers for the
        exact route), so the check compares like with like.
    source, sink : int

    Returns
    -------
    dict
        The certificate (``checked: True`` and the figures that were compared).

    Raises
    ------
    SelfCheckFailed
        The answer does not hold.
    """
    if solution.status == "unbounded":
        certificates.check_path(graph.tail, graph.head, graph.unlimited, source, sink, solution.unbounded_path)
        return {"checked": True, "unbounded_path_arcs": int(solution.unbounded_path.size)}
    relative = 0.0
    if solution.engine.get("kind") == "lp":
        # LP answers: compare in floating point, never wrap int64.
        graph = graph.replace(capacity=graph.capacity.astype(np.float64, copy=False))
        relative = LP_TOLERANCE
    return certificates.check_max_flow(graph, source, sink, solution.flows, solution.value, solution.source_side,
                                       relative)
