"""Names of stored networks and tenants: short, URL-safe, and safe inside store keys."""

from __future__ import annotations

import re

from .errors import InvalidParameter

#: Networks a tenant stores are addressed by name in URLs and in Redis keys, so the
#: alphabet is the URL-safe unreserved set minus "~" (RFC 3986), never ":" or "/".
NAME_PATTERN = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]*")
MAX_NAME_LENGTH = 128
TENANT_PATTERN = re.compile(r"[a-z0-9][a-z0-9_-]*")
MAX_TENANT_LENGTH = 64
#: The tenant of every request until API keys name one (a later issue).
DEFAULT_TENANT = "public"
DIGEST_PATTERN = re.compile(r"sha256:[0-9a-f]{64}")


def check_name(name: object, parameter: str = "name") -> str:
    """Return ``name`` when it is a valid network name.

    Raises
    ------
    InvalidParameter
        Not a string of 1-128 characters from ``A-Z a-z 0-9 . _ -`` starting with a
        letter or digit.

    Examples
    --------
    >>> check_name("depots-north.v2")
    'depots-north.v2'
    """
    if not isinstance(name, str) or not 1 <= len(name) <= MAX_NAME_LENGTH:
        raise InvalidParameter(parameter, f"must be 1-{MAX_NAME_LENGTH} characters long")
    if not NAME_PATTERN.fullmatch(name):
        raise InvalidParameter(
            parameter, "may contain only letters, digits, '.', '_' and '-', and must start with a letter or digit"
        )
    return name


def check_tenant(tenant: object) -> str:
    """Return ``tenant`` when it is a valid tenant name (lower case, digits, ``_``, ``-``)."""
    if not isinstance(tenant, str) or not 1 <= len(tenant) <= MAX_TENANT_LENGTH or not TENANT_PATTERN.fullmatch(tenant):
        raise ValueError(f"invalid tenant name {tenant!r}")
    return tenant


def check_digest(digest: object, parameter: str = "digest") -> str:
    """Return ``digest`` when it has the form ``sha256:<64 lower-case hex digits>``."""
    if not isinstance(digest, str) or not DIGEST_PATTERN.fullmatch(digest):
        raise InvalidParameter(parameter, "must look like sha256:<64 lower-case hex digits>")
    return digest
