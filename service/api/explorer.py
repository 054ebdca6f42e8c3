"""The explorer page at ``/`` and the example scenarios it offers.

``GET /`` serves ``service/static/explorer.html`` (plain HTML with a little
JavaScript, no build step); ``GET /explorer/{name}`` its script and style sheet.
``GET /v1/scenarios`` lists the invented example files in :data:`EXAMPLES` (those the
kinds declare, :attr:`Kind.example <service.kinds.base.Kind.example>` and
``Kind.examples``, and :data:`SHARED_EXAMPLES`) and ``GET /v1/scenarios/{name}``
returns one of them; other files a user writes into ``service/scenarios/`` are not
served.

A scenario's kind comes from its file name: the stem's first ``-``-separated word
that names a kind (``depots-maxflow-columns`` is a max-flow request); its endpoint is
given only when that kind is registered.
A stem starting with ``verify-`` is a body for ``POST /v1/verify/{kind}``, one
starting with ``batch-`` a body for ``POST /v1/batch``.
"""

from __future__ import annotations

import json
from importlib import resources

from flask import Blueprint, Response
from marshmallow import Schema, fields

from ..errors import NotFound
from ..kinds import KINDS
from ..model.dimacs import MEDIA_TYPE as DIMACS_MEDIA_TYPE
from .declare import json_body, ok, operation, path_parameter, problems, text_body
from .jsonio import json_response

bp = Blueprint("explorer", __name__)

STATIC = {"explorer.js": "text/javascript", "explorer.css": "text/css"}


class ScenarioSchema(Schema):
    name = fields.String(metadata={"description": "The JSON file's stem, or the DIMACS file's name; GET "
                                                 "/v1/scenarios/{name} returns the body."})
    kind = fields.String(allow_none=True, metadata={"description": "The problem kind, from the file name."})
    endpoint = fields.String(allow_none=True, metadata={"description": "Where the body is meant to be POSTed."})
    title = fields.String(metadata={"description": "A one-line description."})
    media_type = fields.String(metadata={"description": "application/json, or text/x-dimacs for DIMACS files."})


class ScenarioListSchema(Schema):
    scenarios = fields.List(fields.Nested(ScenarioSchema))


#: Example files that belong to no one kind, so no Kind declares them: a batch body
#: holds items of several kinds.
SHARED_EXAMPLES = ("batch-depots.json",)

#: The example files served (a file in service/scenarios/ not named here is not): each
#: kind's ``example`` and ``examples`` (its Kind declaration), and :data:`SHARED_EXAMPLES`.
EXAMPLES = tuple(sorted({name for kind in KINDS.values() for name in (kind.example, *kind.examples)}
                        | set(SHARED_EXAMPLES)))


def _folder():
    return resources.files("service").joinpath("scenarios")


def _describe(name: str, suffix: str) -> dict:
    words = name.removesuffix(".dimacs").split("-")
    kind = next((w for w in words if w in KINDS), None)
    if words[0] == "verify":
        endpoint = f"/v1/verify/{kind}" if kind else None
    elif words[0] == "batch":
        endpoint, kind = "/v1/batch", None
    else:
        endpoint = f"/v1/{kind}" if kind in KINDS else None
    title = " ".join(w for w in words if w != kind and w not in ("verify", "batch"))
    return {"name": name, "kind": kind, "endpoint": endpoint, "title": title or name,
            "media_type": "text/x-dimacs" if suffix == ".dimacs" else "application/json"}


def scenario_files() -> dict:
    """name -> (file, suffix) of every declared example: a JSON file is named by its stem,
    a DIMACS file by its whole file name (``depots-maxflow.dimacs``)."""
    out = {}
    for entry in sorted((_folder().joinpath(name) for name in EXAMPLES), key=lambda e: e.name):
        if entry.name.endswith(".json"):
            out[entry.name[: -len(".json")]] = (entry, ".json")
        elif entry.name.endswith(".dimacs"):
            out[entry.name] = (entry, ".dimacs")
    return out


@bp.get("/")
@operation("explorer", "The explorer page: pick or paste a problem, solve, see the diagram",
           responses={"200": ok("An HTML page.", text_body("text/html"))})
def explorer():
    """The explorer page: pick or paste a problem, solve it, see the diagram."""
    html = resources.files("service").joinpath("static", "explorer.html").read_text()
    return Response(html, mimetype="text/html")


@bp.get("/explorer/<name>")
@operation("explorer_asset", "The explorer page's script and style sheet",
           parameters=[path_parameter("name", {"type": "string", "enum": list(STATIC)})],
           responses={"200": ok("The file.", {media: {"schema": {"type": "string"}} for media in STATIC.values()}),
                      **problems(404)})
def explorer_asset(name: str):
    """The explorer page's script and style sheet."""
    if name not in STATIC:
        raise NotFound(f"no explorer file {name!r}")
    text = resources.files("service").joinpath("static", name).read_text()
    return Response(text, mimetype=STATIC[name], headers={"Cache-Control": "no-cache"})


@bp.get("/v1/scenarios")
@operation("list_scenarios", "The invented example problems",
           schemas={"ScenarioList": ScenarioListSchema},
           responses={"200": ok("Name, kind, endpoint and title of each.", json_body("ScenarioList"))})
def scenarios():
    """The example scenarios (invented data), with the kind and endpoint of each."""
    return json_response({"scenarios": [_describe(name, suffix) for name, (_, suffix) in scenario_files().items()]})


@bp.get("/v1/scenarios/<name>")
@operation("get_scenario", "One example problem's request body",
           parameters=[path_parameter("name", {"type": "string"})],
           responses={"200": ok("The body, ready to POST to its endpoint.",
                                {**json_body({"type": "object"}), **text_body(DIMACS_MEDIA_TYPE)}),
                      **problems(404)})
def scenario(name: str):
    """One example scenario's request body."""
    files = scenario_files()
    if name not in files:
        raise NotFound(f"no scenario {name!r}; GET /v1/scenarios lists them")
    entry, suffix = files[name]
    text = entry.read_text()
    if suffix == ".dimacs":
        return Response(text, mimetype="text/x-dimacs")
    return json_response(json.loads(text))
