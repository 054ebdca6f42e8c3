"""Solvers: plain functions over numpy arrays, each checking its own answer.

The front functions here pick an engine, run it, and certify the result; the
modules behind them hold one algorithm each. Nothing in this package imports Flask
or the HTTP layer.

Public surface
--------------
Graph
    The one graph type: a network as aligned arrays (tail, head, capacity,
    unlimited, cost, lower), taken by every front below.
maximum_flow
    Max-flow with a minimum cut, on the graph engine (exact integers, or exact
    decimal scaling) or the LP engine (GLOP, stated tolerance).
MaxFlowSolution
solve_certified, LPModel, LPResult
    A linear program on GLOP, certified whatever its status (optimal: residuals, gap,
    complementary slackness; infeasible and unbounded: proofs of their own).
multicommodity_flow
    Commodities sharing arc capacities: min-cost or max-throughput, capacity prices.
min_cost_flow
    Min-cost flow with lower bounds, shortage modes, potentials, infeasibility proof
    sets and negative unlimited cycles (graph engine, exact scaling, or LP).
solve_assignment
    Assignment (rectangular, forbidden pairs, maximize, required side) with duals.
MinCostSolution, AssignmentSolution
"""

from __future__ import annotations

from .front import EngineChoice, maximum_flow
from .graph import Graph
from .lp import LPModel, LPResult, solve_certified
from .maxflow_graph import MaxFlowSolution
from .multicommodity import multicommodity_flow
from .mincost import MinCostSolution, min_cost_flow
from .assignment import AssignmentSolution, solve_assignment

__all__ = ["AssignmentSolution", "EngineChoice", "Graph", "LPModel", "LPResult", "MaxFlowSolution", "MinCostSolution",
           "maximum_flow", "min_cost_flow", "multicommodity_flow", "solve_assignment", "solve_certified"]
