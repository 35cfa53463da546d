"""The catalogue on PostgreSQL as on SQLite: the same CLI, migrations with data in place, and
concurrent writers that never lose an update (see tests/pg.py for where the server comes from).

Concurrency rule under test (catalog/store/revisions.py, add_document): the entry row is locked before
its head is read, so two writers of one entry give two revisions in commit order, the second
with the first as parent; two creators of one new entry: the second becomes revision 2 (or
"unchanged"); a write that still collides is one clear Conflict error, with nothing written.
"""

from __future__ import annotations

import json
import subprocess
import sys
import threading
import time
from collections import defaultdict
from importlib.resources import files
from pathlib import Path

import pytest
from alembic import command
from alembic.config import Config
from conftest import DATA
from pg import any_url, pg_url, wait_until_blocked  # noqa: F401  (fixtures)
from postgres_helpers import document
from sqlalchemy import inspect, select
from sqlalchemy.orm import Session

from gravicat.errors import SchemaOutdated
from gravicat.format.metricfile import load_file
from gravicat.store import db
from gravicat.store import revisions as store
from gravicat.store.models import CheckRecord, Entry, Revision

HELPER = Path(__file__).parent / "postgres_helpers.py"
FIXTURE = DATA / "rindler-demo.toml"


@pytest.fixture
def engine(any_url):  # noqa: F811
    eng = db.make_engine(any_url)
    db.ensure_schema(eng, may_upgrade=True, may_create=True)
    yield eng
    eng.dispose()


def _one_error_line(result) -> str:
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("Error: ") and "Traceback" not in result.output
    return lines[0]


def _chain(engine, slug) -> list[tuple[int, int | None, int, str]]:
    """(id, parent_id, number, hash) of every revision of ``slug``, by number."""
    with Session(engine) as session:
        rows = session.execute(select(Revision.id, Revision.parent_id, Revision.number, Revision.hash)
                               .join(Entry, Revision.entry_id == Entry.id).where(Entry.slug == slug)
                               .order_by(Revision.number))
        return [tuple(r) for r in rows]


def _assert_linear(chain) -> None:
    """Numbers 1..n without gaps, each revision's parent the one before: no lost update."""
    assert [number for _, _, number, _ in chain] == list(range(1, len(chain) + 1))
    assert chain[0][1] is None
    for (prev_id, _, _, _), (_, parent, _, _) in zip(chain, chain[1:], strict=False):
        assert parent == prev_id


# --------------------------------------------------------------------------- the same CLI


def test_same_commands_on_both_databases(any_url, cli):  # noqa: F811
    assert cli("init", "--empty", db=any_url).exit_code == 0
    added = cli("add", str(FIXTURE), "--author", "Ines Varga-Lund", "-m", "first version", db=any_url)
    assert added.exit_code == 0 and "halcyon-rindler: new (revision 1" in added.stdout
    doc = load_file(FIXTURE)
    listed = cli("list", "--json", db=any_url)
    assert listed.exit_code == 0
    (row,) = json.loads(listed.stdout)
    assert (row["id"], row["revision"], row["charts"]) == ("halcyon-rindler", doc.hash, ["rindler"])
    shown = json.loads(cli("show", "halcyon-rindler", "--json", db=any_url).stdout)
    assert shown["author"] == "Ines Varga-Lund" and shown["revision"] == doc.hash
    again = cli("add", str(FIXTURE), db=any_url)
    assert again.exit_code == 0 and "unchanged" in again.stdout
    removed = cli("remove", "halcyon-rindler", "--yes", db=any_url)
    assert removed.exit_code == 0
    assert json.loads(cli("list", "--json", db=any_url).stdout) == []


def test_postgres_without_a_catalogue_and_with_a_wrong_password(pg_url, cli):  # noqa: F811
    missing = cli("list", db=pg_url)
    assert missing.exit_code == 2 and "no catalogue here yet; run 'gravicat --db" in _one_error_line(missing)
    wrong = pg_url.replace("gravicat@", "gravicat:secret-word@").replace("/gravicat_t_", "/no_such_db_")
    refused = cli("list", db=wrong)
    line = _one_error_line(refused)
    assert refused.exit_code == 2 and "cannot open the database" in line
    assert "secret-word" not in refused.output  # the password is never printed


# --------------------------------------------------------------------------- migrations


def _alembic(connection) -> Config:
    cfg = Config()
    cfg.set_main_option("script_location", str(files("gravicat.migrations")))
    cfg.attributes["connection"] = connection
    return cfg


def test_postgres_upgrade_from_the_first_revision_keeps_data(pg_url, cli):  # noqa: F811
    engine = db.make_engine(pg_url)
    try:
        db.upgrade(engine, "0001")
        assert db.current_revision(engine) == "0001"
        assert {"check_result", "job"}.isdisjoint(inspect(engine).get_table_names())
        doc = load_file(FIXTURE)
        with Session(engine) as session, session.begin():
            first = store.add_document(session, doc, author="Ines Varga-Lund", message="before the upgrades")
            second = store.add_document(session, document("halcyon-flat"), author="Tomas Okafor-Reyes")

        db.upgrade(engine, "0002")
        with Session(engine) as session, session.begin():
            rev = store.revision(session, "halcyon-rindler")
            session.add(CheckRecord(revision_id=rev.id, chart="rindler", check="structure", verifier="structure",
                                    verifier_version="1", status="pass", method="symbolic", detail="at 0002",
                                    seconds=0.5))

        # a shared server is never upgraded behind the group's back: the command says what to run
        refused = cli("list", db=pg_url)
        assert refused.exit_code == 2
        assert "schema 0002, this version needs 0004; run 'gravicat --db" in _one_error_line(refused)
        with pytest.raises(SchemaOutdated):
            db.ensure_schema(engine, may_upgrade=False)
        upgraded = cli("init", "--empty", db=pg_url)
        assert upgraded.exit_code == 0, upgraded.output
        assert db.current_revision(engine) == db.SCHEMA_HEAD == "0004"
        assert "job" not in inspect(engine).get_table_names()  # 0003 made it, 0004 dropped it (verify --cluster)

        with Session(engine) as session, session.begin():
            rev = store.revision(session, "halcyon-rindler")
            assert (rev.hash, rev.number, rev.document) == (first.hash, 1, doc.data)
            assert rev.provenance.author == "Ines Varga-Lund" and rev.message == "before the upgrades"
            assert [c.name for c in rev.charts] == ["rindler"] and [p.name for p in rev.parameters] == ["g0"]
            assert sorted(t.name for t in rev.tags) == ["flat", "test-fixture"]
            assert [(r.check, r.detail, r.seconds) for r in rev.results] == [("structure", "at 0002", 0.5)]
            assert store.revision(session, "halcyon-flat").hash == second.hash
        with engine.begin() as conn:
            command.check(_alembic(conn))  # the models and the migrations agree on PostgreSQL too
    finally:
        engine.dispose()


def test_postgres_downgrade_and_upgrade_again(pg_url):  # noqa: F811
    engine = db.make_engine(pg_url)
    try:
        db.ensure_schema(engine, may_upgrade=True, may_create=True)
        with engine.begin() as conn:
            command.downgrade(_alembic(conn), "0003")
        assert "job" in inspect(engine).get_table_names()  # 0004's downgrade gives the (empty) table back
        with engine.begin() as conn:
            command.downgrade(_alembic(conn), "0002")
        assert "job" not in inspect(engine).get_table_names()
        db.upgrade(engine)
        assert "job" not in inspect(engine).get_table_names() and db.current_revision(engine) == db.SCHEMA_HEAD
    finally:
        engine.dispose()


# --------------------------------------------------------------------------- concurrent writers


def _race(engine, first_doc, second_doc):
    """Writer A stores ``first_doc`` and holds its transaction open while writer B stores ``second_doc``."""
    outcome: dict = {}

    def writer_b():
        try:
            with Session(engine) as session, session.begin():
                outcome["b"] = store.add_document(session, second_doc, author="writer B")
        except Exception as exc:  # reported to the test below
            outcome["error"] = exc

    with Session(engine) as session_a:
        session_a.begin()
        outcome["a"] = store.add_document(session_a, first_doc, author="writer A")
        b = threading.Thread(target=writer_b)
        b.start()
        wait_until_blocked(engine, b)
        session_a.commit()
    b.join(30)
    assert "error" not in outcome, outcome.get("error")
    return outcome["a"], outcome["b"]


def test_two_writers_of_one_entry_give_two_ordered_revisions(engine):
    with Session(engine) as session, session.begin():
        store.add_document(session, document("race-entry", "base"), author="setup")
    a, b = _race(engine, document("race-entry", "from A"), document("race-entry", "from B"))
    assert (a.action, a.number) == ("revised", 2)
    assert (b.action, b.number) == ("revised", 3)  # B waited for A, then built on A's revision
    chain = _chain(engine, "race-entry")
    _assert_linear(chain)
    assert [h for _, _, _, h in chain][1:] == [a.hash, b.hash]


@pytest.mark.parametrize("same_content", [False, True], ids=["different", "identical"])
def test_two_creators_of_one_new_entry(engine, same_content):
    first = document("race-new", "from A")
    second = document("race-new", "from A" if same_content else "from B")
    a, b = _race(engine, first, second)
    assert (a.action, a.number) == ("new", 1)
    if same_content:
        assert (b.action, b.number, b.hash) == ("unchanged", 1, a.hash)
    else:
        assert (b.action, b.number) == ("revised", 2)
    chain = _chain(engine, "race-new")
    _assert_linear(chain)
    assert [h for _, _, _, h in chain] == ([a.hash] if same_content else [a.hash, b.hash])


def test_a_write_that_still_collides_is_one_conflict_error(empty_catalogue, db_url, monkeypatch):
    """An older writer that does not lock (simulated by a stale head) hits the unique parent."""
    cli = empty_catalogue
    assert cli("add", str(FIXTURE)).exit_code == 0
    changed = FIXTURE.read_text().replace("Used by the test suite only.", "Changed by writer A.")
    path_a = Path(db_url.removeprefix("sqlite:///")).parent / "a.toml"
    path_a.write_text(changed)
    assert cli("add", str(path_a)).exit_code == 0
    path_b = path_a.with_name("b.toml")
    path_b.write_text(FIXTURE.read_text().replace("Used by the test suite only.", "Changed by writer B."))
    engine = db.make_engine(db_url)
    before = _chain(engine, "halcyon-rindler")

    real_head = store.head

    def stale_head(session, slug):  # what B saw before A committed
        latest = real_head(session, slug)
        return session.get(Revision, latest.parent_id) if latest is not None and latest.parent_id else latest

    monkeypatch.setattr(store, "head", stale_head)
    result = cli("add", str(path_b))
    line = _one_error_line(result)
    assert result.exit_code == 2
    assert line == (f"Error: {path_b}: entry 'halcyon-rindler' was changed by another writer at the same moment; "
                    "nothing was written, run the command again")
    monkeypatch.setattr(store, "head", real_head)
    assert _chain(engine, "halcyon-rindler") == before  # nothing written
    retried = cli("add", str(path_b))
    assert retried.exit_code == 0 and "revised (revision 3" in retried.stdout
    engine.dispose()


def test_two_processes_adding_100_entries_each(any_url, engine, tmp_path):  # noqa: F811
    go = tmp_path / "go"
    procs = [subprocess.Popen([sys.executable, str(HELPER), "add", any_url, prefix, "100", "--shared", "4",
                               "--go", str(go)], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
             for prefix in ("north", "south")]
    time.sleep(0.5)
    go.touch()
    outputs = [p.communicate(timeout=240) for p in procs]
    assert all(p.returncode == 0 for p in procs), [err for _, err in outputs]

    stored = [line.split()[1:] for out, _ in outputs for line in out.splitlines() if line.startswith("stored ")]
    assert len(stored) == 250  # 200 own entries and 50 changes of the 4 shared ones
    with Session(engine) as session:
        slugs = set(session.scalars(select(Entry.slug)))
    own = {f"{p}-{i:03d}" for p in ("north", "south") for i in range(100)}
    assert own | {f"shared-{k:02d}" for k in range(4)} == slugs  # all 200 present
    expected = {f"{p}-{i:03d}": document(f"{p}-{i:03d}").hash for p in ("north", "south") for i in range(100)}
    by_slug = defaultdict(list)
    for slug, action, number, digest in stored:
        by_slug[slug].append((action, int(number), digest))
    for slug in own:
        assert by_slug[slug] == [("new", 1, expected[slug])]
        assert [(n, h) for _, _, n, h in _chain(engine, slug)] == [(1, expected[slug])]
    for k in range(4):  # concurrent changes of one entry: as many revisions, in one well-defined order
        slug = f"shared-{k:02d}"
        chain = _chain(engine, slug)
        _assert_linear(chain)
        assert len(chain) == len(by_slug[slug]) == (14 if k == 0 else 12)  # rounds 0, 4, ... 96 of each process
        assert sorted((n, h) for _, n, h in by_slug[slug]) == [(n, h) for _, _, n, h in chain]


# --------------------------------------------------------------------------- control characters (issue 14 item 5)


@pytest.mark.parametrize("bad", ["\\u0000", "\\u001b]0;x\\u0007"], ids=["NUL", "OSC"])
def test_a_control_character_in_a_text_field_is_refused_alike(any_url, cli, tmp_path, bad):  # noqa: F811
    """A NUL (which PostgreSQL's text type cannot hold: it crashed the write with the SQL parameters
    in a traceback) or an escape sequence in a title is refused at `add` with the same one line on
    both databases, and nothing is stored."""
    assert cli("init", "--empty", db=any_url).exit_code == 0
    source = FIXTURE.read_text(encoding="utf-8")
    hostile = tmp_path / "hostile-title.toml"
    hostile.write_text(source.replace('title = "', f'title = "{bad}', 1), encoding="utf-8")
    assert hostile.read_text(encoding="utf-8") != source
    added = cli("add", str(hostile), db=any_url)
    line = _one_error_line(added)
    assert added.exit_code == 2
    code = "0000" if bad == "\\u0000" else "001B"
    # the message of gravicat.format (the same code on both databases; nothing reaches the driver)
    assert line.startswith(f"Error: {hostile}: title: contains the control character U+{code}")
    assert "INSERT" not in added.output and "\x00" not in added.output
    assert json.loads(cli("list", "--json", db=any_url).stdout) == []


# --------------------------------------------------------------------------- a read-only role (issue 14 item 8)


def test_a_role_that_may_only_read_lists_and_gets_one_line_on_writes(pg_url, cli, tmp_path):  # noqa: F811
    """The group's shared catalogue read through a role granted SELECT only: reading works; add,
    remove and init end with one line (exit 2), not a driver traceback, and nothing changes."""
    import uuid

    import psycopg
    from pg import _libpq
    from sqlalchemy.engine import make_url

    assert cli("init", "--empty", db=pg_url).exit_code == 0
    assert cli("add", str(FIXTURE), db=pg_url).exit_code == 0
    role = f"reader_{uuid.uuid4().hex[:8]}"
    with psycopg.connect(_libpq(pg_url), autocommit=True) as conn:
        conn.execute(f'CREATE ROLE "{role}" LOGIN')
        conn.execute(f'GRANT SELECT ON ALL TABLES IN SCHEMA public TO "{role}"')
    reader = make_url(pg_url).set(username=role).render_as_string(hide_password=False)
    try:
        listed = cli("list", "--json", db=reader)
        assert listed.exit_code == 0 and [r["id"] for r in json.loads(listed.stdout)] == ["halcyon-rindler"]
        assert cli("show", "halcyon-rindler", db=reader).exit_code == 0
        second = tmp_path / "second.toml"
        second.write_text(FIXTURE.read_text(encoding="utf-8").replace('id = "halcyon-rindler"',
                                                                      'id = "halcyon-rindler-two"'), encoding="utf-8")
        for args in (["add", str(second)], ["remove", "halcyon-rindler", "--yes"], ["init"]):
            done = cli(*args, db=reader)
            line = _one_error_line(done)
            assert done.exit_code == 2, args
            assert line.startswith("Error: the catalogue is read-only for this user: permission denied for table")
            assert line.endswith("nothing was written")
        assert [r["id"] for r in json.loads(cli("list", "--json", db=pg_url).stdout)] == ["halcyon-rindler"]
    finally:
        with psycopg.connect(_libpq(pg_url), autocommit=True) as conn:
            conn.execute(f'REVOKE ALL ON ALL TABLES IN SCHEMA public FROM "{role}"')
            conn.execute(f'DROP OWNED BY "{role}"')
            conn.execute(f'DROP ROLE "{role}"')
