"""Errors the store reports, in the service's one exception tree."""

from __future__ import annotations

from ..errors import SluiceError


class StoreUnavailable(SluiceError):
    """The backing store (SQLite file or Redis) cannot be reached or used right now.

    Solves carry on without the cache; calls that need the store (stored networks,
    ``GET /v1/solutions``) answer 503 with ``Retry-After``.
    """

    status = 503
    slug = "store-unavailable"
    title = "The store is unavailable"

    def __init__(self, detail: str | None = None, *, retry_after: int = 2):
        super().__init__(detail, headers={"Retry-After": str(retry_after)})


class InvalidParameter(SluiceError):
    """A path or query parameter (not the body) is malformed: 400, naming the parameter."""

    status = 400
    slug = "invalid-parameter"
    title = "A request parameter is invalid"

    def __init__(self, parameter: str, detail: str):
        self.parameter = parameter
        super().__init__(f"{parameter}: {detail}")
        self.reason = detail

    def extra(self) -> dict:
        """Problem members naming the offending parameter.

        Returns
        -------
        dict
            ``{"errors": [{"parameter": ..., "detail": ...}]}``: a parameter name rather
            than a JSON Pointer, since the fault is not in the body.
        """
        return {"errors": [{"parameter": self.parameter, "detail": self.reason}]}
