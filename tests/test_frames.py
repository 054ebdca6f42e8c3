"""Frames between API processes and solver processes: real pipes, real processes."""

from __future__ import annotations

import fcntl
import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest

from service.deadline import Deadline
from service.jobs.frames import HEADER, _advance, read_frame, write_frame
from service.jobs.runner import PIPE_SIZE, ChildLost, SolverPool, SolverProcess, unpack
from service.kinds import KINDS, Limits

ROOT = Path(__file__).resolve().parents[1]

#: A process that sends every frame it reads straight back, through the same module
#: (a frame holding ``None`` reads like the end of the stream, as in the solver process).
ECHO = """
import os, sys
from service.jobs.frames import read_frame, write_frame
while True:
    message = read_frame(0)
    if message is None:
        break
    write_frame(1, message)
"""


def assert_same_array(got, want):
    assert type(got) is np.ndarray
    assert got.dtype == want.dtype and got.shape == want.shape
    assert got.flags.writeable == want.flags.writeable
    # Bytes, not values: NaN payloads and -0.0 must survive too.
    assert np.ascontiguousarray(got).tobytes() == np.ascontiguousarray(want).tobytes()


def sample_arrays() -> dict:
    rng = np.random.default_rng(7)
    floats = rng.standard_normal(1_000_003)
    floats[:4] = [np.nan, -0.0, np.inf, -np.inf]
    floats.view(np.uint64)[4] = 0x7FF8_0000_DEAD_BEEF  # a NaN with a payload
    readonly = np.arange(10_001, dtype=np.int32)
    readonly.flags.writeable = False
    return {
        "int32": rng.integers(-2**31, 2**31 - 1, 2_000_001, dtype=np.int32),
        "int64": rng.integers(-2**63, 2**63 - 1, 3_000_000, dtype=np.int64),  # 24 MB: many pipe fills
        "float64": floats,
        "bool": rng.random(1_000_001) < 0.5,  # an odd number of bytes
        "int8": np.arange(-128, 127, dtype=np.int8),
        "fortran": np.asfortranarray(rng.integers(0, 9, (301, 7))),
        "strided": np.arange(100_001, dtype=np.int64)[::3],  # not contiguous: pickled in band
        "readonly": readonly,
        "empty": np.empty(0, dtype=np.float64),
        "scalar": np.array(3.5),
    }


def check_round_trip(got: dict, want: dict) -> None:
    assert got.keys() == want.keys()
    for key in want:
        assert_same_array(got[key], want[key])


@pytest.fixture
def echo():
    proc = subprocess.Popen([sys.executable, "-c", ECHO], cwd=ROOT, stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                            bufsize=0)
    yield proc
    proc.stdin.close()
    assert proc.wait(timeout=30) == 0
    proc.stdout.close()


def test_large_arrays_round_trip_bit_exact_through_another_process(echo):
    arrays = sample_arrays()
    message = ("ok", {"arrays": arrays, "ids": list(range(50_000)), "text": "x" * 12_345}, 0.25)
    for _ in range(2):  # the second frame must not see leftovers of the first
        write_frame(echo.stdin.fileno(), message)
        reply = read_frame(echo.stdout.fileno())
        check_round_trip(reply[1]["arrays"], arrays)
        assert reply[1]["ids"] == message[1]["ids"] and reply[1]["text"] == message[1]["text"]
        assert reply[0] == "ok" and reply[2] == 0.25


def test_frames_of_odd_sizes_and_many_buffers(echo):
    # Odd byte counts, one byte, no buffers at all, and more buffers than one writev
    # or readv call takes (IOV_MAX is 1024 on Linux).
    messages = [
        (),
        b"",
        b"\x00",
        np.zeros(1, dtype=np.uint8),
        np.arange(7, dtype=np.uint8),
        np.frombuffer(os.urandom(PIPE_SIZE + 1), dtype=np.uint8),
        [np.full(i % 5 + 1, i, dtype=np.int16) for i in range(3_001)],
    ]
    for message in messages:
        write_frame(echo.stdin.fileno(), message)
        got = read_frame(echo.stdout.fileno())
        if isinstance(message, list):
            assert len(got) == len(message)
            for a, b in zip(got, message):
                assert_same_array(a, b)
        elif isinstance(message, np.ndarray):
            assert_same_array(got, message)
        else:
            assert got == message


def test_a_frame_cut_short_reads_as_end_of_stream():
    for keep in (0, 3, HEADER.size + 5, None):  # nothing, part of the header, part of the body
        r, w = os.pipe()
        frame_r, frame_w = os.pipe()
        write_frame(frame_w, {"a": np.arange(1000)})
        os.close(frame_w)
        frame = os.read(frame_r, 1 << 20)
        os.close(frame_r)
        cut = frame[:-1] if keep is None else frame[:keep]
        os.write(w, cut)
        os.close(w)
        try:
            assert read_frame(r) is None
        finally:
            os.close(r)


def test_advance_after_partial_transfers():
    views = [memoryview(b"abc"), memoryview(b"de"), memoryview(b"fghij")]
    assert [bytes(v) for v in _advance(views, 0)] == [b"abc", b"de", b"fghij"]
    assert [bytes(v) for v in _advance(views, 2)] == [b"c", b"de", b"fghij"]
    assert [bytes(v) for v in _advance(views, 3)] == [b"de", b"fghij"]
    assert [bytes(v) for v in _advance(views, 6)] == [b"ghij"]
    assert _advance(views, 10) == []


def test_pipes_to_a_solver_process_are_enlarged():
    r, w = os.pipe()
    try:
        fcntl.fcntl(w, fcntl.F_SETPIPE_SZ, PIPE_SIZE)
    except OSError as exc:
        pytest.skip(f"this host refuses {PIPE_SIZE}-byte pipes ({exc}); the solver processes keep the default")
    finally:
        os.close(r)
        os.close(w)
    proc = SolverProcess()
    try:
        for stream in (proc.proc.stdin, proc.proc.stdout):
            assert fcntl.fcntl(stream.fileno(), fcntl.F_GETPIPE_SZ) == PIPE_SIZE
    finally:
        proc.kill()


def random_maxflow(m: int, seed: int = 3):
    rng = np.random.default_rng(seed)
    n = m // 10
    tail, head = rng.integers(1, n - 1, m), rng.integers(1, n - 1, m)
    tail[: m // 100] = 0
    head[m // 100: m // 50] = n - 1
    body = {"source": 0, "sink": n - 1, "arcs": {"from": tail.tolist(), "to": head.tolist(),
                                                 "capacity": rng.integers(1, 100, m).tolist()}}
    return KINDS["maxflow"].parse(body, Limits())


def test_a_pooled_solve_returns_exactly_the_inline_answer():
    kind, problem = KINDS["maxflow"], random_maxflow(300_000)
    inline = kind.solve(problem, Deadline.after(120))
    pool = SolverPool(1)
    try:
        pooled, _ = unpack(pool.run(("solve", kind.name, problem, None), deadline=Deadline.after(120)))
    finally:
        pool.close()
    assert pooled["value"] == inline["value"] > 0
    assert_same_array(pooled["flows"], inline["flows"])
    for part in ("source_side", "arcs"):
        assert_same_array(pooled["cut"][part], inline["cut"][part])
    assert pooled["certificate"] == inline["certificate"] and pooled["digest"] == inline["digest"]


def test_a_child_killed_while_a_large_frame_is_written_is_lost_not_hung():
    proc = SolverProcess()
    os.kill(proc.pid, signal.SIGSTOP)  # reads nothing: the write fills the pipe and blocks
    message = ("solve", "maxflow", np.zeros(4_000_000, dtype=np.int64), None)  # 32 MB >> the pipe
    outcome: list = []

    def run():
        try:
            proc.run(message, deadline=Deadline.after(60))
        except ChildLost as exc:
            outcome.append(exc)

    thread = threading.Thread(target=run)
    thread.start()
    time.sleep(0.5)
    assert thread.is_alive()  # blocked in the write
    os.kill(proc.pid, signal.SIGKILL)
    thread.join(30)
    assert not thread.is_alive() and len(outcome) == 1
    assert not proc.alive
    with pytest.raises(ChildLost):  # a dead process refuses further work instead of writing to a stale fd
        proc.run(("solve", "maxflow", None, None))
