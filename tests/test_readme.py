"""Every command block of the README runs against a real server and prints what the
README shows after it.

The convention (README, "How the README's examples are checked"):

- A fenced ``sh`` block is a command block. The blocks run in README order in one bash
  session (so ``cd`` and variables carry over, as for a reader typing them top to
  bottom), in a scratch folder holding a copy of ``service/scenarios`` (the real files
  are never written), against one ``sluice serve`` with the embedded defaults. The
  port 8000 in ``localhost:8000`` / ``127.0.0.1:8000`` is replaced by the test server's.
- The fenced block right after it (only blank lines between), ``json`` or ``text``, is
  what the commands print on stdout. Every command block has one, unless the line right
  before it says ``<!-- not executed: REASON -->``.
- ``json``: stdout and the block are read as a sequence of JSON documents and compared
  member by member. ``…`` (or ``...``) stands for left-out members or array elements
  (``{"a": 1, …}``, ``[1, 2, …]``), for one value (``"cut": …``) or, inside a string,
  for any characters (``"sha256:…"``). A number matches at the precision it is printed
  with (``4.625``, ``3.6e-15``). The values of the volatile members in ``VOLATILE``
  (timings, times, request and job ids) are not compared, only their presence.
- ``text``: line by line; ``…`` inside a line stands for any characters, a line ``…``
  (or ``...``) for any number of lines. Trailing spaces and ``\\r`` are ignored.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import shutil
import subprocess
import time
from dataclasses import dataclass
from pathlib import Path

import pytest

from tests.conftest import ROOT, SCENARIOS, RunningServer

pytestmark = pytest.mark.server

README = ROOT / "README.md"
COMMAND_LANGS = {"sh", "bash", "shell", "console", ""}
OUTPUT_LANGS = {"json", "text"}
NOT_EXECUTED = re.compile(r"^<!--\s*not executed:\s*(?P<reason>\S.{9,}?)\s*-->$")
#: Members whose values change from run to run: compared for presence only.
VOLATILE = frozenset({"timing_ms", "request_id", "id", "created", "updated", "created_at", "started_at",
                      "finished_at"})
ELLIPSES = ("…", "...")


@dataclass
class Block:
    lang: str
    text: str
    line: int  # 1-based line of the opening fence
    skip_reason: str | None = None
    output: "Block | None" = None


def parse_readme(text: str) -> list[Block]:
    """The fenced blocks of ``text``, each command block with its output block."""
    lines = text.splitlines()
    blocks, i = [], 0
    while i < len(lines):
        opening = re.match(r"^```(\S*)\s*$", lines[i])
        if not opening:
            i += 1
            continue
        end = next((j for j in range(i + 1, len(lines)) if lines[j].startswith("```")), None)
        assert end is not None, f"README.md:{i + 1}: a fenced block is never closed"
        before = next((lines[j].strip() for j in range(i - 1, -1, -1) if lines[j].strip()), "")
        marker = NOT_EXECUTED.match(before)
        blocks.append(Block(opening.group(1), "\n".join(lines[i + 1:end]), i + 1,
                            marker.group("reason") if marker else None))
        i = end + 1
    paired: list[Block] = []
    for block in blocks:
        if block.lang in OUTPUT_LANGS:
            previous = paired[-1] if paired else None
            between = lines[(previous.output or previous).line + len((previous.output or previous).text.splitlines())
                            + 1:block.line - 1] if previous else []
            if previous is None or previous.output is not None or any(s.strip() for s in between):
                raise AssertionError(f"README.md:{block.line}: a {block.lang} block that follows no command "
                                     f"block (an output nobody checks); put it right after its command block")
            previous.output = block
        else:
            paired.append(block)
    return paired


def indented_code(text: str) -> list[int]:
    """Lines opening an indented (4-space) code block, which the test could not run."""
    lines, found, fenced = text.splitlines(), [], False
    for i, line in enumerate(lines):
        if line.startswith("```"):
            fenced = not fenced
        if fenced or not line.startswith("    ") or not line.strip() or i == 0 or lines[i - 1].strip():
            continue
        previous = next((s for s in reversed(lines[:i]) if s.strip()), "")
        if not re.match(r"^\s*([-*+]|\d+\.)\s|^\s", previous):  # not a list item's continuation
            found.append(i + 1)
    return found


BLOCKS = parse_readme(README.read_text())
COMMANDS = [b for b in BLOCKS if b.lang in COMMAND_LANGS]


# -- matching ----------------------------------------------------------------------

class Shown(float):
    """A float as the README prints it, keeping its literal for the precision."""

    def __new__(cls, literal: str):
        value = super().__new__(cls, literal)
        value.literal = literal
        return value


def number_matches(expected, actual) -> bool:
    if isinstance(actual, bool) or not isinstance(actual, (int, float)):
        return False
    if not isinstance(expected, Shown):  # an integer in the README: the same integer
        return isinstance(actual, int) and actual == expected
    if not isinstance(actual, float):
        return False
    literal = expected.literal.lower()
    if "e" in literal:
        mantissa = literal.split("e")[0].lstrip("-").replace(".", "").lstrip("0")
        return float(f"{actual:.{max(len(mantissa), 1) - 1}e}") == expected
    decimals = len(literal.split(".")[1]) if "." in literal else 0
    return round(actual, decimals) == expected


def loose_json(text: str) -> str:
    """``text`` with each bare ``…``/``...`` turned into JSON: a ``"...": "..."`` member
    in key position, a ``"..."`` value elsewhere."""
    out, stack, in_string, escaped, expect_key, i = [], [], False, False, False, 0
    while i < len(text):
        ch = text[i]
        if in_string:
            out.append(ch)
            if escaped:
                escaped = False
            elif ch == "\\":
                escaped = True
            elif ch == '"':
                in_string = False
            i += 1
            continue
        ellipsis = next((e for e in ELLIPSES if text.startswith(e, i)), None)
        if ellipsis:
            out.append('"...": "..."' if stack and stack[-1] == "{" and expect_key else '"..."')
            expect_key = False
            i += len(ellipsis)
            continue
        if ch == '"':
            in_string, escaped = True, False
            expect_key = False
        elif ch in "{[":
            stack.append(ch)
            expect_key = ch == "{"
        elif ch in "}]":
            stack.pop()
        elif ch == ",":
            expect_key = bool(stack) and stack[-1] == "{"
        out.append(ch)
        i += 1
    return "".join(out)


def json_documents(text: str, expected: bool) -> list:
    decoder = json.JSONDecoder(parse_float=Shown) if expected else json.JSONDecoder()
    text = loose_json(text) if expected else text
    docs, i = [], 0
    while True:
        while i < len(text) and text[i].isspace():
            i += 1
        if i == len(text):
            return docs
        doc, i = decoder.raw_decode(text, i)
        docs.append(doc)


def is_wildcard(value) -> bool:
    return isinstance(value, str) and value in ELLIPSES


def json_mismatch(expected, actual, where: str = "") -> str | None:
    """None when ``actual`` matches the README's ``expected``, else where and how not."""
    if is_wildcard(expected):
        return None
    if isinstance(expected, dict):
        if not isinstance(actual, dict):
            return f"{where or '/'}: README shows an object, printed {actual!r:.80}"
        keys = [k for k in expected if not is_wildcard(k)]
        missing = [k for k in keys if k not in actual]
        if missing:
            return f"{where or '/'}: printed no member {missing[0]!r}"
        extra = sorted(set(actual) - set(keys))
        if extra and not any(is_wildcard(k) for k in expected):
            return f"{where or '/'}: printed members the README leaves out without a …: {extra}"
        for k in keys:
            if k in VOLATILE:
                continue
            problem = json_mismatch(expected[k], actual[k], f"{where}/{k}")
            if problem:
                return problem
        return None
    if isinstance(expected, list):
        if not isinstance(actual, list):
            return f"{where or '/'}: README shows an array, printed {actual!r:.80}"
        open_end = bool(expected) and is_wildcard(expected[-1])
        shown = expected[:-1] if open_end else expected
        if len(actual) < len(shown) or (not open_end and len(actual) != len(shown)):
            return f"{where or '/'}: README shows {len(shown)} elements, printed {len(actual)}"
        for n, (e, a) in enumerate(zip(shown, actual)):
            problem = json_mismatch(e, a, f"{where}/{n}")
            if problem:
                return problem
        return None
    if isinstance(expected, str) and any(e in expected for e in ELLIPSES):
        pattern = ".*".join(map(re.escape, re.split("…|[.][.][.]", expected)))
        ok = isinstance(actual, str) and re.fullmatch(pattern, actual, re.S)
        return None if ok else f"{where}: README shows {expected!r}, printed {actual!r}"
    if isinstance(expected, (int, float)) and not isinstance(expected, bool):
        return None if number_matches(expected, actual) else f"{where}: README shows {expected}, printed {actual!r}"
    if expected != actual or type(expected) is not type(actual):
        return f"{where or '/'}: README shows {expected!r}, printed {actual!r}"
    return None


def text_mismatch(expected: str, actual: str) -> str | None:
    want = [line.rstrip() for line in expected.splitlines()]
    got = [line.rstrip("\r ").rstrip() for line in actual.splitlines()]

    def line_ok(pattern: str, line: str) -> bool:
        return re.fullmatch(".*".join(map(re.escape, pattern.split("…"))), line) is not None

    def match(w: int, g: int) -> bool:
        if w == len(want):
            return g == len(got)
        if want[w].strip() in ELLIPSES:
            return any(match(w + 1, k) for k in range(g, len(got) + 1))
        return g < len(got) and line_ok(want[w], got[g]) and match(w + 1, g + 1)

    if match(0, 0):
        return None
    return "README shows:\n" + "\n".join(want) + "\nprinted:\n" + "\n".join(got)


# -- running -----------------------------------------------------------------------

class Shell:
    """One bash session; each block is sourced in it, its stdout and status kept."""

    def __init__(self, cwd: Path, work: Path, env: dict):
        self.work = work
        self.proc = subprocess.Popen(["bash", "--noprofile", "--norc"], stdin=subprocess.PIPE, cwd=cwd, env=env,
                                     stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, text=True)

    def run(self, number: int, script: str, timeout: float = 120.0) -> tuple[int, str, str]:
        path, out, err, rc = (self.work / f"block{number}.{ext}" for ext in ("sh", "out", "err", "rc"))
        path.write_text(script + "\n")
        self.proc.stdin.write(f"source {path} >{out} 2>{err} </dev/null; echo $? >{rc}.tmp; mv {rc}.tmp {rc}\n")
        self.proc.stdin.flush()
        deadline = time.monotonic() + timeout
        while not rc.exists():
            if time.monotonic() > deadline or self.proc.poll() is not None:
                raise AssertionError(f"block {number} did not finish within {timeout} s (or the shell exited)")
            time.sleep(0.02)
        return int(rc.read_text()), out.read_text(), err.read_text()

    def close(self) -> None:
        if self.proc.poll() is None:
            self.proc.stdin.close()
            try:
                self.proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()


def scenario_hashes() -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(SCENARIOS.iterdir())}


class ReadmeRun:
    """Runs the command blocks in README order, as far as a test asks."""

    def __init__(self, tmp: Path):
        self.server = RunningServer(data_dir=str(tmp / "data"))
        self.scratch = tmp / "reader"
        shutil.copytree(SCENARIOS, self.scratch / "service" / "scenarios")
        (tmp / "shell").mkdir()
        env = {**os.environ, "PATH": f"{ROOT / '.venv' / 'bin'}{os.pathsep}{os.environ.get('PATH', '')}"}
        self.shell = Shell(self.scratch, tmp / "shell", env)
        self.results: dict[int, tuple[int, str, str]] = {}

    def through(self, block: Block) -> tuple[int, str, str]:
        for n, b in enumerate(COMMANDS):
            if b.line in self.results or b.skip_reason:
                continue
            script = re.sub(r"\b(localhost|127\.0\.0\.1):8000\b", rf"\g<1>:{self.server.port}", b.text)
            self.results[b.line] = self.shell.run(n, script)
            if b is block:
                break
        return self.results[block.line]

    def close(self) -> None:
        self.shell.close()
        self.server.stop()


@pytest.fixture(scope="module")
def readme_run(tmp_path_factory):
    before = scenario_hashes()
    run = ReadmeRun(tmp_path_factory.mktemp("readme"))
    yield run
    run.close()
    assert scenario_hashes() == before, "running the README changed a file in service/scenarios"


# -- the tests ---------------------------------------------------------------------

def test_the_readme_has_command_blocks_and_no_unchecked_code():
    assert len(COMMANDS) >= 20
    assert not indented_code(README.read_text()), \
        f"README.md lines {indented_code(README.read_text())}: indented code blocks; fence them as ```sh"
    unknown = [b.line for b in BLOCKS if b.lang not in COMMAND_LANGS and b.skip_reason is None]
    assert not unknown, f"README.md lines {unknown}: fenced blocks of a language the test does not run"


def test_blocks_not_executed_say_why_and_stay_few():
    skipped = [(b.line, b.skip_reason) for b in COMMANDS if b.skip_reason]
    # Each one is a command this test cannot run against its own server (make itself,
    # another server, another host); raise the bound only with a reason as good.
    assert len(skipped) <= 6, f"too many README blocks not executed: {skipped}"


@pytest.mark.parametrize("block", [b for b in COMMANDS if not b.skip_reason], ids=lambda b: f"line{b.line}")
def test_the_block_prints_what_the_readme_shows(readme_run, block):
    assert block.output is not None, (f"README.md:{block.line}: a command block without an output block; add the "
                                      f"```json or ```text block it prints, or mark it <!-- not executed: why -->")
    rc, out, err = readme_run.through(block)
    assert rc == 0, f"README.md:{block.line}: the block exited {rc}\n{block.text}\nstderr: {err[-2000:]}"
    if block.output.lang == "json":
        try:
            got = json_documents(out, expected=False)
        except ValueError as exc:
            pytest.fail(f"README.md:{block.line}: printed no JSON ({exc}):\n{out[:2000]}")
        want = json_documents(block.output.text, expected=True)
        assert len(got) == len(want), f"README.md:{block.line}: README shows {len(want)} documents, printed {len(got)}"
        for e, a in zip(want, got):
            problem = json_mismatch(e, a)
            assert problem is None, f"README.md:{block.output.line}: {problem}\nprinted: {json.dumps(a)[:3000]}"
    else:
        problem = text_mismatch(block.output.text, out)
        assert problem is None, f"README.md:{block.output.line}: {problem}"


# -- the matcher itself (it must be able to fail) -----------------------------------

@pytest.mark.parametrize("expected, actual, ok", [
    ('{"a": 1, "b": [1, 2]}', {"a": 1, "b": [1, 2]}, True),
    ('{"a": 1, …}', {"a": 1, "b": 2}, True),
    ('{"a": 1}', {"a": 1, "b": 2}, False),
    ('{"a": 2, …}', {"a": 1, "b": 2}, False),
    ('{"a": [1, 2, …]}', {"a": [1, 2, 3]}, True),
    ('{"a": [1, 2]}', {"a": [1, 2, 3]}, False),
    ('{"a": {…}}', {"a": {"x": 1}}, True),
    ('{"d": "sha256:…"}', {"d": "sha256:ab12"}, True),
    ('{"d": "sha256:…"}', {"d": "md5:ab12"}, False),
    ('{"x": 4.625}', {"x": 4.62500000001}, True),
    ('{"x": 4.625}', {"x": 4.626}, False),
    ('{"x": 3.6e-15}', {"x": 3.5527e-15}, True),
    ('{"x": 3.6e-15}', {"x": 2.2e-15}, False),
    ('{"x": 160}', {"x": 160.0}, False),
    ('{"timing_ms": {"total": 1.1}}', {"timing_ms": {"total": 9.9}}, True),
    ('{"timing_ms": {"total": 1.1}}', {}, False),
    ('{"v": "..."}', {"v": [1]}, True),
    ('{"e": "\\"1-…\\"", …}', {"e": '"1-ab"', "f": 2}, True),
    ('{"e": "\\"1-…\\""}', {"e": '1-ab'}, False),
])
def test_json_matching(expected, actual, ok):
    (doc,) = json_documents(expected, expected=True)
    assert (json_mismatch(doc, actual) is None) is ok


@pytest.mark.parametrize("expected, actual, ok", [
    ("Cache-Status: sluice; hit", "Cache-Status: sluice; hit\r\n", True),
    ("Cache-Status: sluice; hit", "Cache-Status: sluice; fwd=miss; stored", False),
    ("Location: /v1/jobs/…", "Location: /v1/jobs/6f0c12", True),
    ("first\n…\nlast", "first\na\nb\nlast", True),
    ("first\n…\nlast", "first\na\nb", False),
    ("204", "200", False),
])
def test_text_matching(expected, actual, ok):
    assert (text_mismatch(expected, actual) is None) is ok


def test_blocks_pair_with_their_outputs():
    blocks = parse_readme("x\n```sh\necho 1\n```\n\n```json\n1\n```\n<!-- not executed: needs make itself -->\n"
                          "```sh\nmake test\n```\n")
    assert [(b.line, b.output.line if b.output else None, b.skip_reason) for b in blocks] == \
        [(2, 6, None), (10, None, "needs make itself")]
    with pytest.raises(AssertionError, match="follows no command"):
        parse_readme("```sh\necho 1\n```\ntext\n```json\n1\n```\n")
