"""Problem kinds: parse a request into a normalised problem, solve it into a response.

``KINDS`` maps the kind name (also the path segment under ``/v1/``) to its module
object. See :mod:`service.kinds.base` for the interface.
"""

from .base import Kind, Limits
from .assignment import KIND as ASSIGNMENT
from .expansion import KIND as EXPANSION
from .flowovertime import KIND as FLOWOVERTIME
from .lp import KIND as LP
from .maxflow import KIND as MAXFLOW
from .mincostflow import KIND as MINCOSTFLOW
from .multicommodity import KIND as MULTICOMMODITY
from .resilience import KIND as RESILIENCE

KINDS: dict[str, Kind] = {kind.name: kind for kind in (MAXFLOW, MINCOSTFLOW, ASSIGNMENT, LP, MULTICOMMODITY,
                                                       EXPANSION, RESILIENCE, FLOWOVERTIME)}

__all__ = ["KINDS", "Kind", "Limits"]
