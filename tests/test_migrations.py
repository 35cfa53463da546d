"""Migrations: the head constant, models in step with the scripts, and upgrades that keep data."""

from __future__ import annotations

from importlib.resources import files

import pytest
from alembic import command
from alembic.config import Config
from alembic.script import ScriptDirectory
from conftest import DATA
from sqlalchemy import inspect, select
from sqlalchemy.orm import Session

from gravicat import SchemaOutdated
from gravicat.format.metricfile import load_file
from gravicat.store import db
from gravicat.store import revisions as store
from gravicat.store.models import CheckRecord, Revision


def _config(connection=None) -> Config:
    cfg = Config()
    cfg.set_main_option("script_location", str(files("gravicat.migrations")))
    if connection is not None:
        cfg.attributes["connection"] = connection
    return cfg


def test_head_constant_matches_alembic():
    assert ScriptDirectory.from_config(_config()).get_current_head() == db.SCHEMA_HEAD


def test_models_match_migrations(db_url):
    engine = db.make_engine(db_url)
    db.ensure_schema(engine, may_upgrade=True, may_create=True)
    with engine.begin() as conn:
        command.check(_config(conn))  # raises if autogenerate would find a difference


def test_upgrade_from_first_revision_keeps_data(db_url):
    engine = db.make_engine(db_url)
    db.upgrade(engine, "0001")
    assert db.current_revision(engine) == "0001"
    assert "check_result" not in inspect(engine).get_table_names()
    doc = load_file(DATA / "rindler-demo.toml")
    with Session(engine) as session, session.begin():
        stored = store.add_document(session, doc, author="Ines Varga-Lund", message="before the upgrade")

    with pytest.raises(SchemaOutdated, match="run 'gravicat --db .* init'"):
        db.ensure_schema(engine, may_upgrade=False)
    db.ensure_schema(engine, may_upgrade=True)
    assert db.current_revision(engine) == db.SCHEMA_HEAD

    with Session(engine) as session, session.begin():
        rev = store.revision(session, "halcyon-rindler")
        assert rev.hash == stored.hash == doc.hash
        assert rev.document == doc.data
        assert rev.provenance.author == "Ines Varga-Lund" and rev.message == "before the upgrade"
        assert [c.name for c in rev.charts] == ["rindler"]
        assert [p.name for p in rev.parameters] == ["g0"]
        assert sorted(t.name for t in rev.tags) == ["flat", "test-fixture"]
        # the table the upgrade added is usable and attached to the old revision
        session.add(CheckRecord(revision_id=rev.id, chart="rindler", check="structure", verifier="structure",
                                verifier_version="1", status="pass", method="symbolic", detail="", seconds=0.0))
    with Session(engine) as session:
        rev = session.scalars(select(Revision)).one()
        assert [r.check for r in rev.results] == ["structure"]


def test_newer_schema_is_refused(db_url):
    engine = db.make_engine(db_url)
    db.ensure_schema(engine, may_upgrade=True, may_create=True)
    with engine.begin() as conn:
        conn.exec_driver_sql("UPDATE alembic_version SET version_num = '9999'")
    with pytest.raises(SchemaOutdated, match="newer than this gravicat"):
        db.ensure_schema(engine, may_upgrade=True)


def test_sqlite_runs_with_foreign_keys_and_wal(db_url):
    engine = db.make_engine(db_url)
    with engine.connect() as conn:
        assert conn.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
        assert conn.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
