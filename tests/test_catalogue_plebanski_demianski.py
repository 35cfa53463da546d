"""The bundled Plebanski-Demianski entry against the physical form of Griffiths and Podolsky.

The engine proves the bundled chart (Plebanski's polynomial coordinates) in tests/test_bundled_checks.py:
electrovacuum with Lambda, Petrov type D, Killing vectors, flat when m = n = e = g = Lambda = 0. Here, with
plain sympy and exact rationals, the chart is pulled back (metric and Jacobian) under the change of
coordinates and parameters of

  J. B. Griffiths and J. Podolsky, A new look at the Plebanski-Demianski family of solutions, International
  Journal of Modern Physics D 15 (2006) 335; also their Exact Space-Times in Einstein's General Relativity
  (2009), chapter on the Plebanski-Demianski family (forms recalled from memory; the pull-back below checks them)

and compared with the physical (t, r, theta, phi) form written out in this file; that form is then compared
with the bundled entries it contains: accelerating-kerr-newman (no NUT parameter, omega = a),
kerr-newman-de-sitter (no acceleration, no NUT, t and phi divided by Xi = 1 + Lambda a**2/3) and the
north-regular chart of kerr-taub-nut (no acceleration, charges or Lambda). Compared at rational points with
rational parameters, evaluated with 60 significant digits (cos and sin of a rational angle are not rational):
every component agrees to 1e-40 relative to the largest.
"""

from __future__ import annotations

import functools

import pytest
import sympy as sp

from gravicat.engine.runner import bundled_documents
from gravicat.format.metricfile import build_chart

DOCS = bundled_documents()
R = sp.Rational
t, r, th, ph = sp.symbols("t r theta phi", real=True)
GP_COORDS = (t, r, th, ph)
POINTS = [dict(t=R(1, 7), r=R(5, 2), theta=R(6, 5), phi=R(1, 3)),
          dict(t=R(-2, 3), r=R(13, 4), theta=R(2, 5), phi=R(7, 9))]


@functools.cache
def _chart(entry, chart):
    spec = build_chart(DOCS[entry], chart)
    return spec, {s.name: s for s in (*spec.coords, *spec.params)}


def _coefficients(M, l, a, e, g, alpha, Lam, w):
    """k, epsilon, n of Plebanski's polynomials from the physical parameters (Griffiths and Podolsky 2006)."""
    k = (1 + 2 * alpha * l * M / w - 3 * alpha**2 * l**2 * (e**2 + g**2) / w**2 - Lam * l**2) / (
        w**2 / (a**2 - l**2) + 3 * alpha**2 * l**2)
    c = alpha**2 * (w**2 * k + e**2 + g**2) / w**2 + Lam / 3
    eps = w**2 * k / (a**2 - l**2) + 4 * alpha * l * M / w - (a**2 + 3 * l**2) * c
    n = w**2 * k * l / (a**2 - l**2) - alpha * (a**2 - l**2) * M / w + (a**2 - l**2) * l * c
    return k, eps, n


def _physical(M, l, a, e, g, alpha, Lam, w):
    """The Griffiths-Podolsky metric in (t, r, theta, phi), l != a (the formulas divide by a**2 - l**2)."""
    k, eps, n = _coefficients(M, l, a, e, g, alpha, Lam, w)
    c0 = w**2 * k + e**2 + g**2
    a3 = 2 * alpha * a * M / w - 4 * alpha**2 * a * l * c0 / w**2 - 4 * Lam * a * l / 3
    a4 = -(alpha**2) * a**2 * c0 / w**2 - Lam * a**2 / 3
    Pt = 1 - a3 * sp.cos(th) - a4 * sp.cos(th) ** 2
    Qr = c0 - 2 * M * r + eps * r**2 - 2 * alpha * n * r**3 / w - (alpha**2 * k + Lam / 3) * r**4
    Om = 1 - alpha * (l + a * sp.cos(th)) * r / w
    rho2 = r**2 + (l + a * sp.cos(th)) ** 2
    chi = a * sp.sin(th) ** 2 + 2 * l * (1 - sp.cos(th))
    W = r**2 + (a + l) ** 2
    g_ = sp.zeros(4, 4)
    s2 = sp.sin(th) ** 2
    g_[0, 0] = (-Qr + Pt * s2 * a**2) / rho2
    g_[0, 3] = g_[3, 0] = (Qr * chi - Pt * s2 * a * W) / rho2
    g_[1, 1] = rho2 / Qr
    g_[2, 2] = rho2 / Pt
    g_[3, 3] = (-Qr * chi**2 + Pt * s2 * W**2) / rho2
    return g_ / Om**2


def _at(matrix, point):
    return matrix.xreplace({s: point[s.name] for s in GP_COORDS})


def _same(ours, theirs):
    a, b = ours.evalf(60), theirs.evalf(60)
    size = max(abs(x) for x in b)
    assert size > 1e-3
    assert max(abs(x - y) for x, y in zip(a, b, strict=True)) < 1e-40 * size, (a, b)


CASES = [  # M, l, a, e, g, alpha, Lambda, omega
    (R(1), R(1, 10), R(1, 4), R(1, 4), R(1, 5), R(1, 20), R(-1, 100), R(1, 3)),
    (R(3, 2), R(2, 7), R(1, 9), R(-1, 3), R(1, 8), R(1, 11), R(1, 50), R(5, 4)),
]


@pytest.mark.parametrize("params", CASES)
@pytest.mark.parametrize("point", POINTS)
def test_plebanski_chart_pulls_back_to_the_physical_form(params, point):
    M, l, a, e, g, alpha, Lam, w = params
    k, eps, n = _coefficients(*params)
    spec, names = _chart("plebanski-demianski", "plebanski")
    tau, q, p, sigma = spec.coords
    values = {"m": M, "n": n, "e": e, "g": g, "epsilon": eps, "k": k, "alpha": alpha, "omega": w, "Lambda": Lam}
    new = [t - (a + l) ** 2 * ph / a, r, (l + a * sp.cos(th)) / w, -w * ph / a]  # tau, q, p, sigma
    jac = sp.Matrix(4, 4, lambda i, j: sp.diff(new[i], GP_COORDS[j]))
    ours = spec.metric.xreplace({names[key]: v for key, v in values.items()}).xreplace(dict(zip((tau, q, p, sigma),
                                                                                              new, strict=True)))
    pulled = _at(jac.T * ours * jac, point)
    theirs = _at(_physical(*params), point)
    _same(pulled, theirs)


@pytest.mark.parametrize("point", POINTS)
def test_no_nut_parameter_is_the_accelerating_kerr_newman_entry(point):
    """l = 0, omega = a: Omega = 1 - alpha r cos(theta) and Griffiths and Podolsky's P, Q of the l = 0 case."""
    M, a, e, g, alpha, Lam = R(1), R(1, 4), R(1, 4), R(1, 5), R(1, 20), R(-1, 100)
    spec, names = _chart("accelerating-kerr-newman", "boyer-lindquist")
    theirs = spec.metric.xreplace({names["M"]: M, names["a"]: a, names["Q"]: e, names["g"]: g, names["A"]: alpha,
                                   names["Lambda"]: Lam})
    theirs = theirs.xreplace({names[c.name]: c for c in GP_COORDS})
    ours = _physical(M, R(0), a, e, g, alpha, Lam, a)
    _same(_at(ours, point), _at(theirs, point))


@pytest.mark.parametrize("Lam", [R(-1, 100), R(1, 200)])
def test_no_acceleration_and_no_nut_is_kerr_newman_de_sitter(Lam):
    """alpha = 0, l = 0, omega = a, g = 0: Carter's metric once t and phi are divided by Xi = 1 + Lambda a**2/3."""
    M, a, e = R(1), R(1, 2), R(1, 2)
    spec, names = _chart("kerr-newman-de-sitter", "boyer-lindquist")
    theirs = spec.metric.xreplace({names["M"]: M, names["a"]: a, names["Q"]: e, names["Lambda"]: Lam})
    theirs = theirs.xreplace({names[c.name]: c for c in GP_COORDS})
    xi = 1 + Lam * a**2 / 3
    scale = sp.diag(1 / xi, 1, 1, 1 / xi)  # Jacobian of t = t'/Xi, phi = phi'/Xi
    ours = scale * _physical(M, R(0), a, e, R(0), R(0), Lam, a) * scale
    for point in POINTS:
        _same(_at(ours, point), _at(theirs, point))


def test_no_acceleration_charge_or_lambda_is_kerr_taub_nut():
    """alpha = Lambda = e = g = 0: the north-regular chart of the Kerr-Taub-NUT entry (any omega)."""
    M, n, a = R(1), R(1, 2), R(1, 3)
    spec, names = _chart("kerr-taub-nut", "north-regular")
    theirs = spec.metric.xreplace({names["M"]: M, names["n"]: n, names["a"]: a})
    theirs = theirs.xreplace({names[c.name]: c for c in GP_COORDS})
    ours = _physical(M, n, a, R(0), R(0), R(0), R(0), R(7, 5))
    for point in POINTS:
        _same(_at(ours, point), _at(theirs, point))
