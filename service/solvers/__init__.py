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
min_cost_flow
    Min-cost flow with lower bounds, shortage modes, potentials, infeasibility proof
    sets and negative unlimited cycles (graph engine, exact scaling, or LP).
solve_assignment
    Assignment (rectangular, forbidden pairs, maximize, required side) with duals.
MinCostSolution, AssignmentSolution
"""

from __future__ import annotations

from .front import EngineChoice, maximum_flow
from .maxflow_graph import MaxFlowSolution
from .mincost import MinCostSolution, min_cost_flow
from .assignment import AssignmentSolution, solve_assignment

__all__ = ["AssignmentSolution", "EngineChoice", "MaxFlowSolution", "MinCostSolution", "maximum_flow",
           "min_cost_flow", "solve_assignment"]
