"""SVG diagrams of solved networks, with no HTTP in them: numpy and plain data in, text out.

``draw(drawer, network, result)`` draws ``result`` (an answer as a client receives it,
a JSON document) on a :class:`DrawnNetwork`. What differs between kinds is a
:class:`Drawer`, one module per drawn kind (its ``DRAWER``); a kind declares the one it
is drawn with (in its :attr:`service.kinds.base.Kind.picture`), so no list of drawn kinds is
kept here:

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
from .flowovertime import FlowOverTimeDrawer
from .scene import draw as _draw


def draw(drawer: Drawer | FlowOverTimeDrawer, network: DrawnNetwork, result: dict) -> str:
    """The SVG document of a solved network.

    Parameters
    ----------
    drawer : Drawer or FlowOverTimeDrawer
        The drawn kind's drawer (of its :attr:`service.kinds.base.Kind.picture`).
    network : DrawnNetwork
        The problem's network (and supplies, or source and sink).
    result : dict
        The answer as JSON values (lists, not arrays; ids as the client sent them).

    Returns
    -------
    str
        A standalone SVG document (``image/svg+xml``).
    """
    if hasattr(drawer, "render"):  # a picture of its own (flows over time: lanes against periods)
        return drawer.render(network, result)
    return _draw(drawer, network, result)


__all__ = ["Drawer", "DrawnNetwork", "FlowOverTimeDrawer", "Marks", "draw"]
