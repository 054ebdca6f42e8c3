"""Invented test networks (depots, cross-docks, stores); the networkx reference is tests/references.py."""

from __future__ import annotations

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
