"""A kind declares what it can do in one place (service/kinds/base.py: Kind), and the
service derives its routes, spec entries, capabilities and the page's lists from KINDS."""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from service.deadline import Deadline
from service.kinds import KINDS, Limits
from service.kinds.base import Kind
from tests.conftest import scenario

ROOT = Path(__file__).resolve().parent.parent


def test_every_registered_kind_is_one_declaration():
    for name, kind in KINDS.items():
        assert isinstance(kind, Kind) and kind.name == name
        assert (ROOT / "service" / "scenarios" / kind.example).is_file()
        # a kind's picture is drawn by that kind's drawer (it names it in the SVG's data-kind)
        assert kind.picture is None or kind.picture.drawer.kind == name


def test_a_half_declared_what_if_is_refused():
    maxflow = KINDS["maxflow"]
    with pytest.raises(TypeError, match="go together"):
        Kind(**{**maxflow.__dict__, "query_schema": None})
    with pytest.raises(TypeError, match="dimacs"):
        Kind(**{**maxflow.__dict__, "dimacs": "max-flow"})
    with pytest.raises(TypeError, match="its drawer draws 'mincostflow'"):
        Kind(**{**maxflow.__dict__, "picture": KINDS["mincostflow"].picture})


def test_kinds_endpoint_lists_each_declaration(client):
    r = client.get("/v1/kinds")
    assert r.status_code == 200
    listed = {k["name"]: k for k in r.get_json()["kinds"]}
    assert list(listed) == list(KINDS)
    for name, kind in KINDS.items():
        caps = listed[name]["capabilities"]
        assert listed[name]["endpoint"] == f"/v1/{name}" and listed[name]["summary"] == kind.summary
        assert caps["what_if"] == (kind.from_network is not None) and caps["dimacs"] == kind.dimacs
        assert caps["diagram"] == (kind.picture is not None) and caps["verify"] == (kind.verify is not None)
        assert client.get(f"/v1/scenarios/{listed[name]['example']}").status_code == 200
    # what the capabilities say holds: a what-if route where declared, none elsewhere
    rules = {r.rule for r in client.application.url_map.iter_rules()}
    for name, kind in KINDS.items():
        assert (f"/v1/networks/<name>/{name}" in rules) == (kind.from_network is not None), name
    assert listed["maxflow"]["capabilities"]["dimacs"] == "max"
    assert client.post("/v1/verify/lp", json={}).status_code == 404  # lp declares no verifier


def test_the_page_has_no_list_of_kinds():
    script = (ROOT / "service" / "static" / "explorer.js").read_text()
    assert "/v1/kinds" in script
    for name in KINDS:
        assert f'"{name}"' not in script, f"explorer.js names the kind {name!r}: it should come from /v1/kinds"


# A throwaway kind, registered before the HTTP layer is imported (in a fresh
# interpreter, so the real registry is untouched): its route, spec entry, listing,
# batch items and job submissions appear with no other file changed.
THROWAWAY = textwrap.dedent('''
    import json, sys, tempfile
    from dataclasses import dataclass
    from marshmallow import RAISE, Schema, fields
    from service.errors import InputError
    from service.kinds import KINDS
    from service.kinds.base import Kind

    class SumRequest(Schema):
        class Meta:
            unknown = RAISE
        values = fields.List(fields.Integer(), required=True)

    class SumResponse(Schema):
        total = fields.Integer()

    @dataclass
    class SumProblem:
        values: list
        options: dict
        digest: str

    def parse(body, limits):
        if not isinstance(body, dict) or not isinstance(body.get("values"), list):
            raise InputError.at("/values", "is required: a list of integers")
        return SumProblem(body["values"], {}, "sha256:" + "0" * 63 + str(len(body["values"]) % 10))

    def solve(problem, deadline):
        return {"total": sum(problem.values), "digest": problem.digest}

    KINDS["sum"] = Kind(name="sum", summary="Adds whole numbers (a throwaway kind of a test)",
                        request_schema=SumRequest, response_schema=SumResponse, example="depots-maxflow.json",
                        parse=parse, solve=solve, size=lambda p: len(p.values))

    from service.api import create_app
    from service.api.spec import build_spec

    client = create_app({"data_dir": tempfile.mkdtemp()}).test_client()
    spec = build_spec()
    out = {
        "solve": client.post("/v1/sum", json={"values": [2, 3, 4]}).get_json(),
        "refused": client.post("/v1/sum", json={}).status_code,
        "listed": [k["name"] for k in client.get("/v1/kinds").get_json()["kinds"]],
        "spec": spec["paths"]["/v1/sum"]["post"]["operationId"],
        "spec_schema": "SumRequest" in spec["components"]["schemas"],
        "job_enum": "sum" in spec["components"]["schemas"]["JobRequest"]["properties"]["kind"]["enum"],
        "batch": client.post("/v1/batch", json={"items": [{"kind": "sum", "problem": {"values": [1, 1]}}]}).get_json(),
        "job": client.post("/v1/jobs", json={"kind": "sum", "problem": {"values": [5]}}).status_code,
        "what_if": client.post("/v1/networks/x/sum", json={}).status_code,
    }
    json.dump(out, sys.stdout)
''')


def test_a_new_kind_needs_only_its_declaration_in_the_registry():
    run = subprocess.run([sys.executable, "-c", THROWAWAY], cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr[-3000:]
    out = json.loads(run.stdout.strip().splitlines()[-1])
    assert out["solve"]["total"] == 9 and out["refused"] == 422
    assert out["listed"][-1] == "sum" and out["spec"] == "solve_sum" and out["spec_schema"] and out["job_enum"]
    assert out["batch"]["results"][0]["total"] == 2
    assert out["job"] == 202
    assert out["what_if"] == 404  # no from_network declared: no what-if route


# A throwaway kind declaring every capability a Kind has: what-ifs on stored networks,
# DIMACS bodies, a picture (its drawer and drawn form), plan checks, a size, a time-limit grace, what a solver process
# is sent and extra example files. It is built from the max-flow parts (a real new kind's
# module would import its solver the same way) and registered before the HTTP layer is
# imported, in a fresh interpreter; every route, spec entry and listing below must follow
# from that one declaration, with no other file of the service changed.
EVERY_CAPABILITY = textwrap.dedent('''
    import json, sys, tempfile
    from service.drawing.maxflow import MaxFlowDrawer
    from service.kinds import KINDS, maxflow
    from service.kinds.base import Kind, problem_size, without_arc_keys
    from service.kinds.picture import network_picture, problem_ends
    from service.kinds.verify import max_flow_plans

    class LanesDrawer(MaxFlowDrawer):
        kind = "lanes"

    def subclass(schema, name):  # the spec names schemas by class: each kind has its own
        return type(name, (schema,), {})

    KINDS["lanes"] = Kind(
        name="lanes", summary="Max flow again (a throwaway kind of a test)",
        request_schema=subclass(maxflow.MaxFlowRequest, "LanesRequest"),
        response_schema=subclass(maxflow.MaxFlowResponse, "LanesResponse"),
        example="depots-maxflow.json", parse=maxflow.parse, solve=maxflow.solve,
        query_schema=subclass(maxflow.MaxFlowQuery, "LanesQuery"), from_network=maxflow.from_network,
        dimacs="max", picture=network_picture(LanesDrawer(), ends=problem_ends), verify=max_flow_plans(maxflow.parse), size=problem_size,
        honours_time_limit=True, for_solver_process=without_arc_keys, examples=("depots-maxflow.dimacs",))

    from service.api import create_app
    from service.api.spec import build_spec

    client = create_app({"data_dir": tempfile.mkdtemp()}).test_client()
    body = json.load(open("service/scenarios/depots-maxflow.json"))
    dimacs = open("service/scenarios/depots-maxflow.dimacs").read()
    solved = client.post("/v1/lanes", json=body).get_json()
    svg = client.post("/v1/diagram.svg", json={"kind": "lanes", "problem": body})
    stored = client.put("/v1/networks/lanes-demo", json={"nodes": body.get("nodes"), "arcs": body["arcs"]})
    question = {"source": body["source"], "sink": body["sink"]}
    spec = build_spec()
    paths = spec["paths"]
    listed = {k["name"]: k["capabilities"] for k in client.get("/v1/kinds").get_json()["kinds"]}
    out = {
        "value": solved["value"],
        "dimacs": client.post("/v1/lanes", data=dimacs, content_type="text/x-dimacs").get_json().get("value"),
        "what_if": [stored.status_code, client.post("/v1/networks/lanes-demo/lanes", json=question).get_json().get("value")],
        "verified": client.post("/v1/verify/lanes", json={"problem": body, "flows": solved["flows"]}).get_json(),
        "svg": [svg.status_code, svg.mimetype, 'data-kind="lanes"' in svg.get_data(as_text=True)],
        "capabilities": listed["lanes"],
        "refused": client.post("/v1/verify/assignment", json={}).get_json()["detail"],
        "batch": client.post("/v1/batch", json={"items": [{"kind": "lanes", "problem": body}]}).get_json()["results"][0].get("value"),
        "job": client.post("/v1/jobs", json={"kind": "lanes", "problem": body}).status_code,
        "scenarios": sorted(s["name"] for s in client.get("/v1/scenarios").get_json()["scenarios"]),
        "spec": {
            "solve": "text/x-dimacs" in paths["/v1/lanes"]["post"]["requestBody"]["content"],
            "what_if": paths["/v1/networks/{name}/lanes"]["post"]["operationId"],
            "verify": "lanes" in paths["/v1/verify/{kind}"]["post"]["parameters"][0]["schema"]["enum"],
            "jobs": "lanes" in spec["components"]["schemas"]["JobRequest"]["properties"]["kind"]["enum"],
        },
    }
    json.dump(out, sys.stdout)
''')


def test_a_kind_with_every_capability_needs_only_its_declaration():
    run = subprocess.run([sys.executable, "-c", EVERY_CAPABILITY], cwd=ROOT, capture_output=True, text=True,
                         timeout=180)
    assert run.returncode == 0, run.stderr[-3000:]
    out = json.loads(run.stdout.strip().splitlines()[-1])
    direct = KINDS["maxflow"].solve(KINDS["maxflow"].parse(scenario("depots-maxflow.json"), Limits()), Deadline.after(30))
    assert out["value"] == direct["value"] and out["batch"] == direct["value"]
    assert out["dimacs"] > 0 and out["what_if"] == [201, direct["value"]]
    verified = out["verified"]
    assert verified["feasible"] and verified["optimal"] and verified["certificate"]["proof"] == "cut"
    assert verified["cut"]["capacity"] == verified["value"]  # max-flow = min-cut
    assert out["svg"] == [200, "image/svg+xml", True]
    assert out["capabilities"] == {"what_if": True, "dimacs": "max", "diagram": True, "verify": True,
                                   "jobs": True, "batch": True}
    assert out["refused"] == "plans can be verified for maxflow, mincostflow, lanes; not for 'assignment'"
    assert out["job"] == 202
    assert "depots-maxflow.dimacs" in out["scenarios"]
    assert out["spec"] == {"solve": True, "what_if": "what_if_lanes", "verify": True, "jobs": True}


def test_limits_take_their_defaults_and_values_from_the_settings(monkeypatch):
    from dataclasses import fields

    from service.config import Settings
    from service.kinds import Limits

    shared = [f.name for f in fields(Limits) if hasattr(Settings, f.name)]
    assert {"max_arcs", "max_nodes", "max_commodities"} <= set(shared)
    assert not hasattr(Limits(), "time_limit")  # time is a solve's Deadline, not a parse limit
    assert Limits() == Limits.from_settings(Settings())
    changed = Settings(**{name: getattr(Settings(), name) + 1 for name in shared})
    assert all(getattr(Limits.from_settings(changed), name) == getattr(changed, name) for name in shared)
    for var in [v for v in __import__("os").environ if v.startswith("SLUICE_")]:
        monkeypatch.delenv(var)
    assert Settings.from_env() == Settings()  # unset variables keep the one written default
