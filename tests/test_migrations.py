"""Migrations: the head constant, models in step with the scripts, and upgrades that keep data."""

from __future__ import annotations

from importlib.resources import files

import pytest
from alembic import command
from alembic.config import Config
from alembic.script import ScriptDirectory
from conftest import DATA
from pg import any_url  # noqa: F401  (fixture: SQLite and PostgreSQL)
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
    with pytest.raises(SchemaOutdated, match="written by another version of gravicat"):
        db.ensure_schema(engine, may_upgrade=True)


def test_sqlite_runs_with_foreign_keys_and_wal(db_url):
    engine = db.make_engine(db_url)
    with engine.connect() as conn:
        assert conn.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
        assert conn.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"


def _rows(engine, tables) -> dict[str, list[tuple]]:
    """Every row of every table in ``tables``, ordered by id, as plain tuples."""
    from sqlalchemy import MetaData

    meta = MetaData()
    meta.reflect(engine, only=list(tables))
    with engine.connect() as conn:
        return {name: [tuple(r) for r in conn.execute(select(meta.tables[name]).order_by(meta.tables[name].c.id))]
                for name in tables}


def test_upgrade_dropping_the_job_table_keeps_every_other_table(any_url):  # noqa: F811
    """0004 drops the home-made queue's job table (verification across machines runs on Dask);
    every row of every other table is the same after the upgrade, and the stored results still work."""
    from sqlalchemy import text

    engine = db.make_engine(any_url)
    try:
        db.upgrade(engine, "0003")
        doc = load_file(DATA / "rindler-demo.toml")
        with Session(engine) as session, session.begin():
            rev = store.add_document(session, doc, author="Ines Varga-Lund", message="before 0004")
            rid = session.scalars(select(Revision.id)).one()
            session.add(CheckRecord(revision_id=rid, chart="rindler", check="structure", verifier="structure",
                                    verifier_version="1", status="pass", method="symbolic", detail="kept",
                                    seconds=0.25))
        with engine.begin() as conn:  # a job left by the old queue (the table as 0003 made it)
            conn.execute(text("INSERT INTO job (revision_id, chart, verifier, verifier_version, state, priority, "
                              "budget, attempts, max_attempts, created_at) VALUES (:r, 'rindler', 'structure', '1', "
                              "'pending', 0, 20.0, 0, 3, CURRENT_TIMESTAMP)"), {"r": rid})
        others = sorted(set(inspect(engine).get_table_names()) - {"job", "alembic_version"})
        assert {"entry", "revision", "provenance", "chart", "parameter", "tag", "reference",
                "check_result"} <= set(others)
        before = _rows(engine, others)
        assert all(before[name] for name in ("entry", "revision", "chart", "parameter", "tag", "check_result"))

        db.ensure_schema(engine, may_upgrade=True)
        assert db.current_revision(engine) == db.SCHEMA_HEAD
        assert "job" not in inspect(engine).get_table_names()
        assert _rows(engine, others) == before
        with Session(engine) as session:
            again = store.revision(session, "halcyon-rindler")
            assert again.hash == rev.hash
            assert [(r.check, r.detail) for r in store.results_for(session, again)] == [("structure", "kept")]
    finally:
        engine.dispose()


@pytest.mark.parametrize("stamp", ["0000", "00035", "0003a", "zzzz", "9999"])
def test_an_unknown_schema_revision_is_one_line_whatever_it_sorts_as(db_url, stamp):
    """Issue 14 item 7: '0000' and '00035' sort below the head as strings but are no revision of this
    gravicat; every unknown revision gets the one-line 'another version' message, not an Alembic traceback."""
    from sqlalchemy import text

    engine = db.make_engine(db_url)
    try:
        db.ensure_schema(engine, may_upgrade=True, may_create=True)
        with engine.begin() as conn:
            conn.execute(text("UPDATE alembic_version SET version_num = :v"), {"v": stamp})
        with pytest.raises(SchemaOutdated) as info:
            db.ensure_schema(engine, may_upgrade=True)
        message = str(info.value)
        assert "\n" not in message and "written by another version of gravicat" in message
        assert db.known_revisions()[-1] == db.SCHEMA_HEAD
    finally:
        engine.dispose()
