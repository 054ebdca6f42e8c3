"""Invented test networks (depots, cross-docks, stores) and the networkx reference for them."""

from __future__ import annotations

import networkx as nx
import numpy as np


def depot_arcs(seed: int, nodes: int = 12, arcs: int = 40, *, unlimited_share: float = 0.0) -> list[dict]:
    """Random arcs between invented sites, with keys ``lane-<i>``; parallel arcs allowed."""
    rng = np.random.default_rng(seed)
    names = [f"site-{chr(97 + i % 26)}{i // 26}" for i in range(nodes)]
    out = []
    for i in range(arcs):
        a, b = rng.choice(nodes, size=2, replace=False)
        cap = None if rng.random() < unlimited_share else int(rng.integers(1, 50))
        out.append({"from": names[a], "to": names[b], "capacity": cap, "key": f"lane-{i}"})
    return out


def nx_max_flow(arcs: list[dict], source, sink) -> float:
    """Max-flow value by networkx.maximum_flow_value (preflow-push), the reference.

    Parallel arcs are merged by summing capacities (networkx's flow functions take a
    DiGraph); an arc without capacity is unlimited (no capacity attribute).
    """
    g = nx.DiGraph()
    for arc in arcs:
        u, v, cap = arc["from"], arc["to"], arc.get("capacity")
        if u == v:
            continue
        if g.has_edge(u, v):
            old = g[u][v].get("capacity")
            if old is None or cap is None:
                g[u][v].pop("capacity", None)
            else:
                g[u][v]["capacity"] = old + cap
        elif cap is None:
            g.add_edge(u, v)
        else:
            g.add_edge(u, v, capacity=cap)
    g.add_nodes_from([source, sink])
    return nx.maximum_flow_value(g, source, sink)


def with_changes(arcs: list[dict], changes: list[dict]) -> list[dict]:
    """The arcs a what-if describes, built the slow and obvious way (one dict per arc)."""
    out = [dict(a) for a in arcs]
    by_key = {a.get("key"): i for i, a in enumerate(arcs)}
    for change in changes:
        i = change["arc"] if "arc" in change else by_key[change["key"]]
        if change.get("closed"):
            out[i]["capacity"] = 0
        if "capacity" in change:
            out[i]["capacity"] = change["capacity"]
        if "cost" in change:
            out[i]["cost"] = change["cost"]
    return out
