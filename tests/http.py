"""HTTP helpers shared by the tests: post a body, read a problem's pointers, check a problem.

They take a Flask test client or a ``requests`` session alike (both have
``post(url, data=, headers=)``); with a session, give a full URL as ``path``. Every
response the tests get is also checked against the OpenAPI document
(:mod:`tests.contract`); these helpers check what the document cannot say.
"""

from __future__ import annotations

import json
import time

import orjson
import pytest

JSON = "application/json"
PROBLEM = "application/problem+json"
PROBLEM_BASE = "urn:sluice:problem:"


def post(client, path: str, body, content_type: str = JSON, headers: dict | None = None, **kwargs):
    """POST ``body`` to ``path``: bytes and text as they are, anything else as JSON.

    JSON is written by orjson (NaN and infinities become ``null``: send those as text),
    or by the standard library for integers beyond 64 bits, which orjson refuses.

    Examples
    --------
    >>> r = post(client, "/v1/maxflow", {"source": "a", "sink": "b", "arcs": []})  # doctest: +SKIP
    """
    data = body if isinstance(body, (bytes, str)) else _dumps(body)
    return client.post(path, data=data, headers={"Content-Type": content_type, **(headers or {})}, **kwargs)


def send(client, method: str, path: str, body=None, **headers):
    """Send ``body`` with any method through a Flask test client: bytes as they are,
    anything else as JSON (as :func:`post` writes it), always as ``application/json``;
    ``headers`` as keyword arguments.

    Examples
    --------
    >>> send(client, "PUT", "/v1/networks/depots", {"arcs": []}, **{"If-Match": '"v1"'})  # doctest: +SKIP
    """
    data = None if body is None else (body if isinstance(body, bytes) else _dumps(body))
    return client.open(path, method=method, data=data, content_type=JSON, headers=headers)


def _dumps(body) -> bytes:
    try:
        return orjson.dumps(body)
    except TypeError:
        return json.dumps(body).encode()


def json_of(response):
    """The decoded JSON body of a Flask test response or a ``requests`` response."""
    if hasattr(response, "get_json"):
        return response.get_json(force=True)
    return response.json()


def _media_type(response) -> str:
    return response.headers.get("Content-Type", "").split(";")[0].strip()


def pointers(failure) -> list[str]:
    """The JSON Pointers a problem names, in order.

    ``failure`` is a problem+json response, an ``InputError`` or the
    ``pytest.raises`` record of one.
    """
    if isinstance(failure, pytest.ExceptionInfo):
        failure = failure.value
    if isinstance(failure, BaseException):
        return [e.pointer for e in failure.errors]
    assert _media_type(failure) == PROBLEM, (failure.status_code, failure.headers)
    return [e["pointer"] for e in json_of(failure).get("errors", []) if "pointer" in e]


def assert_problem(response, status: int, problem_type: str | None = None, pointers: list[str] | None = None,
                   pointer: str | None = None) -> dict:
    """Check an RFC 9457 problem and return its document.

    Parameters
    ----------
    response
        A Flask test response or a ``requests`` response.
    status
        The HTTP status, also the document's ``status``.
    problem_type
        The problem slug (``invalid-input``, ``too-large``...), when it matters.
    pointers
        Exactly the pointers its ``errors`` name, in order.
    pointer
        One pointer that must be among them.
    """
    text = response.get_data(as_text=True) if hasattr(response, "get_data") else response.text
    assert response.status_code == status, text[:2000]
    assert _media_type(response) == PROBLEM, response.headers
    doc = json_of(response)
    assert doc["status"] == status and doc["type"].startswith(PROBLEM_BASE), doc
    assert doc["title"] and doc["detail"], doc
    assert "Traceback" not in text
    if problem_type is not None:
        assert doc["type"] == PROBLEM_BASE + problem_type, doc
    named = [e["pointer"] for e in doc.get("errors", []) if "pointer" in e]
    if pointers is not None:
        assert named == pointers, doc
    if pointer is not None:
        assert pointer in named, doc
    return doc


def finished_job(client, location: str, headers: dict | None = None, timeout: float = 60.0) -> dict:
    """Poll ``GET location`` with a Flask test client until the job is done, failed or
    cancelled, and return its document (``opsutil.poll_job`` does this for a real server)."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        doc = client.get(location, headers=headers).get_json()
        if doc["state"] in ("done", "failed", "cancelled"):
            return doc
        time.sleep(0.1)
    raise AssertionError("job did not finish")
