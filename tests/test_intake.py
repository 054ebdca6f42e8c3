"""service.intake in-process: the ASGI front driven with scripted receive/send (no
sockets), for what the real-process tests cannot time exactly."""

from __future__ import annotations

import asyncio
import threading
import time

import orjson
from blake3 import blake3

from service.intake import BODY_FINGERPRINT, BODY_STEPS, HASH_FROM, HEAVY_FROM, SHED, BufferedWSGI, IntakeLimits


def scope(length: int | None = None, path: str = "/v1/maxflow") -> dict:
    headers = [(b"content-type", b"application/json")]
    if length is not None:
        headers.append((b"content-length", str(length).encode()))
    return {"type": "http", "method": "POST", "path": path, "query_string": b"", "headers": headers,
            "server": ("127.0.0.1", 8000), "client": ("127.0.0.1", 5000), "http_version": "1.1", "scheme": "http"}


def script(chunks: list[bytes], stall_after: bool = False):
    """A receive() that hands out ``chunks`` and then, if asked, never returns."""
    queue = list(chunks)

    async def receive():
        if queue:
            chunk = queue.pop(0)
            return {"type": "http.request", "body": chunk, "more_body": bool(queue) or stall_after}
        await asyncio.sleep(3600)

    return receive


class Recorder:
    def __init__(self):
        self.messages = []

    async def __call__(self, message):
        self.messages.append(message)

    @property
    def status(self) -> int:
        return self.messages[0]["status"]

    @property
    def headers(self) -> dict:
        return dict(self.messages[0]["headers"])

    @property
    def body(self) -> bytes:
        return b"".join(m.get("body", b"") for m in self.messages[1:])


def echo_app(seen: list):
    def app(environ, start_response):
        seen.append(environ)
        body = b"".join(environ[BODY_STEPS])
        start_response("200 OK", [("Content-Type", "text/plain"), ("Content-Length", str(len(body)))])
        return [body]
    return app


def test_the_app_gets_the_whole_body_with_its_length_and_hash():
    seen = []
    front = BufferedWSGI(echo_app(seen), IntakeLimits(max_body=10 << 20))
    parts = [b"x" * (1 << 20)] * 3
    sent = Recorder()
    asyncio.run(front(scope(None), script(parts), sent))  # chunked: no Content-Length
    assert sent.status == 200 and sent.body == b"".join(parts)
    environ = seen[0]
    assert environ["CONTENT_LENGTH"] == str(3 << 20) and "HTTP_TRANSFER_ENCODING" not in environ
    assert 3 << 20 >= HASH_FROM and environ[BODY_FINGERPRINT] == blake3(b"".join(parts)).digest()
    assert environ["wsgi.input"].read(5) == b"xxxxx"


def test_a_chunked_body_past_the_limit_is_413_and_closes():
    front = BufferedWSGI(echo_app([]), IntakeLimits(max_body=1000))
    sent = Recorder()
    asyncio.run(front(scope(None), script([b"x" * 600, b"x" * 600]), sent))
    assert sent.status == 413 and sent.headers[b"connection"] == b"close"
    assert "1000" in orjson.loads(sent.body)["detail"]


def test_a_stalled_body_is_408_after_the_idle_timeout():
    front = BufferedWSGI(echo_app([]), IntakeLimits(max_body=1 << 20, idle_timeout=0.3))
    sent = Recorder()
    t0 = time.monotonic()
    asyncio.run(front(scope(1000), script([b"{"], stall_after=True), sent))
    elapsed = time.monotonic() - t0
    assert sent.status == 408 and b"request-timeout" in sent.body
    assert 0.3 <= elapsed < 0.3 + 2.5  # + the linger for the unread rest


def test_a_trickle_below_the_minimum_rate_is_408():
    async def trickle():
        await asyncio.sleep(0.05)
        return {"type": "http.request", "body": b" ", "more_body": True}

    front = BufferedWSGI(echo_app([]), IntakeLimits(max_body=1 << 20, idle_timeout=0.4, min_rate=1000))
    sent = Recorder()
    asyncio.run(front(scope(100_000), trickle, sent))
    assert sent.status == 408 and b"slower than 1000 bytes/s" in sent.body


def test_large_bodies_take_turns_and_one_that_waits_too_long_is_flagged_shed():
    seen, release = [], threading.Event()

    def app(environ, start_response):
        seen.append((environ.get(SHED, False), threading.current_thread().name))
        if not environ.get(SHED):
            release.wait(5)  # the first holds the only slot
        start_response("200 OK", [("Content-Length", "0")])
        return [b""]

    front = BufferedWSGI(app, IntakeLimits(max_body=10 << 20, heavy_slots=1, queue_wait=0.2))
    big = b"x" * HEAVY_FROM

    async def both():
        first = asyncio.create_task(front(scope(len(big)), script([big]), Recorder()))
        await asyncio.sleep(0.05)
        await front(scope(len(big)), script([big]), Recorder())
        release.set()
        await first

    asyncio.run(both())
    assert [shed for shed, _ in seen] == [False, True]
    assert seen[1][1].startswith("sluice-probe")  # answered beside the probes, not queued behind
