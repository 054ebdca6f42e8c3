"""The rooms of the code import one way only (DEVELOPERS.md): a guard against drift."""

import ast
from pathlib import Path

import pytest

SERVICE = Path(__file__).resolve().parents[1] / "service"

#: What each room may import from the rest of the package (besides itself).
ALLOWED = {
    "model": {"errors"},
    "solvers": {"errors"},
    "kinds": {"errors", "model", "solvers"},
    "store": {"errors", "model"},
    "jobs": {"errors", "config", "kinds", "memory"},
    "drawing": set(),  # numpy and plain data only: no model, no solvers, no Flask
}


def imported_rooms(path: Path) -> set[str]:
    rooms = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.ImportFrom):
            if node.level == 2 and node.module:  # from ..room import x
                rooms.add(node.module.split(".")[0])
            elif node.level == 0 and node.module and node.module.startswith("service."):
                rooms.add(node.module.split(".")[1])
            elif node.level == 0 and node.module and node.module.split(".")[0] == "flask":
                rooms.add("flask")
        elif isinstance(node, ast.Import):
            rooms.update("flask" for alias in node.names if alias.name.split(".")[0] == "flask")
    return rooms


@pytest.mark.parametrize("room", sorted(ALLOWED))
def test_room_imports_flow_one_way(room):
    for path in sorted((SERVICE / room).rglob("*.py")):
        extra = imported_rooms(path) - ALLOWED[room]
        assert not extra, f"{path.relative_to(SERVICE)} imports {sorted(extra)}"
