"""gravicat repair: suggestions for copying slips, checked against the published metrics.

The repaired metrics are compared with the textbook forms written out here with sympy (not
with the bundled files the slips were made from), and the screening arithmetic is compared
with a Ricci tensor computed from scratch by sympy.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
import sympy as sp
from typer.testing import CliRunner

from gravicat.cli import app
from gravicat.engine.runner import bundled_documents
from gravicat.format.metricfile import build_chart, load_file
from gravicat.registry import make_plugin_manager, verifiers
from gravicat.repair import KINDS, corruptions, edited_document, find_repairs
from gravicat.store.revisions import bundled_files

BUNDLED = {p.stem: p for p in bundled_files()}
EXAMPLES = Path(__file__).resolve().parent.parent / "catalog" / "examples"


@pytest.fixture(scope="module")
def plugins():
    return verifiers(make_plugin_manager())


@pytest.fixture(scope="module")
def docs():
    return bundled_documents()


def slip(tmp_path: Path, stem: str, old: str, new: str, name: str | None = None) -> Path:
    """A copy of a bundled file with one slip typed into it (the old text must occur exactly once)."""
    text = BUNDLED[stem].read_text()
    assert text.count(old) == 1, old
    path = tmp_path / (name or f"{stem}-slip.toml")
    path.write_text(text.replace(old, new))
    return path


def symbols_of(spec) -> dict:
    return {str(s): s for s in (*spec.params, *spec.coords)}


def same_metric(spec, expected) -> bool:
    return all(sp.cancel(sp.sympify(a) - b) == 0 for a, b in zip(spec.metric, expected, strict=True))


@pytest.fixture
def rcli(db_url):
    """The command line (the whole app: repair with add, verify, show and history)."""
    runner = CliRunner()

    def run(*args: str, db: str | None = None):
        return runner.invoke(app, ["--db", db or db_url, *args])

    return run


# --------------------------------------------------------------------------- the slips of the issue


def kerr_bl(spec):
    """Kerr in Boyer-Lindquist coordinates, G = c = 1: S. M. Carroll, Spacetime and Geometry (2004),
    eq. (6.70); R. H. Boyer and R. W. Lindquist, J. Math. Phys. 8 (1967) 265 (value recalled from memory)."""
    s = symbols_of(spec)
    M, a, r, th = s["M"], s["a"], s["r"], s["theta"]
    sigma = r**2 + a**2 * sp.cos(th) ** 2
    delta = r**2 - 2 * M * r + a**2
    gtphi = -2 * M * a * r * sp.sin(th) ** 2 / sigma
    return sp.Matrix([[-(1 - 2 * M * r / sigma), 0, 0, gtphi], [0, sigma / delta, 0, 0], [0, 0, sigma, 0],
                      [gtphi, 0, 0, (r**2 + a**2 + 2 * M * a**2 * r * sp.sin(th) ** 2 / sigma) * sp.sin(th) ** 2]])


def test_kerr_flipped_sign_in_delta(tmp_path, plugins, docs):
    path = slip(tmp_path, "kerr", 'Delta = "r**2 - 2*M*r + a**2"', 'Delta = "r**2 + 2*M*r + a**2"')
    bad = load_file(path)
    report = find_repairs(bad, plugins, docs=docs, charts=["boyer-lindquist"])
    cr = report.charts[0]
    assert report.status == "repairs-found"
    assert "field-equations" in cr.failing and cr.screened == cr.candidates > 100
    best = cr.suggestions[0]
    edit = best.edits[0]
    assert (edit.field, edit.kind) == ("charts.boyer-lindquist.define.Delta", "sign")
    assert edit.original == "r ** 2 + 2 * M * r + a ** 2" and edit.suggested == "r ** 2 - 2 * M * r + a ** 2"
    assert best.status == "pass"
    fe = next(c for c in best.checks if c.check == "field-equations")
    assert fe.status.value == "pass" and fe.method.value == "symbolic"
    spec = build_chart(best.document, "boyer-lindquist")
    assert same_metric(spec, kerr_bl(spec))
    # every suggestion is a vacuum metric that keeps the checks that passed (Schwarzschild limit, flatness)
    for s in cr.suggestions:
        assert {c.check: c.status.value for c in s.checks}["limits:nonrotating"] == "pass"


def test_kerr_missing_factor_2_in_the_g_t_phi_term(tmp_path, plugins, docs):
    path = slip(tmp_path, "kerr", "- 4*M*a*r*sin(theta)**2/Sigma*dt*dphi", "- 2*M*a*r*sin(theta)**2/Sigma*dt*dphi")
    report = find_repairs(load_file(path), plugins, docs=docs, charts=["boyer-lindquist"], jobs=2)
    cr = report.charts[0]
    assert cr.failing == ["field-equations"]  # a = 0 hides the slip from the Schwarzschild limit
    assert not cr.exhausted and cr.screened == cr.candidates
    edit = cr.suggestions[0].edits[0]
    assert edit.kind == "factor-2" and edit.field == "charts.boyer-lindquist.line-element"
    assert "- 4 * M * a * r * sin(theta) ** 2 / Sigma * dt * dphi" in edit.suggested
    spec = build_chart(cr.suggestions[0].document, "boyer-lindquist")
    assert same_metric(spec, kerr_bl(spec))
    assert len(cr.suggestions) == 1


def test_reissner_nordstrom_wrong_power_of_r(tmp_path, plugins, docs):
    # f = 1 - 2M/r + Q^2/r^2: H. Reissner, Ann. Phys. 50 (1916) 106; G. Nordstrom, Proc. KNAW 20 (1918) 1238;
    # S. M. Carroll, Spacetime and Geometry (2004), eq. (6.41) (value recalled from memory)
    text = BUNDLED["reissner-nordstrom"].read_text()
    old = 'define = { f = "1 - 2*M/r + Q**2/r**2" }'
    path = tmp_path / "rn.toml"
    path.write_text(text.replace(old, 'define = { f = "1 - 2*M/r + Q**2/r**3" }', 1))  # the static chart only
    report = find_repairs(load_file(path), plugins, docs=docs)
    static = next(c for c in report.charts if c.chart == "static")
    other = next(c for c in report.charts if c.chart != "static")
    assert not other.failing and not other.suggestions
    assert static.failing[0] == "field-equations"
    edit = static.suggestions[0].edits[0]
    assert (edit.field, edit.kind, edit.suggested) == ("charts.static.define.f", "exponent",
                                                        "1 - 2 * M / r + Q ** 2 / r ** 2")
    spec = build_chart(static.suggestions[0].document, "static")
    s = symbols_of(spec)
    f = 1 - 2 * s["M"] / s["r"] + s["Q"] ** 2 / s["r"] ** 2
    assert same_metric(spec, sp.diag(-f, 1 / f, s["r"] ** 2, s["r"] ** 2 * sp.sin(s["theta"]) ** 2))
    checks = {c.check: c.status.value for c in static.suggestions[0].checks}
    assert checks["field-equations"] == "pass" and checks["limits:uncharged"] == "pass"


def test_flrw_wrong_power_of_r(tmp_path, plugins, docs):
    # ds^2 = -dt^2 + a(t)^2 (dr^2 + r^2 dOmega^2), k = 0: S. M. Carroll, Spacetime and Geometry (2004),
    # eq. (8.25) (value recalled from memory); the density and pressure of the file are Friedmann's
    path = slip(tmp_path, "flrw-flat", "a**2*(dr**2 + r**2*(dtheta**2", "a**2*(dr**2 + r**3*(dtheta**2")
    report = find_repairs(load_file(path), plugins, docs=docs, charts=["comoving-spherical"])
    cr = report.charts[0]
    assert cr.failing == ["field-equations"]
    assert [s.edits[0].kind for s in cr.suggestions][0] == "exponent"
    spec = build_chart(cr.suggestions[0].document, "comoving-spherical")
    s = symbols_of(spec)
    a = spec.functions[0]
    r, th = s["r"], s["theta"]
    assert same_metric(spec, sp.diag(-1, a**2, a**2 * r**2, a**2 * r**2 * sp.sin(th) ** 2))


def test_every_kind_of_slip_is_undone(plugins, docs):
    """One slip of each kind in Reissner-Nordstrom's static chart: the original comes back."""
    doc = docs["reissner-nordstrom"]
    chosen = {
        "sign": ("charts.static.define.f", "1 + 2 * M / r + Q ** 2 / r ** 2"),
        "factor-2": ("charts.static.define.f", "1 - 4 * M / r + Q ** 2 / r ** 2"),
        "small-factor": ("charts.static.define.f", "1 - 2 * M / r + Q ** 2 / r ** 2 / 4"),
        "exponent": ("charts.static.define.f", "1 - 2 * M / r ** 2 + Q ** 2 / r ** 2"),
        "trig": None,
        "swap": ("charts.static.potential.t", "-M / r"),
        "drop-term": ("charts.static.define.f", "1 - 2 * M / r + Q ** 2 / r ** 2 + Q ** 2 / r ** 2"),
        "parameter-power": ("charts.static.define.f", "1 - 2 * M / r + Q / r ** 2"),
    }
    original = build_chart(doc, "static")
    for kind in KINDS:
        options = corruptions(doc, "static", kind)
        pick = chosen[kind] or options[0]
        assert pick in options, (kind, pick)
        bad = edited_document(doc, "static", {pick[0]: pick[1]})
        report = find_repairs(bad, plugins, docs=docs, charts=["static"])
        assert report.status == "repairs-found", (kind, pick)
        assert any(same_metric(build_chart(s.document, "static"), original.metric)
                   and build_chart(s.document, "static").potential == original.potential
                   for s in report.charts[0].suggestions), (kind, pick)


def test_max_edits_2_finds_two_slips(tmp_path, plugins, docs):
    text = (EXAMPLES / "corvin9-exterior.toml").read_text()
    le = 'line-element = "-f*dt**2 + dr**2/f + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"'
    assert le in text
    two = 'line-element = "-f*dt**2 + dr**2/f + r**3*(dtheta**2 + sin(theta)*dphi**2)"'
    path = tmp_path / "two.toml"
    path.write_text(text.replace(le, two))
    doc = load_file(path)
    single = find_repairs(doc, plugins, docs=docs)
    assert single.status == "no-repair-found"
    double = find_repairs(doc, plugins, docs=docs, max_edits=2)
    cr = double.charts[0]
    assert cr.pairs > 0 and double.status == "repairs-found"
    best = cr.suggestions[0]
    assert best.size == 2 and {e.kind for e in best.edits} == {"exponent"}
    spec = build_chart(best.document, cr.chart)
    s = symbols_of(spec)
    f = 1 - 2 * s["M"] / s["r"]  # Schwarzschild, MTW (1973) eq. (31.1) (value recalled from memory)
    assert same_metric(spec, sp.diag(-f, 1 / f, s["r"] ** 2, s["r"] ** 2 * sp.sin(s["theta"]) ** 2))


# --------------------------------------------------------------------------- dropped divisors (Lambda/3)

DATA = Path(__file__).resolve().parent / "data"


def kerr_de_sitter(spec):
    """Kerr-(anti-)de Sitter in Carter's Boyer-Lindquist-type chart, written out here with sympy:
    Delta_r = (r^2 + a^2)(1 - Lambda r^2/3) - 2 M r, Delta_theta = 1 + Lambda a^2 cos^2(theta)/3,
    Xi = 1 + Lambda a^2/3, Sigma = r^2 + a^2 cos^2(theta);
    ds^2 = -Delta_r/(Xi^2 Sigma) (dt - a sin^2 dphi)^2 + Delta_theta sin^2/(Xi^2 Sigma) (a dt - (r^2 + a^2) dphi)^2
           + Sigma (dr^2/Delta_r + dtheta^2/Delta_theta).
    B. Carter, Commun. Math. Phys. 10 (1968) 280; G. W. Gibbons and S. W. Hawking, Phys. Rev. D 15 (1977)
    2738 (the form recalled from memory; section and equation numbers not checked). Lambda of either sign."""
    s = symbols_of(spec)
    M, a, L, r, th = s["M"], s["a"], s["Lambda"], s["r"], s["theta"]
    sig = r**2 + a**2 * sp.cos(th) ** 2
    dr = (r**2 + a**2) * (1 - L * r**2 / 3) - 2 * M * r
    dth = 1 + L * a**2 * sp.cos(th) ** 2 / 3
    xi = 1 + L * a**2 / 3
    s2 = sp.sin(th) ** 2
    k = xi**2 * sig
    gtt = (-dr + dth * a**2 * s2) / k
    gtp = (dr * a * s2 - dth * s2 * a * (r**2 + a**2)) / k
    gpp = (-dr * a**2 * s2**2 + dth * s2 * (r**2 + a**2) ** 2) / k
    return sp.Matrix([[gtt, 0, 0, gtp], [0, sig / dr, 0, 0], [0, 0, sig / dth, 0], [gtp, 0, 0, gpp]])


def kerr_de_sitter_text(sign: str) -> str:
    """The bundled Kerr-de Sitter file (Lambda > 0), or the same chart with Lambda < 0 (Kerr-anti-de Sitter,
    the same Carter form; its a = 0 limit is Schwarzschild-anti-de Sitter)."""
    text = BUNDLED["kerr-de-sitter"].read_text()
    if sign == "positive":
        return text
    for old, new in [
        ('id = "kerr-de-sitter"', 'id = "repair-kerr-anti-de-sitter"'),
        ('assume = ["positive"]\nrange = "0 < Lambda < 1/(9*M**2)"\ndefault = "1/100"',
         'assume = ["negative"]\nrange = "-1/(9*M**2) < Lambda < 0"\ndefault = "-1/100"'),
        ('reduces-to = "schwarzschild-de-sitter:static"', 'reduces-to = "schwarzschild-anti-de-sitter:static"'),
        ('domain = ["r > M", "Lambda*r**2 < 3", ', 'domain = ["r > M", '),
    ]:
        assert text.count(old) == 1, old
        text = text.replace(old, new)
    return text


@pytest.mark.parametrize("sign", ["positive", "negative"])
@pytest.mark.parametrize("old, new, field", [
    ('Dth = "1 + Lambda*a**2*cos(theta)**2/3"', 'Dth = "1 + Lambda*a**2*cos(theta)**2"', "Dth"),
    ('Dr = "(r**2 + a**2)*(1 - Lambda*r**2/3) - 2*M*r"', 'Dr = "(r**2 + a**2)*(1 - Lambda*r**2) - 2*M*r"', "Dr"),
])
def test_kerr_de_sitter_dropped_divisor_3(tmp_path, plugins, docs, sign, old, new, field):
    text = kerr_de_sitter_text(sign)
    assert text.count(old) == 1
    path = tmp_path / "kds.toml"
    path.write_text(text.replace(old, new))
    report = find_repairs(load_file(path), plugins, docs=docs)
    cr = report.charts[0]
    assert "field-equations" in cr.failing and not cr.exhausted
    assert "invariants:ricci-scalar" in {r.check for r in cr.baseline if r.status.value == "fail"}
    best = cr.suggestions[0]
    edit = best.edits[0]
    assert (edit.field, edit.kind) == (f"charts.boyer-lindquist.define.{field}", "small-factor")
    assert "divide" in edit.detail and "by 3" in edit.detail
    assert best.status == "pass" and not best.doubt and best.still_failing == []
    checks = {c.check: c.status.value for c in best.checks}
    # the declared Ricci scalar R = 4 Lambda (trace of G_ab + Lambda g_ab = 0) is mended too
    assert checks["field-equations"] == "pass" and checks["invariants:ricci-scalar"] == "pass"
    spec = build_chart(best.document, "boyer-lindquist")
    assert same_metric(spec, kerr_de_sitter(spec))


def test_small_factor_edits_keep_the_screen_bounded(docs):
    """The new kind adds at most six edits where factor-2 has two, and only on terms that name a parameter or
    a definition (a bare number or a term of coordinates alone, such as r**2 dOmega**2, is left alone)."""
    import re

    from gravicat.repair import _Model, enumerate_edits

    model = _Model(docs["kerr-de-sitter"], "boyer-lindquist")
    named = {"M", "a", "Lambda", "Sigma", "Dr", "Dth", "Xi"}
    for target in model.editable:
        two = enumerate_edits(target, ("factor-2",))
        small = enumerate_edits(target, ("small-factor",))
        assert len(small) <= 3 * len(two)
        for e in small:
            term = e.detail.split("'")[1]
            assert set(re.findall(r"[A-Za-z_]\w*", term)) & named, e.detail
    rn = _Model(docs["reissner-nordstrom"], "static")
    le = next(t for t in rn.editable if t.field.endswith("line-element"))
    assert not [e for e in enumerate_edits(le, ("small-factor",)) if "'r ** 2 * (" in e.detail]
    # the repair of a dropped /3 reads back as the published text
    dth = next(t for t in model.editable if t.field.endswith("define.Dth"))
    assert dth.text == "1 + Lambda * a ** 2 * cos(theta) ** 2 / 3"


def test_flat_repair_while_a_declared_invariant_fails_is_doubtful(rcli, plugins, docs, tmp_path):
    # de Sitter, static chart: f = 1 - Lambda r^2/3, R = 4 Lambda (S. W. Hawking and G. F. R. Ellis, The Large
    # Scale Structure of Space-Time (1973), section 5.2; recalled from memory). Typed with a vacuum claim and
    # the /3 dropped, the only single edit that satisfies the claim drops the Lambda term: flat space, which
    # contradicts the declared R = 4 Lambda.
    src = DATA / "repair-de-sitter-vacuum-claim.toml"
    report = find_repairs(load_file(src), plugins, docs=docs)
    cr = report.charts[0]
    assert cr.failing == ["field-equations"]
    assert report.status == "no-repair-found"
    assert len(cr.suggestions) == 1
    only = cr.suggestions[0]
    assert only.edits[0].kind == "drop-term" and only.edits[0].suggested == "1"
    assert only.still_failing == ["invariants:ricci-scalar"] and "flat" in only.doubt
    path = tmp_path / "ds.toml"
    path.write_text(src.read_text())
    r = rcli("repair", str(path), "--write")
    assert r.exit_code == 1 and "doubtful: the repaired chart is flat" in r.stdout
    assert "1 doubtful suggestion(s) listed, none applied unasked" in r.stderr
    assert path.read_text() == src.read_text()  # nothing written


def test_doubtful_suggestions_rank_after_every_other():
    from gravicat.repair import EditInfo, Suggestion, suggestion_rank

    def sug(size, doubt="", still=()):
        edits = [EditInfo("f", "sign", "", "", "")] * size
        return Suggestion("c", edits, "pass", [], None, list(still), doubt)

    flat = sug(1, doubt="flat", still=["invariants:ricci-scalar"])
    pair = sug(2)
    single_with_failure = sug(1, still=["transforms:x"])
    ranked = sorted([flat, pair, single_with_failure], key=suggestion_rank)
    assert ranked == [single_with_failure, pair, flat]


# --------------------------------------------------------------------------- the screening arithmetic


def test_screening_residual_matches_sympy_ricci():
    """R_ab of the mistyped exterior (g_rr = 1/(1 + 2M/r)) at a sample point, ball arithmetic vs sympy."""
    from gravicat.repair import _Model, _PointEnv, _Prec, ball_curvature

    doc = load_file(EXAMPLES / "corvin9-typo.toml")
    model = _Model(doc, "exterior")
    import flint

    with _Prec(256):
        values = {"M": flint.arb(2), "Rs": flint.arb(5), "t": flint.arb(1), "r": flint.arb(7) / 2,
                  "theta": flint.arb(3) / 5, "phi": flint.arb(1) / 3}
        vals = model.evaluate(_PointEnv(model, values, 0, 0), {}, None, 2)
        ricci = ball_curvature(vals["g"]).ricci  # the engine's curvature on balls
    t, r, th, ph, M = sp.symbols("t r theta phi M")
    g = sp.diag(-(1 - 2 * M / r), 1 / (1 + 2 * M / r), r**2, r**2 * sp.sin(th) ** 2)
    x = [t, r, th, ph]
    gi = g.inv()
    gam = [[[sum(gi[a, d] * (sp.diff(g[d, b], x[c]) + sp.diff(g[d, c], x[b]) - sp.diff(g[b, c], x[d]))
                 for d in range(4)) / 2 for c in range(4)] for b in range(4)] for a in range(4)]
    point = {M: 2, r: sp.Rational(7, 2), th: sp.Rational(3, 5), ph: sp.Rational(1, 3), t: 1}
    for b, d in [(0, 0), (1, 1), (2, 2), (3, 3), (1, 2)]:
        rbd = sum(sp.diff(gam[a][b][d], x[a]) - sp.diff(gam[a][b][a], x[d])
                  + sum(gam[a][a][e] * gam[e][b][d] - gam[a][d][e] * gam[e][a][b] for e in range(4))
                  for a in range(4))
        exact = sp.N(rbd.subs(point), 60)
        ball = ricci[b][d]
        assert ball.rad() < 1e-50
        assert abs(float(ball.mid()) - float(exact)) < 1e-12 * max(1.0, abs(float(exact))), (b, d)
    assert not ricci[0][0].contains(0)  # the slip shows: R_tt != 0


# --------------------------------------------------------------------------- the command line


def test_nothing_to_repair(rcli):
    r = rcli("repair", str(EXAMPLES / "corvin9-exterior.toml"))
    assert r.exit_code == 0, r.output
    assert "nothing to repair" in r.stdout
    r = rcli("repair", str(EXAMPLES / "corvin9-exterior.toml"), "--json")
    out = json.loads(r.stdout)
    assert out["status"] == "nothing-to-repair" and out["charts"][0]["failing"] == []


def test_cli_reports_the_repair_and_writes_nothing(rcli):
    path = EXAMPLES / "corvin9-typo.toml"
    before = path.read_text()
    r = rcli("repair", str(path))
    assert r.exit_code == 0, r.output
    assert "1. charts.exterior.line-element  [sign]" in r.stdout
    assert "suggested: -(1 - 2 * M / r) * dt ** 2 + dr ** 2 / (1 - 2 * M / r)" in r.stdout
    assert "hypothesis" in r.stdout and "Nothing was written" in r.stdout
    assert path.read_text() == before
    r = rcli("repair", str(path), "--json", "--jobs", "2")
    out = json.loads(r.stdout)
    assert out["status"] == "repairs-found" and out["written"] == []
    chart = out["charts"][0]
    assert set(chart) >= {"chart", "failing", "baseline", "candidates", "screened", "points", "passed_screen",
                          "proved", "budget_exhausted", "note", "seconds", "suggestions"}
    sug = chart["suggestions"][0]
    assert sug["rank"] == 1 and sug["size"] == 1 and sug["status"] == "pass"
    assert set(sug["edits"][0]) == {"field", "kind", "detail", "original", "suggested"}
    # the sign of the mass flipped in g_tt also gives a vacuum metric, but it breaks the declared static
    # observer (g(u,u) = -1 passed before), so it is not suggested
    assert len(chart["suggestions"]) == 1


def catalogue_state(rcli, entry: str) -> tuple:
    """Everything the catalogue says about ``entry``: its revisions (hash, status, check counts) and the head."""
    hist = json.loads(rcli("history", entry, "--json").stdout)
    shown = json.loads(rcli("show", entry, "--json").stdout)
    return hist, shown


def test_write_edits_the_file_only_and_leaves_the_catalogue_alone(rcli, tmp_path):
    """A file whose id names a catalogue entry: --write changes the file, never the entry (storing is 'add')."""
    src = (EXAMPLES / "corvin9-typo.toml").read_text()
    path = tmp_path / "typo.toml"
    path.write_text(src)
    assert rcli("init", "--empty").exit_code == 0
    r = rcli("add", str(path))
    assert r.exit_code == 0 and "revision 1" in r.stdout
    r = rcli("verify", "corvin9-typo")
    assert r.exit_code == 1, r.output  # the stored results: the slip fails field-equations
    hist, shown = catalogue_state(rcli, "corvin9-typo")
    assert len(hist["revisions"]) == 1 and hist["revisions"][0]["status"] == "fail"
    r = rcli("repair", str(path), "--write")
    assert r.exit_code == 0, r.output
    assert "wrote" in r.stdout and "revision 2" not in r.stdout
    assert "the catalogue was not changed (to store the repaired file: gravicat add" in r.stdout
    new = path.read_text()
    assert "dr**2/(1 - 2*M/r)" in new and "# the slip: g_rr should be 1/(1 - 2*M/r)" in new  # comments kept
    assert catalogue_state(rcli, "corvin9-typo") == (hist, shown)  # revisions, results and head unchanged
    repaired = load_file(path)
    assert shown["revision"] != repaired.hash
    r = rcli("repair", str(path))
    assert r.exit_code == 0 and "nothing to repair" in r.stdout
    r = rcli("add", str(path))  # storing the repaired file is add's job
    assert r.exit_code == 0 and "revision 2" in r.stdout
    assert json.loads(rcli("show", "corvin9-typo", "--json").stdout)["revision"] == repaired.hash


def test_write_of_a_file_does_not_open_the_catalogue(rcli, tmp_path):
    typo = tmp_path / "typo.toml"
    typo.write_text((EXAMPLES / "corvin9-typo.toml").read_text())
    r = rcli("repair", str(typo), "--write", db="nosuchdb://x")  # the database is not used at all
    assert r.exit_code == 0, r.output
    assert "dr**2/(1 - 2*M/r)" in typo.read_text()


def test_write_on_a_catalogue_entry_and_json_beside_a_json_file(rcli, tmp_path):
    assert rcli("init", "--empty").exit_code == 0
    src = tmp_path / "typo.toml"
    src.write_text((EXAMPLES / "corvin9-typo.toml").read_text())
    assert rcli("add", str(src)).exit_code == 0
    r = rcli("repair", "corvin9-typo", "--write")  # an entry id: only a new revision
    assert r.exit_code == 0, r.output
    assert "revision 2" in r.stdout and "message: repair: charts.exterior.line-element" in r.stdout
    # a JSON file is never rewritten: the repaired canonical form goes beside it
    doc = load_file(EXAMPLES / "corvin9-typo.toml")
    jpath = tmp_path / "typo.json"
    jpath.write_text(doc.canonical_json(indent=2))
    r = rcli("repair", str(jpath), "--write")
    assert r.exit_code == 0, r.output
    beside = tmp_path / "typo.repaired.json"
    assert beside.exists() and "left unchanged" in r.stdout
    assert jpath.read_text() == doc.canonical_json(indent=2)
    assert load_file(beside).hash != doc.hash


def test_no_repair_found_exits_1(rcli, tmp_path):
    text = (EXAMPLES / "corvin9-exterior.toml").read_text()
    path = tmp_path / "far.toml"
    assert "dr**2/f" in text
    path.write_text(text.replace("dr**2/f", "dr**2/(1 - 3*M/r + M**2/r**2)"))
    r = rcli("repair", str(path))
    assert r.exit_code == 1
    assert r.stderr.strip().splitlines() == [f"Error: {path}: no repair found for field-equations "
                                             f"({r.stdout.split('screened ')[1].split(' of')[0]} candidates screened)"]


def test_bad_input_is_handled_like_check(rcli, tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('id = "x"\ntitle = \n')
    r = rcli("repair", str(bad))
    assert r.exit_code == 2 and r.stderr.startswith(f"Error: {bad}: malformed TOML") and len(r.stderr.splitlines()) == 1
    r = rcli("repair", str(tmp_path / "missing.toml"))
    assert r.exit_code == 2 and "no such file" in r.stderr
    r = rcli("repair", str(EXAMPLES / "corvin9-typo.toml"), "--chart", "nope")
    assert r.exit_code == 2 and r.stderr.strip() == (f"Error: {EXAMPLES / 'corvin9-typo.toml'}: charts.nope: no such "
                                                     "chart (charts: exterior)")
    r = rcli("repair", str(EXAMPLES / "corvin9-typo.toml"), "--max-edits", "3")
    assert r.exit_code == 2
    r = rcli("repair", str(EXAMPLES / "corvin9-typo.toml"), "--pick", "1")
    assert r.exit_code == 2 and "--pick: only meaningful with --write" in r.stderr
    r = rcli("repair", "corvin9-typo", "--write", db="nosuchdb://x")  # an entry id needs the catalogue
    assert r.exit_code == 2 and r.stderr == "Error: --db nosuchdb://x: unknown database kind 'nosuchdb'\n"
    unknown = tmp_path / "unknown.toml"
    unknown.write_text((EXAMPLES / "corvin9-typo.toml").read_text().replace("dr**2/(1 + 2*M/r)", "dr**2/(1 + 2*K/r)"))
    r = rcli("repair", str(unknown))
    assert r.exit_code == 2 and "unknown name 'K'" in r.stderr and len(r.stderr.splitlines()) == 1


MATRIX_EF = '''id = "ef-matrix"
title = "Schwarzschild, ingoing Eddington-Finkelstein, as a matrix"
field-equations = "vacuum"
tags = ["asymptotically-flat"]

[parameters.M]
description = "mass"
assume = ["positive"]
range = "M > 0"

[charts.ingoing]
coordinates = ["v", "r", "theta", "phi"]
domain = ["r > 0", "0 < theta < pi"]
# g_vr typed as 2 in both places (a line element's 2*dv*dr copied as the component)
metric = [["-(1 - 2*M/r)", "2", "0", "0"],
          ["2", "0", "0", "0"],
          ["0", "0", "r**2", "0"],
          ["0", "0", "0", "r**2*sin(theta)**2"]]
'''


def test_matrix_metric_repaired_in_both_symmetric_places(rcli, tmp_path):
    # ds^2 = -(1 - 2M/r) dv^2 + 2 dv dr + r^2 dOmega^2, so g_vr = 1: C. W. Misner, K. S. Thorne and
    # J. A. Wheeler, Gravitation (1973), eq. (31.10b) (value recalled from memory)
    path = tmp_path / "ef.toml"
    path.write_text(MATRIX_EF)
    r = rcli("repair", str(path), "--write")
    assert r.exit_code == 0, r.output
    assert "charts.ingoing.metric[0][1]  [factor-2]" in r.stdout
    text = path.read_text()
    assert '[["-(1 - 2*M/r)", "1", "0", "0"],' in text and '["1", "0", "0", "0"],' in text
    assert "# g_vr typed as 2" in text
    spec = build_chart(load_file(path), "ingoing")
    s = symbols_of(spec)
    f = 1 - 2 * s["M"] / s["r"]
    expected = sp.Matrix([[-f, 1, 0, 0], [1, 0, 0, 0], [0, 0, s["r"] ** 2, 0],
                          [0, 0, 0, s["r"] ** 2 * sp.sin(s["theta"]) ** 2]])
    assert same_metric(spec, expected)


def test_several_suggestions_need_pick(rcli, tmp_path):
    # Majumdar-Papapetrou: U = 1 + m1/|x - x1| + m2/|x - x2| (S. D. Majumdar, Phys. Rev. 72 (1947) 390;
    # A. Papapetrou, Proc. R. Irish Acad. A 51 (1947) 191; value recalled from memory) with the square of
    # (z + d) lost: restoring it and dropping the second hole both give an electrovacuum metric
    # The bundled file declares Petrov type I, which rules out dropping the second hole (one centre is
    # extremal Reissner-Nordstrom, type D): with the declaration the one credible repair is written.
    path = slip(tmp_path, "majumdar-papapetrou", "m2/sqrt(x**2 + y**2 + (z + d)**2)", "m2/sqrt(x**2 + y**2 + (z + d))")
    r = rcli("repair", str(path), "--write")
    assert r.exit_code == 0, r.output
    assert path.read_text() == BUNDLED["majumdar-papapetrou"].read_text()
    # without it both repairs pass every check the file states, so --write asks for --pick
    decl = 'petrov-type = "I"\n'
    original = BUNDLED["majumdar-papapetrou"].read_text().replace(decl, "")
    path = slip(tmp_path, "majumdar-papapetrou", "m2/sqrt(x**2 + y**2 + (z + d)**2)", "m2/sqrt(x**2 + y**2 + (z + d))")
    path.write_text(path.read_text().replace(decl, ""))
    before = path.read_text()
    r = rcli("repair", str(path), "--write")
    assert r.exit_code == 2 and r.stderr.startswith("Error: --write: 2 suggestions: choose one with --pick RANK")
    assert "  1. charts.cartesian.define.U  [exponent] 'z + d' -> '(z + d) ** 2'" in r.stdout
    assert path.read_text() == before
    r = rcli("repair", str(path), "--write", "--pick", "1")
    assert r.exit_code == 0, r.output
    assert path.read_text() == original
