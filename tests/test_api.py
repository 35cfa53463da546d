"""The Python API (gravicat.Catalogue, Entry, Chart, CheckResults, load_file, numeric()).

Physics values are checked against published results beside each assertion; exact curvature is
also checked against sympy's own differentiation of the metric (a general-purpose reference
library), and numbers against sympy evaluated at the same points (relative tolerance 1e-9,
absolute 1e-12: float64 evaluation of the same closed forms).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import sympy as sp
from conftest import DATA
from pg import any_url  # noqa: F401  (fixture: the same test on SQLite and PostgreSQL)

import gravicat
from gravicat import Catalogue, CheckResults, DatabaseError, InputError, NotFound, load_file

ROOT = Path(__file__).resolve().parent.parent
BUNDLED = ROOT / "catalog" / "data" / "spacetimes"
EXAMPLES = ROOT / "catalog" / "examples"
RTOL, ATOL = 1e-9, 1e-12


@pytest.fixture(scope="module")
def cat(tmp_path_factory):
    """One bundled catalogue for the reading tests (nothing here writes to it after init)."""
    with pytest.MonkeyPatch.context() as mp:
        folder = tmp_path_factory.mktemp("api")
        mp.setenv("GRAVICAT_CONFIG", str(folder / "no-config.toml"))
        mp.delenv("GRAVICAT_DB", raising=False)
        mp.delenv("GRAVICAT_DISABLE_PLUGINS", raising=False)
        c = Catalogue(f"sqlite:///{folder / 'catalogue.sqlite'}")
        c.init()
        yield c
        c.close()


def bundled_ids() -> list[str]:
    import tomllib

    files = [*BUNDLED.glob("*.toml"), *(BUNDLED.parent / "initial-data").glob("*.toml")]  # as init loads them
    return sorted(tomllib.loads(p.read_text())["id"] for p in files)


# --------------------------------------------------------------------------- the surface


def test_import_gravicat_loads_no_heavy_library():
    code = ("import sys, gravicat; gravicat.Catalogue; gravicat.Entry; gravicat.load_file; "
            "print(sorted(m for m in ('sympy', 'flint', 'alembic', 'sqlalchemy', 'numpy') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"


def test_public_names():
    for name in ("Catalogue", "Entry", "Chart", "CheckResults", "load_file"):
        assert name in gravicat.__all__
        assert getattr(gravicat, name).__doc__
    with pytest.raises(AttributeError):
        gravicat.NoSuchThing  # noqa: B018


def test_every_public_method_is_documented():
    for cls in (gravicat.Catalogue, gravicat.Entry, gravicat.Chart, gravicat.CheckResults):
        for name, member in vars(cls).items():
            if name.startswith("_") or not callable(member):
                continue
            assert member.__doc__, f"{cls.__name__}.{name} has no docstring"


# --------------------------------------------------------------------------- every bundled entry


def test_every_bundled_entry_and_chart(cat):
    ids = bundled_ids()
    assert cat.ids() == ids
    for slug in ids:
        entry = cat.get(slug)
        assert entry.id == slug and entry.number == 1
        for chart in entry.charts:
            g, n = chart.metric, chart.dimension
            assert g.shape == (n, n) and len(chart.coordinates) == n
            assert all(isinstance(c, sp.Symbol) for c in chart.coordinates + chart.parameters)
            assert sp.simplify(g - g.T) == sp.zeros(n, n), f"{slug}:{chart.name} metric not symmetric"
            assert cat.get(f"{slug}:{chart.name}").metric == g
            assert chart.line_element.free_symbols  # ds^2 as an expression
            latex = chart._repr_latex_()
            assert latex.startswith("$") and r"\mathrm{d}s^2" in latex


@pytest.mark.parametrize("subject", ["schwarzschild:schwarzschild", "kerr:boyer-lindquist", "de-sitter",
                                     "reissner-nordstrom", "flrw-flat", "godel"])
def test_curvature_matches_sympy_differentiation(cat, subject):
    """Gamma^a_bc = g^ad (d_b g_dc + d_c g_db - d_d g_bc)/2, computed here by sympy directly."""
    chart = cat.get(subject)
    if isinstance(chart, gravicat.Entry):
        chart = chart.chart()
    g, x, n = chart.metric, chart.coordinates, chart.dimension
    ginv = g.inv()
    gamma = chart.christoffel()
    assert gamma.shape == (n, n, n)
    # compare at a generic exact point of the domain (cheaper than simplifying every component)
    point = {s: sp.Rational(7 + 3 * k, 5 + k) for k, s in enumerate((*chart.parameters, *x))}
    point.update(chart.defaults)
    for s in x:
        if str(s) in ("theta", "chi"):
            point[s] = sp.Rational(7, 10)
    if chart.entry.id == "kerr":
        point.update({sp.Symbol("a", nonnegative=True): sp.Rational(1, 2)})
    for a in range(n):
        for b in range(n):
            for c in range(n):
                ref = sum(ginv[a, d] * (sp.diff(g[d, c], x[b]) + sp.diff(g[d, b], x[c]) - sp.diff(g[b, c], x[d]))
                          for d in range(n)) / 2
                diff = (gamma[a, b, c] - ref).subs(point)
                assert abs(complex(sp.N(diff, 30))) < 1e-20, (subject, a, b, c)


def test_schwarzschild_textbook_values(cat):
    sch = cat.get("schwarzschild:schwarzschild")
    t, r, theta, phi = sch.coordinates
    (M,) = sch.parameters
    gamma = sch.christoffel()
    # S. M. Carroll, Spacetime and Geometry (2004), eq. 5.15 (values recalled from memory):
    # Gamma^t_tr = M/(r(r-2M)), Gamma^r_tt = M(r-2M)/r^3, Gamma^r_rr = -M/(r(r-2M)),
    # Gamma^theta_r theta = 1/r, Gamma^phi_theta phi = cot(theta)
    assert sp.simplify(gamma[0, 0, 1] - M / (r * (r - 2 * M))) == 0
    assert sp.simplify(gamma[1, 0, 0] - M * (r - 2 * M) / r**3) == 0
    assert sp.simplify(gamma[1, 1, 1] + M / (r * (r - 2 * M))) == 0
    assert sp.simplify(gamma[2, 1, 2] - 1 / r) == 0
    assert sp.simplify(gamma[3, 2, 3] - sp.cos(theta) / sp.sin(theta)) == 0
    inv = sch.invariants()
    # Kretschmann scalar 48 M^2/r^6: C. W. Misner, K. S. Thorne, J. A. Wheeler, Gravitation (1973),
    # chapter 31 (recalled from memory); vacuum: R = 0 and the Weyl square equals the Kretschmann scalar
    assert sp.simplify(inv["kretschmann"] - 48 * M**2 / r**6) == 0
    assert inv["ricci-scalar"] == 0 and sp.simplify(inv["weyl-square"] - inv["kretschmann"]) == 0
    assert sch.ricci().tomatrix().is_zero_matrix and sch.einstein().tomatrix().is_zero_matrix
    riemann = sch.riemann()
    # R^t_rtr = 2M/(r^2(r-2M)) in these coordinates (Carroll 2004, eq. 5.16, recalled from memory)
    assert sp.simplify(riemann[0, 1, 0, 1] - 2 * M / (r**2 * (r - 2 * M))) == 0


def test_kerr_kretschmann_and_de_sitter(cat):
    bl = cat.get("kerr:boyer-lindquist")
    t, r, theta, phi = bl.coordinates
    M, a = bl.parameters
    c = sp.cos(theta)
    # R. C. Henry, ApJ 535 (2000) 350, Q = 0 (recalled from memory; also the bundled file's declared value)
    henry = (48 * M**2 * (r**6 - 15 * a**2 * r**4 * c**2 + 15 * a**4 * r**2 * c**4 - a**6 * c**6)
             / (r**2 + a**2 * c**2)**6)
    assert sp.simplify(bl.invariants()["kretschmann"] - henry) == 0
    ds = cat.get("de-sitter").chart()
    R = ds.invariants()["ricci-scalar"]
    # de Sitter: R = 4 Lambda in four dimensions (G_ab + Lambda g_ab = 0 traced); K = 8 Lambda^2/3
    # (S. W. Hawking, G. F. R. Ellis, The Large Scale Structure of Space-Time, 1973, sec. 5.2; recalled)
    lam = next(p for p in ds.parameters if str(p) in ("Lambda", "L"))
    assert sp.simplify(R - 4 * lam) == 0
    assert sp.simplify(ds.invariants()["kretschmann"] - sp.Rational(8, 3) * lam**2) == 0


# --------------------------------------------------------------------------- numeric()


def _sympy_values(exprs, chart, values, pts):
    subs_p = {p: values[str(p)] for p in chart.parameters}
    out = []
    for pt in pts:
        subs = {**subs_p, **dict(zip(chart.coordinates, (sp.Float(v, 30) for v in pt), strict=True))}
        out.append([complex(sp.N(e.subs(subs), 20)).real for e in exprs])
    return np.array(out)


@pytest.mark.parametrize("subject, values, pts", [
    ("kerr:boyer-lindquist", {"M": 1, "a": sp.Rational(9, 10)}, [[0, 5, 1.0, 0], [1, 3.3, 0.4, 2], [2, 9, 2.9, 5]]),
    ("schwarzschild:schwarzschild", {"M": 2}, [[0, 4.5, 1.2, 0.3], [0, 60, 0.1, 1]]),
    ("reissner-nordstrom", None, [[0, 7, 1.1, 0.2]]),
    # a positive cosmological constant: the static region between the horizons (M = 1, Lambda = 1/100)
    ("schwarzschild-de-sitter", None, [[0, 3, 1.0, 0], [0, 8, 2.0, 1]]),
    ("schwarzschild-anti-de-sitter", None, None),
])
def test_numeric_matches_sympy(cat, subject, values, pts):
    chart = cat.get(subject)
    chart = chart if isinstance(chart, gravicat.Chart) else chart.chart()
    f = chart.numeric(**{k: v for k, v in (values or {}).items()})
    vals = {k: v for k, v in f.parameters.items()}
    if pts is None:  # a negative cosmological constant: any r outside the horizon, far out too
        pts = [[0, 3, 1.0, 0], [0, 50, 0.3, 1], [0, 400, 2.5, 4]]
    x = np.array(pts, dtype=float)
    n = chart.dimension
    got_g, got_inv, got_gam = f.metric(x), f.inverse(x), f.christoffel(x)
    assert got_g.shape == (len(pts), n, n) and got_gam.shape == (len(pts), n, n, n)
    ref_g = _sympy_values(list(chart.metric), chart, vals, pts).reshape(got_g.shape)
    ref_inv = _sympy_values(list(chart.metric.inv()), chart, vals, pts).reshape(got_inv.shape)
    gam = chart.christoffel()
    ref_gam = _sympy_values([gam[a, b, c] for a in range(n) for b in range(n) for c in range(n)],
                            chart, vals, pts).reshape(got_gam.shape)
    np.testing.assert_allclose(got_g, ref_g, rtol=RTOL, atol=ATOL)
    np.testing.assert_allclose(got_inv, ref_inv, rtol=RTOL, atol=ATOL)
    np.testing.assert_allclose(got_gam, ref_gam, rtol=RTOL, atol=ATOL)


def test_numeric_textbook_values_and_shapes(cat):
    sch = cat.get("schwarzschild:schwarzschild")
    f = sch.numeric(M=1)
    r = np.linspace(3, 40, 12)
    grid = np.stack([np.zeros_like(r), r, np.full_like(r, 1.1), np.zeros_like(r)], axis=-1).reshape(3, 4, 4)
    gam = f.christoffel(grid)
    assert gam.shape == (3, 4, 4, 4, 4)
    rr = grid[..., 1]
    # Carroll (2004) eq. 5.15, recalled: Gamma^r_tt = M(r-2M)/r^3 and Gamma^t_tr = M/(r(r-2M)), M = 1
    np.testing.assert_allclose(gam[..., 1, 0, 0], (rr - 2) / rr**3, rtol=1e-12)
    np.testing.assert_allclose(gam[..., 0, 0, 1], 1 / (rr * (rr - 2)), rtol=1e-12)
    np.testing.assert_allclose(f.metric(grid)[..., 0, 0], -(1 - 2 / rr), rtol=1e-12)
    # one point without a batch axis
    assert f.metric([0, 10, 1, 0]).shape == (4, 4)
    # Kerr, equatorial plane: g_tphi = -2 M a / r (Boyer-Lindquist form, e.g. Carroll 2004 eq. 6.70, recalled)
    k = cat.get("kerr:boyer-lindquist").numeric(M=1, a=0.5)
    g = k.metric([[0, 4, np.pi / 2, 0], [0, 10, np.pi / 2, 1]])
    np.testing.assert_allclose(g[:, 0, 3], [-2 * 0.5 / 4, -2 * 0.5 / 10], rtol=1e-12)
    # extremal Kerr (a = M) is inside the declared range 0 <= a <= M
    assert cat.get("kerr:boyer-lindquist").numeric(M=1, a=1).parameters["a"] == 1


def test_numeric_parameter_forms_and_errors(cat):
    bl = cat.get("kerr:boyer-lindquist")
    assert bl.numeric("M=1,a=9/10").parameters == bl.numeric(M=1, a="9/10").parameters
    assert bl.numeric("M=2", a=1).parameters == {"M": 2, "a": 1}
    assert bl.numeric().parameters == {"M": 1, "a": sp.Rational(9, 10)}  # the file's defaults
    with pytest.raises(InputError, match="outside the range") as err:
        bl.numeric(M=1, a=2)
    assert "\n" not in str(err.value) and "kerr" in str(err.value)
    with pytest.raises(InputError, match="positive|outside"):
        bl.numeric(M=-1, a=0)
    with pytest.raises(InputError, match="not a parameter"):
        bl.numeric(Q=1)
    with pytest.raises(InputError):
        bl.numeric(M="__import__('os')")
    with pytest.raises(InputError, match="given twice"):
        bl.numeric("M=1", M=2)
    f = bl.numeric(M=1, a=0.5)
    with pytest.raises(InputError, match="outside the chart's domain"):
        f.metric([[0, 1.0, 1, 0]])  # inside the horizon r_+ = 1 + sqrt(3)/2
    assert f.inside([[0, 1.0, 1, 0], [0, 5, 1, 0]]).tolist() == [False, True]
    with pytest.raises(InputError, match=r"shape \(\.\.\., 4\)"):
        f.metric([0, 5, 1])


# --------------------------------------------------------------------------- check()


@pytest.mark.parametrize("slug", ["schwarzschild", "reissner-nordstrom"])
def test_check_equals_the_cli(cli, slug):
    path = BUNDLED / f"{slug}.toml"
    api = load_file(path).check()
    assert isinstance(api, CheckResults)
    res = cli("check", str(path), "--json")
    assert res.exit_code == 0, res.output
    shown = json.loads(res.stdout)

    def key(doc):
        return [(c["chart"], k["check"], k["status"], k["method"]) for c in doc["charts"] for k in c["checks"]]

    mine = api.to_json()
    assert mine["metric"] == shown["metric"] == slug and mine["status"] == shown["status"] == "pass"
    assert key(mine) == key(shown)
    assert api.passed and len(api) == sum(len(c["checks"]) for c in shown["charts"])


def test_chart_check_and_results(cat):
    res = cat.get("kerr:boyer-lindquist").check()
    assert res.passed and res.status == "pass"
    assert {c["chart"] for c in res.to_json()["charts"]} == {"boyer-lindquist"}
    assert res.result("field-equations").status == "pass"
    with pytest.raises(NotFound):
        res.result("no-such-check")
    assert "<table>" in res._repr_html_()


def test_check_finds_a_wrong_metric(tmp_path):
    text = (EXAMPLES / "corvin9-typo.toml").read_text()
    entry = load_file(EXAMPLES / "corvin9-typo.toml")
    res = entry.check()
    assert not res.passed and res.failures(), text[:80]


# --------------------------------------------------------------------------- files and display


def test_load_file_and_display():
    e = load_file(EXAMPLES / "corvin9-exterior.toml")
    assert e.catalogue is None and e.number is None and e.id == "corvin9-exterior"
    assert e.chart_names == ["exterior"] and e.stored_results() == []
    html_text = e._repr_html_()
    assert "Corvin-9" in html_text and "<h4>" in html_text
    assert e.check().passed


def test_display_escapes_text(tmp_path):
    src = (DATA / "rindler-demo.toml") if (DATA / "rindler-demo.toml").exists() else EXAMPLES / "corvin9-exterior.toml"
    text = src.read_text()
    import re

    text = re.sub(r'^title = ".*"$', 'title = "A <b>bold</b> & 100% $ title_x"', text, flags=re.M)
    path = tmp_path / "odd.toml"
    path.write_text(text)
    e = load_file(path)
    assert "<b>bold</b>" not in e._repr_html_() and "&lt;b&gt;" in e._repr_html_()
    assert r"100\%" in e._repr_latex_() and r"\$" in e._repr_latex_()


def test_malformed_files(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text("id = \n")
    with pytest.raises(InputError, match="bad.toml") as err:
        load_file(bad)
    assert "\n" not in str(err.value)
    with pytest.raises(InputError, match="no such file"):
        load_file(tmp_path / "missing.toml")
    evil = tmp_path / "evil.toml"
    evil.write_text((EXAMPLES / "corvin9-exterior.toml").read_text().replace(
        'f = "1 - 2*M/r"', 'f = "__import__(\'os\').system(\'true\')"'))
    with pytest.raises(InputError, match="evil.toml"):
        load_file(evil)


# --------------------------------------------------------------------------- subjects and errors


def test_subject_errors(cat):
    with pytest.raises(NotFound, match="no entry 'no-such'"):
        cat.get("no-such")
    with pytest.raises(NotFound, match="no chart 'nope'.*boyer-lindquist"):
        cat.get("kerr:nope")
    with pytest.raises(NotFound, match="kerr@ffff: no revision of kerr starts with ffff"):
        cat.get("kerr@ffff")
    for text in ("", "kerr@", "kerr:", "Kerr!", "kerr@1@2", "a:b:c"):
        with pytest.raises(InputError):
            cat.get(text)
    entry = cat.get("kerr")
    assert cat.get(f"kerr@{entry.revision[:8]}").revision == entry.revision
    assert cat.get("kerr@1").number == 1
    assert isinstance(cat.get(f"kerr@{entry.revision[:8]}:kerr-schild"), gravicat.Chart)
    with pytest.raises(InputError, match="names a chart"):
        cat.entry("kerr:boyer-lindquist")
    # the one subject syntax also reads files: FILE[:CHART]
    path = EXAMPLES / "corvin9-exterior.toml"
    assert cat.get(str(path)).catalogue is None
    assert cat.get(f"{path}:exterior").name == "exterior"
    with pytest.raises(NotFound, match="no chart 'inside'"):
        cat.get(f"{path}:inside")
    with pytest.raises(InputError, match="names a file"):
        cat.verify(str(path))


def test_unopened_catalogue_is_one_line(tmp_path):
    with pytest.raises(DatabaseError, match="no catalogue here yet") as err:
        Catalogue(f"sqlite:///{tmp_path / 'none.sqlite'}").get("kerr")
    assert "\n" not in str(err.value)
    with pytest.raises(DatabaseError, match="does not exist"):
        Catalogue(f"sqlite:///{tmp_path / 'no' / 'dir.sqlite'}").get("kerr")
    with pytest.raises(DatabaseError, match="not a database URL"):
        Catalogue("::nonsense::").get("kerr")


def test_configured_catalogue_is_the_default(tmp_path, monkeypatch):
    url = f"sqlite:///{tmp_path / 'configured.sqlite'}"
    monkeypatch.setenv("GRAVICAT_DB", url)
    assert Catalogue().url == url


# --------------------------------------------------------------------------- writing (SQLite and PostgreSQL)


def test_add_verify_history_find(any_url):  # noqa: F811
    with Catalogue(any_url) as cat:
        cat.init(bundled=False)
        assert len(cat) == 0
        entry = load_file(EXAMPLES / "corvin9-exterior.toml")
        stored = cat.add(entry, author="halcyon-reach", message="first")
        assert stored.number == 1 and stored.catalogue is cat
        assert cat.add(entry).number == 1  # unchanged: no new revision
        assert cat.status("corvin9-exterior") == "unverified"
        done = cat.verify("corvin9-exterior")
        assert [(v.id, v.status) for v in done] == [("corvin9-exterior", "pass")] and done[0].computed == 1
        again = cat.verify("corvin9-exterior")
        assert again[0].computed == 0 and again[0].status == "pass"  # results reused
        assert cat.status("corvin9-exterior") == "pass"
        assert cat.get("corvin9-exterior").stored_results()
        rows = cat.history("corvin9-exterior")
        assert rows[0]["number"] == 1 and rows[0]["author"] == "halcyon-reach" and rows[0]["status"] == "pass"
        assert [e.id for e in cat.find(tag="example")] == ["corvin9-exterior"]
        assert cat.find(tag="black-hole") == []
        assert [e.id for e in cat.find("Corvin", status="verified")] == ["corvin9-exterior"]
        with pytest.raises(InputError, match="--status"):
            cat.find(status="bogus")
        with pytest.raises(NotFound):
            cat.verify("no-such")
        with pytest.raises(InputError):
            cat.verify()
        assert "corvin9-exterior" in cat and "kerr" not in cat


def test_a_files_limit_is_resolved_in_the_catalogue(tmp_path):
    """A file whose limit names an entry only the catalogue holds (the bundled Minkowski file stored
    under another id): checked through the catalogue, the massless limit of Corvin-9's exterior is
    proved to be that flat chart, as ``gravicat check`` finds it in the user's catalogue; without a
    catalogue the target cannot be resolved and the check says so (never a pass)."""
    import re

    flat = re.sub(r'^id = ".*"$', 'id = "halcyon-flat"', (BUNDLED / "minkowski.toml").read_text(), flags=re.M)
    (tmp_path / "halcyon-flat.toml").write_text(flat)
    lim = '\n[limits.massless]\nchart = "exterior"\nset = { M = "0" }\nreduces-to = "halcyon-flat:spherical"\n'
    text = re.sub(r'^id = ".*"$', 'id = "halcyon-copy"', (EXAMPLES / "corvin9-exterior.toml").read_text(),
                  flags=re.M)
    (tmp_path / "copy.toml").write_text(text + lim)
    with Catalogue(f"sqlite:///{tmp_path / 'c.sqlite'}") as cat:
        cat.init(bundled=False)
        cat.add(tmp_path / "halcyon-flat.toml")
        through = cat.check(str(tmp_path / "copy.toml"), only=["limits"])
    alone = load_file(tmp_path / "copy.toml").check(only=["limits"])
    assert through.result("limits:massless").status == "pass"
    assert alone.result("limits:massless").status != "pass"


def test_find_on_bundled(cat):
    hits = {e.id for e in cat.find(tag="black-hole")}
    assert {"kerr", "schwarzschild"} <= hits
    assert all("black-hole" in e.tags for e in cat.find(tag="black-hole"))


def test_degenerate_metric_and_arbitrary_functions(cat):
    """A metric with det g = 0 everywhere has no inverse: curvature is a one-line InputError, not a
    library exception; a chart with an arbitrary function a(t) has no numbers."""
    for name, chart_name in (("degenerate-everywhere.toml", "static-patch"), ("degenerate-5d.toml", "slip")):
        chart = load_file(DATA / name).chart(chart_name)
        with pytest.raises(InputError, match="degenerate") as err:
            chart.christoffel()
        assert "\n" not in str(err.value)
    assert load_file(DATA / "degenerate-5d.toml").chart("static").ricci().shape == (5, 5)  # its sound chart
    flrw = cat.get("flrw-flat").chart()
    assert flrw.christoffel().shape == (4, 4, 4)  # exact curvature works with a(t)
    with pytest.raises(InputError, match="arbitrary function"):
        flrw.numeric()


def test_five_dimensional_numeric(cat):
    """Other dimensions: the five-dimensional Tangherlini chart, g_tt = -(1 - mu/r^2) (F. R. Tangherlini,
    Nuovo Cimento 27 (1963) 636; form recalled from memory, mu the mass parameter of the file)."""
    chart = cat.get("tangherlini-5d").chart()
    assert chart.dimension == 5
    f = chart.numeric()
    x = np.array([[0, 3.0, 1.0, 0.7, 0.2], [0, 5.0, 0.5, 1.1, 1.0]])
    g = f.metric(x)
    assert g.shape == (2, 5, 5) and f.christoffel(x).shape == (2, 5, 5, 5)
    np.testing.assert_allclose(np.einsum("...ij,...jk->...ik", g, f.inverse(x)), np.broadcast_to(np.eye(5), g.shape),
                               atol=1e-12)
    ref = _sympy_values(list(chart.metric), chart, f.parameters, x.tolist()).reshape(g.shape)
    np.testing.assert_allclose(g, ref, rtol=RTOL, atol=ATOL)
