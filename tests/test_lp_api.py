"""POST /v1/lp through the Flask test client: answers, forms, limits and bad input."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import scipy.sparse as sp

from service.api import create_app
from service.errors import InputError
from service.kinds import Limits
from service.kinds.lp import parse
from tests.conftest import scenario
from tests.lp_reference import duality_figures, linprog_solve, random_model, to_request
from tests.http import pointers, post


def scenario_as_model(body: dict) -> dict:
    names = [v["id"] for v in body["variables"]]
    A = np.array([[c["terms"].get(v, 0) for v in names] for c in body["constraints"]], float)
    inf = math.inf
    return {
        "c": np.array([body["objective"]["terms"].get(v, 0) for v in names], float), "A": A,
        "row_lower": np.array([c.get("lower", c.get("equals", -inf)) for c in body["constraints"]], float),
        "row_upper": np.array([c.get("upper", c.get("equals", inf)) for c in body["constraints"]], float),
        "col_lower": np.array([v.get("lower", 0) for v in body["variables"]], float),
        "col_upper": np.array([inf if v.get("upper") is None else v["upper"] for v in body["variables"]], float),
        "maximize": body["objective"]["sense"] == "max",
    }


def test_scenario_against_scipy(client):
    body = scenario("depots-lp.json")
    r = post(client, "/v1/lp", body)
    assert r.status_code == 200
    out = r.get_json()
    model = scenario_as_model(body)
    _, objective = linprog_solve(model)
    assert out["status"] == "optimal"
    assert out["objective"] == pytest.approx(objective)
    names = [v["id"] for v in body["variables"]]
    rows = [c["id"] for c in body["constraints"]]
    fig = duality_figures(model, [out["values"][v] for v in names], [out["duals"][c] for c in rows],
                          [out["reduced_costs"][v] for v in names])
    assert fig["primal_violation"] <= 1e-9 and fig["stationarity"] <= 1e-9
    assert fig["dual_objective"] == pytest.approx(objective)
    cert = out["certificate"]
    assert cert["checked"] is True and {"primal_residual", "dual_residual", "gap"} <= set(cert)
    assert out["digest"].startswith("sha256:") and out["engine"]["kind"] == "lp"


def test_matrix_form_gives_the_same_answer_and_digest(client):
    a = post(client, "/v1/lp", scenario("depots-lp.json")).get_json()
    b = post(client, "/v1/lp", scenario("depots-lp-matrix.json")).get_json()
    assert b["status"] == "optimal"
    for key in ("objective", "values", "duals", "reduced_costs", "digest"):
        assert a[key] == b[key]


@pytest.mark.parametrize("seed", range(6))
def test_random_lps_over_http(client, seed):
    """End to end against scipy HiGHS: same status and objective."""
    rng = np.random.default_rng(1000 + seed)
    model = random_model(rng, 8, 6, maximize=bool(seed % 2), feasible=seed != 4)
    res, objective = linprog_solve(model)
    out = post(client, "/v1/lp", to_request(model)).get_json()
    assert out["status"] == {0: "optimal", 2: "infeasible", 3: "unbounded"}[res.status]
    if res.status == 0:
        assert out["objective"] == pytest.approx(objective, abs=1e-7)


def test_constant_and_equals(client):
    body = {"objective": {"sense": "min", "terms": {"x": 2, "y": 3}, "constant": 10},
            "variables": [{"name": "x"}, {"name": "y"}],
            "constraints": [{"name": "total", "terms": {"x": 1, "y": 1}, "equals": 4},
                            {"name": "y-floor", "terms": {"y": 1}, "lower": 1}]}
    out = post(client, "/v1/lp", body).get_json()
    assert out["objective"] == pytest.approx(10 + 2 * 3 + 3 * 1)
    assert out["duals"] == pytest.approx({"total": 2, "y-floor": 1})


def test_unbounded_and_infeasible_over_http(client):
    unbounded = {"objective": {"sense": "min", "terms": {"x": -1, "y": -1}},
                 "variables": [{"name": "x"}, {"name": "y"}],
                 "constraints": [{"name": "c", "terms": {"x": 1, "y": -1}, "upper": 1}]}
    out = post(client, "/v1/lp", unbounded).get_json()
    assert out["status"] == "unbounded" and out["objective"] is None
    d = out["ray"]["direction"]
    assert d.get("x", 0) - d.get("y", 0) <= 1e-9 and -(d.get("x", 0) + d.get("y", 0)) < 0
    infeasible = {"objective": {"sense": "max", "terms": {"x": 1}}, "variables": [{"name": "x", "upper": 1}],
                  "constraints": [{"name": "too-much", "terms": {"x": 1}, "lower": 3}]}
    out = post(client, "/v1/lp", infeasible).get_json()
    assert out["status"] == "infeasible"
    assert out["infeasibility"]["constraints"] == ["too-much"]
    assert out["infeasibility"]["variables"] == ["x"]
    # x <= 1 against x >= 3: violated by 2 at best, relative to 1 + |3|
    assert out["certificate"]["least_total_violation"] == pytest.approx(2 / 4)


def test_detail_option(client):
    body = scenario("depots-lp.json") | {"options": {"detail": ["values"]}}
    out = post(client, "/v1/lp", body).get_json()
    assert "values" in out and "duals" not in out and "reduced_costs" not in out


def test_server_time_limit_caps_the_request(tmp_path):
    rng = np.random.default_rng(0)
    n, m = 3000, 1500
    A = sp.random(m, n, density=0.01, random_state=1, format="coo")
    x0 = rng.uniform(0, 1, n)
    body = {
        "objective": {"sense": "max", "coefficients": rng.uniform(0, 1, n).tolist()},
        "variables": {"name": [f"v{j}" for j in range(n)], "upper": [10.0] * n},
        "constraints": {"name": [f"r{i}" for i in range(m)], "upper": (A.tocsr() @ x0 + 1).tolist()},
        "matrix": {"row": A.row.tolist(), "column": A.col.tolist(), "value": A.data.tolist()},
        "options": {"time_limit": 100},
    }
    client = create_app({"data_dir": str(tmp_path), "time_limit": 0.01}).test_client()
    out = post(client, "/v1/lp", body).get_json()
    assert out["status"] == "time_limit" and out["certificate"]["checked"] is False


def test_openapi_document_has_the_lp_and_multicommodity_paths(client):
    from openapi_spec_validator import validate

    spec = client.get("/openapi.json").get_json()
    validate(spec)
    assert "/v1/lp" in spec["paths"] and "/v1/multicommodity" in spec["paths"]
    duals = spec["components"]["schemas"]["LpResponse"]["properties"]["duals"]["description"]
    assert "per unit increase" in duals and "same for min and max" in duals


# --------------------------------------------------------------------------- bad input

BASE = {"objective": {"sense": "max", "terms": {"x": 1, "y": 2}},
        "variables": [{"name": "x", "upper": 4}, {"name": "y", "lower": 0}],
        "constraints": [{"name": "cap", "terms": {"x": 1, "y": 1}, "upper": 6}]}


def changed(**parts):
    body = json.loads(json.dumps(BASE))
    for path, value in parts.items():
        node = body
        keys = path.split("__")
        for k in keys[:-1]:
            node = node[int(k)] if k.isdigit() else node[k]
        last = keys[-1]
        if value is KeyError:
            del node[last]
        elif last.isdigit():
            node[int(last)] = value
        else:
            node[last] = value
    return body


BAD = [
    ("unknown variable in a term", changed(constraints__0__terms={"x": 1, "z": 1}), "/constraints/0/terms/z"),
    ("unknown variable in the objective", changed(objective__terms={"w": 1}), "/objective/terms/w"),
    ("duplicate variable", changed(variables=[{"name": "x"}, {"name": "x"}]), "/variables/1/name"),
    ("duplicate constraint", changed(constraints=[BASE["constraints"][0]] * 2), "/constraints/1/name"),
    ("boolean coefficient", changed(constraints__0__terms={"x": True}), "/constraints/0/terms/x"),
    ("string coefficient", changed(objective__terms={"x": "3"}), "/objective/terms/x"),
    ("huge coefficient", changed(constraints__0__terms={"x": 1e300}), "/constraints/0/terms/x"),
    ("string bound", changed(variables__0__upper="4"), "/variables/0/upper"),
    ("lower above upper", changed(variables__0__lower=5), "/variables/0/lower"),
    ("row lower above upper", changed(constraints__0__lower=7), "/constraints/0/lower"),
    ("equals with upper", changed(constraints__0__equals=3), "/constraints/0/equals"),
    ("no bound on a row", changed(constraints__0__upper=KeyError), "/constraints/0"),
    ("empty objective", changed(objective__terms={}), "/objective/terms"),
    ("missing objective terms", changed(objective={"sense": "max"}), "/objective/terms"),
    ("missing sense", changed(objective={"terms": {"x": 1}}), "/objective/sense"),
    ("bad sense", changed(objective__sense="maximise"), "/objective/sense"),
    ("no variables", changed(variables=[]), "/variables"),
    ("unknown member", changed(solver="glop"), "/solver"),
    ("unknown variable field", changed(variables__0__integer=True), "/variables/0/integer"),
    ("graph engine", changed(options={"engine": "graph"}), "/options/engine"),
    ("name too long", changed(variables__0__name="x" * 201), "/variables/0/name"),
    ("terms not an object", changed(constraints__0__terms=[1, 2]), "/constraints/0/terms"),
    ("terms and coefficients", changed(objective__coefficients=[1, 2]), "/objective/coefficients"),
]


@pytest.mark.parametrize("what,body,pointer", BAD, ids=[b[0] for b in BAD])
def test_bad_input_is_a_422_with_a_pointer(client, what, body, pointer):
    r = post(client, "/v1/lp", body)
    assert r.status_code == 422, r.get_json()
    assert pointer in pointers(r)


MATRIX = {"objective": {"sense": "min", "coefficients": [1, 1]},
          "variables": {"name": ["a", "b"]},
          "constraints": {"name": ["r"], "lower": [1]},
          "matrix": {"row": [0, 0], "column": [0, 1], "value": [1, 1]}}


@pytest.mark.parametrize("what,patch,pointer", [
    ("row out of range", {"row": [0, 1]}, "/matrix/row/1"),
    ("negative column", {"column": [0, -1]}, "/matrix/column/1"),
    ("boolean index", {"column": [0, True]}, "/matrix/column/1"),
    ("duplicate entry", {"column": [1, 1]}, "/matrix/value/1"),
    ("string value", {"value": [1, "2"]}, "/matrix/value/1"),
    ("unequal lengths", {"value": [1]}, "/matrix/value"),
])
def test_bad_matrix_form(client, what, patch, pointer):
    body = json.loads(json.dumps(MATRIX))
    body["matrix"].update(patch)
    r = post(client, "/v1/lp", body)
    assert r.status_code == 422
    assert pointer in pointers(r)


def test_matrix_form_solves(client):
    out = post(client, "/v1/lp", MATRIX).get_json()
    assert out["status"] == "optimal" and out["objective"] == pytest.approx(1)


def test_coefficients_of_the_wrong_length(client):
    body = json.loads(json.dumps(MATRIX))
    body["objective"]["coefficients"] = [1]
    assert pointers(post(client, "/v1/lp", body)) == ["/objective/coefficients"]


def test_an_upper_bound_below_the_default_lower_bound_is_a_422_naming_it(client):
    # It was a 500: the check looked for the lower bound's pointer, and none was given.
    for variables in ([{"id": "x", "upper": -2}], {"id": ["x"], "upper": [-2]}):
        body = {"variables": variables, "objective": {"sense": "max", "terms": {"x": 1}}}
        r = post(client, "/v1/lp", body)
        assert r.status_code == 422
        expected = "/variables/0/upper" if isinstance(variables, list) else "/variables/upper/0"
        assert pointers(r) == [expected]
        assert "default lower bound" in r.get_json()["errors"][0]["detail"]


def test_non_finite_numbers():
    """JSON cannot carry NaN or Infinity (the decoder answers 400, below); a decoded
    body holding them (e.g. from a batch built in Python) is refused with a pointer."""
    for bad in (math.inf, -math.inf, math.nan):
        body = changed(constraints__0__terms={"x": bad})
        with pytest.raises(InputError) as err:
            parse(body, Limits())
        assert err.value.errors[0].pointer == "/constraints/0/terms/x"


def test_nan_literal_is_a_400(client):
    raw = json.dumps(BASE).replace('"upper": 6', '"upper": NaN')
    r = client.post("/v1/lp", data=raw, headers={"Content-Type": "application/json"})
    assert r.status_code == 400
    assert r.headers["Content-Type"].startswith("application/problem+json")


def test_too_many_variables_is_a_413(tmp_path):
    client = create_app({"data_dir": str(tmp_path), "max_arcs": 1}).test_client()
    r = post(client, "/v1/lp", BASE)
    assert r.status_code == 413 and pointers(r) == ["/variables"]


# -- `id`, with `name` as its older alias ------------------------------------------

def renamed(body: dict, old: str, new: str) -> dict:
    out = json.loads(json.dumps(body))
    for part in ("variables", "constraints"):
        if isinstance(out[part], list):
            out[part] = [{(new if k == old else k): v for k, v in entry.items()} for entry in out[part]]
        else:
            out[part] = {(new if k == old else k): v for k, v in out[part].items()}
    return out


@pytest.mark.parametrize("name", ["depots-lp.json", "depots-lp-matrix.json"])
def test_name_is_read_as_id_with_the_same_answer_and_digest(client, name):
    body = scenario(name)
    assert "name" not in json.dumps(body)  # the scenarios use the documented spelling
    by_id = post(client, "/v1/lp", body).get_json()
    by_name = post(client, "/v1/lp", renamed(body, "id", "name")).get_json()
    assert by_name["status"] == by_id["status"] == "optimal"
    assert by_name["digest"] == by_id["digest"]
    assert by_name["values"] == by_id["values"] and by_name["duals"] == by_id["duals"]


def test_entries_may_mix_id_and_name_but_not_give_both(client):
    body = scenario("depots-lp.json")
    body["variables"][0] = {"name": body["variables"][0].pop("id"), **body["variables"][0]}
    assert post(client, "/v1/lp", body).get_json()["status"] == "optimal"
    body["variables"][1]["name"] = body["variables"][1]["id"]
    r = post(client, "/v1/lp", body)
    assert r.status_code == 422 and pointers(r) == ["/variables/1/name"]
    assert "not both" in r.get_json()["errors"][0]["detail"]


def test_columns_give_id_or_name_not_both(client):
    body = scenario("depots-lp-matrix.json")
    body["variables"]["name"] = body["variables"]["id"]
    r = post(client, "/v1/lp", body)
    assert r.status_code == 422 and pointers(r) == ["/variables/name"]


def test_errors_point_at_the_spelling_sent(client):
    body = scenario("depots-lp.json")
    body["variables"][2]["id"] = body["variables"][0]["id"]
    r = post(client, "/v1/lp", body)
    assert pointers(r) == ["/variables/2/id"] and "duplicate variable id" in r.get_json()["errors"][0]["detail"]
    old = renamed(body, "id", "name")
    assert pointers(post(client, "/v1/lp", old)) == ["/variables/2/name"]
    del body["variables"][0]["id"]
    assert pointers(post(client, "/v1/lp", body)) == ["/variables/0/id"]
