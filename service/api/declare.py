"""Each route declares its OpenAPI operation; :mod:`service.api.spec` collects them.

The idea is flask-smorest's (the route says what it takes and answers, and the document
follows from the routes), built on apispec alone::

    @bp.get("/kinds")
    @operation("list_kinds", "The problem kinds this service solves",
               responses={"200": ok("Name and capabilities of each.", json_body("KindList"))},
               schemas={"KindList": KindListSchema})
    def list_kinds(): ...

Schemas are named in ``schemas`` (the component name the document uses) and referred
to by that name in the operation; the builder registers each once. A route without a
declaration makes the document builder fail, naming the route.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from importlib import resources
from typing import Callable

#: The attribute of a view function that holds its :class:`Operation`.
ATTRIBUTE = "openapi_operation"

SVG_MEDIA_TYPE = "image/svg+xml"
PROBLEM_CONTENT = {"application/problem+json": {"schema": "Problem"}}
RETRY_AFTER = {"Retry-After": {"description": "Seconds to wait before retrying.", "schema": {"type": "integer"}}}
WWW_AUTHENTICATE = {"WWW-Authenticate": {"schema": {"type": "string"}}}

#: The one wording of each problem+json answer; an operation may give a status its own.
PROBLEM_TEXT = {
    400: "The body is not valid JSON, or a path parameter is malformed.",
    401: "No valid API key (when keys are configured).",
    403: "A read-only key cannot write.",
    404: "Not found.",
    413: "The body or problem exceeds a size limit.",
    415: "The Content-Type is not supported.",
    422: "The body is not a valid request.",
    429: "The tenant's rate limit is used up.",
    500: "Internal error (including a failed self-check).",
    503: "The store does not answer (Retry-After says when to try again).",
    504: "The check exceeded its time limit.",
}
#: Headers that go with a status wherever it is answered (every 503 of the service,
#: store, queue or overload, says when to retry: :class:`~service.errors.Unavailable`,
#: :class:`~service.store.StoreUnavailable`).
PROBLEM_HEADERS = {401: WWW_AUTHENTICATE, 429: RETRY_AFTER, 503: RETRY_AFTER}

#: The wording of the solve-body statuses (solves, what-ifs, network uploads, jobs).
SOLVE_BODY_TEXT = {400: "The body is not valid JSON.", 415: "The Content-Type is not JSON.",
                   422: "The body is JSON but not a valid problem."}
#: ... for a route with a ``{name}`` (a malformed one is a 400 ``invalid-parameter``).
NAMED_BODY_TEXT = {**SOLVE_BODY_TEXT, 400: "The body is not valid JSON, or the name is malformed."}
#: ... for a route that also takes DIMACS text.
DIMACS_BODY_TEXT = {415: "The Content-Type is neither JSON nor text/x-dimacs."}
#: The 504 of a bounded solve (:mod:`service.api.bounded`) whose problem could be a job.
SOLVE_TIMEOUT_TEXT = "The solve exceeded the synchronous time limit and was stopped; use a job."


def problem(status: int, text: str | None = None, headers: dict | None = None) -> dict:
    """One problem+json response: ``text`` or the standard wording of ``status``."""
    out = {"description": text or PROBLEM_TEXT[status], "content": PROBLEM_CONTENT}
    headers = headers if headers is not None else PROBLEM_HEADERS.get(status)
    if headers:
        out["headers"] = headers
    return out


def problems(*statuses: int, texts: dict[int, str] | None = None) -> dict:
    """The problem+json responses of ``statuses``, keyed as OpenAPI keys them (strings)."""
    texts = texts or {}
    return {str(status): problem(status, texts.get(status)) for status in statuses}


def json_body(schema, example=None) -> dict:
    """A ``content`` map of one JSON schema (a component name or an inline schema)."""
    entry = {"schema": schema}
    if example is not None:
        entry["example"] = example
    return {"application/json": entry}


def text_body(media_type: str, description: str | None = None, example: str | None = None) -> dict:
    """A ``content`` map of one text type (SVG, DIMACS, HTML...)."""
    schema = {"type": "string"}
    if description:
        schema["description"] = description
    entry = {"schema": schema}
    if example is not None:
        entry["example"] = example
    return {media_type: entry}


def ok(description: str, content: dict | None = None, headers: dict | None = None) -> dict:
    """A response that is not a problem."""
    out = {"description": description}
    if headers:
        out["headers"] = headers
    if content:
        out["content"] = content
    return out


def path_parameter(name: str, schema: dict, description: str | None = None) -> dict:
    """A required path parameter (``{name}`` of the route) with its JSON Schema."""
    out = {"name": name, "in": "path", "required": True, "schema": schema}
    if description:
        out["description"] = description
    return out


def header_parameter(name: str, description: str | None = None, required: bool | None = None) -> dict:
    """A string request header (``If-Match``, ``Prefer``...); ``required`` is written only when given."""
    out = {"name": name, "in": "header"}
    if required is not None:
        out["required"] = required
    out["schema"] = {"type": "string"}
    if description:
        out["description"] = description
    return out


@dataclass(frozen=True)
class Operation:
    """One route's OpenAPI operation, as the route declares it.

    ``path_parameters`` belong to the path (shared by every method on it); ``request``
    is the ``content`` map of a required request body; ``schemas`` names the
    marshmallow schemas the operation refers to by component name.
    """

    operation_id: str
    summary: str
    responses: dict
    description: str | None = None
    parameters: tuple = ()
    path_parameters: tuple = ()
    request: dict | None = None
    schemas: dict = field(default_factory=dict)

    def document(self) -> dict:
        """The OpenAPI operation object (schemas still by name: apispec resolves them)."""
        out = {"operationId": self.operation_id, "summary": self.summary}
        if self.description:
            out["description"] = self.description
        if self.parameters:
            out["parameters"] = list(self.parameters)
        if self.request is not None:
            out["requestBody"] = {"required": True, "content": self.request}
        out["responses"] = self.responses
        return out


def operation(operation_id: str, summary: str, *, responses: dict, description: str | None = None,
              parameters=(), path_parameters=(), request: dict | None = None,
              schemas: dict | None = None) -> Callable:
    """Declare the OpenAPI operation of the view function it decorates (see the module doc)."""
    declared = Operation(operation_id, summary, responses, description, tuple(parameters), tuple(path_parameters),
                         request, dict(schemas or {}))

    def attach(view):
        """Attach the declaration to ``view`` and hand it back unchanged."""
        setattr(view, ATTRIBUTE, declared)
        return view
    return attach


def declared(view) -> Operation | None:
    """The operation a view function declares, or ``None``."""
    return getattr(view, ATTRIBUTE, None)


#: The header every solve answer carries (the result cache, RFC 9211).
CACHE_STATUS = {"Cache-Status": {"description": "RFC 9211: how the result cache took part (see above).",
                                 "schema": {"type": "string"}}}


def kind_title(name: str) -> str:
    """The component-name stem of a kind: ``maxflow`` -> ``Maxflow`` (``MaxflowRequest``)."""
    return name.capitalize() if name.islower() else name


def scenario_text(name: str) -> str:
    """An example file of ``service/scenarios`` (the document's examples are the served ones)."""
    return resources.files("service").joinpath("scenarios", name).read_text()


def scenario_json(name: str):
    """An example JSON file of ``service/scenarios``, parsed."""
    return json.loads(scenario_text(name))
