"""The front of each worker: a request's whole body is received on the event loop,
and only then does the Flask app run, on a thread.

``sluice serve`` runs gunicorn's asyncio worker (``worker_class="asgi"``): gunicorn
parses HTTP/1.1 (keep-alive, pipelining, chunked framing, ``Expect: 100-continue``) and
hands each request to :class:`BufferedWSGI`. A client that sends its body slowly, or
stops, costs a socket and a coroutine here, never one of the app's threads:

- the body must keep arriving: no byte for ``idle_timeout`` seconds, or an average
  below ``min_rate`` bytes/s once ``idle_timeout`` has passed, is a 408;
- a body is counted while it arrives (chunked ones too): past ``max_body`` it is a
  413, with ``Connection: close`` (the rest is not read);
- every body the app sees arrived whole, so an early answer (401, 404, 415, 429...)
  never leaves unread bytes on a kept-alive connection;
- ``/healthz`` and ``/readyz`` run on threads of their own, never queued behind solves;
  a request that waited longer than ``queue_wait`` for a thread is answered 503 with
  ``Retry-After`` instead of being run late (the app decides, see ``sluice.queued``);
- at most ``heavy_slots`` bodies of ``HEAVY_FROM`` bytes or more are handed to threads
  at once (as many as the worker has solver processes): another waits up to
  ``queue_wait`` for a turn, then gets 503 with ``Retry-After`` without being decoded
  (the app answers it, flagged ``sluice.shed``, on a probe thread).
  Decoding a large body holds the GIL for long stretches, so a few at a time keep the
  event loop and the probes answering.

A body of 2 MiB or more is hashed (BLAKE3) as it arrives, for the result cache's
byte-identical fast path (``service.api.jsonio``), so a cache hit pays no hash after
the read.
"""

from __future__ import annotations

import asyncio
import sys
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from time import monotonic

import orjson
from blake3 import blake3

from .config import Settings
from .errors import PROBLEM_BASE

#: Bodies from this size on are hashed while they arrive.
HASH_FROM = 2 << 20
#: Bodies from this size on take a heavy slot (about where a problem goes to a solver process).
HEAVY_FROM = 1 << 20
#: Paths answered on their own threads (probes must not wait behind solves).
PROBE_PATHS = frozenset({"/healthz", "/readyz"})
#: After a 408 or 413 the unread rest of a body is discarded for at most this long, so
#: the client (still sending) reads the answer instead of a reset connection.
LINGER_SECONDS = 2.0
#: environ keys the app reads (service.api.jsonio and the shedding hook).
BODY_STEPS, BODY_FINGERPRINT, QUEUED = "sluice.body_steps", "sluice.body_fingerprint", "sluice.queued"
#: Set when every heavy slot stayed busy: the app answers 503 without decoding the body.
SHED = "sluice.shed"


@dataclass(frozen=True)
class IntakeLimits:
    """How long and how large a request body may be."""

    max_body: int
    idle_timeout: float = Settings.body_timeout
    min_rate: float = Settings.body_min_rate
    threads: int = Settings.threads
    probe_threads: int = 2
    heavy_slots: int = Settings.solver_processes
    queue_wait: float = Settings.queue_wait


class _Refused(Exception):
    def __init__(self, status: int, slug: str, title: str, detail: str):
        super().__init__(detail)
        self.status, self.slug, self.title, self.detail = status, slug, title, detail


class _Gone(Exception):
    """The client went away before its body was complete."""


class _Watch:
    """Cancels the reading task when the body stops arriving fast enough."""

    def __init__(self, limits: IntakeLimits):
        self.limits, self.task = limits, asyncio.current_task()
        self.started = self.last = monotonic()
        self.received, self.expired = 0, None
        self.loop = asyncio.get_running_loop()
        self.handle = self.loop.call_later(self._tick(), self.check)

    def _tick(self) -> float:
        return max(0.05, min(1.0, self.limits.idle_timeout / 2))

    def progress(self, n: int) -> None:
        """Count ``n`` more bytes of the body, received now."""
        self.received += n
        self.last = monotonic()

    def check(self) -> None:
        """Timer callback: cancel the reading task when the body stalls or crawls, else check again in a tick.

        Stalled: no byte for ``idle_timeout``. Crawling: once ``idle_timeout`` has passed, fewer bytes
        than ``min_rate`` per second on average since the start. The reason is kept in ``expired``.
        """
        now, limits = monotonic(), self.limits
        if now - self.last > limits.idle_timeout:
            self.expired = f"no part of the body arrived for {limits.idle_timeout:g} s"
        elif now - self.started > limits.idle_timeout and self.received < limits.min_rate * (now - self.started):
            self.expired = (f"the body arrived slower than {limits.min_rate:g} bytes/s "
                            f"({self.received} bytes in {now - self.started:.1f} s)")
        if self.expired:
            self.task.cancel()
        else:
            self.handle = self.loop.call_later(self._tick(), self.check)

    def stop(self) -> None:
        """Cancel the pending check (the read is over)."""
        self.handle.cancel()


async def run_in(pool: ThreadPoolExecutor, fn, environ: dict):
    """``fn(environ, queued_at)`` on ``pool``; ``queued_at`` lets the app see how long it waited."""
    return await asyncio.get_running_loop().run_in_executor(pool, fn, environ, monotonic())


def _problem(status: int, slug: str, title: str, detail: str) -> bytes:
    return orjson.dumps({"type": PROBLEM_BASE + slug, "title": title, "status": status, "detail": detail})


class BufferedWSGI:
    """An ASGI application that runs a WSGI app once each request body is complete.

    Parameters
    ----------
    app : WSGI callable
        The Flask app (kept as ``.app``, for the worker hooks).
    limits : IntakeLimits
    """

    def __init__(self, app, limits: IntakeLimits):
        self.app, self.limits = app, limits
        self._threads = ThreadPoolExecutor(limits.threads, thread_name_prefix="sluice-request")
        self._probes = ThreadPoolExecutor(limits.probe_threads, thread_name_prefix="sluice-probe")
        self._heavy = None  # an asyncio.Semaphore, made on the worker's event loop

    async def __call__(self, scope, receive, send):
        if scope["type"] != "http":
            return None  # no lifespan events are needed, and no websockets are served
        length = None
        for name, value in scope["headers"]:
            if name.lower() == b"content-length":
                length = int(value)
        try:
            steps, fingerprint = await self._read_body(receive, length)
        except _Refused as refused:
            await self._answer_and_linger(receive, send, refused)
            return None
        except _Gone:
            return None
        environ = self._environ(scope, steps, fingerprint)
        status, headers, parts = await self._dispatch(environ, scope["path"])
        await send({"type": "http.response.start", "status": status, "headers": headers})
        for part in parts[:-1]:
            await send({"type": "http.response.body", "body": part, "more_body": True})
        await send({"type": "http.response.body", "body": parts[-1] if parts else b""})
        return None

    async def _dispatch(self, environ: dict, path: str) -> tuple[int, list, list[bytes]]:
        """The app's answer, from a thread of the right lane (large bodies take turns)."""
        if path in PROBE_PATHS:
            return await run_in(self._probes, self._run, environ)
        if int(environ["CONTENT_LENGTH"]) < HEAVY_FROM:
            return await run_in(self._threads, self._run, environ)
        if self._heavy is None:
            self._heavy = asyncio.Semaphore(self.limits.heavy_slots)
        try:
            async with asyncio.timeout(self.limits.queue_wait):
                await self._heavy.acquire()
        except (TimeoutError, asyncio.TimeoutError):
            # The app answers 503 at once (its first hook), on a probe thread: the
            # answer is counted, logged and carries the usual headers.
            environ[SHED] = True
            return await run_in(self._probes, self._run, environ)
        # The slot is free when the thread is done, not when this coroutine is: a client
        # that leaves cancels the wait, not the decode under way.
        loop = asyncio.get_running_loop()
        work = self._threads.submit(self._run, environ, monotonic())
        work.add_done_callback(lambda _: loop.call_soon_threadsafe(self._heavy.release))
        return await asyncio.wrap_future(work)

    async def _read_body(self, receive, length: int | None) -> tuple[list[bytes], bytes | None]:
        limit = self.limits.max_body
        if length is not None and length > limit:
            raise _Refused(413, "too-large", "The request exceeds a size limit",
                           f"the body has {length} bytes; the limit is {limit}")
        if length == 0:
            return [], None
        steps, size, hasher = [], 0, None
        watch = _Watch(self.limits)
        try:
            while True:
                message = await receive()
                if message["type"] != "http.request":
                    raise _Gone()
                chunk = message.get("body", b"")
                if chunk:
                    size += len(chunk)
                    watch.progress(len(chunk))
                    if size > limit:  # only a chunked body gets here
                        raise _Refused(413, "too-large", "The request exceeds a size limit",
                                       f"the chunked body passed the limit of {limit} bytes")
                    steps.append(chunk)
                    if hasher is not None:
                        hasher.update(chunk)
                    elif size >= HASH_FROM or (length or 0) >= HASH_FROM:
                        hasher = blake3()
                        for step in steps:
                            hasher.update(step)
                if not message.get("more_body"):
                    break
        except asyncio.CancelledError:
            if watch.expired is None:
                raise
            task = asyncio.current_task()
            if hasattr(task, "uncancel"):
                task.uncancel()
            raise _Refused(408, "request-timeout", "The request body did not arrive in time",
                           f"{watch.expired}; send the body at once, or retry") from None
        finally:
            watch.stop()
        return steps, None if hasher is None else hasher.digest()

    async def _answer_and_linger(self, receive, send, refused: _Refused) -> None:
        body = _problem(refused.status, refused.slug, refused.title, refused.detail)
        await send({"type": "http.response.start", "status": refused.status,
                    "headers": [(b"content-type", b"application/problem+json"),
                                (b"content-length", str(len(body)).encode()), (b"connection", b"close")]})
        await send({"type": "http.response.body", "body": body})
        # A client still sending would get a reset (and maybe lose the answer) if the
        # socket closed with unread bytes: discard what arrives for a moment first.
        try:
            async with asyncio.timeout(LINGER_SECONDS):
                while (await receive()).get("more_body"):
                    pass
        except (TimeoutError, asyncio.TimeoutError):
            pass

    def _environ(self, scope, steps: list[bytes], fingerprint: bytes | None) -> dict:
        server = scope.get("server") or ("127.0.0.1", 0)
        client = scope.get("client") or ("", 0)
        size = sum(map(len, steps))
        environ = {
            "REQUEST_METHOD": scope["method"],
            "SCRIPT_NAME": scope.get("root_path", "").encode("utf-8").decode("latin-1"),
            "PATH_INFO": scope["path"].encode("utf-8").decode("latin-1"),
            "QUERY_STRING": scope.get("query_string", b"").decode("latin-1"),
            "SERVER_NAME": str(server[0]),
            "SERVER_PORT": str(server[1]),
            "SERVER_PROTOCOL": f"HTTP/{scope.get('http_version', '1.1')}",
            "REMOTE_ADDR": client[0],
            "REMOTE_PORT": str(client[1]),
            "CONTENT_LENGTH": str(size),
            "wsgi.version": (1, 0),
            "wsgi.url_scheme": scope.get("scheme", "http"),
            "wsgi.input": _StepsReader(steps),
            "wsgi.errors": sys.stderr,
            "wsgi.multithread": True,
            "wsgi.multiprocess": True,
            "wsgi.run_once": False,
            BODY_STEPS: steps,
            BODY_FINGERPRINT: fingerprint,
        }
        for name, value in scope["headers"]:
            key = name.decode("latin-1").upper().replace("-", "_")
            if key in ("CONTENT_LENGTH", "TRANSFER_ENCODING"):
                continue  # the body is complete: its length is what arrived
            if key == "CONTENT_TYPE":
                environ["CONTENT_TYPE"] = value.decode("latin-1")
                continue
            key = "HTTP_" + key
            text = value.decode("latin-1")
            environ[key] = f"{environ[key]},{text}" if key in environ else text
        return environ

    def _run(self, environ: dict, queued_at: float) -> tuple[int, list, list[bytes]]:
        """Run the WSGI app on this thread; the response as (status, headers, body parts)."""
        environ[QUEUED] = monotonic() - queued_at
        answer = {}

        def start_response(status, headers, exc_info=None):
            """The WSGI ``start_response``: keep the status code and the headers.

            Nothing is sent before the app returns, so a later call (with ``exc_info``) simply replaces
            them. The ``write`` callable it returns appends to the body parts.
            """
            answer["status"], answer["headers"] = int(status.split(" ", 1)[0]), headers
            return parts.append

        parts: list[bytes] = []
        result = self.app(environ, start_response)
        try:
            parts.extend(part for part in result if part)
        finally:
            if hasattr(result, "close"):
                result.close()
        headers = [(k.encode("latin-1"), v.encode("latin-1")) for k, v in answer["headers"]]
        return answer["status"], headers, parts


class _StepsReader:
    """``wsgi.input`` over the received steps (for readers other than the app's own)."""

    def __init__(self, steps: list[bytes]):
        self._steps, self._view, self._at = steps, None, 0

    @property
    def _data(self) -> memoryview:
        if self._view is None:  # joined only if someone reads this way
            self._view = memoryview(self._steps[0] if len(self._steps) == 1 else b"".join(self._steps))
        return self._view

    def read(self, size: int = -1) -> bytes:
        """Up to ``size`` bytes from the current position; all the rest when ``size`` is negative or None."""
        end = len(self._data) if size is None or size < 0 else min(len(self._data), self._at + size)
        out, self._at = bytes(self._data[self._at:end]), end
        return out

    def readline(self, size: int = -1) -> bytes:
        """The next line, its newline included, from the current position: at most ``size`` bytes when
        ``size`` is not negative or None.
        """
        rest = self._data[self._at:] if size is None or size < 0 else self._data[self._at:self._at + size]
        cut = bytes(rest).find(b"\n")
        return self.read(len(rest) if cut < 0 else cut + 1)

    def __iter__(self):
        while line := self.readline():
            yield line
