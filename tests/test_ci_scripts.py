"""The .ci/ensure-* scripts say what they install before they install it.

As root, `make test` may install a C compiler, redis-server and chromium (about 115
Debian packages, a minute or more); apt-get runs quietly, so the line printed before it
is all a newcomer sees.
"""

from __future__ import annotations

import re

import pytest

from tests.conftest import ROOT

SCRIPTS = sorted((ROOT / ".ci").glob("ensure-*"))


def test_there_are_ensure_scripts():
    assert {p.name for p in SCRIPTS} >= {"ensure-browser", "ensure-compiler", "ensure-redis"}


@pytest.mark.parametrize("script", SCRIPTS, ids=lambda p: p.name)
def test_every_install_is_announced_on_the_line_before(script):
    lines = script.read_text().splitlines()
    installs = [i for i, line in enumerate(lines) if re.search(r"apt-get (update|install)", line)]
    assert installs, f"{script.name} installs nothing with apt-get"
    for i in installs:
        before = lines[i - 1].strip()
        assert before.startswith("echo ") and "installing" in before and ">&2" in before, \
            f"{script.name}:{i + 1} runs apt-get without saying what it installs first: {lines[i]!r}"
