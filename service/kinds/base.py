"""What every problem kind provides, and helpers they share.

A *kind* turns a decoded JSON request into a normalised problem (``parse``) and a
problem into a response document (``solve``). The HTTP layer, batches and jobs all
go through this interface, so a new problem kind is one module here plus its entry in
:data:`service.kinds.KINDS`.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any, Callable, Protocol

from ..config import Settings
from ..deadline import Deadline
from ..errors import InputError
from ..model.ids import NodeIndex, ids_of, lookalike, shown_id  # noqa: F401 - ids_of: the kinds take it from here
from ..model.schemas import load_envelope
from ..model.stored import body_of
from ..solvers.graph import Graph

if TYPE_CHECKING:
    from ..model.arcs import Network
    from .picture import Picture


@dataclass(frozen=True)
class Limits:
    """Size limits applied while parsing.

    The configurable ones take their defaults from :class:`service.config.Settings`
    (the one place they are written), for callers without settings such as tests;
    :meth:`from_settings` gives the service's. Time is not a limit of parsing: a solve
    gets a :class:`~service.deadline.Deadline`.
    """

    max_arcs: int = Settings.max_arcs
    max_nodes: int = Settings.max_nodes
    max_commodities: int = Settings.max_commodities
    max_expanded: int = Settings.max_expanded

    @classmethod
    def from_settings(cls, settings: Settings) -> "Limits":
        """The limits a service with ``settings`` applies."""
        return cls(max_arcs=settings.max_arcs, max_nodes=settings.max_nodes,
                   max_commodities=settings.max_commodities, max_expanded=settings.max_expanded)


class Problem(Protocol):
    digest: str
    options: dict


@dataclass(frozen=True)
class PlanVerifier:
    """How a kind checks a client's own plan (``POST /v1/verify/{kind}``).

    Attributes
    ----------
    parse : callable
        ``parse(body, limits) -> plan``: the verify request (``{"problem", "flows"}``)
        read and validated; raises :class:`~service.errors.InputError` with pointers
        under ``/problem`` or ``/flows``.
    check : callable
        ``check(plan, deadline) -> dict``: the verdict as the response document
        (without ``timing_ms``, which the route adds).
    """

    parse: Callable[[Any, Limits], Any]
    check: Callable[[Any, Deadline], dict]


@dataclass(frozen=True)
class Kind:
    """Everything the service knows about one problem kind, declared in one place.

    Routes, the OpenAPI document, batches, jobs, DIMACS bodies, diagrams, plan checks,
    stored-network what-ifs and ``GET /v1/kinds`` are all derived from these fields;
    a capability a kind lacks is a field left at its empty default.

    Attributes
    ----------
    name : str
        The path segment under ``/v1/`` and the ``kind`` of batch items and jobs.
    summary : str
        One line for the spec and ``GET /v1/kinds``.
    request_schema, response_schema : type
        Marshmallow schemas of ``POST /v1/{name}`` (documentation; ``parse`` validates).
    example : str
        File name of the scenario under ``service/scenarios`` shown as the example.
    parse : callable
        ``parse(body, limits) -> Problem``; raises :class:`~service.errors.InputError`.
    solve : callable
        ``solve(problem, deadline) -> dict``, the response document; ``deadline`` (a
        :class:`~service.deadline.Deadline`, made by the caller: the HTTP layer or the
        job runner) is the solve's time budget, which the solvers read what is left of.
    query_schema : type, optional
        Schema of the question about a stored network (``POST /v1/networks/{n}/{name}``,
        without ``changes``); given together with ``from_network``.
    from_network : callable, optional
        ``from_network(network, query, limits) -> Problem`` for a stored network.
    dimacs : {"max", "min"}, optional
        The DIMACS ``p`` format the solve endpoint also takes as ``text/x-dimacs``.
    picture : Picture, optional
        How the kind's answers are drawn (``POST /v1/diagram.svg``, and cached answers
        by digest): its drawer (one of :mod:`service.drawing`, whose ``kind`` is this
        kind's ``name``), how a problem becomes the drawn network and what is kept of it
        beside a cached answer (:mod:`.picture`).
    verify : PlanVerifier, optional
        How clients' plans are checked (``POST /v1/verify/{name}``, built with
        :mod:`.verify`); ``None``: plans of the kind are not checked.
    size : callable, optional
        ``size(problem) -> int``, the work a problem holds; at most
        ``SLUICE_INLINE_MAX_ARCS`` it is solved on the request thread. ``None``: always
        in a solver process.
    honours_time_limit : bool
        The solver stops itself at its deadline and answers (GLOP, the MIP engines), so
        a solver process gets a grace period past it before it is killed
        (:func:`stop_grace`).
    per_period_capacity : bool
        What-if ``capacity`` changes may give one number per period (flows over time).
    for_solver_process : callable, optional
        ``for_solver_process(problem) -> Problem``: the problem without what its solve
        does not read, before it is pickled to a solver process (:func:`without_arc_keys`
        for the kinds whose solve never reads the arcs' ``key`` labels). ``None``: as is.
    examples : tuple of str
        File names of further scenarios under ``service/scenarios`` that are bodies for
        this kind's endpoints (another body form, a DIMACS file, a plan to verify);
        ``GET /v1/scenarios`` serves these and ``example``. Each file's name names the
        kind (:mod:`service.api.explorer` reads the kind and endpoint from it).
    """

    name: str
    summary: str
    request_schema: type
    response_schema: type
    example: str
    parse: Callable[[Any, Limits], Problem]
    solve: Callable[[Problem, Deadline], dict]
    query_schema: type | None = None
    from_network: Callable[[Any, Any, Limits], Problem] | None = None
    dimacs: str | None = None
    picture: Picture | None = None
    verify: PlanVerifier | None = None
    size: Callable[[Problem], int] | None = None
    honours_time_limit: bool = False
    per_period_capacity: bool = False
    for_solver_process: Callable[[Problem], Problem] | None = None
    examples: tuple[str, ...] = ()

    def __post_init__(self):
        if (self.query_schema is None) != (self.from_network is None):
            raise TypeError(f"kind {self.name!r}: query_schema and from_network go together")
        if self.dimacs not in (None, "max", "min"):
            raise TypeError(f"kind {self.name!r}: dimacs must be 'max', 'min' or None")
        if self.picture is not None and self.picture.drawer.kind != self.name:
            raise TypeError(f"kind {self.name!r}: its drawer draws {self.picture.drawer.kind!r}")

    def capabilities(self) -> dict:
        """What the kind can do beyond ``POST /v1/{name}``, as ``GET /v1/kinds`` lists it."""
        return {"what_if": self.from_network is not None, "dimacs": self.dimacs, "diagram": self.picture is not None,
                "verify": self.verify is not None, "jobs": True, "batch": True}


def without_arc_keys(problem):
    """The problem with its network's arc ``key`` labels dropped: for :attr:`Kind.for_solver_process`.

    A list of labels pickles one string at a time: at 1M labelled arcs that took about
    430 ms both ways, more than the solve (measured in-process; the arrays themselves
    cross in about 40 ms).

    Parameters
    ----------
    problem : dataclass
        A problem with a ``network`` (a :class:`~service.model.arcs.Network`).

    Returns
    -------
    dataclass
        ``problem`` itself when it has no keys, else a copy without them.
    """
    if problem.network.keys is None:
        return problem
    return replace(problem, network=replace(problem.network, keys=None))


def problem_size(problem) -> int:
    """The ``size`` a problem carries (a field or property): for :attr:`Kind.size`.

    Parameters
    ----------
    problem : Problem

    Returns
    -------
    int
    """
    return problem.size


def graph_of(network: "Network") -> Graph:
    """The solvers' graph of a parsed network, built once per solve.

    The model knows nothing of the solvers; the kinds stand between them and hand
    the model's arrays over as they are (no copies).

    Parameters
    ----------
    network : Network
        A normalised network (:func:`service.model.arcs.read_network`).

    Returns
    -------
    Graph
        Nodes, arcs, capacities, unlimited arcs, costs and lower bounds of ``network``.
    """
    return Graph(network.num_nodes, network.tail, network.head, network.capacity, network.unlimited,
                 network.cost, network.lower)


def node_position(nodes: NodeIndex, node_id, ptr: str) -> int:
    """The position of a node the request names.

    Parameters
    ----------
    nodes : NodeIndex
    node_id : str or int
        As the client sent it.
    ptr : str
        The JSON Pointer of the field that names it (``/source``).

    Returns
    -------
    int

    Raises
    ------
    InputError
        At ``ptr`` for an unknown node (with a lookalike id when there is one).
    """
    index = nodes.index_of(node_id)
    if index is None:
        raise InputError.at(ptr, f"unknown node {shown_id(node_id)}: it is neither in nodes nor on any arc"
                                 f"{lookalike(node_id, nodes.ids)}")
    return index


def budget_seconds(options: dict, cap: float) -> float:
    """Seconds a solve may take: ``options.time_limit`` when the client asked for less
    than ``cap`` (the configured limit: ``SLUICE_TIME_LIMIT``, or a job's), else ``cap``.
    ``time_limit`` is not in the digest: it never changes an answer that is final."""
    asked = options.get("time_limit")
    return cap if asked is None else min(float(asked), cap)


def digest_detail(options: dict, default) -> list | None:
    """``options.detail`` as the digest sees it.

    Parameters
    ----------
    options : dict
        The request's options.
    default : collection of str
        The parts answered when ``detail`` is left out.

    Returns
    -------
    list or None
        ``None`` when ``detail`` is left out or names the default parts (in any
        order), so asking for the default equals leaving it out; else ``detail``.
    """
    detail = options.get("detail")
    return None if detail is None or set(detail) == set(default) else detail


def stop_grace(kind: Kind | None, seconds: float) -> float:
    """Seconds past its time limit before a solve is killed: a kind whose solver stops
    itself at the limit (``honours_time_limit``: GLOP, the MIP engines) gets time to
    return its own answer (``time_limit``, or a plan so far); the others are killed at it."""
    return min(10.0, max(2.0, 0.5 * seconds)) if kind is not None and kind.honours_time_limit else 0.0


def wants(options: dict, part: str) -> bool:
    """Whether the answer includes a part.

    Parameters
    ----------
    options : dict
        The request's options.
    part : str
        A part of the answer (``"flows"``, ``"cut"``...).

    Returns
    -------
    bool
        True when ``options.detail`` is left out or names ``part``.
    """
    detail = options.get("detail")
    return detail is None or part in detail


def posted_whole(network, query, query_schema, *, arc_fields: tuple = (), node_fields: tuple = ()) -> dict:
    """The body a client would post whole for a question about a stored network.

    For kinds whose what-ifs read the stored network through their own parser (the
    planning and over-time kinds), so the two answer alike by construction. The query
    is checked first by ``query_schema`` (pointers relative to the query: ``/top``),
    then joined with the network's ``nodes`` and ``arcs`` and the optional columns
    ``arc_fields``/``node_fields`` it carries (:func:`service.model.stored.body_of`).

    Parameters
    ----------
    network : Network
        The stored network, what-if changes applied.
    query : dict
        The question (without ``changes``).
    query_schema : Schema
        The kind's schema of the question.
    arc_fields, node_fields : tuple of str
        Optional columns of the stored network the kind reads.

    Returns
    -------
    dict
        The query joined with ``nodes`` and ``arcs``.

    Raises
    ------
    InputError
        The query does not pass ``query_schema``.
    """
    load_envelope(query_schema, query)
    return {**query, **body_of(network, arc_fields, node_fields)}
