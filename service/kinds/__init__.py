"""Problem kinds: parse a request into a normalised problem, solve it into a response.

``KINDS`` maps the kind name (also the path segment under ``/v1/``) to its module
object. See :mod:`service.kinds.base` for the interface.
"""

from .base import Kind, Limits
from .lp import KIND as LP
from .maxflow import KIND as MAXFLOW
from .multicommodity import KIND as MULTICOMMODITY

KINDS: dict[str, Kind] = {MAXFLOW.name: MAXFLOW}
KINDS[LP.name] = LP
KINDS[MULTICOMMODITY.name] = MULTICOMMODITY

__all__ = ["KINDS", "Kind", "Limits"]
