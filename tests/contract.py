"""Every response the tests get, checked against the committed OpenAPI document.

``openapi/openapi.yaml`` is what clients generate their code from, so a response it
does not describe (an undocumented status, a body off its schema, another content
type) is a bug of the service or of the document. The checks use openapi-core:

* :class:`SpecClient` is the Flask test client of every app the tests make (conftest
  installs it): each response it gets is checked before the test sees it.
* :class:`SpecSession` is a ``requests`` session that does the same against a real
  server; :func:`spec_session` makes one.
* :func:`check_request_body` checks a body against the documented request schema (a
  test fails when a route answers 200 to a body its own document refuses).

Request bodies are not checked on the way out: some tests send bad input on purpose.
"""

from __future__ import annotations

import gzip
import json
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path
from urllib.parse import parse_qsl, urlsplit

import requests
import yaml
from flask.testing import FlaskClient
from openapi_core import Config, OpenAPI
from openapi_core.contrib.requests import RequestsOpenAPIResponse
from openapi_core.contrib.werkzeug import WerkzeugOpenAPIResponse
from openapi_core.datatypes import RequestParameters
from openapi_core.exceptions import OpenAPIError
from openapi_core.templating.paths.exceptions import OperationNotFound, PathNotFound
from openapi_schema_validator import OAS31Validator
from werkzeug.datastructures import Headers, ImmutableMultiDict

SPEC_FILE = Path(__file__).resolve().parents[1] / "openapi" / "openapi.yaml"


def _text(data: bytes, **parameters) -> str:
    return data.decode()


#: Media types the document uses beyond openapi-core's own (JSON, plain text...).
MEDIA_TYPES = {"application/problem+json": lambda data, **p: json.loads(data),
               **dict.fromkeys(("text/x-dimacs", "image/svg+xml", "text/html", "text/plain", "text/javascript",
                                "text/css"), _text)}

#: Statuses a path the document does not list may answer: a route that is not there.
NOT_A_ROUTE = {404, 405}


@lru_cache(maxsize=None)
def openapi() -> OpenAPI:
    """The committed document, loaded once per test session."""
    return OpenAPI.from_file_path(str(SPEC_FILE), config=Config(extra_media_type_deserializers=MEDIA_TYPES))


@lru_cache(maxsize=None)
def document() -> dict:
    """The committed document as plain data (do not change it: it is shared)."""
    return yaml.safe_load(SPEC_FILE.read_text())


@lru_cache(maxsize=None)
def _problem_validator() -> OAS31Validator:
    doc = document()
    return OAS31Validator({**doc["components"]["schemas"]["Problem"], "components": doc["components"]})


@dataclass
class SpecRequest:
    """What openapi-core reads of a request (its ``Request`` protocol)."""

    method: str
    path: str
    body: bytes | None = None
    content_type: str = "application/json"
    query: list = field(default_factory=list)
    headers: dict = field(default_factory=dict)
    host_url: str = "http://localhost/"
    parameters: RequestParameters = field(init=False)

    def __post_init__(self):
        # A field, not a property: openapi-core writes the path's variables into it.
        self.parameters = RequestParameters(query=ImmutableMultiDict(self.query), header=Headers(self.headers))


class ContractBroken(AssertionError):
    """A response (or a body the service took) that the OpenAPI document does not describe."""


def check_response(request: SpecRequest, response) -> None:
    """Raise :class:`ContractBroken` unless ``response`` is one the document describes.

    ``response`` is an openapi-core response adapter. A path the document does not list
    must be a route that is not there (404 or 405, with a problem body): the document
    leaves no route out.
    """
    if request.method in ("head", "options"):
        return  # HEAD and CORS preflights: answered by Flask and the CORS layer for any route
    where = f"{request.method.upper()} {request.path} -> {response.status_code}"
    try:
        openapi().validate_response(request, response)
    except (PathNotFound, OperationNotFound) as exc:
        if response.status_code not in NOT_A_ROUTE:
            raise ContractBroken(f"{where}: not in openapi.yaml ({exc})") from None
        _check_problem(where, response)
    except OpenAPIError as exc:
        raise ContractBroken(f"{where} breaks openapi.yaml: {_reason(exc)}") from None


def _check_problem(where: str, response) -> None:
    if response.content_type.split(";")[0] != "application/problem+json":
        raise ContractBroken(f"{where}: a missing route answers {response.content_type}, not problem+json")
    errors = sorted(_problem_validator().iter_errors(json.loads(response.data)), key=str)
    if errors:
        raise ContractBroken(f"{where}: the problem breaks the Problem schema: {errors[0].message}")


def _reason(exc: BaseException) -> str:
    """The innermost schema errors of an openapi-core failure (its message alone says little)."""
    parts = [str(exc)[:500]]
    cause = exc.__cause__
    for error in getattr(cause, "schema_errors", None) or ():
        parts.append(f"at {'/'.join(map(str, error.absolute_path)) or '(root)'}: {error.message[:300]}")
    return "; ".join(parts)


def what_if_request_schema(kind: str) -> dict | None:
    """The documented body of ``POST /v1/networks/{name}/<kind>`` (None: no such route)."""
    doc = document()
    path = doc["paths"].get(f"/v1/networks/{{name}}/{kind}")
    if path is None:
        return None
    ref = path["post"]["requestBody"]["content"]["application/json"]["schema"]["$ref"]
    return doc["components"]["schemas"][ref.rsplit("/", 1)[1]]


def as_stored_question(kind: str, body: dict) -> tuple[dict, dict]:
    """A problem body as a client splits it for a stored network: ``(network, question)``.

    The network keeps the arcs and the nodes' own fields; what a stored network holds
    one value of per arc arrives as a change when the body gives a list (a capacity
    per period); the nodes' supplies move to the question's ``supplies`` when the
    what-if takes them. Posting the question to the stored network must answer as
    posting ``body`` whole.
    """
    arcs, changes = [], []
    for i, arc in enumerate(body["arcs"]):
        lists = {k: v for k, v in arc.items() if isinstance(v, list)}
        arcs.append({k: v for k, v in arc.items() if k not in lists})
        if lists:
            changes.append({"arc": i, **lists})
    network = {"arcs": arcs}
    nodes = body.get("nodes") or []
    if nodes:
        own = [{k: v for k, v in n.items() if k != "supply"} if isinstance(n, dict) else {"id": n} for n in nodes]
        network["nodes"] = own if any(len(n) > 1 for n in own) else [n["id"] for n in own]
    question = {k: v for k, v in body.items() if k not in ("arcs", "nodes")}
    supplies = [{"id": n["id"], "supply": n["supply"]} for n in nodes if isinstance(n, dict) and "supply" in n]
    if supplies and "supplies" in what_if_request_schema(kind)["properties"]:
        question["supplies"] = supplies
    if changes:
        question["changes"] = changes
    return network, question


def check_request_body(method: str, path: str, body, content_type: str = "application/json") -> None:
    """Raise :class:`ContractBroken` when the document's request schema for
    ``method path`` refuses ``body`` (a dict is sent as JSON, bytes and text as they are)."""
    data = body.encode() if isinstance(body, str) else body if isinstance(body, bytes) else json.dumps(body).encode()
    request = SpecRequest(method.lower(), path, data, content_type)
    try:
        openapi().validate_request(request)
    except OpenAPIError as exc:
        raise ContractBroken(f"{method.upper()} {path}: the documented request schema refuses the body: "
                             f"{_reason(exc)}") from None


class _DecodedResponse(WerkzeugOpenAPIResponse):
    """A test response as a client reads it: a gzip ``Content-Encoding`` undone
    (``requests`` does that itself)."""

    @property
    def data(self) -> bytes:
        data = super().data
        return gzip.decompress(data) if self.response.headers.get("Content-Encoding") == "gzip" else data


#: Bodies up to this size that a route answered with success are checked against the
#: documented request schema too (larger ones would make the suite slow: jsonschema
#: walks every arc).
CHECKED_BODY_BYTES = 256 * 1024

def check_accepted_body(request: SpecRequest, status: int) -> None:
    """A body the route answered with success must be one its documented request schema
    takes (else a client generated from the document cannot send it)."""
    if not 200 <= status < 300 or request.body is None or len(request.body) > CHECKED_BODY_BYTES:
        return
    if request.method in ("get", "head", "options", "delete"):
        return
    if not request.content_type.startswith(("application/json", "text/x-dimacs")):
        return  # e.g. a gzip-encoded body: the document describes what is inside
    if request.headers.get("Content-Encoding", "identity") != "identity":
        return
    try:
        openapi().validate_request(request)
    except RecursionError:
        return  # nested deeper than the standard library's decoder goes (the service's goes to 1,024)
    except OpenAPIError as exc:
        raise ContractBroken(f"{request.method.upper()} {request.path} answered {status} to a body its documented "
                             f"request schema refuses: {_reason(exc)}") from None


def _sent_body(kwargs: dict) -> tuple[bytes | None, str | None]:
    """The body and content type of a test client call, from its keyword arguments."""
    if "json" in kwargs:
        return json.dumps(kwargs["json"]).encode(), "application/json"
    data = kwargs.get("data")
    if isinstance(data, str):
        data = data.encode()
    headers = dict(kwargs.get("headers") or {})
    content_type = kwargs.get("content_type") or headers.get("Content-Type") or headers.get("content-type")
    return (data, content_type) if isinstance(data, bytes) else (None, None)


class SpecClient(FlaskClient):
    """Flask's test client, checking every response against the document (and every
    body the service took against the documented request schema)."""

    def open(self, *args, **kwargs):
        response = super().open(*args, **kwargs)
        sent = response.request
        request = SpecRequest(sent.method.lower(), sent.path, query=list(sent.args.items(multi=True)),
                              headers=dict(sent.headers))
        check_response(request, _DecodedResponse(response))
        body, content_type = _sent_body(kwargs)
        if body is not None and content_type:
            request.body, request.content_type = body, content_type
            check_accepted_body(request, response.status_code)
        return response


def unchecked_client(app) -> FlaskClient:
    """A plain test client, for a surface the document does not describe (the metrics
    port of ``SLUICE_METRICS=port:N``, which serves nothing but ``/metrics``)."""
    return FlaskClient(app, app.response_class, use_cookies=True)


class SpecSession(requests.Session):
    """A ``requests`` session against a real server, checking every response it gets."""

    def send(self, prepared, **kwargs):
        response = super().send(prepared, **kwargs)
        if kwargs.get("stream"):
            return response  # the caller reads the body as it comes; nothing to check yet
        url = urlsplit(prepared.url)
        request = SpecRequest(prepared.method.lower(), url.path, query=parse_qsl(url.query),
                              headers=dict(prepared.headers))
        check_response(request, RequestsOpenAPIResponse(response))
        body = prepared.body.encode() if isinstance(prepared.body, str) else prepared.body
        if isinstance(body, bytes) and prepared.headers.get("Content-Type"):
            request.body, request.content_type = body, prepared.headers["Content-Type"]
            check_accepted_body(request, response.status_code)
        return response


def spec_session() -> SpecSession:
    """A new :class:`SpecSession` (use it as a context manager to close its connections)."""
    return SpecSession()
