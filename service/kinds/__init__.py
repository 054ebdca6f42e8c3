"""Problem kinds: parse a request into a normalised problem, solve it into a response.

``KINDS`` maps the kind name (also the path segment under ``/v1/``) to its module
object. See :mod:`service.kinds.base` for the interface.
"""

from .base import Kind, Limits
from .assignment import KIND as ASSIGNMENT
from .maxflow import KIND as MAXFLOW
from .mincostflow import KIND as MINCOSTFLOW

KINDS: dict[str, Kind] = {MAXFLOW.name: MAXFLOW, MINCOSTFLOW.name: MINCOSTFLOW,
                         ASSIGNMENT.name: ASSIGNMENT}

__all__ = ["KINDS", "Kind", "Limits"]
