"""The one exception tree of Sluice.

Every error the service can report is a subclass of :class:`SluiceError`. Each carries
the HTTP status and the problem ``type`` slug it maps to, so the HTTP layer turns any
of them into one ``application/problem+json`` shape (RFC 9457) without knowing the
individual classes. The solvers and the problem model raise these; they never import
Flask.

Tree::

    SluiceError                      500  internal
    ├── InputError                   422  invalid-input (carries JSON Pointer errors)
    │   └── ProblemTooLarge          413  too-large
    ├── BadRequest                   400  bad-request (not JSON, bad UTF-8, too deep)
    ├── UnsupportedMediaType         415  unsupported-media-type
    ├── NotFound                     404  not-found
    ├── PreconditionFailed           412  precondition-failed
    ├── Conflict                     409  conflict
    ├── SolveTimeout                 504  time-limit
    ├── Unauthorized                 401  unauthorized (WWW-Authenticate: Bearer)
    ├── Forbidden                    403  forbidden (a read-only key asked to write)
    ├── Unavailable                  503  unavailable (with Retry-After)
    └── SolverFailure                500  solver-failure
        └── SelfCheckFailed          500  self-check-failed (a certificate did not hold)

Infeasible and unbounded problems are *answers*, not errors: solvers report them in
the result's ``status``.
"""

from __future__ import annotations

from dataclasses import dataclass

PROBLEM_BASE = "urn:sluice:problem:"


@dataclass(frozen=True)
class FieldError:
    """One offending field: a JSON Pointer (RFC 6901) into the request and a reason."""

    pointer: str
    detail: str

    def as_dict(self) -> dict:
        """The error as a member of a problem document's ``errors`` list.

        Returns
        -------
        dict
            ``{"pointer": ..., "detail": ...}``.
        """
        return {"pointer": self.pointer, "detail": self.detail}


def pointer(*parts: str | int) -> str:
    """Build a JSON Pointer from path parts, escaping ``~`` and ``/`` (RFC 6901)."""
    return "".join("/" + str(p).replace("~", "~0").replace("/", "~1") for p in parts)


class SluiceError(Exception):
    """Base of every error Sluice reports."""

    status = 500
    slug = "internal"
    title = "Internal error"

    def __init__(self, detail: str | None = None, *, headers: dict | None = None):
        super().__init__(detail or self.title)
        self.detail = detail or self.title
        self.headers = headers or {}

    @property
    def type(self) -> str:
        """The problem ``type`` URI: ``urn:sluice:problem:`` followed by the slug."""
        return PROBLEM_BASE + self.slug

    def extra(self) -> dict:
        """Problem members beyond type/title/status/detail."""
        return {}


class InputError(SluiceError):
    """The body is JSON but not a valid problem. Carries one or more field errors."""

    status = 422
    slug = "invalid-input"
    title = "The request is not a valid problem"

    def __init__(self, errors: list[FieldError] | FieldError, detail: str | None = None):
        self.errors = [errors] if isinstance(errors, FieldError) else list(errors)
        first = self.errors[0] if self.errors else None
        default = f"{first.pointer or '/'}: {first.detail}" if first else None
        super().__init__(detail or default)

    @classmethod
    def at(cls, ptr: str, detail: str) -> "InputError":
        """An input error about one field, in one call.

        Parameters
        ----------
        ptr : str
            JSON Pointer (RFC 6901) to the offending value; build it with :func:`pointer`.
        detail : str
            What is wrong with it.

        Returns
        -------
        InputError
        """
        return cls(FieldError(ptr, detail))

    def extra(self) -> dict:
        """Problem members beyond type/title/status/detail: the field errors.

        Returns
        -------
        dict
            ``{"errors": [{"pointer": ..., "detail": ...}, ...]}``.
        """
        return {"errors": [e.as_dict() for e in self.errors]}


class ProblemTooLarge(InputError):
    """A body or problem exceeds a configured limit."""

    status = 413
    slug = "too-large"
    title = "The request exceeds a size limit"


class BadRequest(SluiceError):
    status = 400
    slug = "bad-request"
    title = "The body is not valid JSON"


class UnsupportedMediaType(SluiceError):
    status = 415
    slug = "unsupported-media-type"
    title = "Unsupported media type"


class NotFound(SluiceError):
    status = 404
    slug = "not-found"
    title = "Not found"


class Conflict(SluiceError):
    status = 409
    slug = "conflict"
    title = "Conflict"


class PreconditionFailed(SluiceError):
    status = 412
    slug = "precondition-failed"
    title = "Precondition failed"


class SolveTimeout(SluiceError):
    status = 504
    slug = "time-limit"
    title = "The solve exceeded its time limit"


class SolverFailure(SluiceError):
    """The solver returned a status we cannot turn into an answer."""

    status = 500
    slug = "solver-failure"
    title = "The solver failed"


class SelfCheckFailed(SolverFailure):
    """A solution failed the service's own optimality check: a bug, never a 200."""

    slug = "self-check-failed"
    title = "The solution failed its self-check"


class Unauthorized(SluiceError):
    """No valid bearer token (RFC 6750); carries the WWW-Authenticate challenge."""

    status = 401
    slug = "unauthorized"
    title = "Authentication required"


class Forbidden(SluiceError):
    status = 403
    slug = "forbidden"
    title = "Not allowed with this key"


class Unavailable(SluiceError):
    """A part the request needs (job queue, solver processes) cannot answer now."""

    status = 503
    slug = "unavailable"
    title = "Temporarily unavailable"

    def __init__(self, detail: str | None = None, *, retry_after: int = 5):
        super().__init__(detail, headers={"Retry-After": str(retry_after)})
