"""The OpenAPI document, generated from the marshmallow schemas.

``python -m service.api.spec`` prints it as YAML; ``openapi/openapi.yaml`` is that
output, committed, and a test fails when the two drift apart.
"""

from __future__ import annotations

import json
import sys
from functools import lru_cache
from importlib import resources

import yaml
from apispec import APISpec
from apispec.ext.marshmallow import MarshmallowPlugin
from marshmallow import Schema, fields

from .. import __version__
from .spec_ops import OPS_DESCRIPTION, add_access_responses, register as register_ops, solve_extras
from ..kinds import KINDS
from .spec_extras import DESCRIPTION as EXTRAS_DESCRIPTION
from .spec_extras import add_paths, dimacs_content
from ..model.schemas import ArcColumnsSchema, ArcSchema, ArcsField, NodeId, NodesField, StrictBoolean, StrictNumber

DESCRIPTION = """Network-flow optimisation over HTTP: max-flow with minimum cuts, certified.

Every answer carries a `certificate`: the service's own check of the solution
(conservation, capacities, cut capacity = flow value). Errors are
`application/problem+json` (RFC 9457) with JSON Pointers (RFC 6901) to the offending
fields. Node ids are strings (1-200 characters) or non-negative integers, one kind per
payload. A capacity of `null` (or an absent capacity) means no limit.

Linear programs (`/v1/lp`) and multi-commodity flow (`/v1/multicommodity`) run on
GLOP. One sign convention for every dual and reduced cost: the change of the
objective per unit increase of the active bound (right-hand side), the same for `min`
and `max`. A capacity price is what one more unit of a lane's capacity is worth (>= 0).

Results are cached by problem digest (the normalised problem, the answer-changing
options and the solver version). `options.cache`: `use` (default: answer from the cache
when possible), `refresh` (solve again and overwrite), `bypass` (neither read nor
write). Every solve response has a `Cache-Status` header (RFC 9211): `sluice; hit`,
`sluice; fwd=miss; stored`, `sluice; fwd=request; stored` (refresh),
`sluice; fwd=request; detail=bypass`, `sluice; fwd=miss; detail=too-large` (solved, too
large to cache), `sluice; fwd=miss; detail=not-final` (a status other than optimal,
infeasible or unbounded, e.g. a time limit, is never cached) or
`sluice; fwd=bypass; detail=store-unavailable` (the store is down: solved without it). `GET /v1/solutions/{digest}` returns a cached answer.

Stored networks: `PUT /v1/networks/{name}` once, then ask `POST
/v1/networks/{name}/maxflow` (and the other kinds listed below) with `changes`; the
stored network is never modified by a what-if. Every PUT makes a new version with a new
ETag; `If-Match` makes a PUT or DELETE conditional (412 when stale, checked atomically
so of two writers holding one ETag exactly one wins) and `If-None-Match: *` makes a PUT
create-only. Network names are 1-128 characters from `A-Z a-z 0-9 . _ -`, starting with
a letter or digit.

Status codes worth knowing: a request whose Content-Type is neither JSON nor a DIMACS
type the endpoint takes gets 415 Unsupported Media Type (RFC 9110). A malformed path or
query parameter (network name, digest, `limit`, `after`, `include`) gets 400 `invalid-parameter` with
`errors: [{"parameter": ..., "detail": ...}]` (there is no body to point into). When the
store (SQLite file or Redis) does not answer, `/readyz` answers 200 with `status:
degraded` (solves still answer, without the cache), while stored networks and cached
solutions answer 503 `store-unavailable` with `Retry-After`; `/readyz` answers 503 only
when the solvers fail. Network metadata carries `etag`, `size`, `created` and `updated`,
and what-if answers carry `network` (name, version, ETag of the version that
answered).

Linear programs name their variables and constraints `id`, as every other kind names
its nodes and commodities; `name`, the first spelling, is still read as an alias (one
of the two per entry). Answers are unchanged: `values`, `duals` and `reduced_costs` are
maps keyed by those ids.

Results are decision support: plans affecting people, vehicles or safety-critical
stock must be reviewed by a responsible planner and follow local rules."""


class ProblemSchema(Schema):
    type = fields.String(metadata={"description": "URI naming the kind of problem."})
    title = fields.String()
    status = fields.Integer()
    detail = fields.String()
    errors = fields.List(fields.Dict(), metadata={"description": "For input errors: {pointer, detail} items."})


class HealthSchema(Schema):
    status = fields.String(metadata={"description": "ok (healthz); ready, degraded or not ready (readyz)."})
    checks = fields.Dict(metadata={"description": "Each dependency: ok, or why not."})
    store = fields.Dict(metadata={"description": "readyz: the result store's backend and usage."})


def _field_attributes(self, field, ret, **kwargs):
    if isinstance(field, NodeId):
        return {"oneOf": [{"type": "string", "minLength": 1, "maxLength": 200}, {"type": "integer", "minimum": 0}]}
    if isinstance(field, StrictNumber):
        out = {"type": ["number", "null"] if field.allow_none else "number"}
        if field.minimum is not None:
            out["exclusiveMinimum" if field.exclusive else "minimum"] = field.minimum
        return out
    if isinstance(field, StrictBoolean):
        return {"type": "boolean"}
    if isinstance(field, ArcsField):
        return {"oneOf": [{"type": "array", "items": {"$ref": "#/components/schemas/Arc"}},
                          {"$ref": "#/components/schemas/ArcColumns"}]}
    if isinstance(field, NodesField):
        return {"oneOf": [{"type": "array", "items": {}}, {"type": "object"}, {"type": "null"}]}
    return {}


def _example(name: str) -> dict:
    text = resources.files("service").joinpath("scenarios", name).read_text()
    return json.loads(text)


def _problem_responses() -> dict:
    ref = {"application/problem+json": {"schema": "Problem"}}
    return {
        "400": {"description": "The body is not valid JSON.", "content": ref},
        "413": {"description": "The body or problem exceeds a size limit.", "content": ref},
        "415": {"description": "The Content-Type is not JSON.", "content": ref},
        "422": {"description": "The body is JSON but not a valid problem.", "content": ref},
        "500": {"description": "Internal error (including a failed self-check).", "content": ref},
    }


def build_spec() -> dict:
    plugin = MarshmallowPlugin()
    spec = APISpec(
        title="Sluice",
        version=__version__,
        openapi_version="3.1.0",
        plugins=[plugin],
        info={"description": DESCRIPTION + "\n" + EXTRAS_DESCRIPTION + "\n" + OPS_DESCRIPTION},
    )
    plugin.converter.add_attribute_function(_field_attributes)
    spec.components.schema("Problem", schema=ProblemSchema)
    spec.components.schema("Arc", schema=ArcSchema)
    spec.components.schema("ArcColumns", schema=ArcColumnsSchema)
    cache_status = {"Cache-Status": {"description": "RFC 9211: how the result cache took part (see above).",
                                     "schema": {"type": "string"}}}
    register_ops(spec)
    extras = solve_extras()
    for kind in KINDS.values():
        title = kind.name.capitalize() if kind.name.islower() else kind.name
        spec.components.schema(f"{title}Request", schema=kind.request_schema)
        spec.components.schema(f"{title}Response", schema=kind.response_schema)
        spec.path(
            path=f"/v1/{kind.name}",
            operations={"post": {
                "operationId": f"solve_{kind.name}",
                "summary": kind.summary,
                "security": [{"bearer": []}, {}],
                "parameters": extras["parameters"],
                "requestBody": {"required": True, "content": {"application/json": {
                    "schema": f"{title}Request", "example": _example(kind.example)}, **dimacs_content(kind.name)}},
                "responses": {"200": {"description": "Solved (status says optimal, infeasible or unbounded).",
                                      "headers": cache_status,
                                      "content": {"application/json": {"schema": f"{title}Response"}}},
                              **_problem_responses(), **extras["responses"]},
            }},
        )
    _store_paths(spec, cache_status)
    add_paths(spec)
    health = {"application/json": {"schema": HealthSchema}}
    spec.path(path="/healthz", operations={"get": {"operationId": "healthz", "summary": "The process is up.",
                                                   "responses": {"200": {"description": "Up.", "content": health}}}})
    spec.path(path="/readyz", operations={"get": {
        "operationId": "readyz", "summary": "The store and solvers are usable.",
        "responses": {"200": {"description": "Ready.", "content": health},
                      "503": {"description": "Not ready.", "content": health}}}})
    spec.path(path="/openapi.json", operations={"get": {
        "operationId": "openapi", "summary": "This document.",
        "responses": {"200": {"description": "The OpenAPI document.",
                              "content": {"application/json": {"schema": {"type": "object"}}}}}}})
    document = _drop_null_defaults(spec.to_dict())
    add_access_responses(document["paths"])
    return document


def _drop_null_defaults(node):
    """Remove ``default: null`` (from ``load_default=None``, meaning "absent"): a default
    must validate against its schema, and null does not for most of these fields."""
    if isinstance(node, dict):
        return {k: _drop_null_defaults(v) for k, v in node.items() if not (k == "default" and v is None)}
    if isinstance(node, list):
        return [_drop_null_defaults(v) for v in node]
    return node


@lru_cache(maxsize=None)
def _what_if_schemas(kind_name: str) -> tuple[type, type]:
    """Request and response schemas of a kind's what-if (made once: marshmallow registers classes)."""
    from .networks import ChangeSchema

    kind = KINDS[kind_name]
    title = kind_name.capitalize()
    request_schema = type(f"{title}WhatIfRequest", (kind.query_schema,), {
        "changes": fields.List(fields.Nested(ChangeSchema), allow_none=True, metadata={
            "description": "Changes to apply for this question only; each arc at most once."}),
    })
    response_schema = type(f"{title}WhatIfResponse", (kind.response_schema,), {
        "network": fields.Dict(metadata={"description": "name, version and etag of the version that answered."}),
    })
    return request_schema, response_schema


def _store_paths(spec: APISpec, cache_status: dict) -> None:
    """Stored networks, what-ifs and cached solutions."""
    from .networks import (ChangeSchema, NetworkBodySchema, NetworkListSchema, NetworkMetaSchema, NetworkRequest,
                           what_if_kinds)

    spec.components.schema("NetworkRequest", schema=NetworkRequest)
    spec.components.schema("NetworkMeta", schema=NetworkMetaSchema)
    spec.components.schema("NetworkBody", schema=NetworkBodySchema)
    spec.components.schema("NetworkList", schema=NetworkListSchema)
    spec.components.schema("Change", schema=ChangeSchema)
    problem = {"application/problem+json": {"schema": "Problem"}}
    unavailable = {"description": "The store does not answer (Retry-After says when to try again).",
                   "content": problem}
    name = {"name": "name", "in": "path", "required": True,
            "schema": {"type": "string", "minLength": 1, "maxLength": 128, "pattern": "^[A-Za-z0-9][A-Za-z0-9._-]*$"}}
    if_match = {"name": "If-Match", "in": "header", "schema": {"type": "string"},
                "description": "Only write if the current version has this ETag (or any version, for *)."}
    etag = {"ETag": {"description": "The version's entity tag.", "schema": {"type": "string"}}}
    bad_name = {"description": "The name (or another parameter) is malformed.", "content": problem}
    not_found = {"description": "No such network.", "content": problem}
    stale = {"description": "If-Match or If-None-Match did not hold.", "content": problem}
    meta = {"application/json": {"schema": "NetworkMeta"}}
    spec.path(path="/v1/networks", operations={"get": {
        "operationId": "list_networks", "summary": "Stored networks, by name, a page at a time.",
        "parameters": [
            {"name": "limit", "in": "query", "schema": {"type": "integer", "minimum": 1, "maximum": 1000,
                                                        "default": 100}},
            {"name": "after", "in": "query", "schema": {"type": "string"},
             "description": "Start after this name (the next link sets it)."}],
        "responses": {"200": {"description": "One page; next is the URL of the following page, or null.",
                              "content": {"application/json": {"schema": "NetworkList"}}},
                      "400": bad_name, "503": unavailable}}})
    spec.path(path="/v1/networks/{name}", parameters=[name], operations={
        "put": {
            "operationId": "put_network", "summary": "Store a network (a new version when it exists).",
            "parameters": [if_match, {"name": "If-None-Match", "in": "header", "schema": {"type": "string"},
                                      "description": "* : only create, never replace."}],
            "requestBody": {"required": True, "content": {
                "application/json": {"schema": "NetworkRequest"},
                "text/x-dimacs": {"schema": {"type": "string", "description": "A DIMACS max-flow or min-cost "
                                  "flow file; its s/t designations and supplies are not stored."}}}},
            "responses": {"201": {"description": "Created.", "headers": etag, "content": meta},
                          "200": {"description": "Replaced by a new version.", "headers": etag, "content": meta},
                          **_problem_responses(), "412": stale, "503": unavailable}},
        "get": {
            "operationId": "get_network", "summary": "A stored network's metadata (and arcs with ?include=arcs).",
            "parameters": [{"name": "include", "in": "query", "schema": {"type": "string", "enum": ["arcs"]}},
                           {"name": "If-None-Match", "in": "header", "schema": {"type": "string"}}],
            "responses": {"200": {"description": "The current version. With `Accept: text/x-dimacs` the arcs "
                                                 "as a DIMACS min-cost flow file (zero supplies).",
                                  "headers": etag,
                                  "content": {"application/json": {"schema": "NetworkBody"},
                                              "text/x-dimacs": {"schema": {"type": "string"}}}},
                          "304": {"description": "Not modified (If-None-Match holds the current ETag)."},
                          "400": bad_name, "404": not_found, "503": unavailable}},
        "delete": {
            "operationId": "delete_network", "summary": "Remove a stored network.",
            "parameters": [if_match],
            "responses": {"204": {"description": "Removed."}, "400": bad_name, "404": not_found, "412": stale,
                          "503": unavailable}},
    })
    for kind_name in what_if_kinds():
        kind = KINDS[kind_name]
        title = kind_name.capitalize()
        request_schema, response_schema = _what_if_schemas(kind_name)
        spec.components.schema(f"{title}WhatIfRequest", schema=request_schema)
        spec.components.schema(f"{title}WhatIfResponse", schema=response_schema)
        spec.path(path=f"/v1/networks/{{name}}/{kind_name}", parameters=[name], operations={"post": {
            "operationId": f"what_if_{kind_name}",
            "summary": f"{kind.summary}, on a stored network with optional changes (the store is not modified).",
            "requestBody": {"required": True, "content": {"application/json": {"schema": f"{title}WhatIfRequest"}}},
            "responses": {"200": {"description": "Solved.", "headers": cache_status,
                                  "content": {"application/json": {"schema": f"{title}WhatIfResponse"}}},
                          **_problem_responses(), "404": not_found, "503": unavailable}}})
    spec.path(path="/v1/solutions/{digest}", operations={"get": {
        "operationId": "get_solution", "summary": "A cached answer, by the digest its solve response carried.",
        "parameters": [{"name": "digest", "in": "path", "required": True,
                        "schema": {"type": "string", "pattern": "^sha256:[0-9a-f]{64}$"}},
                       {"name": "If-None-Match", "in": "header", "schema": {"type": "string"}}],
        "responses": {"200": {"description": "The cached answer (without timing_ms).", "headers": {
                          "ETag": {"description": "Hash of the cached answer.", "schema": {"type": "string"}}},
                          "content": {"application/json": {"schema": {"type": "object"}}}},
                      "304": {"description": "Not modified."},
                      "400": {"description": "The digest is malformed.", "content": problem},
                      "404": {"description": "Not cached (never solved here, or evicted).", "content": problem},
                      "503": unavailable}}})


def spec_yaml() -> str:
    return yaml.safe_dump(build_spec(), sort_keys=False, allow_unicode=True)


if __name__ == "__main__":
    sys.stdout.write(spec_yaml())
