"""Linear programs: request members -> numpy arrays and one CSR matrix.

Variables and constraints come as lists of objects (for people) or as objects of
columns (for machines); coefficients come from each constraint's ``terms`` and/or a
sparse ``matrix`` of (row, column, value) arrays. Everything is read column by
column: C-level ``map``/``chain`` over the decoded lists, numpy checks, and a Python
loop only to *name* an error once a vectorised check has failed.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import chain, repeat

import numpy as np
import scipy.sparse as sp

from ..errors import FieldError, InputError, ProblemTooLarge, pointer
from .columns import MAX_MAGNITUDE, MAX_REPORTED_ERRORS, number_column
from .ids import lookalike, shown_id
from .records import ID, ID_ALIAS, Records, bound, fold_id_alias, present, read_records, record_ids

VARIABLE_FIELDS = (ID, ID_ALIAS, "lower", "upper")
CONSTRAINT_FIELDS = (ID, ID_ALIAS, "terms", "lower", "upper", "equals")
MATRIX_FIELDS = ("row", "column", "value")
_NO_TERMS: dict = {}


@dataclass
class LinearModel:
    """A normalised LP: ``opt c.x + constant`` s.t. ``row_lower <= A x <= row_upper`` and bounds."""

    variables: list
    constraints: list
    c: np.ndarray
    constant: float
    maximize: bool
    matrix: sp.csr_matrix
    row_lower: np.ndarray
    row_upper: np.ndarray
    col_lower: np.ndarray
    col_upper: np.ndarray


def read_variables(raw, *, max_count: int, base: str = "/variables"):
    """Variables: names, lower bounds (default 0, null = none) and upper bounds (default none).

    Returns
    -------
    (names, lookup, lower, upper)

    Raises
    ------
    InputError
        Bad shape, names or numbers, or a lower bound above the upper bound.
    """
    records = fold_id_alias(read_records(raw, base, VARIABLE_FIELDS, {"lower": 0, "upper": None}, "variable"),
                            base)
    if records.count == 0:
        raise InputError.at(base, "must hold at least one variable")
    if records.count > max_count:
        raise ProblemTooLarge(FieldError(base, f"has {records.count} variables; the limit is {max_count}"))
    names, lookup = record_ids(records, base, "variable")
    lower = bound(records, "lower", 0.0, -np.inf)
    upper = bound(records, "upper", np.inf, np.inf)
    crossed = lower > upper
    if crossed.any():
        idx = np.flatnonzero(crossed)[:MAX_REPORTED_ERRORS]
        if "lower" not in records.columns:  # no variable gives one: the upper is below the default 0
            where = records.columns["upper"][1]
            raise InputError([FieldError(where(int(i)), "must be >= 0, the default lower bound "
                                                        "(give lower to allow less)") for i in idx])
        where = records.columns["lower"][1]
        raise InputError([FieldError(where(int(i)), "must not exceed upper") for i in idx])
    return names, lookup, lower, upper


@dataclass
class _Entries:
    rows: np.ndarray
    cols: np.ndarray
    values: np.ndarray
    where: object  # entry index -> pointer of its value


def read_constraints(raw, lookup: dict, *, max_count: int, base: str = "/constraints"):
    """Constraints: names, row bounds and the coefficients given as ``terms``.

    Returns
    -------
    (names, lower, upper, entries)
        ``lower``/``upper`` are float64 with -inf/inf for none; ``equals`` sets both.

    Raises
    ------
    InputError
        Bad shape, names, numbers or variables; ``equals`` mixed with a bound; no bound
        at all; a lower bound above the upper bound.
    """
    if raw is None:
        raw = []
    records = fold_id_alias(read_records(raw, base, CONSTRAINT_FIELDS,
                                          {"terms": _NO_TERMS, "lower": None, "upper": None, "equals": None},
                                          "constraint"), base)
    if records.count > max_count:
        raise ProblemTooLarge(FieldError(base, f"has {records.count} constraints; the limit is {max_count}"))
    if records.form == "columns" and ID not in records.columns:
        raise InputError.at(f"{base}/{ID}", "is required")
    if records.count == 0:
        return [], np.empty(0), np.empty(0), _empty_entries()
    names, _ = record_ids(records, base, "constraint")
    if "terms" in records.columns and records.form == "columns":
        raise InputError.at(f"{base}/terms", "columnar constraints take their coefficients from matrix")
    lower = bound(records, "lower", -np.inf, -np.inf)
    upper = bound(records, "upper", np.inf, np.inf)
    equals = bound(records, "equals", np.nan, np.nan)
    has_eq = present(records, "equals")
    mixed = has_eq & (present(records, "lower") | present(records, "upper"))
    if mixed.any():
        where = records.columns["equals"][1]
        idx = np.flatnonzero(mixed)[:MAX_REPORTED_ERRORS]
        raise InputError([FieldError(where(int(i)), "give equals, or lower and/or upper, not both") for i in idx])
    lower = np.where(has_eq, equals, lower)
    upper = np.where(has_eq, equals, upper)
    free = ~np.isfinite(lower) & ~np.isfinite(upper)
    if free.any():
        where = (lambda i: f"{base}/{i}") if records.form == "objects" else records.columns[ID][1]
        idx = np.flatnonzero(free)[:MAX_REPORTED_ERRORS]
        raise InputError([FieldError(where(int(i)), "needs lower, upper or equals") for i in idx])
    crossed = lower > upper
    if crossed.any():
        where = records.columns["lower"][1]
        idx = np.flatnonzero(crossed)[:MAX_REPORTED_ERRORS]
        raise InputError([FieldError(where(int(i)), "must not exceed upper") for i in idx])
    entries = _terms(records, lookup, base) if "terms" in records.columns else _empty_entries()
    return names, lower, upper, entries


def _empty_entries() -> _Entries:
    empty = np.empty(0, dtype=np.int64)
    return _Entries(empty, empty, np.empty(0), lambda k: "")


def _terms(records: Records, lookup: dict, base: str) -> _Entries:
    terms, where = records.columns["terms"]
    if set(map(type, terms)) - {dict}:
        i = next(i for i, v in enumerate(terms) if type(v) is not dict)
        raise InputError.at(where(i), "must be an object of {variable: coefficient}")
    counts = np.fromiter(map(len, terms), dtype=np.int64, count=len(terms))
    keys = list(chain.from_iterable(terms))
    rows = np.repeat(np.arange(len(terms), dtype=np.int64), counts)

    def at(k: int) -> str:
        """The JSON Pointer of the ``k``-th term, counting the rows' terms in row order."""
        return pointer(base[1:], int(rows[k]), "terms", keys[k])

    values = list(chain.from_iterable(map(dict.values, terms)))
    cols = _columns_of(keys, lookup, at)
    coef = number_column(values, at).values.astype(np.float64)
    return _Entries(rows, cols, coef, at)


def _columns_of(names: list, lookup: dict, at) -> np.ndarray:
    cols = np.fromiter(map(lookup.get, names, repeat(-1)), dtype=np.int64, count=len(names))
    unknown = cols < 0
    if unknown.any():
        idx = np.flatnonzero(unknown)[:MAX_REPORTED_ERRORS]
        raise InputError([FieldError(at(int(k)), f"unknown variable {shown_id(names[k])}: declare it in variables"
                                                 f"{lookalike(names[k], lookup)}") for k in idx])
    return cols


def read_matrix(raw, num_rows: int, num_cols: int, *, max_count: int, base: str = "/matrix") -> _Entries:
    """The sparse form: ``{"row": [...], "column": [...], "value": [...]}``, 0-based
    indices into ``constraints`` and ``variables``."""
    if raw is None:
        return _empty_entries()
    if not isinstance(raw, dict):
        raise InputError.at(base, "must be an object with row, column and value lists")
    records = read_records(raw, base, MATRIX_FIELDS, {}, "entry")
    for name in MATRIX_FIELDS:
        if name not in records.columns:
            raise InputError.at(f"{base}/{name}", "is required")
    if records.count > max_count:
        raise ProblemTooLarge(FieldError(base, f"has {records.count} entries; the limit is {max_count}"))
    rows = _index_column(records, "row", num_rows, "constraints")
    cols = _index_column(records, "column", num_cols, "variables")
    values, at = records.columns["value"]
    coef = number_column(values, at).values.astype(np.float64)
    return _Entries(rows, cols, coef, at)


def _index_column(records: Records, name: str, size: int, what: str) -> np.ndarray:
    values, where = records.columns[name]
    if set(map(type, values)) - {int}:
        i = next(i for i, v in enumerate(values) if type(v) is not int)
        raise InputError.at(where(i), f"must be an integer index into {what}")
    try:
        arr = np.asarray(values, dtype=np.int64)
    except OverflowError:
        i = next(i for i, v in enumerate(values) if abs(v) > MAX_MAGNITUDE)
        raise InputError.at(where(i), f"must be an index into {what} (0 to {size - 1})") from None
    arr = arr.reshape(-1)
    bad = (arr < 0) | (arr >= size)
    if bad.any():
        idx = np.flatnonzero(bad)[:MAX_REPORTED_ERRORS]
        raise InputError([FieldError(where(int(i)), f"must be an index into {what} (0 to {size - 1})")
                          for i in idx])
    return arr


def read_objective(objective: dict, lookup: dict, num_cols: int, base: str = "/objective") -> np.ndarray:
    """Objective coefficients from ``terms`` ({variable: coefficient}) or a dense
    ``coefficients`` list aligned with the variables."""
    terms = objective.get("terms")
    dense = objective.get("coefficients")
    if terms is not None and dense is not None:
        raise InputError.at(f"{base}/coefficients", "give terms or coefficients, not both")
    if dense is not None:
        if not isinstance(dense, list):
            raise InputError.at(f"{base}/coefficients", "must be a list of numbers aligned with variables")
        if len(dense) != num_cols:
            raise InputError.at(f"{base}/coefficients", f"has {len(dense)} entries; there are {num_cols} variables")
        return number_column(dense, lambda i: f"{base}/coefficients/{i}").values.astype(np.float64)
    if terms is None:
        raise InputError.at(f"{base}/terms", "is required (or coefficients): the objective is empty")
    if not isinstance(terms, dict):
        raise InputError.at(f"{base}/terms", "must be an object of {variable: coefficient}")
    if not terms:
        raise InputError.at(f"{base}/terms", "must name at least one variable: the objective is empty")
    keys = list(terms)

    def at(k: int) -> str:
        """The JSON Pointer of the ``k``-th objective term."""
        return pointer(base[1:], "terms", keys[k])

    cols = _columns_of(keys, lookup, at)
    coef = number_column(list(terms.values()), at).values.astype(np.float64)
    c = np.zeros(num_cols)
    c[cols] = coef
    return c


def assemble(num_rows: int, num_cols: int, parts: list[_Entries], *, max_count: int) -> sp.csr_matrix:
    """One CSR matrix from the entries of ``terms`` and ``matrix``; a (row, column)
    given twice is an error naming the second occurrence."""
    rows = np.concatenate([p.rows for p in parts])
    cols = np.concatenate([p.cols for p in parts])
    values = np.concatenate([p.values for p in parts])
    if rows.size > max_count:
        raise ProblemTooLarge(FieldError("/constraints", f"the model has {rows.size} coefficients; "
                                                         f"the limit is {max_count}"))
    key = rows * num_cols + cols
    order = np.argsort(key, kind="stable")
    sorted_key = key[order]
    again = np.flatnonzero(sorted_key[1:] == sorted_key[:-1])
    if again.size:
        offsets = np.cumsum([0] + [p.rows.size for p in parts])
        errors = []
        for k in again[:MAX_REPORTED_ERRORS]:
            second, first = int(order[k + 1]), int(order[k])
            errors.append(FieldError(_where_entry(parts, offsets, second),
                                     f"duplicate coefficient: this (row, variable) is also given at "
                                     f"{_where_entry(parts, offsets, first)}"))
        raise InputError(errors)
    matrix = sp.csr_matrix((values, (rows, cols)), shape=(num_rows, num_cols))
    matrix.eliminate_zeros()
    matrix.sort_indices()
    return matrix


def _where_entry(parts, offsets, k: int) -> str:
    j = int(np.searchsorted(offsets, k, side="right") - 1)
    return parts[j].where(k - int(offsets[j]))


def read_linear_model(envelope: dict, *, max_vars: int, max_rows: int, max_nonzeros: int) -> LinearModel:
    """Normalise an LP request envelope (already checked by its marshmallow schema).

    Raises
    ------
    InputError, ProblemTooLarge
        Naming the offending field by JSON Pointer.
    """
    names, lookup, col_lower, col_upper = read_variables(envelope["variables"], max_count=max_vars)
    c = read_objective(envelope["objective"], lookup, len(names))
    con_names, row_lower, row_upper, terms = read_constraints(envelope.get("constraints"), lookup,
                                                              max_count=max_rows)
    entries = read_matrix(envelope.get("matrix"), len(con_names), len(names), max_count=max_nonzeros)
    matrix = assemble(len(con_names), len(names), [terms, entries], max_count=max_nonzeros)
    objective = envelope["objective"]
    return LinearModel(names, con_names, c, float(objective.get("constant", 0)), objective["sense"] == "max",
                       matrix, row_lower, row_upper, col_lower, col_upper)
