"""The LP certificates must fail on wrong answers (a check that cannot fail is a defect)."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp

from service.errors import SelfCheckFailed
from service.solvers import lp_checks
from service.solvers.lp import LPModel, solve_certified

INF = np.inf


@pytest.fixture
def wyndor():
    """Hillier & Lieberman's Wyndor Glass example (recalled from memory): optimum
    (2, 6), objective 36, shadow prices (0, 3/2, 1)."""
    model = LPModel(np.array([3.0, 5.0]), sp.csr_matrix([[1.0, 0], [0, 2], [3, 2]]), np.full(3, -INF),
                    np.array([4.0, 12, 18]), np.zeros(2), np.full(2, INF), maximize=True)
    return model, np.array([2.0, 6.0]), np.array([0.0, 1.5, 1.0]), np.zeros(2)


def test_the_right_answer_passes(wyndor):
    model, x, y, d = wyndor
    cert = lp_checks.check_optimal(model, x, y, d, 36.0)
    assert cert["checked"] and cert["gap"] == pytest.approx(0) and cert["duals_unique"] is True


@pytest.mark.parametrize("what,change", [
    ("infeasible primal", lambda x, y, d: (x + [0.5, 0.0], y, d)),
    ("suboptimal primal", lambda x, y, d: (np.array([2.0, 5.0]), y, d)),
    ("wrong-sign dual", lambda x, y, d: (x, -y, d)),
    ("dual off by a bit", lambda x, y, d: (x, y + [0.0, 0.1, 0.0], d)),
    ("reduced costs not c - A^T y", lambda x, y, d: (x, y, d + [0.3, 0.0])),
    ("dual of the slack row", lambda x, y, d: (x, y + [1.0, 0.0, 0.0], d + [-1.0, 0.0])),
])
def test_a_wrong_answer_fails(wyndor, what, change):
    model, x, y, d = wyndor
    bad_x, bad_y, bad_d = change(x, y, d)
    with pytest.raises(SelfCheckFailed):
        lp_checks.check_optimal(model, bad_x, bad_y, bad_d, float(model.c @ bad_x))


def test_a_wrong_objective_fails(wyndor):
    model, x, y, d = wyndor
    with pytest.raises(SelfCheckFailed):
        lp_checks.check_optimal(model, x, y, d, 35.0)


def test_dual_pointing_at_a_missing_bound_fails():
    """min x s.t. x >= 1 (no upper bound): a negative dual would claim raising a
    missing upper bound helps."""
    model = LPModel(np.array([1.0]), sp.csr_matrix([[1.0]]), np.array([1.0]), np.array([INF]),
                    np.array([-INF]), np.array([INF]))
    lp_checks.check_optimal(model, np.array([1.0]), np.array([1.0]), np.array([0.0]), 1.0)
    with pytest.raises(SelfCheckFailed):
        lp_checks.check_optimal(model, np.array([1.0]), np.array([-1.0]), np.array([2.0]), 1.0)


def test_unbounded_certificate_fails_on_a_bad_ray():
    # min -x - y s.t. x - y <= 1: the ray (1, 1) is good, (1, 0) leaves the row, (0, 0) gains nothing
    model = LPModel(np.array([-1.0, -1.0]), sp.csr_matrix([[1.0, -1.0]]), np.array([-INF]), np.array([1.0]),
                    np.zeros(2), np.full(2, INF))
    start = np.zeros(2)
    assert lp_checks.check_unbounded(model, start, np.array([1.0, 1.0]))["checked"]
    with pytest.raises(SelfCheckFailed):
        lp_checks.check_unbounded(model, start, np.array([1.0, 0.0]))
    with pytest.raises(SelfCheckFailed):
        lp_checks.check_unbounded(model, start, np.array([0.0, 0.0]))
    with pytest.raises(SelfCheckFailed):
        lp_checks.check_unbounded(model, np.array([3.0, 0.0]), np.array([1.0, 1.0]))  # start infeasible


def test_uniqueness_is_not_claimed_for_a_degenerate_vertex():
    # min x s.t. x >= 0 as a row and as a bound: any split y + d = 1, y, d >= 0 is optimal
    model = LPModel(np.array([1.0]), sp.csr_matrix([[1.0]]), np.array([0.0]), np.array([INF]),
                    np.array([0.0]), np.array([INF]))
    cert = solve_certified(model).certificate
    assert cert["degenerate"] is True and cert["duals_unique"] is False


def test_uniqueness_needs_full_rank():
    """Two identical rows x + y <= 1 with x, y interior (objective parallel to the rows):
    as many interior variables as active rows, but the rows are dependent, so the split
    of the price between them is free: not unique."""
    model = LPModel(np.array([1.0, 1.0]), sp.csr_matrix([[1.0, 1.0], [1.0, 1.0]]), np.full(2, -INF),
                    np.ones(2), np.zeros(2), np.full(2, INF), maximize=True)
    x = np.array([0.5, 0.5])
    act = model.matrix @ x
    unique, degenerate = lp_checks.duals_uniqueness(model, x, np.array([0.5, 0.5]), act, 1e-9, 1e-9, 1e-9)
    assert unique is False and degenerate is False
