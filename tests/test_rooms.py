"""The rooms of ``catalog/`` import only downwards (the direction drawn in DEVELOPERS.md).

Every import is counted, including the ones inside function bodies: a lazy import is still a
dependency. The core contract (``errors``, ``checks``, ``hookspecs``, ``registry`` and the
package's own ``__init__``) may be imported from anywhere."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
CATALOG = ROOT / "catalog"

# room -> the rooms it may import (besides itself and the core contract)
ALLOWED = {
    "format": set(),
    "engine": {"format"},
    "export": {"engine", "format"},
    "physics": {"export", "engine", "format"},
    "repair": {"physics", "export", "engine", "format"},
    "store": {"format"},
    "api": {"repair", "physics", "export", "engine", "format", "store", "config"},
    "cli": {"api", "repair", "physics", "export", "engine", "format", "store", "config"},
}
CORE = {"errors", "checks", "hookspecs", "registry", ""}
ROOMS = set(ALLOWED)


def _imports(path: Path) -> list[tuple[int, str]]:
    tree = ast.parse(path.read_text())
    out = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out += [(node.lineno, a.name) for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            if node.module == "gravicat":  # from gravicat import engine / X
                out += [(node.lineno, f"gravicat.{a.name}") for a in node.names]
            else:
                out.append((node.lineno, node.module))
    return [(n, m) for n, m in out if m == "gravicat" or m.startswith("gravicat.")]


def _room_of(module: str) -> str:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else ""


def test_every_module_lives_in_a_room():
    loose = sorted(p.name for p in CATALOG.glob("*.py"))
    # the core contract, the settings and the entry point stay at the top
    assert loose == ["__init__.py", "__main__.py", "checks.py", "config.py", "errors.py",
                     "hookspecs.py", "registry.py"]
    for room in ROOMS:
        doc = ast.get_docstring(ast.parse((CATALOG / room / "__init__.py").read_text()))
        assert doc and "import" in doc, f"catalog/{room}/__init__.py must say what it may import"


@pytest.mark.parametrize("room", sorted(ROOMS))
def test_rooms_import_only_downwards(room):
    bad = []
    for path in sorted((CATALOG / room).rglob("*.py")):
        for line, module in _imports(path):
            target = _room_of(module)
            if target in (room, *CORE) or target in ALLOWED[room]:
                continue
            if target == "plugins":
                bad.append(f"{path.relative_to(ROOT)}:{line} imports the built-in plugins ({module})")
            elif target in ROOMS or target == "config":
                bad.append(f"{path.relative_to(ROOT)}:{line} imports {module} (room {target!r})")
    assert not bad, "\n".join(bad)


def test_plugins_do_not_reach_into_api_or_cli():
    bad = []
    for path in sorted((ROOT / "plugins").glob("*.py")):
        for line, module in _imports(path):
            if _room_of(module) in {"api", "cli", "repair", "store"}:
                bad.append(f"{path.relative_to(ROOT)}:{line} imports {module}")
    assert not bad, "\n".join(bad)
