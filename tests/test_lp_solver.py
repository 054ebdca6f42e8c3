"""The LP engine against scipy's HiGHS, textbook shadow prices, finite differences and
LP duality theory; the dual sign convention on both senses and both bound sides."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.sparse as sp

from service.deadline import Deadline
from service.solvers.lp import LPModel, solve_certified, solve_lp
from tests.lp_reference import INF, duality_figures, linprog_row_duals, linprog_solve, random_model


def lp_model(model: dict) -> LPModel:
    return LPModel(np.asarray(model["c"], float), sp.csr_matrix(np.asarray(model["A"], float)),
                   np.asarray(model["row_lower"], float), np.asarray(model["row_upper"], float),
                   np.asarray(model["col_lower"], float), np.asarray(model["col_upper"], float),
                   model["maximize"])


def model_of(c, A, rl, ru, cl, cu, maximize=False) -> dict:
    return {"c": np.array(c, float), "A": np.array(A, float).reshape(len(rl), len(c)),
            "row_lower": np.array(rl, float), "row_upper": np.array(ru, float),
            "col_lower": np.array(cl, float), "col_upper": np.array(cu, float), "maximize": maximize}


def objective_after(model: dict, key: str, index: int, delta: float):
    """Optimal objective (scipy HiGHS) after moving one bound by ``delta``."""
    moved = {k: (v.copy() if isinstance(v, np.ndarray) else v) for k, v in model.items()}
    moved[key][index] += delta
    if key.startswith("row") and model["row_lower"][index] == model["row_upper"][index]:
        other = "row_upper" if key == "row_lower" else "row_lower"
        moved[other][index] += delta  # an equality moves as a whole
    return linprog_solve(moved)[1]


# --------------------------------------------------------------------------- sign convention

# One variable, one row or bound: the expected dual is d objective / d bound, by hand.
ROW_CASES = [
    # (sense, c, row lower, row upper, expected dual): min x s.t. x >= 2 -> objective 2 + delta
    (False, 1.0, 2.0, INF, 1.0),
    (True, -1.0, 2.0, INF, -1.0),  # max -x s.t. x >= 2: objective -2 - delta
    (True, 1.0, -INF, 3.0, 1.0),  # max x s.t. x <= 3: objective 3 + delta
    (False, -1.0, -INF, 3.0, -1.0),  # min -x s.t. x <= 3: objective -3 - delta
]


@pytest.mark.parametrize("maximize,c,lo,up,expected", ROW_CASES)
def test_glop_row_dual_signs_measured(maximize, c, lo, up, expected):
    """GLOP's row duals through model_builder_helper already follow the convention in
    both senses and on both bound sides (measured; the service flips no sign)."""
    sol = solve_lp(np.array([c]), sp.csr_matrix([[1.0]]), np.array([lo]), np.array([up]),
                   np.array([-INF]), np.array([INF]), maximize=maximize)
    assert sol.status == "optimal"
    assert sol.row_duals[0] == pytest.approx(expected)
    model = model_of([c], [[1.0]], [lo], [up], [-INF], [INF], maximize)
    key = "row_lower" if math.isfinite(lo) else "row_upper"
    finite_difference = (objective_after(model, key, 0, 1e-3) - sol.objective) / 1e-3
    assert finite_difference == pytest.approx(expected, abs=1e-6)


COLUMN_CASES = [
    (False, 1.0, 2.0, INF, 1.0),  # min x, x >= 2
    (True, -1.0, 2.0, INF, -1.0),  # max -x, x >= 2
    (True, 1.0, 0.0, 3.0, 1.0),  # max x, x <= 3
    (False, -1.0, 0.0, 3.0, -1.0),  # min -x, x <= 3
]


@pytest.mark.parametrize("maximize,c,lo,up,expected", COLUMN_CASES)
def test_glop_reduced_cost_signs_measured(maximize, c, lo, up, expected):
    sol = solve_lp(np.array([c]), sp.csr_matrix((0, 1)), np.empty(0), np.empty(0),
                   np.array([lo]), np.array([up]), maximize=maximize)
    assert sol.status == "optimal"
    assert sol.reduced_costs[0] == pytest.approx(expected)


def optimal_models(first_seed: int, count: int, n: int, m: int):
    """The first ``count`` random models (alternating senses) that scipy solves to optimality."""
    seed = first_seed
    while count:
        model = random_model(np.random.default_rng(seed), n, m, maximize=bool(seed % 2))
        seed += 1
        if linprog_solve(model)[0].status == 0:
            count -= 1
            yield model


def test_duals_are_finite_differences_when_unique():
    """Where the certificate proves the duals unique (non-degenerate optimum), each
    dual equals the one-sided finite differences (re-solved by scipy HiGHS) in both
    directions, and equals scipy's marginals turned into the same convention."""
    checked = 0
    eps = 1e-4
    for model in optimal_models(100, 12, 6, 5):
        result = solve_certified(lp_model(model))
        assert result.status == "optimal"
        if not result.certificate["duals_unique"]:
            continue  # degenerate: one-sided differences may differ from each other
        checked += 1
        res, objective = linprog_solve(model)
        assert linprog_row_duals(model, res) == pytest.approx(result.duals, abs=1e-6)
        s = -1.0 if model["maximize"] else 1.0
        for i in range(len(model["row_lower"])):
            equality = model["row_lower"][i] == model["row_upper"][i]
            for key in ("row_lower", "row_upper"):
                if not math.isfinite(model[key][i]):
                    continue
                points_here = (s * result.duals[i] > 0) == (key == "row_lower")
                expected = result.duals[i] if equality or points_here else 0.0
                up = (objective_after(model, key, i, eps) - objective) / eps
                down = (objective - objective_after(model, key, i, -eps)) / eps
                assert up == pytest.approx(expected, abs=1e-5)
                assert down == pytest.approx(expected, abs=1e-5)
    assert checked >= 4  # not vacuous: most of these models have unique duals


def test_duals_are_subgradients_even_when_degenerate():
    """LP duality: any optimal dual is a (super)gradient of the optimal value as a
    function of the bounds, so v(b + t) >= v(b) + y t for min (<= for max) for every
    step t, degenerate or not."""
    for model in optimal_models(300, 10, 5, 6):
        result = solve_certified(lp_model(model))
        assert result.status == "optimal"
        s = -1.0 if model["maximize"] else 1.0
        for i in range(len(model["row_lower"])):
            key = "row_upper" if math.isfinite(model["row_upper"][i]) else "row_lower"
            for step in (0.5, -0.5):
                moved = objective_after(model, key, i, step)
                if moved is None:
                    continue  # the step made the model infeasible or unbounded: nothing to compare
                assert s * (moved - result.objective) >= s * result.duals[i] * step - 1e-6


# --------------------------------------------------------------------------- reference solver


@pytest.mark.parametrize("seed", range(40))
def test_random_lps_against_scipy_highs(seed):
    """Same status and objective as scipy.optimize.linprog(method="highs"); primal
    feasibility, strong duality with the returned duals and complementary slackness
    recomputed in the test (tests/lp_reference.py)."""
    rng = np.random.default_rng(seed)
    n, m = int(rng.integers(2, 25)), int(rng.integers(1, 20))
    model = random_model(rng, n, m, maximize=bool(seed % 2), feasible=seed % 7 != 3)
    res, objective = linprog_solve(model)
    result = solve_certified(lp_model(model))
    expected = {0: "optimal", 2: "infeasible", 3: "unbounded"}[res.status]
    assert result.status == expected
    assert result.certificate["checked"] is True
    if expected != "optimal":
        return
    assert result.objective == pytest.approx(objective, rel=1e-7, abs=1e-7)
    fig = duality_figures(model, result.x, result.duals, result.reduced_costs)
    assert fig["primal_violation"] <= 1e-7
    assert fig["stationarity"] <= 1e-7
    assert fig["sign_error"] <= 1e-9
    assert fig["dual_objective"] == pytest.approx(fig["primal_objective"], rel=1e-8, abs=1e-7)
    assert fig["complementarity"] <= 1e-7


def test_random_models_cover_every_status():
    statuses = set()
    for seed in range(40):
        rng = np.random.default_rng(seed)
        n, m = int(rng.integers(2, 25)), int(rng.integers(1, 20))
        model = random_model(rng, n, m, maximize=bool(seed % 2), feasible=seed % 7 != 3)
        statuses.add(linprog_solve(model)[0].status)
    assert statuses == {0, 2, 3}


# --------------------------------------------------------------------------- textbook


def test_wyndor_glass_shadow_prices():
    """Hillier & Lieberman, Introduction to Operations Research, the Wyndor Glass Co.
    product-mix example (chapter 3; its shadow prices in chapter 4) - recalled from memory:
    max 3x1 + 5x2 s.t. x1 <= 4, 2x2 <= 12, 3x1 + 2x2 <= 18; optimum (2, 6), Z = 36,
    shadow prices 0, 3/2, 1."""
    model = model_of([3, 5], [[1, 0], [0, 2], [3, 2]], [-INF] * 3, [4, 12, 18], [0, 0], [INF, INF], True)
    result = solve_certified(lp_model(model))
    assert result.status == "optimal"
    assert result.objective == pytest.approx(36)
    assert result.x == pytest.approx([2, 6])
    assert result.duals == pytest.approx([0, 1.5, 1])
    assert result.certificate["duals_unique"] is True
    # The same plant as a cost minimisation (objective negated): the duals change sign,
    # since they are the change of *this* objective per unit of capacity.
    model["c"], model["maximize"] = -model["c"], False
    result = solve_certified(lp_model(model))
    assert result.objective == pytest.approx(-36)
    assert result.duals == pytest.approx([0, -1.5, -1])


def test_chvatal_first_example_duals():
    """Chvatal, Linear Programming (1983), the opening example of chapter 2 - recalled
    from memory: max 5x1 + 4x2 + 3x3 s.t. 2x1 + 3x2 + x3 <= 5, 4x1 + x2 + 2x3 <= 11,
    3x1 + 4x2 + 2x3 <= 8; optimum x = (2, 0, 1), z = 13. The dual values (1, 0, 1) and
    the reduced cost -3 of x2 follow from it (checked here against scipy too)."""
    model = model_of([5, 4, 3], [[2, 3, 1], [4, 1, 2], [3, 4, 2]], [-INF] * 3, [5, 11, 8], [0] * 3, [INF] * 3,
                     True)
    result = solve_certified(lp_model(model))
    assert result.objective == pytest.approx(13)
    assert result.x == pytest.approx([2, 0, 1])
    assert result.duals == pytest.approx([1, 0, 1])
    assert result.reduced_costs == pytest.approx([0, -3, 0])
    res, _ = linprog_solve(model)
    assert linprog_row_duals(model, res) == pytest.approx([1, 0, 1])


# --------------------------------------------------------------------------- statuses


def test_presolve_reports_an_unbounded_model_as_infeasible_and_we_do_not():
    """min -x - y s.t. x - y <= 1, x, y >= 0 is unbounded (x = y + 1 grows without
    limit). GLOP's presolve says infeasible (measured on OR-Tools 9.15); the certified
    front re-solves and proves unboundedness with a feasible point and a ray."""
    model = model_of([-1, -1], [[1, -1]], [-INF], [1], [0, 0], [INF, INF])
    raw = solve_lp(model["c"], sp.csr_matrix(model["A"]), model["row_lower"], model["row_upper"],
                   model["col_lower"], model["col_upper"], confirm=False)
    assert raw.status == "infeasible"  # what presolve alone says
    assert linprog_solve(model)[0].status == 3  # scipy: unbounded
    result = solve_certified(lp_model(model))
    assert result.status == "unbounded"
    r, x0 = result.ray, result.x
    assert x0 @ [1, -1] <= 1 + 1e-9 and (x0 >= -1e-9).all()
    assert r @ [1, -1] <= 1e-9 and (r >= -1e-9).all() and model["c"] @ r < 0


def test_primal_and_dual_infeasible_model_is_infeasible():
    """min -x1 - x2 s.t. x1 - x2 >= 1, -x1 + x2 >= 1: no feasible point (the rows add up
    to 0 >= 2) and no dual feasible point either. It is infeasible, not unbounded."""
    model = model_of([-1, -1], [[1, -1], [-1, 1]], [1, 1], [INF, INF], [0, 0], [INF, INF])
    assert linprog_solve(model)[0].status == 2
    result = solve_certified(lp_model(model))
    assert result.status == "infeasible"
    # the rows cannot both hold: 2 units short in total, each relative to 1 + |1|
    assert result.certificate["least_total_violation"] == pytest.approx(2 / 2)
    assert sorted(result.conflict_rows.tolist()) == [0, 1]


def test_free_variable_unbounded_maximisation():
    model = model_of([1, 2], [[1, 1]], [-INF], [4], [-INF, 0], [INF, INF], True)
    result = solve_certified(lp_model(model))
    assert result.status == "unbounded"  # x2 = 4 - x1 grows as x1 falls
    assert model["c"] @ result.ray > 0


def test_degenerate_vertex_flags_non_unique_duals():
    """max x + y s.t. x + y <= 2, x <= 1, y <= 1: three rows meet at (1, 1), so the
    optimum is degenerate and the duals are not unique ((1, 0, 0) and (0, 1, 1) are both
    optimal). Finite differences show it: raising x + y <= 2 gains nothing, lowering it
    loses 1 - no single price holds both ways."""
    model = model_of([1, 1], [[1, 1], [1, 0], [0, 1]], [-INF] * 3, [2, 1, 1], [0, 0], [INF, INF], True)
    result = solve_certified(lp_model(model))
    assert result.status == "optimal" and result.objective == pytest.approx(2)
    assert result.certificate["degenerate"] is True
    assert result.certificate["duals_unique"] is False
    up = objective_after(model, "row_upper", 0, 0.1) - 2
    down = 2 - objective_after(model, "row_upper", 0, -0.1)
    assert up == pytest.approx(0) and down == pytest.approx(0.1)


def test_time_limit_status():
    rng = np.random.default_rng(0)
    n, m = 3000, 1500
    A = sp.random(m, n, density=0.01, random_state=1, format="csr")
    x0 = rng.uniform(0, 1, n)
    model = LPModel(-rng.uniform(0, 1, n), A, np.full(m, -INF), A @ x0 + 1, np.zeros(n), np.full(n, 10.0))
    result = solve_certified(model, deadline=Deadline.after(0.01))  # the full solve takes about 2 s here
    assert result.status == "time_limit"
    assert result.certificate["checked"] is False


def test_infeasibility_in_small_units_next_to_a_big_row():
    """x >= 3 and x <= 2 written in thousandths (0.001 x >= 0.003, 0.001 x <= 0.002) next
    to a row with bound 1e5: the violation, 0.001 in absolute terms, is large for its own
    row. A tolerance taken from the biggest row (1e-6 x 1e5 = 0.1) would call it feasible."""
    model = model_of([1, 1], [[1000, 0], [0, 0.001], [0, 0.001]], [-INF, 0.003, -INF], [1e5, INF, 0.002],
                     [0, 0], [INF, INF], True)
    assert linprog_solve(model)[0].status == 2
    result = solve_certified(lp_model(model))
    assert result.status == "infeasible"
    assert sorted(result.conflict_rows.tolist()) == [1, 2]


@pytest.mark.parametrize("seed", range(30))
def test_badly_scaled_models_against_scipy_highs(seed):
    """Rows scaled by 1e-3..1e3 and variables by 1e-2..1e2 (the same models in other
    units): same status and objective as scipy HiGHS wherever HiGHS answers."""
    rng = np.random.default_rng(2000 + seed)
    n, m = int(rng.integers(2, 30)), int(rng.integers(1, 30))
    model = random_model(rng, n, m, maximize=bool(seed % 2), feasible=seed % 5 != 0)
    rows = 10.0 ** rng.integers(-3, 4, size=model["A"].shape[0])
    cols = 10.0 ** rng.integers(-2, 3, size=n)
    model["A"] = model["A"] * rows[:, None] / cols
    model["row_lower"], model["row_upper"] = model["row_lower"] * rows, model["row_upper"] * rows
    model["c"] = model["c"] * 10.0 ** rng.integers(-3, 5) / cols
    model["col_lower"], model["col_upper"] = model["col_lower"] * cols, model["col_upper"] * cols
    res, objective = linprog_solve(model)
    if res.status == 4:
        pytest.skip("HiGHS reports numerical difficulties: no reference answer")
    result = solve_certified(lp_model(model))
    assert result.status == {0: "optimal", 2: "infeasible", 3: "unbounded"}[res.status]
    if res.status == 0:
        assert result.objective == pytest.approx(objective, rel=1e-6, abs=1e-6)
