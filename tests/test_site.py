"""The static site (gravicat.api.site): deterministic bytes, incremental rebuilds, escaping, --only."""

from __future__ import annotations

import json

import pytest
from pg import pg_url  # noqa: F401  (fixture)
from sqlalchemy.orm import Session

from gravicat.api.catalogue import Catalogue
from gravicat.api.site import build_site, collect
from gravicat.errors import InputError, NotFound
from gravicat.format.bundled import bundled_path
from gravicat.registry import exporters, make_plugin_manager
from gravicat.store.db import make_engine

SMALL = ("schwarzschild", "flrw-flat", "minkowski")


@pytest.fixture
def small(tmp_path, db_url):
    with Catalogue(db_url) as cat:
        cat.init(bundled=False)
        for slug in SMALL:
            cat.add(bundled_path(slug), author="site test")
    return db_url


def _build(url, out, only=None):
    engine = make_engine(url)
    with Session(engine) as s:
        entries = collect(s, only)
    engine.dispose()
    return build_site(entries, out, exporters=exporters(make_plugin_manager()), jobs=2)


def _tree(root):
    return {p.relative_to(root).as_posix(): p.read_bytes() for p in sorted(root.rglob("*")) if p.is_file()}


def test_same_catalogue_same_bytes_and_incremental(small, tmp_path):
    a, b = tmp_path / "a", tmp_path / "b"
    first = _build(small, a)
    assert sorted(first.rendered) == sorted(SMALL) and first.index_written
    _build(small, b)
    assert _tree(a) == _tree(b)
    again = _build(small, a)
    assert again.rendered == [] and again.unchanged == 3 and again.written == [] and not again.index_written
    # change one entry: only its pages and the index are written again
    doc = json.loads((a / "downloads/minkowski.metric.json").read_text())
    doc["summary"] = "Flat spacetime, edited."
    edited = tmp_path / "minkowski.json"
    edited.write_text(json.dumps(doc))
    with Catalogue(small) as cat:
        cat.add(edited, author="site test", message="summary")
    changed = _build(small, a)
    assert changed.rendered == ["minkowski"] and changed.unchanged == 2 and changed.index_written
    assert set(changed.written) <= {"index.html", "entries/minkowski.html", "downloads/minkowski.metric.json"}
    assert "entries/minkowski.html" in changed.written
    assert "Flat spacetime, edited." in (a / "entries/minkowski.html").read_text()
    assert "2 rendered" not in changed.line() and "1 rendered" in changed.line()


def test_catalogue_text_is_escaped(small, tmp_path):
    from gravicat.format.bundled import read_bundled

    data = dict(read_bundled(bundled_path("minkowski")).data)
    data["id"] = "hostile"
    data["title"] = "<script>alert(1)</script> & co"
    data["summary"] = 'a "quoted" <b>bold</b> summary'
    path = tmp_path / "hostile.json"
    path.write_text(json.dumps(data))
    with Catalogue(small) as cat:
        cat.add(path, author="site test")
    out = tmp_path / "site"
    _build(small, out, only=["hostile"])
    page = (out / "entries/hostile.html").read_text()
    index = (out / "index.html").read_text()
    for text in (page, index):
        assert "<script>alert" not in text
        assert "&lt;script&gt;alert(1)&lt;/script&gt; &amp; co" in text
    assert "&lt;b&gt;bold&lt;/b&gt;" in page


def test_only_and_page_content(small, tmp_path):
    out = tmp_path / "site"
    rep = _build(small, out, only=["schwarzschild"])
    assert rep.entries == 1 and rep.rendered == ["schwarzschild"]
    assert not (out / "entries/flrw-flat.html").exists()
    page = (out / "entries/schwarzschild.html").read_text()
    assert page.count("<math") >= 3  # line elements, domains of its charts
    assert 'id="orbits"' in page and "ISCO" in page
    # Schwarzschild ISCO at r = 6M and photon orbit at 3M with M = 1 (Carroll, Spacetime and Geometry, 2004,
    # eq. 5.71 and the discussion after it); values compared as printed to 10 significant digits
    assert "<td>6</td>" in page and "<td>3</td>" in page
    assert (out / "figures/schwarzschild.svg").read_bytes().startswith(b"<?xml")
    assert 'alt="Effective potential' in page
    assert "Exports are offered for verified revisions only" in page  # never verified here
    with pytest.raises(NotFound, match="--only: no entry 'nope'"):
        _build(small, out, only=["nope"])
    # growing the site renders the new entries, and schwarzschild again: its limit now links to minkowski
    rep = _build(small, out)
    assert sorted(rep.rendered) == ["flrw-flat", "minkowski", "schwarzschild"] and rep.removed == []
    assert 'href="minkowski.html' in (out / "entries/schwarzschild.html").read_text()
    # a cosmology has no orbit section, and its page says why
    flrw = (out / "entries/flrw-flat.html").read_text()
    assert 'id="orbits"' in flrw and "not tagged stationary or static" in flrw and "<figure>" not in flrw


def test_a_figure_wherever_circular_orbits_exist_else_the_reason():
    """The effective-potential figure is drawn for every stationary entry with a prograde circular
    equatorial geodesic, with or without an ISCO; without one, or where the orbit model does not apply,
    the section says why."""
    from gravicat.api.site.parts import orbit_section
    from gravicat.format.bundled import read_bundled

    # Inside a uniform-density star every radius has a circular orbit (Newtonian limit: the field of a
    # homogeneous sphere grows linearly with r; Binney and Tremaine, Galactic Dynamics, 2nd ed. 2008,
    # sec. 2.2.2; recalled from memory), so there is no ISCO and still a figure.
    star = orbit_section(read_bundled(bundled_path("interior-schwarzschild")))
    assert star["svg"].startswith(b"<?xml") and star["figure_note"] is None and "ISCO" in star["html"]
    # BTZ has no timelike circular geodesics (Cruz, Martinez and Pena, Geodesic structure of the (2+1)-
    # dimensional BTZ black hole, Class. Quantum Grav. 11, 1994; recalled from memory)
    btz = orbit_section(read_bundled(bundled_path("btz")))
    assert btz["svg"] is None and btz["figure_note"].startswith("no prograde circular equatorial geodesic")
    # Taub-NUT is not reflection-symmetric about the equator: the orbit model refuses it and says so
    nut = orbit_section(read_bundled(bundled_path("taub-nut")))
    assert "svg" not in nut and "not reflection-symmetric" in nut["error"]


def test_out_dir_must_be_a_folder_or_an_earlier_site(small, tmp_path):
    (tmp_path / "file").write_text("x")
    with pytest.raises(InputError, match="not a folder"):
        _build(small, tmp_path / "file")
    busy = tmp_path / "busy"
    busy.mkdir()
    (busy / "mine.txt").write_text("keep")
    with pytest.raises(InputError, match="not empty"):
        _build(small, busy)
    assert (busy / "mine.txt").read_text() == "keep"


def test_cli_site_on_postgresql(pg_url, cli, tmp_path):  # noqa: F811
    """`gravicat site OUT --db URL` renders a group's PostgreSQL catalogue (a real server, tests/pg.py)."""
    with Catalogue(pg_url) as cat:
        cat.init(bundled=False)
        for slug in ("minkowski", "kasner"):
            cat.add(bundled_path(slug), author="site test")
    out = tmp_path / "site"
    done = cli("site", str(out), "--db", pg_url, "--json")  # the global --db is the test's SQLite file
    assert done.exit_code == 0, done.stderr
    report = json.loads(done.stdout)
    assert report["entries"] == 2 and sorted(report["rendered"]) == ["kasner", "minkowski"]
    assert report["index_written"] and report["problems"] == []
    assert "Kasner" in (out / "entries/kasner.html").read_text() and 'href="entries/minkowski.html"' in (
        out / "index.html").read_text()
    again = cli("site", str(out), "--db", pg_url)
    assert again.exit_code == 0 and "2 unchanged; 0 files written (index unchanged)" in again.stdout


def test_cli_site_only(small, cli, tmp_path):
    out = tmp_path / "site"
    done = cli("site", str(out), "--only", "minkowski", "--only", "minkowski", db=small)
    assert done.exit_code == 0, done.stderr
    assert done.stdout.startswith("site: 1 entries, 1 rendered, 0 unchanged;")
    assert sorted(p.name for p in (out / "entries").iterdir()) == ["minkowski.html"]
    assert (out / "index.html").read_text().count("<tr data-text=") == 1
    bad = cli("site", str(out), "--only", "no-such-entry", db=small)
    assert bad.exit_code == 2 and bad.stderr.strip() == ("Error: --only: no entry 'no-such-entry' in the catalogue "
                                                         "(see 'gravicat list')")
    assert sorted(p.name for p in (out / "entries").iterdir()) == ["minkowski.html"]  # nothing lost


def test_batched_computation_retries_a_stopped_batch_one_entry_per_child(monkeypatch):
    """Entries are computed in batches (one child each); when a batch reaches its CPU cap, the entries it
    did not send are computed again one per child, so only the runaway entry ends without its parts."""
    from gravicat.api.site import build

    def fake(e, exporters):
        if e["slug"] == "runaway":
            while True:
                pass
        return {"math": {}, "files": {}, "slug": e["slug"]}

    monkeypatch.setattr(build, "compute_entry", fake)
    monkeypatch.setattr(build, "_preload", lambda: None)
    sources = [{"slug": "runaway" if k == 1 else f"e{k}"} for k in range(9)]  # batches of 3 with one job
    values, stopped = build.compute_all(sources, {}, jobs=1, cpu_seconds=1.0)
    assert sorted(values) == [0, 2, 3, 4, 5, 6, 7, 8] and all(values[i]["slug"] == f"e{i}" for i in values)
    assert list(stopped) == [1] and stopped[1].limit == "cpu"


def test_downloads_of_every_target_get_their_own_file():
    """Targets that share a suffix (c and geodesic-c: .h; python and geodesic-numpy: .py) never overwrite
    each other's download: one file per link, each made with the frozen ExportContext exporters expect."""
    from gravicat.api.site.parts import downloads
    from gravicat.format.bundled import read_bundled

    doc = read_bundled(bundled_path("minkowski"))
    checks = [{"check": "field-equations", "status": "pass", "chart": c, "seconds": 0.0} for c in doc.chart_names]
    made = downloads(doc, exporters=exporters(make_plugin_manager()), revision=doc.hash, checks=checks,
                     date="2026-12-05", source="site test")
    names = [fname for _, _, fname in made["links"]]
    assert len(names) == len(set(names)) == len(made["files"]) and set(names) == set(made["files"])
    assert {name for name, _, _ in made["links"]} | {name for name, _ in made["problems"]} >= {"c", "geodesic-c",
                                                                                              "python", "latex"}
