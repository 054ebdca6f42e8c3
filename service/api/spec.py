"""The OpenAPI document, generated from the marshmallow schemas.

``python -m service.api.spec`` prints it as YAML; ``openapi/openapi.yaml`` is that
output, committed, and a test fails when the two drift apart.
"""

from __future__ import annotations

import json
import sys
from importlib import resources

import yaml
from apispec import APISpec
from apispec.ext.marshmallow import MarshmallowPlugin
from marshmallow import Schema, fields

from .. import __version__
from .spec_ops import OPS_DESCRIPTION, register as register_ops, solve_extras
from ..kinds import KINDS
from ..model.schemas import ArcColumnsSchema, ArcSchema, ArcsField, NodeId, NodesField, StrictBoolean, StrictNumber

DESCRIPTION = """Network-flow optimisation over HTTP: max-flow with minimum cuts, certified.

Every answer carries a `certificate`: the service's own check of the solution
(conservation, capacities, cut capacity = flow value). Errors are
`application/problem+json` (RFC 9457) with JSON Pointers (RFC 6901) to the offending
fields. Node ids are strings (1-200 characters) or non-negative integers, one kind per
payload. A capacity of `null` (or an absent capacity) means no limit.

Deviation from the draft contract: a request whose Content-Type is not JSON gets
415 Unsupported Media Type (RFC 9110), not 400.

Results are decision support: plans affecting people, vehicles or safety-critical
stock must be reviewed by a responsible planner and follow local rules."""


class ProblemSchema(Schema):
    type = fields.String(metadata={"description": "URI naming the kind of problem."})
    title = fields.String()
    status = fields.Integer()
    detail = fields.String()
    errors = fields.List(fields.Dict(), metadata={"description": "For input errors: {pointer, detail} items."})


class HealthSchema(Schema):
    status = fields.String()
    checks = fields.Dict()


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
        info={"description": DESCRIPTION + "\n" + OPS_DESCRIPTION},
    )
    plugin.converter.add_attribute_function(_field_attributes)
    spec.components.schema("Problem", schema=ProblemSchema)
    spec.components.schema("Arc", schema=ArcSchema)
    spec.components.schema("ArcColumns", schema=ArcColumnsSchema)
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
                    "schema": f"{title}Request", "example": _example(kind.example)}}},
                "responses": {"200": {"description": "Solved (status says optimal, infeasible or unbounded).",
                                      "content": {"application/json": {"schema": f"{title}Response"}}},
                              **_problem_responses(), **extras["responses"]},
            }},
        )
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
    return spec.to_dict()


def spec_yaml() -> str:
    return yaml.safe_dump(build_spec(), sort_keys=False, allow_unicode=True)


if __name__ == "__main__":
    sys.stdout.write(spec_yaml())
