"""The DIMACS text formats for max-flow and min-cost flow, read.

These are the open formats of the DIMACS implementation challenges. One record per
line, the first character saying what the line is::

    c any comment
    p max NODES ARCS          (or: p min NODES ARCS)
    n ID s                    max: the source;   n ID t: the sink
    n ID SUPPLY               min: supply (> 0) or demand (< 0) of a node
    a FROM TO CAPACITY        max
    a FROM TO LOWER CAPACITY COST   min

Node ids are the integers ``1..NODES``. Blank lines are ignored. A line with the wrong
number of fields is an error, as is any unknown record, a second ``p`` line, an ``n``
or ``a`` line before the ``p`` line, an id outside ``1..NODES``, a max-flow file
without exactly one source and one sink, or an arc count other than the one announced.

:func:`parse_dimacs` turns a file into the same request dict the JSON endpoints take
(columnar arcs with numpy columns, as the fast JSON decoder produces), remembering the
line of every record so that any error names its line: the JSON Pointer of an error
in a text body is ``/line/<n>`` (1-based), and the error carries ``line: n`` too.
:func:`service.model.dimacs_write.to_dimacs` writes a normalised
:class:`~service.model.arcs.Network` back out.

Numbers: the formats define integers; decimals are read too (and written back) so
that a network with fractional data survives a round trip.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import FieldError, InputError, ProblemTooLarge
from .columns import MAX_MAGNITUDE, MAX_REPORTED_ERRORS

MEDIA_TYPE = "text/x-dimacs"
FORMATS = ("max", "min")
#: Fields of an arc line after the ``a``: max-flow and min-cost flow.
ARC_FIELDS = {"max": ("from", "to", "capacity"), "min": ("from", "to", "lower", "capacity", "cost")}


@dataclass(frozen=True)
class LineError(FieldError):
    """An error in a text body: pointer ``/line/<n>`` and the line number itself."""

    line: int = 0

    def as_dict(self) -> dict:
        """The error as a problem ``errors`` member, with the line number beside the pointer."""
        return {"pointer": self.pointer, "line": self.line, "detail": self.detail}


def line_error(line: int, detail: str) -> LineError:
    """The field error for line ``line`` of a DIMACS body (pointer ``/line/<line>``).

    Parameters
    ----------
    line : int
        1-based line number.
    detail : str

    Returns
    -------
    LineError
    """
    return LineError(f"/line/{line}", detail, line)


def _fail(line: int, detail: str, cls=InputError):
    raise cls(line_error(line, detail))


@dataclass
class DimacsFile:
    """A parsed DIMACS file: its format, sizes, columns and where each record was."""

    format: str
    num_nodes: int
    problem_line: int
    tail: np.ndarray  # node ids 1..n, as in the file
    head: np.ndarray
    columns: dict  # "capacity", and for min "lower", "cost": numpy arrays
    arc_lines: np.ndarray
    source: int | None = None
    sink: int | None = None
    supply: dict = field(default_factory=dict)  # node id -> supply (min)
    node_lines: dict = field(default_factory=dict)  # node id -> line of its n record
    designator_lines: dict = field(default_factory=dict)  # "s"/"t" -> line

    def request(self, purpose: str | None = None) -> dict:
        """The request dict for ``purpose``: ``"max"`` or ``"min"`` (the solve request of
        a kind that takes that format: the file must be of it), ``"network"`` (nodes and
        arcs only, as a stored network takes them; node supplies, when a ``p min`` file
        has any, as a ``supply`` column of ``nodes``) or None (the format's own solve
        request).

        Raises
        ------
        InputError
            At the ``p`` line when the format does not fit the purpose.
        """
        wanted = purpose if purpose in FORMATS else None
        if wanted and wanted != self.format:
            _fail(self.problem_line, f"this endpoint takes 'p {wanted}', the file is 'p {self.format}'")
        ids = list(range(1, self.num_nodes + 1))
        arcs = {"from": self.tail, "to": self.head, **self.columns}
        if self.format == "max":
            body = {"nodes": ids, "arcs": arcs}
            if purpose != "network":
                body = {"source": self.source, "sink": self.sink, **body}
            return body
        supply = [self.supply.get(i, 0) for i in ids]
        if purpose == "network" and not any(supply):
            return {"nodes": ids, "arcs": arcs}
        return {"nodes": {"id": ids, "supply": supply}, "arcs": arcs}

    def line_of(self, ptr: str) -> int:
        """The line a JSON Pointer into :meth:`request`'s dict comes from."""
        parts = ptr.split("/")
        if len(parts) >= 4 and parts[1] == "arcs" and parts[3].isdigit() and int(parts[3]) < self.arc_lines.size:
            return int(self.arc_lines[int(parts[3])])
        if len(parts) >= 3 and parts[1] == "arcs" and parts[2].isdigit() and int(parts[2]) < self.arc_lines.size:
            return int(self.arc_lines[int(parts[2])])
        if len(parts) >= 2 and parts[1] in ("source", "sink"):
            return self.designator_lines.get("s" if parts[1] == "source" else "t", self.problem_line)
        if len(parts) >= 4 and parts[1] == "nodes" and parts[3].isdigit():
            return self.node_lines.get(int(parts[3]) + 1, self.problem_line)
        return self.problem_line

    def translate(self, exc: InputError) -> InputError:
        """``exc`` with every JSON Pointer error turned into a line error."""
        errors = [e if isinstance(e, LineError) else line_error(self.line_of(e.pointer), e.detail)
                  for e in exc.errors]
        out = type(exc).__new__(type(exc))
        InputError.__init__(out, errors)
        return out


def parse_dimacs(text: str, *, max_arcs: int | None = None, max_nodes: int | None = None) -> DimacsFile:
    """Read a DIMACS max-flow (``p max``) or min-cost flow (``p min``) file.

    Parameters
    ----------
    text : str
        The whole file.
    max_arcs, max_nodes : int, optional
        Size limits, checked against the ``p`` line before the arcs are read.

    Returns
    -------
    DimacsFile

    Raises
    ------
    InputError
        Naming the line: pointer ``/line/<n>``.
    ProblemTooLarge
        The ``p`` line announces more nodes or arcs than the limits allow.

    Examples
    --------
    >>> f = parse_dimacs("p max 3 2\\nn 1 s\\nn 3 t\\na 1 2 5\\na 2 3 4\\n")
    >>> f.request()["source"], f.request()["arcs"]["capacity"].tolist()
    (1, [5, 4])
    """
    if text.startswith("\ufeff"):  # refused, as in JSON bodies (RFC 8259 forbids senders to add one)
        _fail(1, "starts with a byte-order mark (U+FEFF); send the file without one")
    lines = text.split("\n")
    firsts = np.array([line[:1] for line in lines], dtype="U1")
    arc_index = np.flatnonzero(firsts == "a").tolist()
    p_index = np.flatnonzero(firsts == "p").tolist()
    if not p_index:
        _fail(1, "no problem line: a DIMACS file starts with 'p max NODES ARCS' or 'p min NODES ARCS'")
    p_at = p_index[0]
    if len(p_index) > 1:
        _fail(p_index[1] + 1, "a second problem line")
    fmt, num_nodes, num_arcs = _problem_line(lines[p_at], p_at + 1)
    if max_nodes is not None and num_nodes > max_nodes:
        _fail(p_at + 1, f"announces {num_nodes} nodes; the limit is {max_nodes}", ProblemTooLarge)
    if max_arcs is not None and num_arcs > max_arcs:
        _fail(p_at + 1, f"announces {num_arcs} arcs; the limit is {max_arcs}", ProblemTooLarge)
    _check_records(lines, firsts, p_at)
    if arc_index and arc_index[0] < p_at:
        _fail(arc_index[0] + 1, "an arc before the problem line")
    tail, head, columns = _arcs(lines, arc_index, fmt, num_nodes)
    doc = DimacsFile(fmt, num_nodes, p_at + 1, tail, head, columns, np.asarray(arc_index, dtype=np.int64) + 1)
    if len(arc_index) != num_arcs:
        _fail(p_at + 1, f"announces {num_arcs} arcs; the file has {len(arc_index)}")
    _node_lines(doc, lines, firsts, p_at)
    return doc


def _problem_line(line: str, number: int):
    parts = line.split()
    if len(parts) != 4 or parts[0] != "p" or parts[1] not in FORMATS:
        _fail(number, "the problem line must be 'p max NODES ARCS' or 'p min NODES ARCS'")
    counts = []
    for text, what in ((parts[2], "node"), (parts[3], "arc")):
        if not text.isdigit():
            _fail(number, f"the {what} count must be a non-negative integer, not {text!r}")
        counts.append(int(text))
    return parts[1], counts[0], counts[1]


def _check_records(lines: list, firsts: np.ndarray, p_at: int) -> None:
    odd = np.flatnonzero(~np.isin(firsts, ["a", "c", "p", ""]))
    errors = []
    for i in odd.tolist():
        c = firsts[i]
        if c == "n":
            if i < p_at:
                errors.append(line_error(i + 1, "a node line before the problem line"))
        elif lines[i].strip():
            errors.append(line_error(i + 1, f"unknown record {lines[i][:1]!r}; lines start with c, p, n or a"))
        if len(errors) >= MAX_REPORTED_ERRORS:
            break
    if errors:
        raise InputError(errors)


def _arcs(lines: list, index: list, fmt: str, num_nodes: int):
    names = ARC_FIELDS[fmt]
    width = len(names) + 1
    tokens = " ".join([lines[i] for i in index]).split()
    if len(tokens) != width * len(index) or (index and set(tokens[0::width]) != {"a"}):
        _bad_arc_shape(lines, index, width)
    columns = {}
    for k, name in enumerate(names, start=1):
        columns[name] = _numbers(tokens[k::width], name, lines, index, k, integer=name in ("from", "to"))
    tail, head = columns.pop("from"), columns.pop("to")
    for name, col in (("from", tail), ("to", head)):
        bad = (col < 1) | (col > num_nodes)
        if bad.any():
            raise InputError([line_error(index[int(j)] + 1, f"{name} node {int(col[j])} is outside 1..{num_nodes}")
                              for j in np.flatnonzero(bad)[:MAX_REPORTED_ERRORS]])
    _check_bounds(columns, index)
    if fmt == "min" and not columns["lower"].any():
        del columns["lower"]
    return tail, head, columns


def _bad_arc_shape(lines, index, width):
    errors = []
    for i in index:
        if len(lines[i].split()) != width or lines[i].split()[0] != "a":
            errors.append(line_error(i + 1, f"an arc line has {width - 1} fields after 'a'"))
            if len(errors) >= MAX_REPORTED_ERRORS:
                break
    raise InputError(errors)


def _numbers(tokens: list, name: str, lines, index, position: int, *, integer: bool) -> np.ndarray:
    """One column of number tokens as int64 (or float64 for decimals)."""
    try:
        return np.array(tokens, dtype=np.int64)  # numpy parses each token as an integer
    except (ValueError, OverflowError):
        pass
    if not integer:
        try:
            values = np.array(tokens, dtype=np.float64)
            if np.isfinite(values).all() and (np.abs(values) <= MAX_MAGNITUDE).all():
                if np.all(np.floor(values) == values) and np.all(np.abs(values) <= 2**53):
                    return values.astype(np.int64)
                return values
        except ValueError:
            pass
    errors = []
    for j, token in enumerate(tokens):
        if not _is_number(token, integer):
            kind = "an integer node id" if integer else "a finite number"
            errors.append(line_error(index[j] + 1, f"{name} must be {kind}, not {token!r}"))
            if len(errors) >= MAX_REPORTED_ERRORS:
                break
    raise InputError(errors or [line_error(index[0] + 1, f"{name}: a number is out of range")])


def _is_number(token: str, integer: bool) -> bool:
    try:
        value = int(token)
        return abs(value) <= MAX_MAGNITUDE
    except ValueError:
        if integer:
            return False
    try:
        value = float(token)
    except ValueError:
        return False
    return math.isfinite(value) and abs(value) <= MAX_MAGNITUDE


def _check_bounds(columns: dict, index: list) -> None:
    problems = []
    cap = columns["capacity"]
    for name in ("capacity", "lower"):
        col = columns.get(name)
        if col is not None:
            problems += [(int(j), f"{name} must be >= 0") for j in np.flatnonzero(col < 0)]
        if col is not None:
            problems += [(int(j), f"{name} must be at most {MAX_MAGNITUDE} in magnitude")
                         for j in np.flatnonzero(np.abs(col) > MAX_MAGNITUDE)]
    if "lower" in columns:
        problems += [(int(j), "lower must not exceed capacity") for j in np.flatnonzero(columns["lower"] > cap)]
    if "cost" in columns:
        problems += [(int(j), f"cost must be at most {MAX_MAGNITUDE} in magnitude")
                     for j in np.flatnonzero(np.abs(columns["cost"]) > MAX_MAGNITUDE)]
    if problems:
        problems.sort()
        raise InputError([line_error(index[j] + 1, d) for j, d in problems[:MAX_REPORTED_ERRORS]])


def _node_lines(doc: DimacsFile, lines: list, firsts: np.ndarray, p_at: int) -> None:
    errors = []
    for i in np.flatnonzero(firsts == "n").tolist():
        parts = lines[i].split()
        number = i + 1
        if len(parts) != 3 or not parts[1].isdigit() or not 1 <= int(parts[1]) <= doc.num_nodes:
            errors.append(line_error(number, f"a node line is 'n ID {'s|t' if doc.format == 'max' else 'SUPPLY'}' "
                                             f"with ID in 1..{doc.num_nodes}"))
            continue
        node = int(parts[1])
        if doc.format == "max":
            _designator(doc, parts[2], node, number, errors)
        else:
            _supply(doc, parts[2], node, number, errors)
    if errors:
        raise InputError(errors[:MAX_REPORTED_ERRORS])
    if doc.format == "max":
        for which, what in (("s", "source"), ("t", "sink")):
            if which not in doc.designator_lines:
                _fail(doc.problem_line, f"no {what}: add a line 'n ID {which}'")
        if doc.source == doc.sink:
            _fail(doc.designator_lines["t"], "the sink must differ from the source")


def _designator(doc: DimacsFile, token: str, node: int, number: int, errors: list) -> None:
    if token not in ("s", "t"):
        errors.append(line_error(number, f"a max-flow node line ends in s or t, not {token!r}"))
    elif token in doc.designator_lines:
        what = "source" if token == "s" else "sink"
        errors.append(line_error(number, f"a second {what} (the first is on line {doc.designator_lines[token]})"))
    else:
        doc.designator_lines[token] = number
        doc.node_lines[node] = number
        if token == "s":
            doc.source = node
        else:
            doc.sink = node


def _supply(doc: DimacsFile, token: str, node: int, number: int, errors: list) -> None:
    if not _is_number(token, False):
        errors.append(line_error(number, f"supply must be a finite number, not {token!r}"))
    elif node in doc.node_lines:
        errors.append(line_error(number, f"node {node} already has a supply (line {doc.node_lines[node]})"))
    else:
        value = float(token) if not token.lstrip("+-").isdigit() else int(token)
        doc.supply[node] = int(value) if isinstance(value, float) and value.is_integer() else value
        doc.node_lines[node] = number
