"""Shared fixtures: a throwaway SQLite catalogue and a CLI runner that keeps stderr apart."""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest
from typer.testing import CliRunner

from gravicat.cli import app

DATA = Path(__file__).parent / "data"


@pytest.fixture(autouse=True)
def _isolated_settings(tmp_path, monkeypatch):
    """No test reads the developer's own catalogue, config file or environment."""
    for var in ("GRAVICAT_DB", "GRAVICAT_DISABLE_PLUGINS", "GRAVICAT_AUTHOR"):
        monkeypatch.delenv(var, raising=False)
    monkeypatch.setenv("GRAVICAT_CONFIG", str(tmp_path / "no-config.toml"))


@pytest.fixture
def db_path(tmp_path) -> Path:
    return tmp_path / "catalogue.sqlite"


@pytest.fixture
def db_url(db_path) -> str:
    return f"sqlite:///{db_path}"


@pytest.fixture
def cli(db_url):
    """Run gravicat with ``--db`` pointing at the test database."""
    runner = CliRunner()

    def run(*args: str, db: str | None = None, input: str | None = None):
        return runner.invoke(app, ["--db", db or db_url, *args], input=input)

    return run


@pytest.fixture
def empty_catalogue(cli):
    result = cli("init", "--empty")
    assert result.exit_code == 0, result.output
    return cli


@pytest.fixture
def python_target(monkeypatch):
    """Make sure the python export target is loaded, also before its entry point is installed."""
    from gravicat import registry
    from gravicat.plugins import python_export

    real = registry.make_plugin_manager

    def with_python(**kw):
        pm = real(**kw)
        if "python" not in registry.exporters(pm) and "python-export" not in set(kw.get("blocked", ())):
            pm.register(python_export, name="python-export")
        return pm

    monkeypatch.setattr(registry, "make_plugin_manager", with_python)


def dump(path: Path) -> list[str]:
    """The whole content of a SQLite database as SQL text (independent of page layout)."""
    con = sqlite3.connect(path)
    try:
        return list(con.iterdump())
    finally:
        con.close()
