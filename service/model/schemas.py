"""marshmallow building blocks for request envelopes and the OpenAPI document.

The envelope (source, sink, options, unknown members) is validated here. Arcs and
nodes are *documented* here but validated column-wise by :mod:`service.model.arcs`
and :mod:`service.model.nodes`: a nested per-arc schema is far too slow for large
networks.
"""

from __future__ import annotations

import math

from marshmallow import RAISE, Schema, ValidationError, fields, validate

from ..errors import FieldError, InputError, pointer
from .ids import MAX_ID_LENGTH

NODE_ID_MESSAGE = "must be a node id: a string of 1-200 characters or a non-negative integer"


class NodeId(fields.Field):
    """A node id: a string of 1-200 characters or a non-negative integer."""

    def _deserialize(self, value, attr, data, **kwargs):
        if type(value) is str and 1 <= len(value) <= MAX_ID_LENGTH:
            return value
        if type(value) is int and value >= 0:
            return value
        raise ValidationError(NODE_ID_MESSAGE)


class StrictNumber(fields.Field):
    """A finite JSON number; booleans and numeric strings are rejected."""

    def __init__(self, *, minimum: float | None = None, exclusive: bool = False, **kwargs):
        super().__init__(**kwargs)
        self.minimum = minimum
        self.exclusive = exclusive

    def _deserialize(self, value, attr, data, **kwargs):
        if type(value) not in (int, float) or (type(value) is float and not math.isfinite(value)):
            raise ValidationError("must be a finite number")
        if self.minimum is not None:
            if value < self.minimum or (self.exclusive and value == self.minimum):
                op = ">" if self.exclusive else ">="
                raise ValidationError(f"must be {op} {self.minimum:g}")
        return value


class StrictBoolean(fields.Field):
    def _deserialize(self, value, attr, data, **kwargs):
        if type(value) is not bool:
            raise ValidationError("must be true or false")
        return value


class ArcsField(fields.Raw):
    """Arcs in object form or columnar form (validated column-wise, not here)."""


class NodesField(fields.Raw):
    """Nodes as a list of ids or objects, or columns (validated column-wise)."""


#: One capacity in the document: a bound >= 0, or null for no limit.
_CAPACITY = {"type": ["number", "null"], "minimum": 0}


class ArcSchema(Schema):
    """One arc in object form (documentation of the arc fields)."""

    from_ = NodeId(data_key="from", required=True, metadata={"description": "Tail node id."})
    to = NodeId(required=True, metadata={"description": "Head node id."})
    capacity = fields.Raw(metadata={
        "description": "Upper bound on the flow; null or absent means no limit. Flows over time: also a list of "
                       "one such bound per departure period.",
        "oneOf": [_CAPACITY, {"type": "array", "items": _CAPACITY}]})
    cost = fields.Float(metadata={"description": "Cost per unit of flow (default 0)."})
    lower = fields.Float(metadata={"description": "Lower bound on the flow (default 0).", "minimum": 0})
    key = fields.String(
        allow_none=True,
        metadata={"description": "Client label, unique within the network; used to address the arc in changes."},
    )
    transit = fields.Integer(metadata={"description": "Flows over time only: whole periods a unit spends on the "
                                                     "lane (default 0).", "minimum": 0})
    expand_cost = fields.Float(allow_none=True, metadata={
        "description": "Expansion only: cost per unit of capacity added to this lane; absent or null = the lane "
                       "cannot be widened.", "minimum": 0})
    expand_max = fields.Float(allow_none=True, metadata={
        "description": "Expansion only: the most capacity that may be added; absent or null = no limit.",
        "minimum": 0})
    expand_fixed = fields.Float(metadata={
        "description": "Expansion only: a one-off charge for widening this lane at all (default 0).", "minimum": 0})


class ArcColumnsSchema(Schema):
    """Arcs in columnar form: parallel arrays, one entry per arc."""

    from_ = fields.List(NodeId(), data_key="from", required=True)
    to = fields.List(NodeId(), required=True)
    capacity = fields.List(fields.Raw(metadata={"oneOf": [_CAPACITY, {"type": "array", "items": _CAPACITY}]}))
    transit = fields.List(fields.Integer(metadata={"minimum": 0}))
    cost = fields.List(fields.Float())
    lower = fields.List(fields.Float())
    key = fields.List(fields.String(allow_none=True))
    expand_cost = fields.List(fields.Float(allow_none=True))
    expand_max = fields.List(fields.Float(allow_none=True))
    expand_fixed = fields.List(fields.Float())


class OptionsSchema(Schema):
    """Options shared by every solve endpoint."""

    class Meta:
        unknown = RAISE

    engine = fields.String(
        load_default="auto",
        validate=validate.OneOf(["auto", "graph", "lp"]),
        metadata={"description": "auto: the exact graph solver for integers and for decimals of at most 9 "
                                 "places (as written; solved exactly by scaling), refusing with a 422 what it "
                                 "cannot hold exactly; other fractions go to GLOP with a stated tolerance "
                                 "(max-flow solves those exactly too, on their binary values). graph: the exact "
                                 "solver only. lp: force GLOP (stated tolerance)."},
    )
    time_limit = StrictNumber(
        # A limit below 10 ms cannot cover even the dispatch to the solver process; with
        # 5e-324 GLOP stopped at once and a valid body got a 504.
        minimum=0.01, exclusive=False, load_default=None, allow_none=True,
        metadata={"description": "Seconds, at least 0.01; capped by the server's synchronous limit.",
                  "type": "number"},
    )
    cache = fields.String(load_default="use", validate=validate.OneOf(["use", "refresh", "bypass"]))


def detail_field(choices: list[str]) -> fields.List:
    """The ``detail`` request field: which optional parts of the answer to include.

    Parameters
    ----------
    choices : list of str
        The parts a kind can add to its answer.

    Returns
    -------
    marshmallow.fields.List
        Strings from ``choices``; absent means ``None`` (all parts that apply).
    """
    return fields.List(
        fields.String(validate=validate.OneOf(choices)),
        load_default=None,
        metadata={"description": "Parts of the answer to include; default all that apply."},
    )


def flatten_messages(messages, prefix: tuple = ()) -> list[FieldError]:
    """Turn marshmallow's nested error messages into JSON Pointer field errors.

    A walk with its own stack (in the messages' order), not recursion, like every walk
    of what a request body decoded to.
    """
    out: list[FieldError] = []
    todo = [(messages, prefix)]
    while todo:
        item, at = todo.pop()
        if isinstance(item, dict):
            todo.extend(reversed([(value, at if key == "_schema" else at + (key,)) for key, value in item.items()]))
        elif isinstance(item, list) and not all(isinstance(m, str) for m in item):
            todo.extend(reversed([(m, at) for m in item]))
        elif isinstance(item, list):
            out.extend(FieldError(pointer(*at), _lower_first(m)) for m in item)
        else:
            out.append(FieldError(pointer(*at), _lower_first(str(item))))
    return out


def _lower_first(message: str) -> str:
    message = message.rstrip(".")
    if message == "Unknown field":
        return "unknown field"
    if message == "Missing data for required field":
        return "is required"
    return message[:1].lower() + message[1:]


def load_envelope(schema: Schema, body: object) -> dict:
    """Validate a request envelope; raise :class:`InputError` with pointers."""
    if not isinstance(body, dict):
        raise InputError.at("", "the request body must be a JSON object")
    try:
        return schema.load(body)
    except ValidationError as exc:
        raise InputError(flatten_messages(exc.messages)) from None
