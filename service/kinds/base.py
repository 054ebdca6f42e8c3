"""What every problem kind provides, and helpers they share.

A *kind* turns a decoded JSON request into a normalised problem (``parse``) and a
problem into a response document (``solve``). The HTTP layer, batches and jobs all
go through this interface, so a new problem kind is one module here plus its entry in
:data:`service.kinds.KINDS`.
"""

from __future__ import annotations

from dataclasses import dataclass
from operator import itemgetter
from typing import Any, Protocol

import numpy as np

from ..errors import InputError
from ..model.ids import NodeIndex, lookalike, shown_id


@dataclass(frozen=True)
class Limits:
    """Size and time limits applied while parsing and solving."""

    max_arcs: int = 5_000_000
    max_nodes: int = 5_000_000
    time_limit: float = 30.0
    max_commodities: int = 1_000
    max_batch_items: int = 100
    #: Flows over time: horizon x (arcs + nodes), the size of the time-expanded network.
    #: 5M is about four times a 10,000-lane network over 100 periods (a few seconds, a few
    #: hundred MB); larger ones are refused with a 413 naming ``horizon``.
    max_expanded: int = 5_000_000


class Problem(Protocol):
    digest: str
    options: dict


class Kind(Protocol):
    name: str
    summary: str
    request_schema: type
    response_schema: type
    example: str  # scenario file name

    def parse(self, body: Any, limits: Limits) -> Problem: ...

    def solve(self, problem: Problem, limits: Limits) -> dict: ...

    # Optional, for kinds that can be asked of a stored network (maxflow, mincostflow):
    # build a problem from an already-normalised Network and a query body (source/sink,
    # or supplies, plus options) without re-parsing the arcs.
    # def from_network(self, network: Network, query: Any, limits: Limits) -> Problem: ...


def ids_of(nodes: NodeIndex, indices: np.ndarray):
    """Node ids for an array of node indices, without a per-node Python loop."""
    if nodes.kind is int:
        return np.asarray(nodes.ids, dtype=np.int64)[indices]
    if indices.size == 0:
        return []
    if indices.size == 1:
        return [nodes.ids[int(indices[0])]]
    return list(itemgetter(*indices.tolist())(nodes.ids))


def node_position(nodes: NodeIndex, node_id, ptr: str) -> int:
    index = nodes.index_of(node_id)
    if index is None:
        raise InputError.at(ptr, f"unknown node {shown_id(node_id)}: it is neither in nodes nor on any arc"
                                 f"{lookalike(node_id, nodes.ids)}")
    return index


def time_limit(options: dict, limits: Limits) -> float:
    asked = options.get("time_limit")
    return limits.time_limit if asked is None else min(float(asked), limits.time_limit)


def digest_detail(options: dict, default) -> list | None:
    """``options.detail`` as the digest sees it: ``None`` when it names the default
    parts (in any order), so asking for the default equals leaving it out."""
    detail = options.get("detail")
    return None if detail is None or set(detail) == set(default) else detail


def stop_grace(kind, seconds: float) -> float:
    """Seconds past its time limit before a solve is killed: a kind whose solver stops
    itself at the limit (``honours_time_limit``: GLOP, the MIP engines) gets time to
    return its own answer (``time_limit``, or a plan so far); the others are killed at it."""
    return min(10.0, max(2.0, 0.5 * seconds)) if getattr(kind, "honours_time_limit", False) else 0.0


def wants(options: dict, part: str) -> bool:
    detail = options.get("detail")
    return detail is None or part in detail
