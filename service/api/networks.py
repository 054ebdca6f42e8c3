"""Stored networks: upload once, then ask what-ifs without sending the arcs again.

``PUT/GET/DELETE /v1/networks/{name}``, ``GET /v1/networks`` (paged) and
``POST /v1/networks/{name}/{kind}`` for every kind with ``from_network``. A stored
network may carry the optional columns of the planning and over-time kinds
(:mod:`service.model.stored`). Versions carry ETags; ``If-Match``
makes a write conditional and the store checks it atomically (412 when stale).
"""

from __future__ import annotations

from time import perf_counter

from flask import Blueprint, Response, current_app, request, url_for
from marshmallow import RAISE, Schema, fields

from ..errors import InputError
from ..kinds import KINDS, Limits
from ..model.arcs import Network, export_network, read_network_with
from ..model.stored import DEFAULTS, STORED_ARC_FIELDS, STORED_NODE_FIELDS, read_extra
from ..model.changes import apply_changes
from ..model.schemas import ArcsField, NodesField, load_envelope
from ..store import InvalidParameter, NetworkMeta, Preconditions, check_name, network_digest
from . import cache
from .storage import get_store, tenant
from ..model.dimacs import MEDIA_TYPE as DIMACS_MEDIA_TYPE
from .declare import CACHE_STATUS, DIMACS_BODY_TEXT, NAMED_BODY_TEXT, header_parameter, json_body, kind_title, ok
from .declare import SOLVE_TIMEOUT_TEXT, operation, path_parameter, problem, problems, text_body
from .jsonio import decode_body, dimacs_response, json_response, read_json_body

bp = Blueprint("networks", __name__, url_prefix="/v1/networks")

MAX_PAGE = 1000
DEFAULT_PAGE = 100


class NetworkRequest(Schema):
    """The body of ``PUT /v1/networks/{name}``: the network alone, no question yet."""

    class Meta:
        unknown = RAISE

    nodes = NodesField(load_default=None, metadata={"description": "Optional node ids (or objects with id), "
                                                                   "to fix their order or add isolated nodes."})
    arcs = ArcsField(required=True, metadata={"description": "Arcs in object or columnar form; give key to "
                                                             "address arcs by label in changes. Optional columns "
                                                             "for the planning and over-time questions: "
                                                             "expand_cost, expand_max, expand_fixed (expansion) "
                                                             "and transit (flowovertime); nodes may carry "
                                                             "holdover and holdover_cost."})


class NetworkMetaSchema(Schema):
    name = fields.String()
    version = fields.Integer(metadata={"description": "1 for a new network, +1 on every successful PUT."})
    etag = fields.String(metadata={"description": "The version's entity tag, as in the ETag header."})
    digest = fields.String(metadata={"description": "sha256 of the stored network's normalised arrays."})
    node_count = fields.Integer()
    arc_count = fields.Integer()
    size = fields.Integer(metadata={"description": "Bytes the stored arrays take."})
    created = fields.String(metadata={"description": "When the first version was stored (RFC 3339)."})
    updated = fields.String(metadata={"description": "When this version was stored (RFC 3339)."})


class NetworkBodySchema(NetworkMetaSchema):
    nodes = fields.Raw(metadata={"oneOf": [{"type": "array"}, {"type": "object"}],
                                 "description": "With ?include=arcs: node ids in index order; columns "
                                                "{id: [...], holdover: [...], ...} when the nodes carry fields."})
    arcs = fields.Dict(metadata={"description": "With ?include=arcs: the arcs in columnar form; PUT it back "
                                                "to get the same digest."})


class NetworkListSchema(Schema):
    networks = fields.List(fields.Nested(NetworkMetaSchema), metadata={"description": "Sorted by name."})
    next = fields.String(allow_none=True, metadata={"description": "URL of the next page; null on the last."})


class ChangeSchema(Schema):
    """One what-if change (documentation; validated column-wise)."""

    arc = fields.Integer(metadata={"description": "Index of the arc in the stored network (0-based)."})
    key = fields.String(metadata={"description": "The arc's key, instead of arc."})
    capacity = fields.Raw(allow_none=True, metadata={"description": "New capacity (>= 0); null for no limit; for "
                                                                    "flowovertime also a list of one capacity (or "
                                                                    "null) per period."})
    cost = fields.Float(metadata={"description": "New cost per unit."})
    closed = fields.Boolean(metadata={"description": "true: the arc carries no flow (capacity and lower bound 0). "
                                                     "Cannot be combined with capacity."})
    expand_cost = fields.Float(allow_none=True, metadata={"description": "expansion: cost per unit added (>= 0); "
                                                                         "null: the lane cannot be widened."})
    expand_max = fields.Float(allow_none=True, metadata={"description": "expansion: most units added; null: no limit."})
    expand_fixed = fields.Float(metadata={"description": "expansion: one-off charge for widening the lane (>= 0)."})
    transit = fields.Integer(metadata={"description": "flowovertime: whole periods on the lane (>= 0)."})
    node = fields.Raw(metadata={"description": "A node id, instead of arc or key: a node change (flowovertime), "
                                               "giving holdover or holdover_cost."})
    holdover = fields.Float(allow_none=True, metadata={"description": "Units that may wait at the node from one "
                                                                      "period to the next; null: no limit."})
    holdover_cost = fields.Float(metadata={"description": "Per unit per period waiting at the node (>= 0)."})


#: What the operations below declare (the OpenAPI entries of these routes).
_NAME = path_parameter("name", {"type": "string", "minLength": 1, "maxLength": 128,
                                "pattern": "^[A-Za-z0-9][A-Za-z0-9._-]*$"})
_IF_MATCH = header_parameter("If-Match", "Only write if the current version has this ETag (or any version, for *).")
_ETAG = {"ETag": {"description": "The version's entity tag.", "schema": {"type": "string"}}}
_BAD_NAME = problem(400, "The name (or another parameter) is malformed.")
_NOT_FOUND = problem(404, "No such network.")
_STALE = problem(412, "If-Match or If-None-Match did not hold.")
_UNAVAILABLE = problem(503)
_META = json_body("NetworkMeta")
_PUT_BODY = {**json_body("NetworkRequest"), **text_body(DIMACS_MEDIA_TYPE, "A DIMACS max-flow or min-cost flow file; "
                                                        "its s/t designations and supplies are not stored.")}


def _limits() -> Limits:
    return current_app.extensions["sluice"].limits


def _etag(meta: NetworkMeta) -> str:
    return f'"{meta.etag}"'


def _preconditions() -> Preconditions:
    """If-Match / If-None-Match of a write; If-Match uses strong comparison (RFC 9110 13.1.1)."""
    def parse(header: str, etags):
        """The tags of a precondition header: None when it is absent, ``"*"`` for any version, else the
        set of its strong tags (weak ones are left out).
        """
        if header not in request.headers:
            return None
        return "*" if etags.star_tag else frozenset(etags.as_set(include_weak=False))

    return Preconditions(parse("If-Match", request.if_match), parse("If-None-Match", request.if_none_match))


def read_network(body, limits: Limits) -> Network:
    """Validate and normalise a network body (nodes and arcs, no question).

    Raises
    ------
    InputError
        Naming the field by JSON Pointer.
    """
    envelope = load_envelope(NetworkRequest(), body)
    # Supplies belong to the question (POST .../mincostflow), not to the stored
    # network; a node's supply here (e.g. from a DIMACS min file) is not stored.
    network, nodes, arc_columns = read_network_with(
        envelope["arcs"], envelope["nodes"], max_arcs=limits.max_arcs, max_nodes=limits.max_nodes,
        node_fields=("supply",) + STORED_NODE_FIELDS, arc_fields=STORED_ARC_FIELDS, node_defaults=DEFAULTS)
    node_columns = {name: nodes.fields[name] for name in STORED_NODE_FIELDS if name in nodes.fields}
    network.extra = read_extra(arc_columns, node_columns, len(nodes.ids.values), network.num_nodes)
    return network


@bp.put("/<name>")
@operation("put_network", "Store a network (a new version when it exists).", path_parameters=[_NAME],
           parameters=[_IF_MATCH, header_parameter("If-None-Match", "* : only create, never replace.")],
           request=_PUT_BODY, schemas={"NetworkRequest": NetworkRequest, "NetworkMeta": NetworkMetaSchema},
           responses={"201": ok("Created.", _META, headers=_ETAG), "200": ok("Replaced by a new version.", _META,
                                                                             headers=_ETAG),
                      **problems(400, 413, 415, 422, 500, texts={**NAMED_BODY_TEXT, **DIMACS_BODY_TEXT}),
                      "412": _STALE,
                      "503": _UNAVAILABLE})
def put_network(name: str):
    """Store a network (201 new, 200 replaced), optionally only if If-Match holds."""
    check_name(name)
    pre = _preconditions()
    store = get_store()
    # The body is checked before the preconditions, so a malformed request is a 4xx
    # for its body whatever the ETags say; the store checks If-Match atomically.
    network = read_network(decode_body("network", arc_columns=True), _limits())
    meta, created = store.put_network(tenant(), name, network, network_digest(network), pre)
    headers = {"ETag": _etag(meta)}
    if created:
        headers["Location"] = url_for("networks.get_network", name=name)
    return json_response(meta.as_dict(), 201 if created else 200, headers=headers)


@bp.get("/<name>")
@operation("get_network", "A stored network's metadata (and arcs with ?include=arcs).", path_parameters=[_NAME],
           parameters=[{"name": "include", "in": "query", "schema": {"type": "string", "enum": ["arcs"]}},
                       header_parameter("If-None-Match")],
           schemas={"NetworkBody": NetworkBodySchema},
           responses={"200": ok("The current version. With `Accept: text/x-dimacs` the arcs as a DIMACS min-cost "
                                "flow file (zero supplies).",
                                {**json_body("NetworkBody"), **text_body(DIMACS_MEDIA_TYPE)}, headers=_ETAG),
                      "304": ok("Not modified (If-None-Match holds the current ETag)."),
                      "400": _BAD_NAME, "404": _NOT_FOUND, "503": _UNAVAILABLE})
def get_network(name: str):
    """A stored network's metadata; with ?include=arcs its nodes and arcs too."""
    check_name(name)
    include = _include()
    store = get_store()
    meta = store.network_meta(tenant(), name)
    if request.if_none_match.contains_weak(meta.etag):
        return Response(status=304, headers={"ETag": _etag(meta)})
    if request.accept_mimetypes.best_match(["application/json", DIMACS_MEDIA_TYPE]) == DIMACS_MEDIA_TYPE:
        # A stored network has no source, sink or supplies: it is written as a min-cost
        # flow file (which carries lower bounds and costs) with zero supplies.
        loaded = store.load_network(tenant(), name)
        response = dimacs_response(loaded.network, "min", title=f"stored network {name} v{loaded.meta.version}")
        response.headers["ETag"] = _etag(loaded.meta)
        return response
    if not include:
        return json_response(meta.as_dict(), headers={"ETag": _etag(meta)})
    loaded = store.load_network(tenant(), name)
    out = loaded.meta.as_dict()
    out.update(export_network(loaded.network))
    return json_response(out, headers={"ETag": _etag(loaded.meta)})


def _include() -> set:
    raw = request.args.get("include")
    if raw is None or raw == "":
        return set()
    parts = set(raw.split(","))
    if parts - {"arcs"}:
        raise InvalidParameter("include", "the only value is arcs")
    return parts


@bp.delete("/<name>")
@operation("delete_network", "Remove a stored network.", path_parameters=[_NAME], parameters=[_IF_MATCH],
           responses={"204": ok("Removed."), "400": _BAD_NAME, "404": _NOT_FOUND, "412": _STALE,
                      "503": _UNAVAILABLE})
def delete_network(name: str):
    """Remove a stored network (204), optionally only if If-Match holds."""
    check_name(name)
    get_store().delete_network(tenant(), name, _preconditions())
    return Response(status=204)


@bp.get("")
@operation("list_networks", "Stored networks, by name, a page at a time.",
           parameters=[{"name": "limit", "in": "query",
                        "schema": {"type": "integer", "minimum": 1, "maximum": MAX_PAGE, "default": DEFAULT_PAGE}},
                       {"name": "after", "in": "query", "schema": {"type": "string"},
                        "description": "Start after this name (the next link sets it)."}],
           schemas={"NetworkMeta": NetworkMetaSchema, "NetworkList": NetworkListSchema},
           responses={"200": ok("One page; next is the URL of the following page, or null.", json_body("NetworkList")),
                      "400": _BAD_NAME, "503": _UNAVAILABLE})
def list_networks():
    """The tenant's networks by name, ``limit`` per page (default 100, at most 1000), after ``after``."""
    limit = _int_arg("limit", DEFAULT_PAGE, 1, MAX_PAGE)
    after = request.args.get("after") or None
    if after is not None:
        check_name(after, "after")
    metas = get_store().list_networks(tenant(), after, limit + 1)
    more = len(metas) > limit
    metas = metas[:limit]
    nxt = url_for("networks.list_networks", after=metas[-1].name, limit=limit) if more else None
    headers = {"Link": f'<{nxt}>; rel="next"'} if nxt else None
    return json_response({"networks": [m.as_dict() for m in metas], "next": nxt}, headers=headers)


def _int_arg(name: str, default: int, low: int, high: int) -> int:
    raw = request.args.get(name)
    if raw is None or raw == "":
        return default
    if not raw.isdigit() or not low <= int(raw) <= high:
        raise InvalidParameter(name, f"must be an integer from {low} to {high}")
    return int(raw)


def what_if_kinds() -> list[str]:
    """Kinds that can be asked of a stored network (they declare ``from_network``)."""
    return [name for name, kind in KINDS.items() if kind.from_network is not None]


def what_if(name: str, kind_name: str):
    """Solve a question about a stored network with optional ``changes``; the store is not modified."""
    started = perf_counter()
    check_name(name)
    kind = KINDS[kind_name]
    body = read_json_body()
    if not isinstance(body, dict):
        raise InputError.at("", "the request body must be a JSON object")
    query = {k: v for k, v in body.items() if k != "changes"}
    loaded = get_store().load_network(tenant(), name)
    network = apply_changes(loaded.network, body.get("changes"), key_index=loaded.key_index,
                            periods=kind.per_period_capacity)
    problem = kind.from_network(network, query, _limits())
    meta = loaded.meta
    return cache.answer(kind, problem, started=started,
                        extra={"network": {"name": meta.name, "version": meta.version, "etag": _etag(meta)}})


def what_if_schemas(kind) -> tuple[type, type]:
    """Request and response schemas of a kind's what-if: its ``query_schema`` with
    ``changes``, its response with ``network`` (made once per kind: marshmallow registers classes)."""
    title = kind_title(kind.name)
    request_schema = type(f"{title}WhatIfRequest", (kind.query_schema,), {
        "changes": fields.List(fields.Nested(ChangeSchema), allow_none=True, metadata={
            "description": "Changes to apply for this question only; each arc at most once."}),
    })
    response_schema = type(f"{title}WhatIfResponse", (kind.response_schema,), {
        "network": fields.Dict(metadata={"description": "name, version and etag of the version that answered."}),
    })
    return request_schema, response_schema


def what_if_operation(kind):
    """``POST /v1/networks/{name}/{kind}``, from the kind's ``query_schema`` and ``response_schema``."""
    title = kind_title(kind.name)
    request_schema, response_schema = what_if_schemas(kind)
    return operation(
        f"what_if_{kind.name}",
        f"{kind.summary}, on a stored network with optional changes (the store is not modified).",
        path_parameters=[_NAME], request=json_body(f"{title}WhatIfRequest"),
        schemas={"Change": ChangeSchema, f"{title}WhatIfRequest": request_schema,
                 f"{title}WhatIfResponse": response_schema},
        responses={"200": ok("Solved.", json_body(f"{title}WhatIfResponse"), headers=CACHE_STATUS),
                   **problems(400, 413, 415, 422, 500, texts=NAMED_BODY_TEXT), "404": _NOT_FOUND,
                   "503": _UNAVAILABLE,
                   # the same bounded solve as POST /v1/{kind}: a stored network's question can run out too
                   "504": problem(504, SOLVE_TIMEOUT_TEXT)})


# One route per kind that can be asked of a stored network, so that every route has
# its own entry in the OpenAPI document.
for _name in what_if_kinds():
    bp.add_url_rule(f"/<name>/{_name}", endpoint=f"what_if_{_name}", methods=["POST"],
                    view_func=what_if_operation(KINDS[_name])(lambda name, _kind=_name: what_if(name, _kind)))
