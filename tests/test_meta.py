"""Meta-tests: the plugin contract is documented, settings are documented, the core stays
independent of the built-in plugins, the CLI starts without sympy, and CI runs the README command.
(docs/ completeness and its examples: tests/test_docs.py.)"""

from __future__ import annotations

import ast
import inspect
import re
import subprocess
import sys
from pathlib import Path

import gravicat
from gravicat import hookspecs
from gravicat.config import SETTINGS

ROOT = Path(__file__).resolve().parent.parent


def _hook_signatures() -> dict[str, str]:
    out = {}
    tree = ast.parse(inspect.getsource(hookspecs))
    for node in tree.body:
        if isinstance(node, ast.FunctionDef):
            args = ", ".join(f"{a.arg}: {ast.unparse(a.annotation)}" if a.annotation else a.arg
                             for a in node.args.args)
            out[node.name] = f"{node.name}({args}) -> {ast.unparse(node.returns)}"
    return out


def test_every_hook_is_documented_with_its_exact_signature():
    guide = (ROOT / "DEVELOPERS.md").read_text()
    hooks = _hook_signatures()
    assert set(hooks) == {"register_verifiers", "register_exporters", "read_metric_source"}
    for name, signature in hooks.items():
        assert f"`{signature}`" in guide, signature
        doc = getattr(hookspecs, name).__doc__
        assert doc and "Called" in doc and ("firstresult" in doc or "joined" in doc)


def test_every_setting_is_documented():
    reference = (ROOT / "docs" / "configuration.md").read_text()
    for env, key in SETTINGS.values():
        assert f"`{env}`" in reference and f"`{key}`" in reference, key


def test_core_never_imports_builtin_plugins():
    for path in (ROOT / "catalog").rglob("*.py"):
        tree = ast.parse(path.read_text())
        for node in ast.walk(tree):
            names = []
            if isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom) and node.module:
                names = [node.module]
            for name in names:
                assert not name.startswith("gravicat.plugins"), f"{path} imports {name}"


def test_builtin_plugins_are_entry_points():
    import tomllib

    project = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
    points = project["entry-points"]["gravicat"]
    modules = {p.stem for p in (ROOT / "plugins").glob("*.py") if not p.stem.startswith("_")}
    assert {v.rsplit(".", 1)[1] for v in points.values()} == modules


def test_public_surface():
    assert "hookimpl" in gravicat.__all__ and "CatalogError" in gravicat.__all__
    for name in gravicat.__all__:
        assert hasattr(gravicat, name)


def test_cli_import_does_not_load_sympy():
    code = "import sys, gravicat.cli; print(sorted(m for m in ('sympy', 'flint', 'alembic', 'sqlalchemy.orm') " \
           "if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"


def test_help_runs_without_sympy():
    code = ("import sys\nfrom typer.testing import CliRunner\nfrom gravicat.cli import app\n"
            "r = CliRunner().invoke(app, ['--help'])\nassert r.exit_code == 0\nprint('sympy' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "False"


def test_ci_runs_the_readme_test_command():
    readme = (ROOT / "README.md").read_text()
    blocks = re.findall(r"```sh\n(.*?)\n```", readme, re.S)
    test_command = blocks[1].strip()
    assert "pytest" in test_command
    assert test_command in (ROOT / ".ci" / "run").read_text()
    first = readme.split("\n\n")[0]
    assert "catalogue" in first and "metric" in first
