"""The search for a whole-unit plan (:mod:`.multicommodity_whole`): the plan in hand,
the best bound, and the MIP engine run until the gap closes or the deadline passes.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from typing import Callable

from ..deadline import Deadline
from ..errors import SolverFailure
from .whole_checks import plan_cost, relative_gap
from .whole_engines import EngineResult, run_engine
from .whole_heuristic import Plan, read_plan
from .whole_model import WholeData, WholeModel, cost_phase, trivial_bound

#: Relative slack taken off a floating-point bound (the LP's, SCIP's) before it is
#: rounded to a whole unit of the objective: a bound a hair too good would be wrong.
BOUND_SLACK = 1e-9

#: ``on_progress(report)``: a dict with ``phase``, ``incumbent``, ``bound``, ``gap``, ``seconds``.
OnProgress = Callable[[dict], None]


@dataclass
class Search:
    """The best plan in hand, the best objective the engine has reported (its plan is
    read when it stops) and the best bound, in model units; reports progress."""

    data: WholeData
    model: WholeModel
    target: float
    started: float
    on_progress: OnProgress | None
    phase: str
    bound: int
    plan: Plan | None = None
    value: int | None = None  # objective of ``plan``
    found: int | None = None  # the engine's incumbent while it runs

    def better(self, a: int | None, b: int | None) -> bool:
        """Whether objective ``a`` beats ``b`` (None: no plan)."""
        return b is None or (a is not None and (a > b if self.model.maximize else a < b))

    def tighten(self, bound: int | None) -> None:
        """Take ``bound`` when it is tighter than the current bound (``None`` is ignored)."""
        if bound is not None and (bound < self.bound if self.model.maximize else bound > self.bound):
            self.bound = bound

    @property
    def best(self) -> int | None:
        """The best objective known: the engine's running incumbent or the plan in hand, whichever is better."""
        return self.found if self.better(self.found, self.value) else self.value

    @property
    def gap(self) -> float | None:
        """The relative gap between :attr:`best` and the bound; ``None`` without a plan."""
        return None if self.best is None else relative_gap(self.best, self.bound)

    def closed(self) -> bool:
        """Whether the gap is down to the target, so the search can stop."""
        return self.gap is not None and self.gap <= self.target

    def offer(self, plan: Plan) -> None:
        """Keep ``plan``, and report progress, if its objective beats the plan in hand."""
        value = plan_value(self.data, self.model, plan)
        if self.better(value, self.value):
            self.plan, self.value = plan, value
            self.report()

    def report(self) -> None:
        """Send a progress report, in the caller's units (costs unscaled).

        Does nothing without an ``on_progress`` listener.
        """
        if self.on_progress is None:
            return
        unit = 1 if self.model.maximize else 10**self.data.scale
        best = self.best
        self.on_progress({"phase": self.phase, "incumbent": None if best is None else best / unit,
                          "bound": self.bound / unit, "gap": self.gap,
                          "seconds": round(time.perf_counter() - self.started, 3)})


def plan_value(data: WholeData, model: WholeModel, plan: Plan) -> int:
    """The model's objective at ``plan``: units delivered (maximising) or scaled cost."""
    return int(plan.delivered.sum()) if model.maximize else plan_cost(data, plan.flows(data))


def run_search(search: Search, engine: str, hint, deadline: Deadline) -> EngineResult | None:
    """Run the engine on ``search.model`` until the gap closes or the time is up."""
    if search.closed() or deadline.expired():
        return None

    def on_plan(objective: float, bound: float, seconds: float) -> bool:
        """The engine's callback: record its incumbent and bound, report, and stop once closed.

        Returns
        -------
        bool
            True to stop the engine (the gap reached the target).
        """
        if math.isfinite(objective) and search.better(int(round(objective)), search.found):
            search.found = int(round(objective))
        search.tighten(engine_bound(bound, search.model))
        search.report()
        return search.closed()

    # Without a listener the engine's own gap test stops it (its bound is at least the
    # LP's), so the callback, which costs SCIP an event handler, is only for progress.
    result = run_engine(engine, search.model, hint, deadline=deadline, gap=search.target,
                        on_plan=on_plan if search.on_progress is not None else None)
    search.found = None
    search.tighten(engine_bound(result.bound, search.model))
    if result.values is not None:
        search.offer(read_plan(search.data, result.values))
    return result


def engine_bound(bound: float | None, model: WholeModel) -> int | None:
    """An engine's bound in whole model units (the objective is integral)."""
    if bound is None or not math.isfinite(bound):
        return None
    slack = BOUND_SLACK * max(1.0, abs(bound))
    return math.floor(bound + slack) if model.maximize else math.ceil(bound - slack)


def hold_delivery(search: Search, engine: str, deadline: Deadline) -> int | None:
    """max-throughput, second phase: the least cost with the delivery held. Returns
    the proven cost bound (scaled), or None when the delivery is not proven yet."""
    if not search.closed():
        return None
    data = search.data
    model = cost_phase(search.model, data, int(search.plan.delivered.sum()))
    held = Search(data, model, search.target, search.started, search.on_progress, "cost", trivial_bound(model))
    held.offer(search.plan)
    result = run_search(held, engine, search.plan.values(data), deadline)
    if result is not None and result.status == "infeasible":
        raise SolverFailure("the engine found no plan delivering as much as the plan it was given")
    search.plan = held.plan
    return held.bound
