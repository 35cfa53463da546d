"""gravicat find / gravicat.store.search: combined filters, chains of limits, sorting and paging.

The catalogue is a handful of bundled reference entries (loaded by path) plus entries of our
own Halcyon Reach scenario; check results are stored directly through the store so that the
status filter is tested without running the verifiers. Every test runs on SQLite and on
PostgreSQL (tests/pg.py says where the server comes from; skipped, visibly, without one).
"""

from __future__ import annotations

import json

import pytest
from pg import any_url  # noqa: F401  (fixture)
from sqlalchemy.orm import Session
from typer.testing import CliRunner

from gravicat.checks import CheckResult, Method, Status
from gravicat.errors import InputError
from gravicat.store import revisions as store
from gravicat.store.db import make_engine
from gravicat.store.search import Query, find_entries

BUNDLED = {p.stem: p for p in store.bundled_files()}
NAMES = ("schwarzschild", "kerr", "kerr-newman", "reissner-nordstrom", "minkowski")

HALCYON = '''
id = "halcyon-{n}"
title = "Halcyon Reach survey metric {n}"
summary = "A 100% synthetic test entry, number {n}."
field-equations = "none"
tags = ["test-fixture"]
[[references]]
citation = "Halcyon Reach survey notes, part {n}"
[parameters.k_{n}]
assume = ["positive"]
[charts.main]
coordinates = ["t", "x_{n}"]
line-element = "-dt**2 + k_{n}*dx_{n}**2"
'''


def one_error_line(result) -> str:
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("Error: ") and "Traceback" not in result.output
    return lines[0]


def _build(url: str, tmp_path):
    from gravicat.cli import app

    def cli(*args):
        return CliRunner().invoke(app, ["--db", url, *args])

    assert cli("init", "--empty").exit_code == 0
    paths = [str(BUNDLED[n]) for n in NAMES]
    for n in range(3):
        p = tmp_path / f"h{n}.toml"
        p.write_text(HALCYON.format(n=n))
        paths.append(str(p))
    assert cli("add", *paths).exit_code == 0
    engine = make_engine(url)
    with Session(engine) as session, session.begin():
        def results(slug, chart, statuses):
            rev = store.revision(session, slug)
            store.save_results(session, rev, chart, [
                CheckResult(check, Status(s), Method.SYMBOLIC, "stored by the test", verifier=check, version="1")
                for check, s in statuses.items()])

        results("kerr", "boyer-lindquist", {"field-equations": "pass", "signature": "pass"})
        results("kerr", "kerr-schild", {"field-equations": "pass"})
        results("schwarzschild", "schwarzschild", {"field-equations": "pass", "signature": "fail"})
        # a newer result supersedes the older one for the same chart and check
        results("schwarzschild", "schwarzschild", {"signature": "pass"})
        results("minkowski", "cartesian", {"field-equations": "inconclusive"})
    return cli, engine


@pytest.fixture
def catalogue(db_url, tmp_path):
    """The test catalogue on SQLite."""
    cli, engine = _build(db_url, tmp_path)
    yield cli, engine
    engine.dispose()


@pytest.fixture
def catalogue_any(any_url, tmp_path):  # noqa: F811
    """The test catalogue on SQLite and on PostgreSQL (the SQL of every filter on both)."""
    cli, engine = _build(any_url, tmp_path)
    yield cli, engine
    engine.dispose()


def ids(engine, **fields) -> list[str]:
    with Session(engine) as session:
        return [h.slug for h in find_entries(session, Query(limit=None, **fields)).hits]


def test_filters_combine(catalogue_any):
    _, engine = catalogue_any
    # "which of our metrics are vacuum, axisymmetric and verified?"
    assert ids(engine, equations=("vacuum",), tags=("axisymmetric",), status="verified") == ["kerr"]
    assert ids(engine, equations=("vacuum",), status="pass") == ["kerr", "schwarzschild"]
    assert ids(engine, status="inconclusive") == ["minkowski"]
    assert ids(engine, status="unverified", equations=("electrovacuum",)) == ["kerr-newman", "reissner-nordstrom"]
    assert ids(engine, equations=("vacuum", "electrovacuum"), tags=("black-hole",)) == [
        "kerr", "kerr-newman", "reissner-nordstrom", "schwarzschild"]
    assert ids(engine, tags=("black-hole", "charged")) == ["kerr-newman", "reissner-nordstrom"]
    assert ids(engine, params=("a", "Q")) == ["kerr-newman"]
    # cylindrical (Minkowski) and isotropic (Reissner-Nordstrom, Schwarzschild) charts
    assert ids(engine, coordinates=("rho",)) == ["minkowski", "reissner-nordstrom", "schwarzschild"]
    assert ids(engine, coordinates=("x_1",)) == ["halcyon-1"]  # '_' is not a wildcard
    assert ids(engine, reference="10.1103/PhysRevLett.11.237") == ["kerr"]  # Kerr (1963) by DOI
    assert ids(engine, reference="LINDQUIST") == ["kerr"]  # case-insensitive
    # every word, in any order, as a substring ("non-rotating" contains "rotating")
    assert ids(engine, text="rotating black hole") == ["kerr", "kerr-newman", "schwarzschild"]
    assert ids(engine, text="100%") == ["halcyon-0", "halcyon-1", "halcyon-2"]  # '%' is not a wildcard
    assert ids(engine, text="halcyon 2") == ["halcyon-2"]
    assert ids(engine, transform_to="isotropic") == []  # nobody declares a map *to* the isotropic chart
    assert ids(engine, transform_to="schwarzschild") == ["schwarzschild"]  # isotropic -> schwarzschild
    assert ids(engine, transform_to="cartesian", equations=("vacuum",)) == ["minkowski"]


def test_reduces_to_follows_chains_of_limits(catalogue_any):
    _, engine = catalogue_any
    with Session(engine) as session:
        page = find_entries(session, Query(reduces_to="schwarzschild", limit=None))
        chains = {h.slug: h.via for h in page.hits}
    # Kerr (a = 0) and Reissner-Nordstrom (Q = 0) reduce to Schwarzschild directly; Kerr-Newman
    # through Kerr (Q = 0, then a = 0), as declared in the bundled files
    assert chains == {"kerr": ["schwarzschild:schwarzschild"],
                      "reissner-nordstrom": ["schwarzschild:schwarzschild"],
                      "kerr-newman": ["kerr:boyer-lindquist", "schwarzschild:schwarzschild"]}
    assert ids(engine, reduces_to="schwarzschild", direct=True) == ["kerr", "reissner-nordstrom"]
    assert ids(engine, reduces_to="schwarzschild:ingoing-eddington-finkelstein") == ["reissner-nordstrom"]
    assert ids(engine, reduces_to="schwarzschild", equations=("electrovacuum",)) == [
        "kerr-newman", "reissner-nordstrom"]
    # M = 0 in the Kerr-Schild chart gives Minkowski; Kerr-Newman gets there through Kerr
    assert ids(engine, reduces_to="minkowski", tags=("axisymmetric",)) == ["kerr", "kerr-newman"]


def test_sorting_and_paging(catalogue):
    _, engine = catalogue
    with Session(engine) as session:
        first = find_entries(session, Query(limit=3))
        second = find_entries(session, Query(limit=3, offset=3))
        last = find_entries(session, Query(limit=3, offset=6))
        by_title = find_entries(session, Query(sort="title", limit=None))
        newest = find_entries(session, Query(sort="updated", limit=None, status="pass"))
    assert first.total == second.total == last.total == 8
    assert [h.slug for h in first.hits + second.hits + last.hits] == sorted(
        ["halcyon-0", "halcyon-1", "halcyon-2", *NAMES])
    titles = [h.revision.title.lower() for h in by_title.hits]
    assert titles == sorted(titles)
    assert [h.status for h in newest.hits] == ["pass", "pass"]
    assert {h.slug: h.status for h in first.hits} == {"halcyon-0": "unverified", "halcyon-1": "unverified",
                                                      "halcyon-2": "unverified"}


def test_bad_query_values_are_refused(catalogue):
    _, engine = catalogue
    with Session(engine) as session:
        for fields, option in (({"status": "green"}, "--status"), ({"equations": ("vacum",)}, "--equations"),
                               ({"sort": "size"}, "--sort"), ({"reduces_to": "Not A Slug"}, "--reduces-to")):
            with pytest.raises(InputError) as err:
                find_entries(session, Query(**fields))
            assert str(err.value).startswith(option)


def test_find_command(catalogue):
    cli, _ = catalogue
    out = cli("find", "--equations", "vacuum", "--tag", "axisymmetric", "--status", "verified", "--json")
    assert out.exit_code == 0, out.output
    data = json.loads(out.stdout)
    assert data["total"] == 1 and data["page"] == 1 and data["pages"] == 1
    (row,) = data["results"]
    assert row["id"] == "kerr" and row["status"] == "pass" and row["field_equations"] == "vacuum"
    assert {"title", "tags", "charts", "parameters", "revision", "number", "updated"} <= set(row)

    paged = json.loads(cli("find", "--limit", "2", "--page", "2", "--json").stdout)
    assert paged["total"] == 8 and paged["pages"] == 4 and [r["id"] for r in paged["results"]] == [
        "halcyon-2", "kerr"]
    chain = json.loads(cli("find", "--reduces-to", "schwarzschild", "--json").stdout)
    assert {r["id"]: r["via"] for r in chain["results"]}["kerr-newman"] == [
        "kerr:boyer-lindquist", "schwarzschild:schwarzschild"]

    human = cli("find", "black", "hole", "--tag", "charged")
    assert human.exit_code == 0
    assert "kerr-newman" in human.stdout and "1 match; showing 1-1 (page 1 of 1)" in human.stdout
    none = cli("find", "--tag", "no-such-tag")
    assert none.exit_code == 0 and "(nothing)" in none.stdout

    bad = cli("find", "--status", "green")
    assert bad.exit_code == 2 and "--status: 'green' is not one of" in one_error_line(bad)
    bad_page = cli("find", "--page", "0")
    assert bad_page.exit_code == 2
