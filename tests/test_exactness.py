"""Exactness at the edges of the accepted range, over HTTP, against exact references.

Numbers are drawn across the whole range the validators accept: integers from 0 to
2**62 (log-uniform) and decimals of 1 to 9 places with at most 15 significant digits
(so the JSON token a client writes is the shortest round-trip text of its double),
down to 1e-9. The references compute exactly: networkx (``maximum_flow_value``,
``network_simplex``) on Python integers, the decimals scaled by 10**9 through
``fractions.Fraction``. Every response must be a 200 whose value an exact reference
does not contradict beyond the certificate's stated tolerance, or a 4xx problem
naming a field by pointer.
"""

from __future__ import annotations

import json
import math
from decimal import Decimal
from fractions import Fraction

import numpy as np
import orjson
import pytest
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from service.deadline import Deadline
from service.model.fastarcs import decode_arcs_body
from service.kinds import KINDS
from service.kinds.base import Limits
from tests.http import post
from tests.references import max_flow_value, min_cost_flow_cost

SETTINGS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
#: Every decimal drawn here is an integer number of 1e-9.
UNIT = 10**9


def integers():
    """0 to 2**62, log-uniform in magnitude."""
    return st.integers(0, 62).flatmap(lambda bits: st.integers(2 ** bits // 2, 2**bits))


def decimals():
    """Decimals of 1 to 9 places and 1 to 15 significant digits: 1e-9 up to about 1e14."""
    return st.tuples(st.integers(1, 9), st.integers(1, 15)).flatmap(
        lambda pd: st.integers(10 ** (pd[1] - 1), 10 ** pd[1] - 1).map(lambda k: Decimal(k).scaleb(-pd[0])))


def numbers():
    return st.one_of(integers(), decimals())


def as_json(value):
    """What a client writes: the integer, or the decimal as its double (its shortest
    round-trip text is the decimal, at 15 significant digits or fewer)."""
    if isinstance(value, Decimal):
        number = float(value)
        assert Decimal(repr(number)) == value
        return number
    return value


def exact(value) -> Fraction:
    return Fraction(value)


def solve(client, kind: str, body: dict):
    """``(status, document)`` of ``POST /v1/<kind>``, the body written by the standard library."""
    response = post(client, f"/v1/{kind}", json.dumps(body))
    doc = response.get_json()
    event(f"{kind}: {response.status_code} {doc.get('status') if response.status_code == 200 else ''}")
    return response.status_code, doc


def assert_names_a_field(doc: dict) -> None:
    assert doc["errors"] and all(e["pointer"].startswith("/") for e in doc["errors"]), doc


# ------------------------------------------------------------------------------ max-flow


@st.composite
def flow_networks(draw):
    n = draw(st.integers(2, 6))
    arcs = draw(st.lists(st.tuples(st.integers(0, n - 1), st.integers(0, n - 1),
                                   st.one_of(numbers(), numbers(), st.none())), min_size=1, max_size=10))
    return n, [(a, b, c) for a, b, c in arcs if a != b] or [(0, n - 1, 1)]


def reference_max_flow(n, arcs, s, t):
    """Exact value (Fraction) or "unbounded": tests.references (networkx) on the capacities times 10**9
    as Python ints."""
    units = [(a, b, None if c is None else exact(c) * UNIT) for a, b, c in arcs]
    assert all(u is None or u.denominator == 1 for _, _, u in units)
    value = max_flow_value([(a, b, None if u is None else int(u)) for a, b, u in units], s, t, range(n))
    return "unbounded" if value == math.inf else Fraction(value, UNIT)


def maxflow_body(n, arcs, columns: bool):
    ids = [f"n{i}" for i in range(n)]
    if columns:
        return {"source": ids[0], "sink": ids[-1], "nodes": ids, "arcs": {
            "from": [ids[a] for a, _, _ in arcs], "to": [ids[b] for _, b, _ in arcs],
            "capacity": [None if c is None else as_json(c) for _, _, c in arcs]}}
    return {"source": ids[0], "sink": ids[-1], "nodes": ids, "arcs": [
        {"from": ids[a], "to": ids[b], "capacity": None if c is None else as_json(c)} for a, b, c in arcs]}


@SETTINGS
@given(flow_networks(), st.booleans())
def test_max_flow_is_exact_at_every_magnitude(client, network, columns):
    n, arcs = network
    status, doc = solve(client, "maxflow", maxflow_body(n, arcs, columns))
    assert status == 200, doc
    expected = reference_max_flow(n, arcs, 0, n - 1)
    if expected == "unbounded":
        assert doc["status"] == "unbounded"
        return
    certificate = doc["certificate"]
    assert doc["status"] == "optimal" and certificate["checked"] and certificate["tolerance"] == 0
    # The exact value, rounded once to a double (exactly an integer when it is one).
    assert doc["value"] == (int(expected) if expected.denominator == 1 and abs(expected) < 2**63
                            else float(expected))
    assert certificate["cut_capacity"] == doc["value"]
    side = set(doc["cut"]["source_side"])
    cut = sum(exact(c) for a, b, c in arcs if f"n{a}" in side and f"n{b}" not in side)
    assert cut == expected  # the returned cut is a minimum cut, exactly


# ------------------------------------------------------------------------- min-cost flow


@st.composite
def cost_networks(draw):
    n = draw(st.integers(2, 5))
    arcs = []
    for a, b in draw(st.lists(st.tuples(st.integers(0, n - 1), st.integers(0, n - 1)), min_size=1, max_size=8)):
        if a == b:
            continue
        capacity = draw(st.one_of(numbers(), numbers(), st.none()))
        cost = draw(numbers())
        if draw(st.booleans()):
            cost = -cost
        arcs.append((a, b, capacity, cost))
    if not arcs:
        arcs = [(0, n - 1, 1, 1)]
    # Supplies in pairs: node i ships x_i, node n-1-i needs it (balanced exactly),
    # often with a lane of its own between them (so that more problems are feasible).
    supply = [Decimal(0)] * n
    for i in range(n // 2):
        x = draw(numbers())
        supply[i], supply[n - 1 - i] = x, -x
        if draw(st.booleans()):
            arcs.append((i, n - 1 - i, draw(st.one_of(st.none(), numbers())), draw(numbers())))
    return n, arcs, supply


def reference_min_cost(n, arcs, supply, *, with_costs=True):
    """Exact cost (Fraction), "infeasible" or "unbounded": networkx.network_simplex on
    Python ints (tests/references.min_cost_flow_cost), every figure scaled by UNIT."""
    scaled = [(a, b, None if capacity is None else int(exact(capacity) * UNIT),
               int(exact(cost) * UNIT) if with_costs else 0) for a, b, capacity, cost in arcs]
    value = min_cost_flow_cost(scaled, {i: int(exact(supply[i]) * UNIT) for i in range(n)}, range(n))
    return value if isinstance(value, str) else Fraction(value, UNIT * UNIT)


def as_value(expected: Fraction):
    """An exact answer as the service reports it: an integer when it is one (and fits
    int64), else the double nearest to it."""
    return int(expected) if expected.denominator == 1 and abs(expected) < 2**63 else float(expected)


def arcs_json(ids, arcs):
    return [{"from": ids[a], "to": ids[b], "capacity": None if c is None else as_json(c), "cost": as_json(k)}
            for a, b, c, k in arcs]


@SETTINGS
@given(cost_networks())
def test_min_cost_flow_is_exact_or_refused_naming_a_field(client, network):
    n, arcs, supply = network
    ids = [f"n{i}" for i in range(n)]
    body = {"nodes": [{"id": ids[i], "supply": as_json(supply[i])} for i in range(n)], "arcs": arcs_json(ids, arcs)}
    status, doc = solve(client, "mincostflow", body)
    if status != 200:
        assert status == 422, doc
        assert_names_a_field(doc)
        event("422: " + doc["errors"][0]["detail"][:40])
        return
    certificate = doc["certificate"]
    assert certificate["checked"] and certificate["tolerance"] == 0 and doc["engine"]["kind"] == "graph"
    feasible = reference_min_cost(n, arcs, supply, with_costs=False) != "infeasible"
    assert (doc["status"] == "infeasible") == (not feasible), doc
    if not feasible:
        proof = doc["infeasibility"]
        assert exact(proof["net_supply"]) > exact(proof["outgoing_capacity"])
        return
    expected = reference_min_cost(n, arcs, supply)
    if expected == "unbounded":
        assert doc["status"] == "unbounded" and exact(doc["negative_cycle"]["cost"]) < 0
        return
    assert doc["status"] == "optimal" and doc["cost"] == as_value(expected)


# ---------------------------------------------------------------------- multi-commodity


@SETTINGS
@given(cost_networks())
def test_one_commodity_agrees_with_the_exact_min_cost_flow_within_its_tolerance(client, network):
    n, arcs, supply = network
    demand = abs(supply[0]) or Decimal(1)
    arcs = [(a, b, c, abs(k)) for a, b, c, k in arcs]  # costs >= 0: the LP is bounded
    ids = [f"n{i}" for i in range(n)]
    body = {"arcs": arcs_json(ids, arcs),
            "commodities": [{"id": "load", "source": ids[0], "sink": ids[-1], "demand": as_json(demand)}]}
    status, doc = solve(client, "multicommodity", body)
    if status != 200:
        assert status == 422, doc
        assert_names_a_field(doc)
        return
    certificate = doc["certificate"]
    assert certificate["checked"]
    rel = Fraction(certificate["relative_tolerance"])
    expected = reference_min_cost(n, arcs, [demand] + [0] * (n - 2) + [-demand])
    if doc["status"] != "optimal":
        assert doc["status"] == "infeasible" and expected == "infeasible"
        return
    # The plan holds to the stated tolerance, each figure against its own magnitude...
    flows = [exact(f) for f in doc["flows"][0]]
    net = [Fraction(0)] * n
    through = [Fraction(0)] * n
    for (a, b, c, _), f in zip(arcs, flows):
        assert f >= -rel * (abs(f) if c is None else exact(c))
        assert c is None or f <= exact(c) * (1 + rel)
        net[a] += f
        net[b] -= f
        through[a] += abs(f)
        through[b] += abs(f)
    delivered = exact(doc["delivered"][0])
    assert delivered <= exact(demand) * (1 + rel)
    for i, target in enumerate([delivered] + [0] * (n - 2) + [-delivered]):
        assert abs(net[i] - target) <= rel * (through[i] + abs(target))
    # ...and its cost is the exact optimum within the stated cost tolerance, when one exists.
    if isinstance(expected, Fraction):
        assert abs(exact(doc["cost"]) - expected) <= Fraction(certificate["cost_tolerance"]) + rel * abs(expected)


# ------------------------------------------------------------------- both decode paths


def answers_on_both_paths(raw: bytes) -> list:
    """The max-flow answer to one body decoded by the compiled scanner (when it takes
    it) and by orjson: the same numbers must give the same decimal scaling."""
    kind = KINDS["maxflow"]
    answers = []
    for body in (decode_arcs_body(raw, min_bytes=0), orjson.loads(raw)):
        if body is None:
            continue  # the scanner stepped aside: the ordinary path answers alone
        out = kind.solve(kind.parse(body, Limits()), Deadline.after(60))
        answers.append((out["status"], out["value"], out["engine"].get("decimal_scale"),
                        np.asarray(out.get("flows", [])).tolist()))
    return answers


@SETTINGS
@given(flow_networks(), st.booleans())
def test_decimals_scale_alike_on_the_scanner_and_the_orjson_path(network, columns):
    n, arcs = network
    answers = answers_on_both_paths(orjson.dumps(maxflow_body(n, arcs, columns)))
    assert all(a == answers[0] for a in answers), answers


@pytest.mark.parametrize("columns", [False, True])
def test_the_scanner_takes_decimal_bodies_and_scales_them_as_written(columns):
    arcs = [(0, 1, Decimal("99999999.99")), (1, 2, Decimal("1000000000.5")), (0, 2, Decimal("0.000000001")),
            (1, 2, Decimal("123456.123456789"))]
    raw = orjson.dumps(maxflow_body(3, arcs, columns))
    assert decode_arcs_body(raw, min_bytes=0) is not None
    answers = answers_on_both_paths(raw)
    assert len(answers) == 2 and answers[0] == answers[1]
    status, value, scale, _ = answers[0]
    assert status == "optimal" and scale == 10**9 and value == float(Decimal("99999999.990000001"))


def test_repr_is_the_decimal_the_client_wrote_up_to_15_digits():
    # The rule the decimal scaling rests on (IEEE 754 doubles hold 15 significant
    # decimal digits exactly; Python's repr is the shortest round-trip string).
    for text in ["99999999.99", "1000000000.5", "0.000001", "1e-9", "123456789012.345", "0.1", "4.35"]:
        assert Decimal(repr(float(text))) == Decimal(text)
    assert math.isclose(float("0.1") * 3, 0.30000000000000004)  # why floats need the rule


# --------------------------------------------------------------- no 500, at the extremes

#: Values the validators accept, from the smallest double to 2**62, with fractions of
#: every kind (a decimal of 9 places, one of 17 digits, a binary fraction, 1/3).
EXTREMES = [5e-324, 1e-300, 1e-9, 1 / 3, 0.1, 0.25, 123456789.123456789, 2.0**62, 2**62, 2**62 - 1, 10**18, 7, 0]


def extreme():
    return st.sampled_from(EXTREMES)


@st.composite
def extreme_bodies(draw, kind: str):
    n = draw(st.integers(2, 5))
    arcs = [{"from": draw(st.integers(0, n - 1)), "to": draw(st.integers(0, n - 1)),
             "capacity": draw(st.one_of(extreme(), st.none()))} for _ in range(draw(st.integers(1, 6)))]
    if kind == "maxflow":
        return {"source": 0, "sink": n - 1, "arcs": arcs}
    for arc in arcs:
        arc["cost"] = draw(extreme()) * draw(st.sampled_from([1, -1] if kind == "mincostflow" else [1]))
    if kind == "mincostflow":
        x = draw(extreme())
        return {"nodes": [{"id": 0, "supply": x}, {"id": n - 1, "supply": -x}], "arcs": arcs,
                "options": {"shortage": draw(st.sampled_from(["reject", "max-flow"]))}}
    if kind == "multicommodity":
        return {"arcs": arcs, "commodities": [{"id": "k", "source": 0, "sink": n - 1, "demand": draw(extreme())}],
                "objective": draw(st.sampled_from(["min-cost", "max-throughput"]))}
    k, t = draw(st.integers(1, 3)), draw(st.integers(1, 3))
    return {"agents": [f"a{i}" for i in range(k)], "tasks": [f"t{j}" for j in range(t)],
            "costs": [[draw(st.one_of(extreme(), st.none())) for _ in range(t)] for _ in range(k)],
            "options": {"maximize": draw(st.booleans()), "require": draw(st.sampled_from(["agents", "tasks",
                                                                                          "min-side"]))}}


@settings(max_examples=160, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.sampled_from(["maxflow", "mincostflow", "multicommodity", "assignment"]).flatmap(
    lambda kind: extreme_bodies(kind).map(lambda body: (kind, body))))
def test_no_valid_problem_gets_a_500_at_the_extremes(client, problem):
    kind, body = problem
    status, doc = solve(client, kind, body)
    assert status < 500, doc
    if status == 200:
        assert doc["certificate"]["checked"], doc
    else:
        assert_names_a_field(doc)
