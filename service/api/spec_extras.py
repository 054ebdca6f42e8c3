"""OpenAPI entries of plan checks, batches, DIMACS bodies, diagrams and the explorer."""

from __future__ import annotations

import json
from importlib import resources

from apispec import APISpec

from ..kinds import KINDS
from ..kinds.verify import VerifyRequest, VerifyResponse
from ..model.dimacs import MEDIA_TYPE as DIMACS_MEDIA_TYPE
from .batch import BatchItemSchema, BatchRequest, BatchResponse
from .diagram import SVG_MEDIA_TYPE, DiagramRequest, diagram_kinds
from .explorer import ScenarioListSchema
from .solve import KindListSchema
from .verify import verify_kinds

DESCRIPTION = """
## Text bodies: the DIMACS formats

`POST /v1/maxflow` and `POST /v1/mincostflow` also take a DIMACS file (the open text
formats of the DIMACS implementation challenges) with `Content-Type: text/x-dimacs`
(optionally `; charset=...`, default UTF-8): `p max NODES ARCS`, `n ID s`, `n ID t`,
`a FROM TO CAPACITY` for max-flow; `p min NODES ARCS`, `n ID SUPPLY`,
`a FROM TO LOWER CAPACITY COST` for min-cost flow; `c` lines are comments. The `p`
line must match the endpoint. Node ids are the integers 1..NODES and the answer uses
them; every node 1..NODES is in `node_ids`. A DIMACS body takes the default options.
Errors in a text body point at the line: `{"pointer": "/line/17", "line": 17,
"detail": ...}` (1-based line numbers), including errors found after reading the
file (a field of arc k points at the line of arc k). The same reader serves stored
networks, and a network can be written back out in either format: arcs without a
capacity limit are written with a stand-in capacity, stated in a comment, larger than
anything a bounded problem can put on one arc.

## Checking a client's plan

`POST /v1/verify/maxflow` and `POST /v1/verify/mincostflow` take `{"problem": <the
solve request body>, "flows": [one number per arc]}`. Errors in the problem point
under `/problem`; flows of the wrong length are a 422 at `/flows`. A violation is
`{"arc", "kind": "capacity" | "lower", "excess"}` (`lower` also covers negative
flow; `excess` > 0 is how far the flow lies outside its bounds) or `{"node", "kind":
"conservation", "imbalance"}` with imbalance = supply + inflow - outflow (supply 0 at
inner max-flow nodes; the source and sink of a max-flow problem are exempt). A
feasible max-flow plan gets either a minimum cut of the same capacity (`optimal`) or
an augmenting path with the fewest arcs (`improving_path`, `gain` = its smallest
residual capacity). A feasible min-cost plan gets either potentials proving it
cheapest or a negative-cost cycle (`improving_cycle`, `amount` to push round it,
`unit_cost` < 0, `gain` = cost saved). A path or cycle without any limit is reported
with `gain: null` and `unbounded: true`. Every verdict is checked again by the
service before it is returned. Answers also carry `violation_count`, `amount`,
`unit_cost`, `cut`, `potentials` and `certificate` where they apply. Plans are checked
under the default `options.shortage` `reject` only (`max-flow` is a 422 at `/problem/options/shortage`).

## Batches

`POST /v1/batch` answers `{"items": [{"kind", "problem"}]}` with `{"results": [...]}`
in order; each result is the item's solve response or a problem object (with `type`,
an integer `status`, `detail`, `errors` and `item`, the item's index). The JSON
Pointers of an item's errors are relative to the item (`/kind`,
`/problem/arcs/3/capacity`). At most `SLUICE_MAX_BATCH_ITEMS` items (413 above); one
synchronous time limit covers the whole batch, and items it does not reach get a 504
problem object.

## Diagrams and the explorer

`POST /v1/diagram.svg` with `{"kind": "maxflow" | "mincostflow", "problem": ...}`
solves the problem and draws the answer as SVG: a layered left-to-right layout from
source to sink, flows, the minimum cut (max-flow) or the arcs at capacity (min-cost
flow), node potentials when the answer has them. Arcs run around the nodes they do not
join; each is labelled `flow/capacity` (`flow/lower..capacity` with a lower bound,
then `@cost` for min-cost flow), and no two texts overlap. Control characters in ids
and keys are drawn as their Unicode control pictures (U+0000 as ␀), so the document
is always well-formed XML. Diagrams are for small networks:
above `SLUICE_MAX_DIAGRAM_NODES` nodes or `SLUICE_MAX_DIAGRAM_ARCS` arcs the answer is
413. `GET /v1/solutions/{digest}/diagram.svg` draws a cached answer the same way.
`GET /` is an explorer page for trying the service in a browser;
`GET /v1/scenarios` lists the invented example problems it offers.
"""


def _scenario_text(name: str) -> str:
    return resources.files("service").joinpath("scenarios", name).read_text()


def _problems(*codes: str) -> dict:
    ref = {"application/problem+json": {"schema": "Problem"}}
    text = {"400": "The body is not valid JSON, or a path parameter is malformed.", "404": "Not found.",
            "413": "The body or problem exceeds a size limit.", "415": "The Content-Type is not supported.",
            "422": "The body is not a valid request.", "500": "Internal error (including a failed self-check).",
            "504": "The check exceeded its time limit."}
    return {code: {"description": text[code], "content": ref} for code in codes}


def dimacs_content(kind_name: str) -> dict:
    """The extra ``requestBody.content`` entry of a solve endpoint that takes DIMACS."""
    fmt = KINDS[kind_name].dimacs
    if fmt is None:
        return {}
    example = _scenario_text("depots-maxflow.dimacs") if kind_name == "maxflow" else (
        "c two depots, two stores\np min 4 4\nn 1 30\nn 2 20\nn 3 -25\nn 4 -25\n"
        "a 1 3 0 40 4\na 1 4 0 40 6\na 2 3 0 40 5\na 2 4 0 40 3\n")
    return {DIMACS_MEDIA_TYPE: {"schema": {"type": "string", "description": (
        f"A DIMACS 'p {fmt}' file; errors point at /line/<n>.")}, "example": example}}


def add_paths(spec: APISpec) -> None:
    """Add the plan-check, batch, diagram, scenario and explorer paths to ``spec``."""
    spec.components.schema("VerifyRequest", schema=VerifyRequest)
    spec.components.schema("VerifyResponse", schema=VerifyResponse)
    spec.components.schema("BatchItem", schema=BatchItemSchema)
    spec.components.schema("BatchRequest", schema=BatchRequest)
    spec.components.schema("BatchResponse", schema=BatchResponse)
    spec.components.schema("DiagramRequest", schema=DiagramRequest)
    spec.components.schema("ScenarioList", schema=ScenarioListSchema)
    spec.components.schema("KindList", schema=KindListSchema)
    spec.path(path="/v1/kinds", operations={"get": {
        "operationId": "list_kinds", "summary": "The problem kinds this service solves, and what each can do",
        "responses": {"200": {"description": "Name, summary, endpoint, example and capabilities of each kind.",
                              "content": {"application/json": {"schema": "KindList"}}}},
    }})
    verify_example = json.loads(_scenario_text("verify-depots-maxflow.json"))
    spec.path(path="/v1/verify/{kind}", operations={"post": {
        "operationId": "verify_plan",
        "summary": "Check a client's flows: feasibility, value or cost, optimality with an improving path or cycle",
        "parameters": [{"name": "kind", "in": "path", "required": True,
                        "schema": {"type": "string", "enum": verify_kinds()}}],
        "requestBody": {"required": True, "content": {"application/json": {
            "schema": "VerifyRequest", "example": verify_example}}},
        "responses": {"200": {"description": "The verdict (an infeasible plan is still a 200).",
                              "content": {"application/json": {"schema": "VerifyResponse"}}},
                      **_problems("400", "404", "413", "415", "422", "500", "504")},
    }})
    spec.path(path="/v1/batch", operations={"post": {
        "operationId": "batch",
        "summary": "Solve many small problems of any kind in one request, answered in order",
        "requestBody": {"required": True, "content": {"application/json": {
            "schema": "BatchRequest", "example": json.loads(_scenario_text("batch-depots.json"))}}},
        "responses": {"200": {"description": "One result per item: a solve response or a problem object.",
                              "content": {"application/json": {"schema": "BatchResponse"}}},
                      **_problems("400", "413", "415", "422")},
    }})
    drawn = diagram_kinds()
    spec.path(path="/v1/diagram.svg", operations={"post": {
        "operationId": "draw_solution",
        "summary": f"Solve a small problem ({', '.join(drawn)}) and draw the answer as SVG",
        "requestBody": {"required": True, "content": {"application/json": {
            "schema": "DiagramRequest",
            "example": {"kind": "maxflow", "problem": json.loads(_scenario_text("depots-maxflow.json"))}}}},
        "responses": {"200": {"description": "The drawing.",
                              "content": {SVG_MEDIA_TYPE: {"schema": {"type": "string"}}}},
                      **_problems("400", "413", "415", "422", "500", "504")},
    }})
    spec.path(path="/v1/solutions/{digest}/diagram.svg", operations={"get": {
        "operationId": "draw_cached_solution",
        "summary": "Draw a cached max-flow or min-cost flow answer as SVG",
        "description": "Small solved problems are kept beside their cached answers so they can be drawn by "
                       "digest; a problem above the diagram limits answers 413, an unknown or evicted one 404.",
        "parameters": [{"name": "digest", "in": "path", "required": True,
                        "schema": {"type": "string", "pattern": "^sha256:[0-9a-f]{64}$"}}],
        "responses": {"200": {"description": "The drawing.",
                              "content": {SVG_MEDIA_TYPE: {"schema": {"type": "string"}}}},
                      **_problems("400", "404", "413")},
    }})
    spec.path(path="/v1/scenarios", operations={"get": {
        "operationId": "list_scenarios", "summary": "The invented example problems",
        "responses": {"200": {"description": "Name, kind, endpoint and title of each.",
                              "content": {"application/json": {"schema": "ScenarioList"}}}},
    }})
    spec.path(path="/v1/scenarios/{name}", operations={"get": {
        "operationId": "get_scenario", "summary": "One example problem's request body",
        "parameters": [{"name": "name", "in": "path", "required": True, "schema": {"type": "string"}}],
        "responses": {"200": {"description": "The body, ready to POST to its endpoint.",
                              "content": {"application/json": {"schema": {"type": "object"}},
                                          DIMACS_MEDIA_TYPE: {"schema": {"type": "string"}}}},
                      **_problems("404")},
    }})
    spec.path(path="/", operations={"get": {
        "operationId": "explorer", "summary": "The explorer page: pick or paste a problem, solve, see the diagram",
        "responses": {"200": {"description": "An HTML page.", "content": {"text/html": {"schema": {"type": "string"}}}}},
    }})
    spec.path(path="/explorer/{name}", operations={"get": {
        "operationId": "explorer_asset", "summary": "The explorer page's script and style sheet",
        "parameters": [{"name": "name", "in": "path", "required": True,
                        "schema": {"type": "string", "enum": ["explorer.js", "explorer.css"]}}],
        "responses": {"200": {"description": "The file.",
                              "content": {"text/javascript": {"schema": {"type": "string"}},
                                          "text/css": {"schema": {"type": "string"}}}},
                      **_problems("404")},
    }})
