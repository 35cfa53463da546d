"""Degenerate metrics, other dimensions and undecidable points (issue 13, items 3, 5, 7 and 13).

* A metric with det g = 0 everywhere fails ``structure`` and ``signature``; the checks that need the
  inverse metric (field equations, invariants) are ``skipped`` with the reason; nothing crashes and
  the overall status is ``fail``, not ``error``.
* Degeneracy on a set of measure zero inside the domain (an axis) is a note, not a failure.
* The printed signature has the chart's dimension: (-,+,+) in three dimensions, (-,+,+,+,+) in five.
* No numerical library's exception reaches a result, and an undecided point is never a counterexample.

References are named beside each check; sympy is the reference library for determinants,
eigenvalue signs and curvature.
"""

from __future__ import annotations

import json
import math

import pytest
import sympy as sp
from conftest import DATA

from gravicat.engine.geometry import Geometry, inertia
from gravicat.format.metricfile import build_chart, load_file
from gravicat.plugins.signature import SignatureCheck

EVERYWHERE = DATA / "degenerate-everywhere.toml"
AXIS = DATA / "degenerate-axis.toml"
FIVE = DATA / "degenerate-5d.toml"


def checked(cli, path, *extra):
    r = cli("check", str(path), "--json", "-j", "1", *extra)
    out = json.loads(r.stdout)
    charts = {c["chart"]: {k["check"]: k for k in c["checks"]} for c in out["charts"]}
    for checks in charts.values():  # never a crash shown as a result (issue 13 items 5 and 7)
        for k in checks.values():
            assert k["status"] != "error" and "crashed" not in k["detail"], k
            assert "LinAlgError" not in k["detail"] and "ZeroDivisionError" not in k["detail"], k
    return r, out, charts


def sympy_signature(metric, point) -> str:
    """Signs of the eigenvalues of the metric at ``point`` (name -> exact value text), by sympy."""
    subs = {s: sp.sympify(point[str(s)], rational=True) for s in sp.Matrix(metric).free_symbols}
    m = sp.Matrix(metric).subs(subs)
    ev = [sp.re(sp.N(v, 40)) for v in m.eigenvals(multiple=True)]
    neg = sum(1 for v in ev if v < -1e-30)
    zero = sum(1 for v in ev if abs(v) <= 1e-30)
    return "(" + ",".join(["-"] * neg + ["0"] * zero + ["+"] * (len(ev) - neg - zero)) + ")"


# ---------------------------------------------------------------------------- degenerate everywhere


@pytest.mark.parametrize("chart", ["static-patch", "null-block"])  # Lambda > 0 and Lambda < 0
def test_degenerate_everywhere_fails_and_skips_what_needs_the_inverse(cli, chart):
    r, out, charts = checked(cli, EVERYWHERE, "--chart", chart)
    assert r.exit_code == 1 and out["status"] == "fail"  # a problem found, not a crash (exit 1, not error)
    checks = charts[chart]
    # sympy (reference library): det g is identically zero for both drafts
    spec = build_chart(load_file(EVERYWHERE), chart)
    assert sp.simplify(sp.Matrix(spec.metric).det()) == 0
    assert checks["structure"]["status"] == "fail" and "identically zero" in checks["structure"]["detail"]
    sig = checks["signature"]
    assert sig["status"] == "fail" and "degenerate" in sig["detail"]
    # the reported signature is the one sympy finds at the reported point
    assert sig["counterexample"]["residual"] == "(-,0,+,+)"
    assert sympy_signature(spec.metric, sig["counterexample"]["point"]) == "(-,0,+,+)"
    for name in ("field-equations", "invariants", *[k for k in checks if k.startswith("invariants:")]):
        assert checks[name]["status"] == "skipped", checks[name]
        assert "degenerate" in checks[name]["detail"] and "det g is identically zero" in checks[name]["detail"]


def test_degeneracy_reason_from_the_engine():
    spec = build_chart(load_file(EVERYWHERE), "static-patch")
    assert Geometry(spec).degeneracy() == "det g is identically zero"
    assert Geometry(build_chart(load_file(AXIS), "boyer-lindquist")).degeneracy() is None


# ---------------------------------------------------------------------------- a set of measure zero


def test_axis_in_the_domain_is_a_note_not_a_failure(cli):
    # Kerr in Boyer-Lindquist coordinates without a theta range (R. P. Kerr, PRL 11 (1963) 237;
    # Boyer & Lindquist, J. Math. Phys. 8 (1967) 265): degenerate only on the axis sin(theta) = 0
    r, out, charts = checked(cli, AXIS)
    assert r.exit_code == 0 and out["status"] == "pass", r.output
    checks = charts["boyer-lindquist"]
    assert checks["signature"]["status"] == "pass"
    assert "sin(theta) = 0" in checks["signature"]["detail"] and "measure zero" in checks["signature"]["detail"]
    assert checks["structure"]["status"] == "pass" and "sin(theta) = 0" in checks["structure"]["detail"]
    # the vacuum equations and Henry's Kretschmann scalar (R. C. Henry, ApJ 535 (2000) 350) still prove
    assert checks["field-equations"]["status"] == "pass"
    assert checks["invariants:kretschmann"]["status"] == "pass"


# ---------------------------------------------------------------------------- other dimensions

BTZ = """
id = "halcyon-btz"
title = "Three-dimensional black hole"
summary = "BTZ black hole (test)."
field-equations = "lambda-vacuum"

[[references]]
citation = "M. Banados, C. Teitelboim and J. Zanelli, Phys. Rev. Lett. 69 (1992) 1849"

[parameters.M]
description = "mass"
assume = ["positive"]
range = "M > 0"
default = "1"

[parameters.l]
description = "anti-de Sitter radius"
assume = ["positive"]
range = "l > 0"
default = "1"

[charts.static]
coordinates = ["t", "r", "phi"]
domain = ["r > l*sqrt(M)"]
cosmological-constant = "-1/l**2"
line-element = "-(r**2/l**2 - M)*dt**2 + dr**2/(r**2/l**2 - M) + r**2*dphi**2"

[charts.static.invariants.ricci-scalar]
value = "-6/l**2"
source = "AdS3 of radius l: R = 6 Lambda = -6/l**2 (recalled from memory; sympy below)"
"""


def test_three_dimensional_chart_prints_three_signs(cli, tmp_path):
    path = tmp_path / "btz.toml"
    path.write_text(BTZ)
    r, out, charts = checked(cli, path)
    assert r.exit_code == 0 and out["status"] == "pass", r.output
    checks = charts["static"]
    assert "Lorentzian (-,+,+) at" in checks["signature"]["detail"]
    assert "(-,+,+,+)" not in checks["signature"]["detail"]
    assert checks["field-equations"]["status"] == "pass"  # Banados, Teitelboim & Zanelli 1992, Lambda < 0
    assert checks["invariants:ricci-scalar"]["status"] == "pass"
    # sympy (reference library): R of the BTZ metric is -6/l**2
    t, rr, ph = sp.symbols("t r phi")
    M, ell = sp.symbols("M l", positive=True)
    f = rr**2 / ell**2 - M
    g = sp.diag(-f, 1 / f, rr**2)
    assert sp.simplify(_ricci_scalar(g, [t, rr, ph]) + 6 / ell**2) == 0


def test_three_dimensional_euclidean_metric_fails_with_three_signs(cli, tmp_path):
    path = tmp_path / "euclid.toml"
    path.write_text(BTZ.replace("-(r**2/l**2 - M)*dt**2", "(r**2/l**2 - M)*dt**2"))
    r, out, charts = checked(cli, path, "--only", "signature")
    sig = charts["static"]["signature"]
    assert r.exit_code == 1 and sig["status"] == "fail"
    assert sig["counterexample"]["residual"] == "(+,+,+)" and "not Lorentzian (-,+,+)" in sig["detail"]


def test_five_dimensional_charts_print_five_signs(cli):
    # Schwarzschild-Tangherlini with a cosmological constant of either sign (F. R. Tangherlini,
    # Nuovo Cimento 27 (1963) 636); the range -1 < Lambda < 1/10 is sampled on both sides of 0
    r, out, charts = checked(cli, FIVE)
    assert r.exit_code == 1 and out["status"] == "fail"
    static, slip = charts["static"], charts["slip"]
    assert "Lorentzian (-,+,+,+,+) at" in static["signature"]["detail"]
    assert static["field-equations"]["status"] == "pass" and static["invariants:weyl-square"]["status"] == "pass"
    assert slip["signature"]["status"] == "fail"
    assert slip["signature"]["counterexample"]["residual"] == "(-,0,+,+,+)"
    assert "not Lorentzian (-,+,+,+,+)" in slip["signature"]["detail"]
    assert slip["field-equations"]["status"] == "skipped" and slip["invariants"]["status"] == "skipped"


@pytest.mark.parametrize("lam", [sp.Rational(1, 20), sp.Rational(-2, 13)])
def test_five_dimensional_kretschmann_against_sympy_for_either_sign_of_lambda(lam):
    # sympy (reference library) computes K = R_abcd R^abcd of the five-dimensional static chart; the
    # engine must agree for a positive and a negative cosmological constant. Expected closed form
    # 72 mu**2/r**8 + 10 Lambda**2/9 (Tangherlini 1963 for the mu part, recalled from memory; the
    # Lambda part is that of de Sitter / anti-de Sitter space in five dimensions).
    spec = build_chart(load_file(FIVE), "static")
    mu, Lam = spec.params
    t, r, chi, th, ph = spec.coords
    geo = Geometry(spec)
    K = geo.to_sympy(geo.kretschmann)
    point = {mu: sp.Rational(5, 11), Lam: lam, r: sp.Rational(7, 3), chi: sp.Rational(9, 10), th: sp.Rational(2, 5)}
    ref = _kretschmann_diagonal(sp.Matrix(spec.metric), list(spec.coords))
    assert abs(sp.N((K - ref).subs(point), 40)) < 1e-30
    assert abs(sp.N((K - 72 * mu**2 / r**8 - 10 * Lam**2 / 9).subs(point), 40)) < 1e-30


# ---------------------------------------------------------------------------- item 7: no library exception


FUNCS = """
id = "halcyon-shape-function"
title = "Wormhole draft with free shape and redshift functions"
summary = "Morris-Thorne form with b(r), Phi(r) and no domain for r (test)."
field-equations = "none"

[[references]]
citation = "M. S. Morris and K. S. Thorne, Am. J. Phys. 56 (1988) 395"

[charts.areal]
coordinates = ["t", "r", "theta", "phi"]
functions = ["b(r)", "Phi(r)"]
domain = ["0 < theta < pi"]
line-element = "-exp(2*Phi)*dt**2 + dr**2/(1 - b/r) + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
"""


def test_declared_functions_without_a_domain_give_no_library_exception_and_a_true_counterexample(cli, tmp_path):
    # without "r > b(r)" the Morris-Thorne form (Morris & Thorne 1988, eq. 1) is not Lorentzian where
    # b(r) > r; the counterexample must be real: sympy finds the same signature there
    path = tmp_path / "funcs.toml"
    path.write_text(FUNCS)
    r, out, charts = checked(cli, path)
    sig = charts["areal"]["signature"]
    if sig["status"] == "fail":
        point = sig["counterexample"]["point"]
        b, Phi, rr = sp.Rational(point["b(r)"]), sp.Rational(point["Phi(r)"]), sp.Rational(point["r"])
        grr = 1 / (1 - b / rr)
        expected = "(-,-,+,+)" if grr < 0 else "(-,+,+,+)"
        assert sig["counterexample"]["residual"] == expected != "(-,+,+,+)"
        assert math.exp(2 * float(Phi)) > 0  # g_tt < 0 whatever Phi is
        assert "declared functions" in sig["detail"]
    else:
        assert sig["status"] in ("pass", "inconclusive")


def test_inertia_raises_value_error_not_a_library_exception():
    import flint

    nan = flint.arb("nan")
    with pytest.raises(ValueError):
        inertia([[nan, 0], [0, flint.arb(1)]])
    with pytest.raises(ValueError):
        inertia([[float("nan"), 0.0], [0.0, 1.0]])
    with pytest.raises(ValueError):
        inertia([[float("inf"), 0.0], [0.0, 1.0]])


def test_inertia_of_balls_with_a_zero_middle_coefficient_is_certain():
    # diag(-1, 1, 1, 1): characteristic polynomial x**4 - 2x**3 + 2x - 1 has a zero x**2 coefficient
    # (sympy, reference library, below); every sign it could take gives the same Descartes counts
    import flint

    x = sp.Symbol("x")
    assert sp.Poly(sp.diag(-1, 1, 1, 1).charpoly(x).as_expr(), x).all_coeffs()[2] == 0
    third = flint.arb(1) / 3
    rows = [[-3 * third, 0, 0, 0], [0, 3 * third, 0, 0], [0, 0, 3 * third, 0], [0, 0, 0, 3 * third]]
    assert inertia(rows) == ((1, 0, 3), True)


class _Sample:
    shown = {"x": "1/7", "y": "2/11"}


class _Point:
    """A sample point whose metric is a 2x2 matrix of balls that cannot be told from singular."""

    point = object()
    sample = _Sample()

    def __init__(self, g):
        self.g = g

    def precision(self):
        import contextlib

        return contextlib.nullcontext()


class _Geometry:
    n = 2
    coords = ("x", "y")
    samples = 3

    class spec:  # noqa: N801 - a stand-in for ChartSpec
        functions = ()

    def __init__(self, g):
        self._g = g

    def draw_point(self, need_inverse=True):
        return _Point(self._g)

    def degeneracy(self):
        return None


def test_an_undecided_point_is_never_a_counterexample():
    # sqrt(2) * [[1, 1], [1, 1]] as balls: the determinant's ball contains 0, so the signs are not
    # certain; the old verifier reported a "degenerate" counterexample from floating-point eigenvalues
    import flint

    q = flint.arb(2).sqrt()
    [res] = SignatureCheck().check(_Geometry([[q, q], [q, q]]))
    assert res.status.value == "inconclusive" and res.counterexample is None
    assert "not decided" in res.detail


# ---------------------------------------------------------------------------- sympy helpers


def _christoffel(g, X):
    n = len(X)
    gi = g.inv()
    return [[[sp.cancel(sum(gi[a, d] * (sp.diff(g[d, b], X[c]) + sp.diff(g[d, c], X[b]) - sp.diff(g[b, c], X[d]))
                            for d in range(n)) / 2) for c in range(n)] for b in range(n)] for a in range(n)]


def _riemann(G, X, a, b, c, d):
    """R^a_bcd = d_c Gamma^a_db - d_d Gamma^a_cb + Gamma^a_ce Gamma^e_db - Gamma^a_de Gamma^e_cb."""
    n = len(X)
    v = sp.diff(G[a][d][b], X[c]) - sp.diff(G[a][c][b], X[d])
    return v + sum(G[a][c][e] * G[e][d][b] - G[a][d][e] * G[e][c][b] for e in range(n))


def _ricci_scalar(g, X):
    n = len(X)
    G = _christoffel(g, X)
    gi = g.inv()
    return sum(gi[b, d] * sum(_riemann(G, X, a, b, a, d) for a in range(n)) for b in range(n) for d in range(n))


def _kretschmann_diagonal(g, X):
    """R_abcd R^abcd of a diagonal metric: sum over a, b, c < d of 2 g_aa g^bb g^cc g^dd (R^a_bcd)**2."""
    n = len(X)
    G = _christoffel(g, X)
    gi = g.inv()
    K = 0
    for a in range(n):
        for b in range(n):
            for c in range(n):
                for d in range(c + 1, n):
                    v = _riemann(G, X, a, b, c, d)
                    if v != 0:
                        K += 2 * g[a, a] * gi[b, b] * gi[c, c] * gi[d, d] * v**2
    return K
