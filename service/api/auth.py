"""API keys per tenant as bearer tokens (RFC 6750).

With keys configured (``SLUICE_API_KEYS`` / ``SLUICE_API_KEYS_FILE``), every ``/v1``
request needs ``Authorization: Bearer <key>``. The key names the tenant; networks,
solutions and jobs are namespaced by :func:`current_tenant`. Without keys the service
runs open and every request belongs to the tenant ``public``.

- no or malformed credentials: 401 with ``WWW-Authenticate: Bearer realm="sluice"``;
  an unknown key adds ``error="invalid_token"`` (RFC 6750 section 3.1);
- a ``read`` key on a method other than GET/HEAD: 403 with ``error="insufficient_scope"``.

Keys are compared as SHA-256 digests with :func:`hmac.compare_digest`, against every
configured key (no early exit), and are never logged.
"""

from __future__ import annotations

import hashlib
import hmac

from flask import Flask, g, request

from ..config import ApiKey
from ..errors import Forbidden, Unauthorized
from ..store.names import check_tenant

PUBLIC_TENANT = "public"
REALM = 'Bearer realm="sluice"'
READ_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})


def current_tenant() -> str:
    """The tenant of the current request (``public`` when the service runs open)."""
    return g.get("tenant", PUBLIC_TENANT)


def _digest(key: str) -> bytes:
    return hashlib.sha256(key.encode()).digest()


class KeyRing:
    """The configured keys, kept as digests."""

    def __init__(self, keys: tuple[ApiKey, ...]):
        for number, k in enumerate(keys, start=1):  # keys parsed from the environment are checked already
            try:
                check_tenant(k.tenant)
            except ValueError:
                raise ValueError(f"API key {number} has a tenant name the store cannot hold") from None
        self.entries = [(_digest(k.key), k.tenant, k.scope) for k in keys]

    def __bool__(self) -> bool:
        return bool(self.entries)

    def match(self, token: str) -> tuple[str, str] | None:
        """(tenant, scope) of the key equal to ``token``, compared in constant time."""
        probe, found = _digest(token), None
        for digest, tenant, scope in self.entries:
            if hmac.compare_digest(probe, digest) and found is None:
                found = (tenant, scope)
        return found


def _challenge(detail: str, error: str | None = None, description: str | None = None):
    value = REALM
    if error:
        value += f', error="{error}"'
        if description:
            value += f', error_description="{description}"'
    return {"WWW-Authenticate": value}


def _bearer_token() -> str | None:
    header = request.headers.get("Authorization", "")
    scheme, _, token = header.partition(" ")
    if scheme.lower() != "bearer" or not token.strip():
        return None
    return token.strip()


def init_app(app: Flask, keys: tuple[ApiKey, ...]) -> KeyRing:
    """Attach bearer-key authentication to ``app`` (call after CORS, before the rate limit).

    Parameters
    ----------
    app : Flask
    keys : tuple of ApiKey
        The configured keys; none runs the service open (every request is tenant ``public``).

    Returns
    -------
    KeyRing
        The keys as digests, also kept in ``app.extensions["sluice.auth"]``.

    Raises
    ------
    ValueError
        A key whose tenant name the store cannot hold.
    """
    ring = KeyRing(keys)

    @app.before_request
    def authenticate():
        """Set ``g.tenant`` for this request; on ``/v1`` paths, when keys are configured, from its bearer key.

        Raises
        ------
        Unauthorized
            401: no credentials, another scheme, or an unknown key (``WWW-Authenticate`` says which).
        Forbidden
            403: a ``read`` key on a method other than GET, HEAD or OPTIONS.
        """
        g.tenant = PUBLIC_TENANT
        if not ring or not request.path.startswith("/v1"):
            return None
        header = request.headers.get("Authorization")
        token = _bearer_token()
        if token is None:
            if header:
                raise Unauthorized("use Authorization: Bearer <key>",
                                   headers=_challenge("", "invalid_request", "use the Bearer scheme"))
            raise Unauthorized("this service needs an API key: send Authorization: Bearer <key>",
                               headers=_challenge(""))
        found = ring.match(token)
        if found is None:
            raise Unauthorized("the API key is not valid", headers=_challenge("", "invalid_token", "unknown key"))
        g.tenant, scope = found
        if scope == "read" and request.method not in READ_METHODS:
            raise Forbidden(f"this key may only read (GET); {request.method} needs a full key",
                            headers=_challenge("", "insufficient_scope", "read-only key"))
        return None

    app.extensions["sluice.auth"] = ring
    return ring
