"""Solvers: plain functions over numpy arrays, each checking its own answer.

The front functions here pick an engine, run it, and certify the result; the
modules behind them hold one algorithm each. Nothing in this package imports Flask
or the HTTP layer.

Public surface
--------------
maximum_flow
    Max-flow with a minimum cut, on the graph engine (exact integers, or exact
    decimal scaling) or the LP engine (GLOP, stated tolerance).
MaxFlowSolution
"""

from __future__ import annotations

from .front import EngineChoice, maximum_flow
from .maxflow_graph import MaxFlowSolution

__all__ = ["EngineChoice", "MaxFlowSolution", "maximum_flow"]
