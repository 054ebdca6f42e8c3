"""Every public function of ``service/`` has a docstring (numpydoc style, DEVELOPERS.md).

Each ``.py`` module is read with :mod:`ast`, never imported. A function is public when
its name does not start with ``_``, wherever it is defined: module functions, methods
(of any class, properties included) and functions nested in others alike. The rule is
kept that simple so a count by hand (``ast.walk``) and this test always agree. The
Cython ``.pyx`` modules are private (``_arcscan``, ``_firstseen``) and not read.
"""

from __future__ import annotations

import ast
import textwrap
from functools import lru_cache
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SERVICE = ROOT / "service"

def _rel(path: Path) -> str:
    return path.relative_to(ROOT).as_posix()


def missing_docstrings(source: str, filename: str = "<source>") -> list[tuple[int, str]]:
    """``(line, name)`` of each public function in ``source`` without a docstring.

    An empty docstring counts as none.
    """
    out = []
    for node in ast.walk(ast.parse(source, filename=filename)):
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)) and not node.name.startswith("_"):
            doc = ast.get_docstring(node)
            if doc is None or not doc.strip():
                out.append((node.lineno, node.name))
    return out


@lru_cache(maxsize=1)
def _undocumented() -> tuple[tuple[str, int, str], ...]:
    """``(module, line, name)`` of every public function of service/ without a docstring."""
    out = []
    for path in sorted(SERVICE.rglob("*.py")):
        for line, name in missing_docstrings(path.read_text(encoding="utf-8"), str(path)):
            out.append((_rel(path), line, name))
    return tuple(sorted(out))


def test_the_walk_reads_the_service():
    """The walk sees the modules it claims to check (a wrong root would pass vacuously)."""
    modules = {_rel(p) for p in SERVICE.rglob("*.py")}
    assert {"service/errors.py", "service/store/base.py", "service/solvers/graph.py"} <= modules


def test_the_walk_finds_each_kind_of_undocumented_function():
    """The check can fail: methods, properties, nested and async functions are all seen;
    private names, dunders and documented functions are not reported."""
    source = textwrap.dedent('''
        def top():
            pass

        def documented():
            """Yes."""

        def empty():
            """"""

        async def waits():
            pass

        def outer():
            """Outer."""
            def inner():
                pass
            return inner

        class _Private:
            def method(self):
                pass

            @property
            def size(self):
                return 0

            def __init__(self):
                pass

            def _helper(self):
                pass
    ''')
    assert [name for _, name in missing_docstrings(source)] == ["top", "empty", "waits", "inner", "method", "size"]


def test_every_public_function_has_a_docstring():
    missing = [f"{module}:{line} {name}" for module, line, name in _undocumented()]
    assert not missing, (
        f"{len(missing)} public function(s) without a docstring (numpydoc: a one-line summary, then "
        "Parameters / Returns / Raises where they apply):\n" + "\n".join(missing)
    )
