"""The ``nodes`` member: ids, objects with ``id`` (and ``supply``), or columns."""

from __future__ import annotations

from dataclasses import dataclass
from operator import itemgetter

from ..errors import FieldError, InputError
from .columns import MAX_REPORTED_ERRORS
from .ids import IdColumn


@dataclass(frozen=True)
class RawNodes:
    ids: IdColumn
    fields: dict  # extra field name -> IdColumn (values, where)


def read_nodes(raw: object, *, extra_fields: tuple[str, ...] = (), base: str = "/nodes",
               defaults: dict | None = None) -> RawNodes:
    """Read ``nodes`` given as a list of ids, a list of objects, or columns.

    ``defaults``: the value of an extra field a node object leaves out (0 unless given).

    Raises
    ------
    InputError
        Wrong shape, unknown fields, missing ids, unequal column lengths.
    """
    allowed = {"id", *extra_fields}
    if raw is None:
        return RawNodes(IdColumn([], lambda i: f"{base}/{i}"), {})
    if isinstance(raw, dict):
        return _read_columns(raw, allowed, base)
    if not isinstance(raw, list):
        raise InputError.at(base, "must be a list of node ids or node objects, or an object of columns")
    if not any(type(v) is dict for v in raw):
        return RawNodes(IdColumn(raw, lambda i: f"{base}/{i}"), {})
    bad = [i for i, v in enumerate(raw) if type(v) is not dict][:MAX_REPORTED_ERRORS]
    if bad:
        raise InputError([FieldError(f"{base}/{i}", "must be a node object like the others") for i in bad])
    present = set().union(*raw)
    unknown = present - allowed
    if unknown:
        i, name = next((i, k) for i, v in enumerate(raw) for k in v if k in unknown)
        raise InputError.at(f"{base}/{i}/{name}", "unknown field")
    try:
        ids = list(map(itemgetter("id"), raw))
    except KeyError:
        i = next(i for i, v in enumerate(raw) if "id" not in v)
        raise InputError.at(f"{base}/{i}/id", "is required") from None
    extras = {
        name: IdColumn([v.get(name, (defaults or {}).get(name, 0)) for v in raw], _where(base, name, columns=False))
        for name in extra_fields if name in present
    }
    return RawNodes(IdColumn(ids, lambda i: f"{base}/{i}/id"), extras)


def _where(base: str, name: str, *, columns: bool):
    if columns:
        return lambda i: f"{base}/{name}/{i}"
    return lambda i: f"{base}/{i}/{name}"


def _read_columns(raw: dict, allowed: set, base: str) -> RawNodes:
    unknown = set(raw) - allowed
    if unknown:
        raise InputError.at(f"{base}/{sorted(unknown)[0]}", "unknown field")
    if "id" not in raw:
        raise InputError.at(f"{base}/id", "is required")
    columns = {}
    for name, values in raw.items():
        if not isinstance(values, list):
            raise InputError.at(f"{base}/{name}", "must be a list")
        if len(values) != len(raw["id"]):
            raise InputError.at(f"{base}/{name}", f"has {len(values)} entries; {base}/id has {len(raw['id'])}")
        columns[name] = IdColumn(values, _where(base, name, columns=True))
    ids = columns.pop("id")
    return RawNodes(ids, columns)
