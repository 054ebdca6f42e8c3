"""The networkx references for max-flow and min-cost flow, written once for every test.

Max-flow source: ``networkx.maximum_flow`` / ``networkx.maximum_flow_value`` (preflow-push by
default). networkx's flow functions take a ``DiGraph``, so parallel arcs are merged by
summing their capacities, which keeps the max-flow value (a cut's capacity is the sum
of its arcs' either way); an arc without a capacity (``None``) is unlimited, networkx's
convention being an arc with no ``capacity`` attribute; self-loops carry no s-t flow
and are left out.

Min-cost flow source: ``networkx.network_simplex`` (:func:`min_cost_flow`,
:func:`min_cost_flow_cost`) on a ``MultiDiGraph`` keyed by each arc's position, so
parallel arcs stay apart and each gets its own flow back; node ``demand`` is minus the
supply (networkx's sign). network_simplex leaves self-loops out of the simplex, so they
are settled here, as the min-cost flow problem reads them: one of negative cost is
filled to its capacity (its cost counted), or makes the problem unbounded when it has
no capacity; the others carry nothing.
"""

from __future__ import annotations

import math
from collections.abc import Iterable

import networkx as nx


def arc_triples(arcs) -> list[tuple]:
    """``(from, to, capacity)`` of arcs in any form the tests write them.

    ``arcs`` is a list of arc objects (``{"from", "to", "capacity"}``), the columnar form
    (``{"from": [...], "to": [...], "capacity": [...]}``) or ``(from, to, capacity)``
    triples. A missing capacity is ``None``: no limit.
    """
    if isinstance(arcs, dict):
        capacities = arcs.get("capacity") or [None] * len(arcs["from"])
        return list(zip(arcs["from"], arcs["to"], capacities))
    return [(a["from"], a["to"], a.get("capacity")) if isinstance(a, dict) else tuple(a) for a in arcs]


def networkx_graph(arcs, nodes: Iterable = ()) -> nx.DiGraph:
    """A ``DiGraph`` of ``arcs`` (see :func:`arc_triples`), parallel arcs merged."""
    g = nx.DiGraph()
    g.add_nodes_from(nodes)
    for u, v, cap in arc_triples(arcs):
        if u == v:
            continue
        unlimited = cap is None or cap == math.inf
        if not g.has_edge(u, v):
            g.add_edge(u, v, **({} if unlimited else {"capacity": cap}))
        elif "capacity" in g[u][v]:
            if unlimited:
                del g[u][v]["capacity"]
            else:
                g[u][v]["capacity"] += cap
    return g


def max_flow_value(arcs, source, sink, nodes: Iterable = ()):
    """The maximum s-t flow value by ``networkx.maximum_flow_value``; ``inf`` when a
    path of unlimited arcs joins them (networkx's ``NetworkXUnbounded``)."""
    g = networkx_graph(arcs, nodes)
    g.add_nodes_from([source, sink])
    try:
        return nx.maximum_flow_value(g, source, sink)
    except nx.NetworkXUnbounded:
        return math.inf


def max_flow_of(body: dict):
    """:func:`max_flow_value` of a ``POST /v1/maxflow`` body (arcs in either form)."""
    nodes = body.get("nodes")
    ids = nodes["id"] if isinstance(nodes, dict) else [n["id"] if isinstance(n, dict) else n for n in nodes or ()]
    return max_flow_value(body["arcs"], body["source"], body["sink"], ids)


def max_flow(arcs, source, sink, nodes: Iterable = ()) -> tuple[float, list]:
    """A maximum flow by ``networkx.maximum_flow``: its value and the flow on each arc,
    in the order given (a merged arc's flow is handed back to its parallel arcs in order,
    each filled to its capacity before the next; self-loops carry 0).

    Raises ``networkx.NetworkXUnbounded`` when a path of unlimited arcs joins them.
    """
    triples = arc_triples(arcs)
    g = networkx_graph(triples, nodes)
    g.add_nodes_from([source, sink])
    value, flow = nx.maximum_flow(g, source, sink)
    left = {(u, v): f for u, targets in flow.items() for v, f in targets.items()}
    per_arc = []
    for u, v, cap in triples:
        share = 0 if u == v else left[u, v] if cap is None else min(cap, left[u, v])
        if u != v:
            left[u, v] -= share
        per_arc.append(share)
    return value, per_arc


def cost_arcs(arcs) -> list[tuple]:
    """``(from, to, capacity, cost)`` of arcs in any form the tests write them.

    ``arcs`` is an iterable of arc objects (``{"from", "to", "capacity", "cost"}``) or of
    ``(from, to, capacity, cost)`` tuples. A missing capacity is ``None`` (no limit), a
    missing cost 0.
    """
    return [(a["from"], a["to"], a.get("capacity"), a.get("cost", 0)) if isinstance(a, dict) else tuple(a)
            for a in arcs]


def min_cost_flow(arcs, supplies: dict, nodes: Iterable = ()) -> tuple[float, list]:
    """A min-cost flow by ``networkx.network_simplex``: its cost and the flow on each arc, in order.

    Parameters
    ----------
    arcs : iterable
        See :func:`cost_arcs`; no lower bounds (a test with them transforms them away).
    supplies : dict
        ``{node: supply}``, positive where flow starts, negative where it is needed;
        nodes not named have 0.
    nodes : iterable, optional
        Further nodes (without supply, on no arc).

    Raises
    ------
    networkx.NetworkXUnfeasible
        No flow meets the supplies.
    networkx.NetworkXUnbounded
        A cycle of unlimited arcs has negative cost (a self-loop one is found first,
        before networkx is asked).
    """
    arcs = cost_arcs(arcs)
    g = nx.MultiDiGraph()
    g.add_nodes_from(nodes)
    g.add_nodes_from(supplies)
    loops = {}
    for i, (u, v, cap, cost) in enumerate(arcs):
        if u == v:
            if cost < 0 and cap is None:
                raise nx.NetworkXUnbounded(f"arc {i} is a self-loop of negative cost and no limit")
            loops[i] = cap if cost < 0 else 0
            continue
        g.add_edge(u, v, key=i, weight=cost, **({} if cap is None else {"capacity": cap}))
    for node, supply in supplies.items():
        g.nodes[node]["demand"] = -supply
    value, flow = nx.network_simplex(g) if len(g) else (0, {})
    value += sum(arcs[i][3] * x for i, x in loops.items())
    return value, [loops[i] if i in loops else flow[u][v][i] for i, (u, v, _, _) in enumerate(arcs)]


def min_cost_flow_cost(arcs, supplies: dict, nodes: Iterable = ()):
    """The least cost of :func:`min_cost_flow` (``networkx.network_simplex``), or the
    string ``"infeasible"`` or ``"unbounded"``."""
    try:
        return min_cost_flow(arcs, supplies, nodes)[0]
    except nx.NetworkXUnfeasible:
        return "infeasible"
    except nx.NetworkXUnbounded:
        return "unbounded"
