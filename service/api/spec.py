"""The OpenAPI document, built from the routes: each declares its operation
(:mod:`service.api.declare`) and this module walks the app's URL map.

``sluice spec`` prints it as YAML; ``openapi/openapi.yaml`` is that output, committed,
and a test fails when the two drift apart. ``create_app`` builds it from its own app
(``GET /openapi.json``); ``sluice spec`` from :func:`~service.api.routes.route_app`, the
same blueprints without a store, jobs or solver processes.
"""

from __future__ import annotations

import copy
import re
import sys

import yaml
from apispec import APISpec
from apispec.ext.marshmallow import MarshmallowPlugin
from flask import Flask
from marshmallow import Schema, fields

from .. import __version__
from ..model.schemas import ArcColumnsSchema, ArcSchema, ArcsField, NodeId, NodesField, StrictBoolean, StrictNumber
from .declare import Operation, declared, problem
from .routes import route_app
from .spec_text import description

#: Methods Flask answers by itself on every route.
_IMPLICIT = {"HEAD", "OPTIONS"}
#: Keys and rate limits apply to all of ``/v1`` (``auth.py``, ``ratelimit.py``).
_ACCESS_PREFIX = "/v1"
_SECURITY = [{"bearer": []}, {}]


class ProblemSchema(Schema):
    type = fields.String(metadata={"description": "URI naming the kind of problem."})
    title = fields.String()
    status = fields.Integer()
    detail = fields.String()
    errors = fields.List(fields.Dict(), metadata={"description": "For input errors: {pointer, detail} items."})


class UndeclaredRoute(LookupError):
    """A route of the app declares no operation."""


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


def openapi_path(rule: str) -> str:
    """``/v1/networks/<name>`` (or ``<string:name>``) -> ``/v1/networks/{name}``."""
    return re.sub(r"<(?:[^<>:]+:)?([^<>]+)>", r"{\1}", rule)


def declared_operations(app: Flask) -> list[tuple[str, str, Operation]]:
    """``(path, method, operation)`` of every route of ``app``, in the order they were
    registered; raises :class:`UndeclaredRoute` naming the routes that declare nothing."""
    found, missing = [], []
    for rule in app.url_map.iter_rules():
        op = declared(app.view_functions[rule.endpoint])
        if op is None:
            missing.append(f"{rule.rule} ({rule.endpoint})")
            continue
        for method in sorted(rule.methods - _IMPLICIT):
            found.append((openapi_path(rule.rule), method.lower(), op))
    if missing:
        raise UndeclaredRoute("routes without a declared operation (service.api.declare.operation): "
                              + ", ".join(missing))
    return found


def _new_spec() -> APISpec:
    plugin = MarshmallowPlugin()
    spec = APISpec(title="Sluice", version=__version__, openapi_version="3.1.0", plugins=[plugin],
                   info={"description": description()})
    plugin.converter.add_attribute_function(_field_attributes)
    spec.components.schema("Problem", schema=ProblemSchema)
    spec.components.schema("Arc", schema=ArcSchema)
    spec.components.schema("ArcColumns", schema=ArcColumnsSchema)
    spec.components.security_scheme("bearer", {"type": "http", "scheme": "bearer",
                                               "description": "An API key (when the service has keys)."})
    return spec


def _register_schemas(spec: APISpec, schemas: dict) -> None:
    for name, schema in schemas.items():
        if name not in spec.components.schemas:  # named by an earlier operation, or nested in one
            spec.components.schema(name, schema=schema)


def build_spec(app: Flask | None = None) -> dict:
    """The OpenAPI document of ``app``'s routes (default: :func:`route_app`)."""
    spec = _new_spec()
    for path, method, op in declared_operations(app or route_app()):
        _register_schemas(spec, op.schemas)
        spec.path(path=path, parameters=list(op.path_parameters), operations={method: op.document()})
    document = _drop_null_defaults(spec.to_dict())
    add_access_responses(document["paths"])
    return document


def add_access_responses(paths: dict) -> None:
    """Give every ``/v1`` operation its bearer security, 401 and 429 (and 403 when it is
    not a GET): keys and rate limits apply to all of ``/v1``, not only to the solves.
    ``paths`` is the finished document's, so references are spelled out."""
    content = {"application/problem+json": {"schema": {"$ref": "#/components/schemas/Problem"}}}
    for path, item in paths.items():
        if not path.startswith(_ACCESS_PREFIX):
            continue
        for method, operation in item.items():
            if method == "parameters":
                continue
            operation.setdefault("security", copy.deepcopy(_SECURITY))
            for status in (401, 429) if method == "get" else (401, 429, 403):
                # A copy each: shared objects would come out as YAML anchors.
                response = {**problem(status), "content": content}
                operation["responses"].setdefault(str(status), copy.deepcopy(response))


def _drop_null_defaults(node):
    """Remove ``default: null`` (from ``load_default=None``, meaning "absent"): a default
    must validate against its schema, and null does not for most of these fields."""
    if isinstance(node, dict):
        return {k: _drop_null_defaults(v) for k, v in node.items() if not (k == "default" and v is None)}
    if isinstance(node, list):
        return [_drop_null_defaults(v) for v in node]
    return node


def spec_yaml() -> str:
    """The document as YAML, as ``sluice spec`` prints it and ``openapi/openapi.yaml`` holds it."""
    return yaml.safe_dump(build_spec(), sort_keys=False, allow_unicode=True)


if __name__ == "__main__":
    sys.stdout.write(spec_yaml())
