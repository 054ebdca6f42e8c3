"""``POST /v1/batch``: many small problems of any kind in one request.

``{"items": [{"kind": "maxflow", "problem": {...}}, ...]}`` is answered with
``{"results": [...]}`` in the same order. Each result is either the solve response of
its item (as ``POST /v1/<kind>`` would give it) or a problem object (RFC 9457 members
plus ``item``, the item's index) when that item failed; one bad item never fails the
others. The JSON Pointers in an item's errors are relative to the item: ``/kind`` or
``/problem/arcs/3/capacity``.

One synchronous time limit covers the whole batch: an item still waiting when it has
run out gets a 504 problem object without being solved. The request as a whole fails
only when it is not a batch at all (not JSON, no ``items`` list: 400/415/422) or has
more items than ``SLUICE_MAX_BATCH_ITEMS`` (413).
"""

from __future__ import annotations

import logging
from time import perf_counter

from flask import Blueprint, current_app
from marshmallow import INCLUDE, Schema, fields

from ..deadline import Deadline
from ..errors import PROBLEM_BASE, FieldError, InputError, ProblemTooLarge, SluiceError, SolveTimeout
from ..kinds import KINDS, Limits
from ..kinds.nested import under
from .bounded import bounded_solve
from .cache import stage_timing
from .declare import json_body, ok, operation, problems, scenario_json
from .jsonio import json_response, read_json_body

log = logging.getLogger("sluice.api")

bp = Blueprint("batch", __name__, url_prefix="/v1")


class BatchItemSchema(Schema):
    """One item. Items are checked one by one: a malformed item (an unknown member, a
    missing kind) gets a problem object in its place in ``results``, not a 422 for the
    whole batch, so the schema leaves items open."""

    class Meta:
        unknown = INCLUDE

    # Required, but checked per item: a missing one gives that item a problem object.
    kind = fields.Raw(metadata={"description": "Required: a problem kind (string), the path segment of its "
                                               "solve endpoint, e.g. maxflow."})
    problem = fields.Raw(metadata={"description": "Required: the request body (object) that POST /v1/{kind} "
                                                  "takes."})


class BatchRequest(Schema):
    # Items are checked one by one (a bad item answers with its own problem object),
    # so the document accepts any item and describes the expected one.
    items = fields.List(fields.Raw(metadata={
        "description": "An object with kind and problem (see BatchItem); anything else answers with a problem "
                       "object in its place."}), required=True)


class BatchResponse(Schema):
    results = fields.List(fields.Dict(), metadata={
        "description": "One per item, in order: the item's solve response, or a problem object (type, title, "
                       "status as an integer, detail, errors with pointers relative to the item, item)."})


def read_items(body, max_items: int) -> list:
    """The ``items`` list of a batch body.

    Raises
    ------
    InputError
        The body is not an object with an ``items`` list (and nothing else).
    ProblemTooLarge
        More than ``max_items`` items.
    """
    if not isinstance(body, dict):
        raise InputError.at("", "the request body must be a JSON object with an items list")
    unknown = sorted(set(body) - {"items"})
    if unknown:
        raise InputError.at(f"/{unknown[0]}", "unknown field")
    items = body.get("items")
    if not isinstance(items, list):
        raise InputError.at("/items", "is required: a list of {kind, problem} objects")
    if len(items) > max_items:
        raise ProblemTooLarge(FieldError("/items", f"has {len(items)} items; the limit is {max_items}"))
    return items


def problem_object(exc: SluiceError, index: int) -> dict:
    """An item's failure as a problem object (RFC 9457 members plus ``item``)."""
    out = {"type": PROBLEM_BASE + exc.slug, "title": exc.title, "status": exc.status, "detail": exc.detail}
    out.update(exc.extra())
    out["item"] = index
    return out


def _kind_of(item) -> object:
    if not isinstance(item, dict):
        raise InputError.at("", "an item must be an object with kind and problem")
    unknown = sorted(set(item) - {"kind", "problem"})
    if unknown:
        raise InputError.at(f"/{unknown[0]}", "unknown field")
    if "kind" not in item:
        raise InputError.at("/kind", "is required")
    kind = KINDS.get(item["kind"]) if isinstance(item["kind"], str) else None
    if kind is None:
        raise InputError.at("/kind", f"must be one of {', '.join(sorted(KINDS))}")
    if "problem" not in item:
        raise InputError.at("/problem", "is required")
    return kind


def solve_item(item, limits: Limits, deadline: Deadline) -> dict:
    """Parse and solve one item within what is left of the batch's ``deadline`` (and
    its own ``options.time_limit``); errors carry pointers relative to the item."""
    started = perf_counter()
    kind = _kind_of(item)
    with under("/problem"):
        problem = kind.parse(item["problem"], limits)
        parsed = perf_counter()
        result = bounded_solve(kind, problem, deadline.within(problem.options.get("time_limit")))
    done = perf_counter()
    result["timing_ms"] = stage_timing(started, parsed, done)
    return result


def run_batch(items: list, limits: Limits, deadline: Deadline) -> list:
    """Solve every item in order before ``deadline``; each item fails on its own."""
    results = []
    for index, item in enumerate(items):
        try:
            if deadline.expired():
                raise SolveTimeout("the batch's time limit ran out before this item was solved")
            results.append(solve_item(item, limits, deadline))
        except SluiceError as exc:
            if exc.status >= 500:
                log.error("batch item %d failed: %s", index, exc.detail)
            results.append(problem_object(exc, index))
        except Exception:  # noqa: BLE001 - one broken item must not fail the others
            log.exception("batch item %d failed", index)
            results.append(problem_object(SluiceError("the server failed to solve this item; the error was "
                                                      "logged"), index))
    return results


@bp.post("/batch")
@operation("batch", "Solve many small problems of any kind in one request, answered in order",
           request=json_body("BatchRequest", scenario_json("batch-depots.json")),
           schemas={"BatchItem": BatchItemSchema, "BatchRequest": BatchRequest, "BatchResponse": BatchResponse},
           responses={"200": ok("One result per item: a solve response or a problem object.",
                                json_body("BatchResponse")),
                      **problems(400, 413, 415, 422)})
def batch():
    """Solve many small problems of any kind in one request."""
    state = current_app.extensions["sluice"]
    items = read_items(read_json_body(), state.settings.max_batch_items)
    # One deadline for the whole batch: SLUICE_TIME_LIMIT from now.
    return json_response({"results": run_batch(items, state.limits, Deadline.after(state.settings.time_limit))})
