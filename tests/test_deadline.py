"""The one time budget of a solve (:mod:`service.deadline`): made once, read everywhere."""

from __future__ import annotations

import pickle
import time

import orjson
import pytest

from service.deadline import Deadline, expired, remaining
from service.jobs.runner import SolverPool, unpack
from service.kinds import KINDS, Limits
from tests.conftest import scenario


def test_a_deadline_counts_down_from_its_budget():
    deadline = Deadline.after(30)
    assert deadline.seconds == 30.0
    assert 29.0 < deadline.remaining() <= 30.0 and not deadline.expired()
    past = Deadline(time.monotonic() - 1.0, 5.0)
    assert past.remaining() == 0.0 and past.expired()  # never a negative budget
    assert remaining(None) is None and not expired(None)  # no deadline: no limit
    with pytest.raises(AttributeError):  # immutable: a deadline is made once
        deadline.at = 0.0  # type: ignore[misc]


def test_within_takes_the_earlier_and_reports_what_is_left():
    batch = Deadline.after(30)
    item = batch.within(2)  # the item asked for 2 s inside a 30 s batch
    assert item.at < batch.at and item.seconds == pytest.approx(2.0, abs=0.05)
    late = batch.within(100)  # asking for more than the batch has left gets the batch's end
    assert late.at == batch.at and late.seconds == pytest.approx(batch.remaining(), abs=0.05)
    assert batch.within(None).at == batch.at


def test_a_deadline_is_the_same_instant_after_pickling():
    deadline = Deadline.after(12.5)
    assert pickle.loads(pickle.dumps(deadline)) == deadline


def test_a_solver_process_reads_the_deadline_it_was_sent_not_a_fresh_limit():
    """The child solves under the caller's instant (one monotonic clock per host): a
    deadline already past makes GLOP answer ``time_limit`` at once, within the grace,
    where a child that started a budget of its own would have solved the LP."""
    kind = KINDS["lp"]
    problem = kind.parse(scenario("depots-lp.json"), Limits())
    assert kind.solve(problem, Deadline.after(60))["status"] == "optimal"
    pool = SolverPool(1)
    try:
        gone = Deadline(time.monotonic() - 0.001, 30.0)
        reply, _ = unpack(pool.run(("solve", kind.name, problem, None), deadline=gone, grace=30.0, wait=120))
        fresh, _ = unpack(pool.run(("solve", kind.name, problem, None), deadline=Deadline.after(60), wait=120))
    finally:
        pool.close()
    assert reply["status"] == "time_limit" and reply["certificate"]["checked"] is False
    assert fresh["status"] == "optimal"


def test_a_job_gets_its_deadline_from_its_budget_when_its_solver_process_is_ready():
    """``budget`` seconds become one Deadline in the runner, sent with the job: a budget
    of none is already over when the child solves (GLOP answers ``time_limit`` in the
    grace), one of a minute is not."""
    kind = KINDS["lp"]
    body = orjson.dumps(scenario(kind.example))
    pool = SolverPool(1)
    try:
        over, _ = unpack(pool.run(("job", kind.name, body, Limits()), budget=0.0, grace=30.0, wait=120))
        ample, _ = unpack(pool.run(("job", kind.name, body, Limits()), budget=60.0, wait=120))
    finally:
        pool.close()
    assert over["status"] == "time_limit"
    assert ample["status"] == "optimal"
