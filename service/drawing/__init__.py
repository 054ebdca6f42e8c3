"""SVG diagrams of solved networks, with no HTTP in them: numpy and plain data in, text out.

``draw(kind, network, result)`` draws ``result`` (an answer as a client receives it,
a JSON document) on a :class:`DrawnNetwork`. What differs between kinds is a
:class:`Drawer`, one module per drawn kind, found in :data:`DRAWERS` by kind name:

- :mod:`.layout` places nodes in layers; :mod:`.routing` runs arcs around them;
- :mod:`.labels` places arc labels so that no two texts meet (:mod:`.text` says
  how wide a text is);
- :mod:`.svg` writes the document and keeps every id well-formed XML;
- :mod:`.scene` puts the parts together.

A drawer with a ``render(network, result)`` method draws the whole document itself
(:mod:`.flowovertime`: lanes against periods, not a network picture).
"""

from __future__ import annotations

from .base import Drawer, DrawnNetwork, Marks
from .expansion import DRAWER as EXPANSION
from .flowovertime import DRAWER as FLOWOVERTIME
from .flowovertime import FlowOverTimeDrawer
from .maxflow import DRAWER as MAXFLOW
from .mincostflow import DRAWER as MINCOSTFLOW
from .resilience import DRAWER as RESILIENCE
from .scene import draw as _draw

#: The drawn kinds: kind name -> its drawer.
DRAWERS: dict[str, Drawer | FlowOverTimeDrawer] = {d.kind: d for d in (MAXFLOW, MINCOSTFLOW, RESILIENCE, EXPANSION,
                                                       FLOWOVERTIME)}


def draw(kind: str, network: DrawnNetwork, result: dict) -> str:
    """The SVG document of a solved network.

    Parameters
    ----------
    kind : str
        A key of :data:`DRAWERS`.
    network : DrawnNetwork
        The problem's network (and supplies, or source and sink).
    result : dict
        The answer as JSON values (lists, not arrays; ids as the client sent them).

    Returns
    -------
    str
        A standalone SVG document (``image/svg+xml``).

    Raises
    ------
    KeyError
        ``kind`` is not drawn.
    """
    drawer = DRAWERS[kind]
    if hasattr(drawer, "render"):  # a picture of its own (flows over time: lanes against periods)
        return drawer.render(network, result)
    return _draw(drawer, network, result)


__all__ = ["DRAWERS", "Drawer", "DrawnNetwork", "Marks", "draw"]
