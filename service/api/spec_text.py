"""The long text of the OpenAPI document's ``info.description``, by area.

The operations themselves are declared on their routes (:mod:`service.api.declare`);
what is here explains what cuts across them: answers and certificates, the result
cache, stored networks, DIMACS bodies, plan checks, batches, diagrams, jobs, access.
Where it names the kinds that take DIMACS, check plans or are drawn, the names come
from their declarations (``$``-placeholders filled by :func:`description`).
"""

from string import Template

from ..kinds import KINDS
from .diagram import diagram_kinds
from .verify import verify_kinds

#: Answers, certificates, the result cache, stored networks, status codes.
DESCRIPTION = """Network-flow optimisation over HTTP: max-flow with minimum cuts, certified.

Every answer carries a `certificate`: the service's own check of the solution
(conservation, capacities, cut capacity = flow value). Errors are
`application/problem+json` (RFC 9457) with JSON Pointers (RFC 6901) to the offending
fields. Node ids are strings (1-200 characters) or non-negative integers, one kind per
payload. A capacity of `null` (or an absent capacity) means no limit.

Linear programs (`/v1/lp`) and multi-commodity flow (`/v1/multicommodity`) run on
GLOP. One sign convention for every dual and reduced cost: the change of the
objective per unit increase of the active bound (right-hand side), the same for `min`
and `max`. A capacity price is what one more unit of a lane's capacity is worth (>= 0).

Results are cached by problem digest (the normalised problem, the answer-changing
options and the solver version). `options.cache`: `use` (default: answer from the cache
when possible), `refresh` (solve again and overwrite), `bypass` (neither read nor
write). Every solve response has a `Cache-Status` header (RFC 9211): `sluice; hit`,
`sluice; fwd=miss; stored`, `sluice; fwd=request; stored` (refresh),
`sluice; fwd=request; detail=bypass`, `sluice; fwd=miss; detail=too-large` (solved, too
large to cache), `sluice; fwd=miss; detail=not-final` (a status other than optimal,
infeasible or unbounded, e.g. a time limit, is never cached) or
`sluice; fwd=bypass; detail=store-unavailable` (the store is down: solved without it). `GET /v1/solutions/{digest}` returns a cached answer.

Stored networks: `PUT /v1/networks/{name}` once, then ask `POST
/v1/networks/{name}/maxflow` (and the other kinds listed below) with `changes`; the
stored network is never modified by a what-if. Every PUT makes a new version with a new
ETag; `If-Match` makes a PUT or DELETE conditional (412 when stale, checked atomically
so of two writers holding one ETag exactly one wins) and `If-None-Match: *` makes a PUT
create-only. Network names are 1-128 characters from `A-Z a-z 0-9 . _ -`, starting with
a letter or digit.

Status codes worth knowing: a request whose Content-Type is neither JSON nor a DIMACS
type the endpoint takes gets 415 Unsupported Media Type (RFC 9110). A malformed path or
query parameter (network name, digest, `limit`, `after`, `include`) gets 400 `invalid-parameter` with
`errors: [{"parameter": ..., "detail": ...}]` (there is no body to point into). When the
store (SQLite file or Redis) does not answer, `/readyz` answers 200 with `status:
degraded` (solves still answer, without the cache), while stored networks and cached
solutions answer 503 `store-unavailable` with `Retry-After`; `/readyz` answers 503 only
when the solvers fail. Network metadata carries `etag`, `size`, `created` and `updated`,
and what-if answers carry `network` (name, version, ETag of the version that
answered).

Linear programs name their variables and constraints `id`, as every other kind names
its nodes and commodities; `name`, the first spelling, is still read as an alias (one
of the two per entry). Answers are unchanged: `values`, `duals` and `reduced_costs` are
maps keyed by those ids.

Results are decision support: plans affecting people, vehicles or safety-critical
stock must be reviewed by a responsible planner and follow local rules."""

#: DIMACS bodies, plan checks, batches, diagrams and the explorer.
EXTRAS = """
## Text bodies: the DIMACS formats

$dimacs_routes also take a DIMACS file (the open text
formats of the DIMACS implementation challenges) with `Content-Type: text/x-dimacs`
(optionally `; charset=...`, default UTF-8): `p max NODES ARCS`, `n ID s`, `n ID t`,
`a FROM TO CAPACITY` for max-flow; `p min NODES ARCS`, `n ID SUPPLY`,
`a FROM TO LOWER CAPACITY COST` for min-cost flow; `c` lines are comments. The `p`
line must match the endpoint. Node ids are the integers 1..NODES and the answer uses
them; every node 1..NODES is in `node_ids`. A DIMACS body takes the default options.
Errors in a text body point at the line: `{"pointer": "/line/17", "line": 17,
"detail": ...}` (1-based line numbers), including errors found after reading the
file (a field of arc k points at the line of arc k). The same reader serves stored
networks, and a network can be written back out in either format: arcs without a
capacity limit are written with a stand-in capacity, stated in a comment, larger than
anything a bounded problem can put on one arc.

## Checking a client's plan

$verify_routes take `{"problem": <the
solve request body>, "flows": [one number per arc]}`. Errors in the problem point
under `/problem`; flows of the wrong length are a 422 at `/flows`. A violation is
`{"arc", "kind": "capacity" | "lower", "excess"}` (`lower` also covers negative
flow; `excess` > 0 is how far the flow lies outside its bounds) or `{"node", "kind":
"conservation", "imbalance"}` with imbalance = supply + inflow - outflow (supply 0 at
inner max-flow nodes; the source and sink of a max-flow problem are exempt). A
feasible max-flow plan gets either a minimum cut of the same capacity (`optimal`) or
an augmenting path with the fewest arcs (`improving_path`, `gain` = its smallest
residual capacity). A feasible min-cost plan gets either potentials proving it
cheapest or a negative-cost cycle (`improving_cycle`, `amount` to push round it,
`unit_cost` < 0, `gain` = cost saved). A path or cycle without any limit is reported
with `gain: null` and `unbounded: true`. Every verdict is checked again by the
service before it is returned. Answers also carry `violation_count`, `amount`,
`unit_cost`, `cut`, `potentials` and `certificate` where they apply. Plans are checked
under the default `options.shortage` `reject` only (`max-flow` is a 422 at `/problem/options/shortage`).

## Batches

`POST /v1/batch` answers `{"items": [{"kind", "problem"}]}` with `{"results": [...]}`
in order; each result is the item's solve response or a problem object (with `type`,
an integer `status`, `detail`, `errors` and `item`, the item's index). The JSON
Pointers of an item's errors are relative to the item (`/kind`,
`/problem/arcs/3/capacity`). At most `SLUICE_MAX_BATCH_ITEMS` items (413 above); one
synchronous time limit covers the whole batch, and items it does not reach get a 504
problem object.

## Diagrams and the explorer

`POST /v1/diagram.svg` with `{"kind": $drawn_kinds, "problem": ...}`
solves the problem and draws the answer as SVG: a layered left-to-right layout from
source to sink, flows, the minimum cut (max-flow) or the arcs at capacity (min-cost
flow), node potentials when the answer has them (a flow over time is drawn as its lanes
against the periods instead). Arcs run around the nodes they do not
join; each is labelled `flow/capacity` (`flow/lower..capacity` with a lower bound,
then `@cost` for min-cost flow), and no two texts overlap. Control characters in ids
and keys are drawn as their Unicode control pictures (U+0000 as ␀), so the document
is always well-formed XML. Diagrams are for small networks:
above `SLUICE_MAX_DIAGRAM_NODES` nodes or `SLUICE_MAX_DIAGRAM_ARCS` arcs the answer is
413. `GET /v1/solutions/{digest}/diagram.svg` draws a cached answer the same way.
`GET /` is an explorer page for trying the service in a browser;
`GET /v1/scenarios` lists the invented example problems it offers.
"""

#: Jobs and time limits, access, operations.
OPERATIONS = """
## Jobs and time limits

A synchronous solve has a hard limit of `SLUICE_TIME_LIMIT` seconds (default 30;
`options.time_limit` may lower it). Problems of up to `SLUICE_INLINE_MAX_ARCS` arcs
(default 20,000) are solved on the request thread in milliseconds; larger ones run in a
solver process that is killed at the limit, and the answer is 504 `time-limit` with a hint
to submit a job. `POST /v1/jobs` (or any solve endpoint with `Prefer: respond-async`,
RFC 7240) validates the problem at once (422 with pointers then, not later), answers 202
with `Location: /v1/jobs/{id}`, and runs it in the background under
`SLUICE_JOB_TIME_LIMIT` (default 600 s). `GET /v1/jobs/{id}` gives the `state`
(`queued`, `running`, `done`, `failed`, `cancelled`) with the `result` (the solve
response) or the `error` (a problem object); `DELETE` cancels, killing the computation
of a running job. A job whose worker dies is queued again while it has attempts left
(`SLUICE_JOB_ATTEMPTS`, embedded backend) or marked failed; it never stays `running`.

## Access

With API keys configured, every `/v1` request needs `Authorization: Bearer <key>`
(RFC 6750): 401 with `WWW-Authenticate` without a valid key, 403 when a read-only key
(`tenant:key:read`) is used to write. Jobs (and stored data) are visible to their own
tenant only; another tenant's job answers 404. Without keys the service runs open.
Each tenant has a request budget (`SLUICE_RATE_LIMIT`, default 600/minute): 429 with
`Retry-After` beyond it. Size limits (`SLUICE_MAX_BODY_MB`, `SLUICE_MAX_ARCS`,
`SLUICE_MAX_NODES`, `SLUICE_MAX_COMMODITIES`, `SLUICE_MAX_BATCH_ITEMS`,
`SLUICE_MAX_EXPANDED`) answer 413 with a pointer to the field.

## Operations

`/healthz` (the process is up), `/readyz` (a tiny solve and the job store or Redis:
503 only when the solver fails; `degraded` with 200 when the job store or Redis does not
answer, since synchronous solves still work), `/metrics` (Prometheus text format, summed
over all workers), `/openapi.json`. Every response echoes `X-Request-Id` (the client's,
when it is 1-128 characters of letters, digits and `._:-`, else a new one)."""


def description() -> str:
    """The whole ``info.description``, the kinds it names taken from their declarations."""
    def routes(prefix: str, names) -> str:
        """``POST {prefix}{name}`` for each name, joined with "and"."""
        return " and ".join(f"`POST {prefix}{name}`" for name in names)

    extras = Template(EXTRAS).substitute(
        dimacs_routes=routes("/v1/", [k.name for k in KINDS.values() if k.dimacs]),
        verify_routes=routes("/v1/verify/", verify_kinds()),
        drawn_kinds=" | ".join(f'"{name}"' for name in diagram_kinds()))
    return DESCRIPTION + "\n" + extras + "\n" + OPERATIONS
