"""One copy of the physics: repair's screening and the verifiers compute the same residuals.

The same chart is fed to both sides at the same exact sample points (the rational points ``check``
draws, :meth:`gravicat.engine.geometry.Geometry.sample_points`):

* the verifiers' side: the residual function of the ``field-equations`` verifier
  (:func:`gravicat.plugins.field_equations.residuals`) on the engine's exact per-point backend
  (:class:`gravicat.engine.pointdata.PointData`: exact rationals, or balls where pi enters);
* repair's side: the candidate's second-order jets at the same point
  (:func:`gravicat.repair.model.point_from_sample`), the engine's ball backend
  (:func:`gravicat.repair.ball_curvature`) and the shared claim residuals
  (:func:`gravicat.repair.field_equation_residual`).

Both sides must give the same components (same labels) with the same values: the ball (256 bits)
must lie within 1e-40 (relative to 1 + |exact|) of the exact value, a tolerance far above the ball's
own radius and far below any residual of a wrong metric. The expected values come from outside the
project where a value is claimed: vacuum solutions have R_ab = 0 (Schwarzschild: R. M. Wald, General
Relativity, 1984, eq. 6.1.44; de Sitter and anti-de Sitter with G_ab + Lambda g_ab = 0: S. W. Hawking
and G. F. R. Ellis, The Large Scale Structure of Space-Time, 1973, section 5.2), and the residual of
a corrupted chart is checked against sympy itself (Ricci tensor from its Christoffel symbols).
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import flint
import pytest
import sympy as sp

from gravicat.engine.geometry import Geometry, inertia
from gravicat.engine.runner import bundled_documents, make_resolver
from gravicat.format.metricfile import build_chart
from gravicat.physics.claims import riemann_residuals, signature_defect
from gravicat.plugins._common import point_matrix
from gravicat.plugins.field_equations import residuals
from gravicat.repair import _Model, _Prec, ball_curvature, edited_document, field_equation_residual
from gravicat.repair.model import point_from_sample
from gravicat.repair.screening import _Signature

TOL = flint.arb(10) ** -40  # stated tolerance between an exact value and a 256-bit ball
POINTS = 2  # sample points per chart


@pytest.fixture(scope="module")
def docs():
    return bundled_documents()


def _ball(v):
    """An exact value (fmpq), a ball or an mpmath number as a ball."""
    if isinstance(v, flint.arb):
        return v
    if isinstance(v, (flint.fmpq, flint.fmpz, int)):
        return flint.arb(v)
    raise AssertionError(f"the verifiers' side gave {type(v).__name__}, not an exact or ball value")


def agree(exact, ball) -> bool:
    """|ball - exact| < TOL * (1 + |exact|), decided in ball arithmetic (never by floats)."""
    with _Prec(256):
        e = _ball(exact)
        return bool(abs(ball - e) < TOL * (1 + abs(e)))


def both_sides(doc, chart, docs, points=POINTS):
    """[(PointData, verifiers' residuals, repair's residuals, repair's jets)] at the first sample points."""
    spec = build_chart(doc, chart, make_resolver({**docs, doc.id: doc}))
    geo = Geometry(spec, seed=0)
    assert geo.path == "flint", geo.fallback_reason
    model = _Model(doc, chart)
    out = []
    for i, pd in enumerate(geo.sample_points()[:points]):
        assert pd.point is not None  # an exact rational point
        with pd.precision():
            theirs = residuals(spec, spec.field_equations)(pd)
        point = point_from_sample(model, pd.sample, i, 0)
        assert point is not None
        with _Prec(256):
            vals = model.evaluate(point, {}, None, 2)
            ours = field_equation_residual(model, vals, ball_curvature(vals["g"], model.coords))
        out.append((pd, theirs, ours, vals))
    assert out, "no sample point"
    return out


def assert_same(doc, chart, docs):
    rows = both_sides(doc, chart, docs)
    for _pd, theirs, ours, _vals in rows:
        assert set(theirs) == set(ours)
        for k, v in theirs.items():
            assert agree(v, ours[k]), (doc.id, chart, k, v, ours[k])
    return rows


# (entry, chart, claim kind): the cosmological constant positive, negative and absent; electrovacuum,
# perfect fluid, dust, null dust (with the arbitrary function's values shared by both sides)
CASES = [
    ("schwarzschild", "schwarzschild"),  # vacuum, no Lambda: R_ab = 0 (Wald 1984, eq. 6.1.44)
    ("kerr", "boyer-lindquist"),  # vacuum (Wald 1984, eq. 12.3.1)
    ("de-sitter", "static"),  # Lambda > 0 (Hawking and Ellis 1973, section 5.2)
    ("anti-de-sitter", "global"),  # Lambda < 0 (Hawking and Ellis 1973, section 5.2)
    ("schwarzschild-de-sitter", "static"),  # Lambda of either sign allowed by its range
    ("reissner-nordstrom", "static"),  # electrovacuum (Wald 1984, eq. 6.4.8, value recalled from memory)
    ("kerr-newman", "boyer-lindquist"),  # electrovacuum
    ("bertotti-robinson", "static"),  # electrovacuum
    ("interior-schwarzschild", "schwarzschild-like"),  # perfect fluid
    ("einstein-static", "areal"),  # dust with a cosmological constant
    ("godel", "original"),  # dust with a negative cosmological constant
    ("vaidya", "ingoing"),  # null dust, m(v) arbitrary
    ("pp-wave", "brinkmann"),  # null dust, H(u, x, y) arbitrary
]


@pytest.mark.parametrize(("entry", "chart"), CASES)
def test_repair_and_the_verifier_give_the_same_field_equation_residuals(docs, entry, chart):
    rows = assert_same(docs[entry], chart, docs)
    # every bundled entry satisfies its claim: every component is 0 on both sides (the exact side
    # exactly, the ball side contains 0)
    for _pd, theirs, ours, _vals in rows:
        for k, v in theirs.items():
            assert _ball(v).contains(0), (entry, chart, k, v)
            assert ours[k].contains(0), (entry, chart, k, ours[k])


def test_a_zero_cosmological_constant_is_the_plain_vacuum_claim_on_both_sides(docs):
    """Lambda written as 0: both sides check R_ab = 0 (the same labels R[..])."""
    doc = docs["schwarzschild"]
    data = doc.data | {"charts": {**doc.data["charts"]}}
    data["charts"]["schwarzschild"] = doc.data["charts"]["schwarzschild"] | {"cosmological-constant": "0"}
    from gravicat.format.metricfile import validate

    zero = validate(data, doc.source)
    rows = assert_same(zero, "schwarzschild", docs)
    assert all(k.startswith("R[") for k in rows[0][1])


def _corrupted_schwarzschild(docs, new_line):
    doc = docs["schwarzschild"]
    return edited_document(doc, "schwarzschild", {"charts.schwarzschild.line-element": new_line})


def test_a_corrupted_chart_gives_the_same_non_zero_residual_on_both_sides(docs):
    """g_tt = -(1 - M/r) with g_rr = 1/(1 - 2M/r): not a vacuum metric. Both sides give the same
    non-zero R_ab, and it equals sympy's own Ricci tensor of that metric at the point."""
    line = "-(1 - M / r) * dt ** 2 + dr ** 2 / f + r ** 2 * (dtheta ** 2 + sin(theta) ** 2 * dphi ** 2)"
    bad = _corrupted_schwarzschild(docs, line)
    rows = assert_same(bad, "schwarzschild", docs)
    # the reference: sympy's Ricci tensor of the corrupted metric
    t, r, th, ph, M = sp.symbols("t r theta phi M")
    x = [t, r, th, ph]
    g = sp.diag(-(1 - M / r), 1 / (1 - 2 * M / r), r**2, r**2 * sp.sin(th) ** 2)
    gi = g.inv()
    gam = [[[sum(gi[a, d] * (sp.diff(g[d, b], x[c]) + sp.diff(g[d, c], x[b]) - sp.diff(g[b, c], x[d]))
                 for d in range(4)) / 2 for c in range(4)] for b in range(4)] for a in range(4)]

    def ricci(b, d):
        return sum(sp.diff(gam[a][b][d], x[a]) - sp.diff(gam[a][b][a], x[d])
                   + sum(gam[a][a][e] * gam[e][b][d] - gam[a][d][e] * gam[e][a][b] for e in range(4))
                   for a in range(4))

    nonzero = 0
    for pd, theirs, ours, _vals in rows:
        s = pd.sample
        subs = {sym: sp.Rational(q.numerator, q.denominator) for sym, q in s.values.items()}
        for sym, (u, q) in s.angles.items():
            subs[sym] = 2 * q * sp.atan(sp.Rational(u.numerator, u.denominator))
        subs = {next(v for v in x + [M] if str(v) == str(k)): val for k, val in subs.items()}
        for b, d in [(0, 0), (1, 1), (2, 2), (3, 3)]:
            label = pd.label("R", b, d)
            ref = sp.N(sp.simplify(ricci(b, d)).subs(subs), 60)
            exact = theirs[label]
            assert isinstance(exact, flint.fmpq)  # no pi here: the verifiers' side is an exact rational
            assert abs(ref - sp.Rational(str(exact))) < sp.Float(10, 60) ** -40 * (1 + abs(ref)), (label, ref, exact)
            assert agree(theirs[label], ours[label])
            if not ours[label].contains(0):
                assert not _ball(theirs[label]).contains(0)
                nonzero += 1
    assert nonzero > 0  # the slip shows on both sides


def test_signature_and_riemann_are_shared(docs):
    """The signature test (inertia + the Lorentzian counts) and the Riemann tensor (the flat-when
    residual) give the same answers on both sides, for a good and a sign-flipped chart."""
    doc = docs["schwarzschild"]
    good = doc.data["charts"]["schwarzschild"]["line-element"]
    flipped = _corrupted_schwarzschild(docs, good.replace("+ dr ** 2 / f", "- dr ** 2 / f"))
    for d, want in ((doc, 0), (flipped, 2)):  # (-,+,+,+) is Lorentzian; (-,-,+,+) is 2 counts away
        for pd, _theirs, _ours, vals in both_sides(d, "schwarzschild", docs):
            with pd.precision():
                counts, certain = inertia(point_matrix(pd))
            assert certain and signature_defect(counts, 4) == want
            with _Prec(256):
                assert _Signature().measure(None, vals, None, None) == float(want)
    # Riemann of Schwarzschild is not zero (Kretschmann 48 M^2 / r^6: Wald 1984, eq. 6.1.44 and
    # common practice); both sides agree component by component
    for pd, _theirs, _ours, vals in both_sides(doc, "schwarzschild", docs, points=1):
        with pd.precision():
            theirs = riemann_residuals(pd)
        with _Prec(256):
            ours = riemann_residuals(ball_curvature(vals["g"], _Model(doc, "schwarzschild").coords))
        assert set(theirs) == set(ours)
        assert any(not ours[k].contains(0) for k in ours)
        for k, v in theirs.items():
            assert agree(v, ours[k]), k


# --------------------------------------------------------------------------- no second copy in repair

REPAIR = Path(__file__).resolve().parent.parent / "catalog" / "repair"
# names that would mean curvature, stress tensors or a signature test of repair's own
FORBIDDEN = re.compile(r"christoffel|gamma|ricci|einstein|riemann|curv|stress|maxwell|fluid_|descartes|weyl|kretsch",
                       re.IGNORECASE)
DELEGATES = {"ball_curvature", "riemann_values", "field_equation_residual", "curvature"}  # calls into engine / physics


def test_repair_has_no_curvature_or_stress_tensor_of_its_own():
    files = sorted(REPAIR.glob("*.py"))
    assert len(files) >= 5
    for path in files:
        text = path.read_text()
        tree = ast.parse(text)
        for node in ast.walk(tree):
            if isinstance(node, (ast.FunctionDef, ast.ClassDef)):
                if node.name in DELEGATES:
                    continue
                assert not FORBIDDEN.search(node.name), f"{path.name}: {node.name}"
        # no matrix inverse, characteristic polynomial or Christoffel contraction of its own
        for token in ("charpoly", "arb_mat", ".inv()", "dgamma", "christoffel_first"):
            assert token not in text, f"{path.name}: {token}"
        assert len(text.splitlines()) <= 800, path.name
    screening = (REPAIR / "screening.py").read_text()
    assert "from gravicat.engine.curvature import BallCurvature" in screening
    assert "field_equation_residuals" in screening and "gravicat.physics.claims" in screening
