"""The rooms of the code import one way only (DEVELOPERS.md), with no circle inside one.

Every module of ``service/`` (``.py`` and Cython ``.pyx``) is read without importing
it, and each import is resolved to the module it names: ``from ..room import x``,
``from .. import room``, ``from . import module``, ``import service.room.module`` and
``cimport`` alike. Two checks follow:

* each *room* (a package of ``service/``, or a top-level module) imports only the
  rooms :data:`ALLOWED` gives it, and Flask only where :data:`FLASK` says;
* no circle of imports between modules; an import inside a function counts too (it
  only hides a circle from the interpreter), unless :data:`LOCAL_IMPORTS` gives it a
  reason.

The entries of :data:`KNOWN` are today's violations, each with the slice of work that
removes it: delete an entry with the fix (a test fails while an entry is no longer
needed).
"""

from __future__ import annotations

import ast
import re
import sys
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import pytest

SERVICE = Path(__file__).resolve().parents[1] / "service"

#: What each room may import from the rest of the package (besides itself). A room is a
#: package of service/ or a top-level module (``service`` itself: ``__version__``).
ALLOWED = {
    "service": set(),  # service/__init__.py: __version__
    "errors": set(),
    "logs": set(),
    "memory": set(),
    # The one time budget of a solve (a monotonic instant), made by api and jobs and read
    # by kinds and solvers: below all of them, importing nothing of the service.
    "deadline": set(),
    # The tenant-name rule (store.names) refuses a bad API key file at start-up.
    "config": {"errors", "store"},
    "model": {"errors"},
    "solvers": {"errors", "deadline"},
    # config: the size limits take their defaults from Settings (one place they are written).
    # drawing: a kind declares its picture (Kind.picture: its drawer and drawn form); the drawing
    # room is a leaf, so no circle.
    "kinds": {"errors", "config", "deadline", "model", "solvers", "drawing"},
    "store": {"errors", "model"},
    "jobs": {"errors", "config", "deadline", "kinds", "memory"},
    # numpy and plain data only: no model, no Flask; from the solvers only their graph type
    # (service.solvers.graph, DRAWING_FROM_SOLVERS), so the columns of a diagram come from
    # the one breadth-first search of the service.
    "drawing": {"solvers"},
    # The worker's front (gunicorn's asyncio worker) hands the app the body whole.
    "intake": {"errors", "config", "logs", "memory"},
    "api": {"service", "errors", "config", "deadline", "logs", "memory", "intake", "model", "solvers", "kinds",
            "store", "jobs", "drawing"},
    "serving": {"errors", "config", "logs", "memory", "intake", "api"},  # runs the app
    "cli": {"service", "errors", "config", "logs", "memory", "serving", "api", "jobs"},
}

#: The only modules of the solvers the drawing room may import.
DRAWING_FROM_SOLVERS = {"service.solvers.graph"}

#: Rooms that may import Flask (or its extensions).
FLASK = {"api"}

_SUBCOMMAND = "each subcommand loads only what it runs (`sluice spec` no gunicorn, `sluice worker` no Flask)"
_BACKEND = "the backend the settings choose is loaded alone: no Redis client for the embedded one"
_CHILD = "the solver process sets itself up (parent-death signal, stdout kept for frames) before these load"

#: Function-local imports of the service, each with its reason (``(module, imported)``).
LOCAL_IMPORTS: dict[tuple[str, str], str] = {
    ("service.cli", "service.config"): _SUBCOMMAND,
    ("service.cli", "service.logs"): _SUBCOMMAND,
    ("service.cli", "service.jobs.redis_backend"): _SUBCOMMAND,
    ("service.cli", "service.api.spec"): _SUBCOMMAND,
    ("service.serving", "service.api"): "the gunicorn master reads this module; each worker builds the app",
    ("service.serving", "service.config"): "read in each worker, from its own environment",
    ("service.serving", "service.intake"): "the worker's front, made in each worker with the app",
    ("service.jobs", "service.jobs.redis_backend"): _BACKEND,
    ("service.jobs", "service.jobs.sqlite_backend"): _BACKEND,
    ("service.store", "service.store.redis_backend"): _BACKEND,
    ("service.store", "service.store.sqlite_backend"): _BACKEND,
    ("service.jobs.child", "service.memory"): _CHILD,
    ("service.jobs.child", "service.jobs.frames"): _CHILD,
    ("service.jobs.child", "service.jobs.work"): _CHILD,
    ("service.config", "service.store.names"): "the store package loads numpy and the model; the settings are "
                                                "read by the gunicorn master and `sluice --help` too",
}


#: Today's violations, each with the work that removes it: delete an entry with its fix.
#: ``("local", module, imported)``: a function-local import without a reason;
#: ``("circle", *modules)``: a circle of imports (its modules sorted);
#: ``("room", module, room)``: a room imported against ALLOWED.
KNOWN: dict[tuple, str] = {
}


@dataclass(frozen=True)
class Import:
    module: str  # the importing module, e.g. service.api.cache
    target: str  # the module imported, e.g. service.model.arcs (or flask)
    line: int
    local: bool  # inside a function: runs when called, not when the module loads


def module_name(path: Path) -> str:
    parts = path.relative_to(SERVICE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


@lru_cache(maxsize=None)
def modules() -> dict[str, Path]:
    """Every module of the service by dotted name."""
    files = [p for p in SERVICE.rglob("*") if p.suffix in (".py", ".pyx") and "__pycache__" not in p.parts]
    return {module_name(p): p for p in sorted(files)}


def _package(path: Path, name: str) -> str:
    return name if path.name == "__init__.py" else name.rpartition(".")[0]


def _resolve(base: str, names: list[str]) -> list[str]:
    """``from base import names``: each name a submodule when there is one, else ``base``."""
    known = modules()
    return [f"{base}.{n}" if f"{base}.{n}" in known else base for n in names] or [base]


def _absolute(path: Path, name: str, level: int, module: str | None) -> str:
    base = _package(path, name)
    for _ in range(level - 1):
        base = base.rpartition(".")[0]
    return f"{base}.{module}" if module else base


def _type_checking(node: ast.If) -> bool:
    test = node.test
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING")


def python_imports(path: Path) -> list[Import]:
    name = module_name(path)
    out: list[Import] = []
    stack = [(child, False) for child in ast.parse(path.read_text()).body]
    while stack:
        node, local = stack.pop()
        if isinstance(node, ast.If) and _type_checking(node):
            continue  # never runs: annotations only
        inner = local or isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.Lambda))
        stack.extend((child, inner) for child in ast.iter_child_nodes(node))
        if isinstance(node, ast.Import):
            out += [Import(name, alias.name, node.lineno, local) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = _absolute(path, name, node.level, node.module)
                targets = _resolve(base, [a.name for a in node.names])
            elif node.module.split(".")[0] == "service":
                targets = _resolve(node.module, [a.name for a in node.names])
            else:
                targets = [node.module]
            out += [Import(name, t, node.lineno, local) for t in targets]
    return out


#: ``cimport x`` / ``from x cimport y`` / ``import x`` / ``from x import y`` in Cython,
#: whose files the ast module cannot read. Only module-level (unindented) lines.
PYX_IMPORT = re.compile(r"^(?:from\s+(\.*[\w.]*)\s+c?import\s+([\w, ()]+)|c?import\s+([\w., ]+))", re.M)


def pyx_imports(path: Path) -> list[Import]:
    name, text = module_name(path), path.read_text()
    out = []
    for match in PYX_IMPORT.finditer(text):
        line = text.count("\n", 0, match.start()) + 1
        source, names, plain = match.groups()
        if plain:
            targets = [t.split(" as ")[0].strip() for t in plain.split(",")]
        elif source.startswith("."):
            level = len(source) - len(source.lstrip("."))
            targets = _resolve(_absolute(path, name, level, source.lstrip(".") or None),
                               [n.split(" as ")[0].strip("() ") for n in names.split(",")])
        elif source.split(".")[0] == "service":
            targets = _resolve(source, [n.split(" as ")[0].strip("() ") for n in names.split(",")])
        else:
            targets = [source]
        out += [Import(name, t, line, False) for t in targets]
    return out


@lru_cache(maxsize=None)
def all_imports() -> tuple[Import, ...]:
    found = []
    for path in modules().values():
        found += pyx_imports(path) if path.suffix == ".pyx" else python_imports(path)
    return tuple(found)


def room(module: str) -> str:
    """``service.api.cache`` -> ``api``; ``service.config`` -> ``config``; ``service`` -> ``service``."""
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else "service"


def service_imports() -> list[Import]:
    return [i for i in all_imports() if i.target == "service" or i.target.startswith("service.")]


# -- the checks ------------------------------------------------------------------------


def room_violations() -> dict[tuple, str]:
    out = {}
    for imp in service_imports():
        mine, theirs = room(imp.module), room(imp.target)
        if theirs != mine and theirs not in ALLOWED[mine]:
            out[("room", imp.module, theirs)] = f"{imp.module}:{imp.line} imports {imp.target}"
    for imp in all_imports():
        top = imp.target.split(".")[0]
        if (top == "flask" or top.startswith("flask_")) and room(imp.module) not in FLASK:
            out[("room", imp.module, "flask")] = f"{imp.module}:{imp.line} imports {imp.target}"
    return out


def local_violations() -> dict[tuple, str]:
    return {("local", i.module, i.target): f"{i.module}:{i.line} imports {i.target} inside a function"
            for i in service_imports() if i.local and (i.module, i.target) not in LOCAL_IMPORTS}


def circles(graph: dict[str, set[str]]) -> list[tuple[str, ...]]:
    """The strongly connected components of more than one module (Tarjan's algorithm,
    with a stack of its own: the graph is small, but recursion is not needed)."""
    index, low, on_stack, stack, found = {}, {}, set(), [], []
    counter = 0
    for start in sorted(graph):
        if start in index:
            continue
        work = [(start, iter(sorted(graph[start])))]
        index[start] = low[start] = counter
        counter += 1
        stack.append(start)
        on_stack.add(start)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is None:
                work.pop()
                if work:
                    low[work[-1][0]] = min(low[work[-1][0]], low[node])
                if low[node] == index[node]:
                    component = []
                    while True:
                        member = stack.pop()
                        on_stack.discard(member)
                        component.append(member)
                        if member == node:
                            break
                    if len(component) > 1:
                        found.append(tuple(sorted(component)))
            elif child not in index:
                index[child] = low[child] = counter
                counter += 1
                stack.append(child)
                on_stack.add(child)
                work.append((child, iter(sorted(graph.get(child, ())))))
            elif child in on_stack:
                low[node] = min(low[node], index[child])
    return sorted(found)


def import_graph(include_local: bool) -> dict[str, set[str]]:
    graph: dict[str, set[str]] = {name: set() for name in modules()}
    for imp in service_imports():
        if imp.target != imp.module and (include_local or not imp.local):
            # A package's __init__ runs before any of its modules: importing
            # service.api.cache imports service.api first, which is not a circle of ours.
            if not imp.module.startswith(imp.target + "."):
                graph[imp.module].add(imp.target)
    return graph


def circle_violations() -> dict[tuple, str]:
    graph = import_graph(include_local=True)
    return {("circle", *c): " -> ".join(c) for c in circles(graph)}


def test_room_imports_flow_one_way():
    found = room_violations()
    unknown = {k: v for k, v in found.items() if k not in KNOWN}
    assert not unknown, "imports against the layers (DEVELOPERS.md):\n" + "\n".join(sorted(unknown.values()))


def test_no_function_local_import_without_a_reason():
    found = local_violations()
    unknown = {k: v for k, v in found.items() if k not in KNOWN}
    assert not unknown, ("function-local imports (move them to the top, or give LOCAL_IMPORTS a reason):\n"
                         + "\n".join(sorted(unknown.values())))


def test_no_import_circle():
    found = circle_violations()
    unknown = {k: v for k, v in found.items() if k not in KNOWN}
    assert not unknown, "import circles:\n" + "\n".join(sorted(unknown.values()))


def test_every_known_violation_is_still_there():
    """An entry of KNOWN whose violation is gone must go too, so the list stays true."""
    found = {**room_violations(), **local_violations(), **circle_violations()}
    stale = sorted(k for k in KNOWN if k not in found)
    assert not stale, f"fixed: delete these KNOWN entries: {stale}"


def test_drawing_takes_only_the_graph_type_from_the_solvers():
    taken = {i.target for i in service_imports() if room(i.module) == "drawing" and room(i.target) == "solvers"}
    assert taken and taken <= DRAWING_FROM_SOLVERS, sorted(taken - DRAWING_FROM_SOLVERS)


def test_every_room_has_a_layer():
    rooms = {room(name) for name in modules()}
    assert rooms == set(ALLOWED), f"rooms without a layer: {sorted(rooms - set(ALLOWED))}"
    for mine, allowed in ALLOWED.items():
        assert allowed <= set(ALLOWED), mine


#: The most lines a module of the service may have (issue 15: split a longer one into
#: cohesive modules). Python modules only: the compiled scanner (``model/_arcscan.pyx``)
#: and the C that Cython generates are not counted.
MAX_MODULE_LINES = 400


def test_no_module_is_longer_than_the_limit():
    lengths = {str(path.relative_to(SERVICE.parent)): len(path.read_text().splitlines())
               for path in modules().values() if path.suffix == ".py"}
    assert len(lengths) > 100  # every module was read, not a stray subset
    long = sorted(f"{name}: {lines} lines" for name, lines in lengths.items() if lines > MAX_MODULE_LINES)
    assert not long, f"modules over {MAX_MODULE_LINES} lines (split them):\n" + "\n".join(long)


# -- the scanner itself ------------------------------------------------------------------


@pytest.fixture
def scratch(tmp_path, monkeypatch):
    """A throwaway ``service`` tree to read (the checks' module list follows SERVICE)."""
    root = tmp_path / "service"
    monkeypatch.setattr(sys.modules[__name__], "SERVICE", root)
    modules.cache_clear()
    all_imports.cache_clear()
    yield root
    modules.cache_clear()
    all_imports.cache_clear()


def write(root: Path, files: dict[str, str]) -> None:
    for name, text in files.items():
        path = root / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text)


def test_every_spelling_of_an_import_is_resolved(scratch):
    write(scratch, {
        "__init__.py": "", "errors.py": "", "config.py": "",
        "model/__init__.py": "", "model/arcs.py": "", "model/ids.py": "",
        "model/_fast.pyx": "from libc.stdint cimport int64_t\nfrom ..errors cimport x\nimport service.config\n",
        "solvers/__init__.py": "",
        "solvers/front.py": ("from .. import model\nfrom ..model import arcs\nimport service.config\n"
                             "from service.model.ids import thing\nfrom . import helper\n"
                             "def f():\n    from ..model.ids import late\n"
                             "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    from ..config import C\n"),
        "solvers/helper.py": "",
    })
    got = {(i.module, i.target, i.local) for i in all_imports() if i.target.startswith("service")}
    assert got == {
        ("service.model._fast", "service.errors", False), ("service.model._fast", "service.config", False),
        ("service.solvers.front", "service.model", False), ("service.solvers.front", "service.model.arcs", False),
        ("service.solvers.front", "service.config", False), ("service.solvers.front", "service.model.ids", False),
        ("service.solvers.front", "service.solvers.helper", False),
        ("service.solvers.front", "service.model.ids", True),
    }
    assert set(room_violations()) == {("room", "service.model._fast", "config"),
                                      ("room", "service.solvers.front", "model"),
                                      ("room", "service.solvers.front", "config")}


def test_a_circle_hidden_by_a_local_import_is_found(scratch):
    write(scratch, {
        "__init__.py": "", "api/__init__.py": "",
        "api/cache.py": "from .diagram import draw\n",
        "api/diagram.py": "from . import networks\n",
        "api/networks.py": "def f():\n    from .cache import get\n",
        "api/other.py": "from .cache import get\n",
    })
    assert circle_violations() == {("circle", "service.api.cache", "service.api.diagram", "service.api.networks"):
                                   "service.api.cache -> service.api.diagram -> service.api.networks"}
    assert set(local_violations()) == {("local", "service.api.networks", "service.api.cache")}
    assert circles(import_graph(include_local=False)) == []
