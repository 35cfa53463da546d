"""The sampler draws generic points inside the declared domain (issue 13, item 3).

A point is generic when no drawn value is 0, +-1, an integer, a simple fraction, a rational bound of
its range or equal to another drawn value, and no angle sits on an axis (u = tan(angle/2) = 0, so
sin = 0) or an equator (u = +-1). The property test draws random domains and parameter ranges; the
reference for "inside the domain" is sympy deciding each relation at the exact point (reference
library).
"""

from __future__ import annotations

from fractions import Fraction

import pytest
import sympy as sp
from conftest import DATA
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from gravicat.engine.geometry import Geometry
from gravicat.engine.runner import bundled_documents
from gravicat.engine.sampling import PRIMES, Sampler, generic_fraction, is_generic
from gravicat.format.metricfile import build_chart, load_file

SPECIAL = {Fraction(0), Fraction(1), Fraction(-1), Fraction(1, 2), Fraction(-1, 2), Fraction(2), Fraction(-2)}


def exact_point(sample):
    """symbol -> exact sympy value (angles as 2 q atan(u))."""
    out = {s: sp.Rational(v.numerator, v.denominator) for s, v in sample.values.items()}
    for s, (u, q) in sample.angles.items():
        out[s] = 2 * q * sp.atan(sp.Rational(u.numerator, u.denominator))
    return out


def holds(rel, point) -> bool:
    """sympy decides ``rel`` at the exact point (50 digits when it needs a numerical comparison)."""
    v = rel.subs(point)
    if v in (sp.true, sp.false):
        return bool(v)
    lhs, rhs = (v.lhs - v.rhs).evalf(50), 0
    return bool(type(v)(lhs, rhs))


def assert_generic(sampler, sample):
    values = []
    for s, x in sample.values.items():
        if s.is_integer:
            continue
        assert x not in SPECIAL, (s, x)
        assert is_generic(x, sampler.primes[s]), (s, x)
        values.append(x)
    for s, (u, _q) in sample.angles.items():
        assert u not in SPECIAL, (s, u)  # u = 0: sin = 0 (an axis); u = +-1: cos = 0 (an equator)
        assert is_generic(u, sampler.primes[s]), (s, u)
        values.append(u)
    assert len(set(values)) == len(values)  # no two values equal
    for key, x in sample.funcs.items():
        assert x not in SPECIAL and is_generic(x, sampler.primes[key])


# ---------------------------------------------------------------------------- the building block


@given(
    x=st.floats(-50, 50, allow_nan=False),
    width=st.floats(1e-9, 20),
    p=st.sampled_from(PRIMES[:30]),
)
def test_generic_fraction_is_strictly_inside_and_never_special(x, width, p):
    lo, hi = x - width / 2, x + width / 2
    q = generic_fraction(x, p, lo, hi)
    assert lo < q < hi
    assert is_generic(q, p) and q.denominator > 1 and q not in SPECIAL


# ---------------------------------------------------------------------------- random domains

bounds = st.fractions(min_value=-5, max_value=5, max_denominator=12)


@st.composite
def domains(draw):
    """Random parameter ranges and a domain with bounds that depend on the parameters."""
    a, b, r, th, x = sp.symbols("a b r theta x", real=True)
    M = sp.Symbol("M", positive=True)
    params, rels = [M, a, b], []
    rels.append(M > sp.Rational(draw(st.fractions(0, 2, max_denominator=8))))
    lo_a = draw(bounds)
    hi_a = lo_a + draw(st.fractions(Fraction(1, 50), 6, max_denominator=50))
    rels += [a >= sp.Rational(lo_a), a <= sp.Rational(hi_a)] if draw(st.booleans()) else [a > sp.Rational(lo_a)]
    rels.append(b < M * sp.Rational(draw(bounds)) + 1)
    # coordinates: r above a parameter-dependent bound (closed or open), x in a band, an angle with
    # an optional range (the Kerr case without a theta range is the unbounded one)
    c = sp.Rational(draw(st.fractions(0, 3, max_denominator=6)))
    rels.append((r >= c * M + sp.sqrt(M**2 + a**2)) if draw(st.booleans()) else (r > c * M))
    xlo = draw(bounds)
    rels += [x > sp.Rational(xlo), x < sp.Rational(xlo) + draw(st.integers(1, 4))]
    angle = draw(st.sampled_from(["none", "half", "full", "narrow"]))
    if angle == "half":
        rels += [th > 0, th < sp.pi]
    elif angle == "full":
        rels += [th > -sp.pi, th < sp.pi]
    elif angle == "narrow":
        rels += [th > sp.pi / 3, th < sp.pi / 3 + sp.Rational(1, 50)]
    q = draw(st.sampled_from([1, 1, 2]))
    return (r, th, x), params, rels, {th: q}


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(dom=domains(), seed=st.integers(0, 10**6))
def test_sampler_points_are_inside_the_domain_and_generic(dom, seed):
    coords, params, rels, angle_q = dom
    sampler = Sampler(coords, params, rels, angle_q, seed=seed)
    drawn = 0
    for _ in range(200):
        s = sampler.draw()
        if s is None:
            continue
        drawn += 1
        point = exact_point(s)
        for rel in rels:
            assert holds(rel, point), (rel, s.shown)
        assert_generic(sampler, s)
        if drawn == 5:
            break
    assert drawn, "no point drawn from a non-empty domain"


def test_unbounded_angle_covers_a_whole_period_and_avoids_the_axis():
    # Kerr's theta without a range (issue 13 item 3): the old sampler drew theta = 2*atan(0) = 0
    r, th = sp.symbols("r theta", real=True)
    M = sp.Symbol("M", positive=True)
    sampler = Sampler((r, th), (M,), (r > 2 * M,), {th: 1}, seed=0)
    thetas = [s.angles[th][0] for s in (sampler.draw() for _ in range(60)) if s is not None]
    assert len(thetas) > 40
    assert all(u != 0 for u in thetas)  # sin(theta) = 2u/(1 + u**2) != 0
    assert any(u > 0 for u in thetas) and any(u < 0 for u in thetas)


def test_integer_parameters_avoid_zero_and_one_when_the_range_allows():
    n = sp.Symbol("n", integer=True)
    x = sp.Symbol("x", real=True)
    sampler = Sampler((x,), (n,), (n >= -1, n <= 5), seed=1)
    seen = {s.values[n] for s in (sampler.draw() for _ in range(40)) if s is not None}
    assert seen and not seen & {-1, 0, 1} and all(-1 <= v <= 5 for v in seen)


# ---------------------------------------------------------------------------- every bundled chart

DOCS = bundled_documents()
CHARTS = [(e, c) for e, doc in sorted(DOCS.items()) for c in doc.chart_names]


@pytest.mark.parametrize("entry,chart", CHARTS, ids=[f"{e}:{c}" for e, c in CHARTS])
def test_bundled_sample_points_are_generic_and_inside(entry, chart):
    spec = build_chart(DOCS[entry], chart)
    geo = Geometry(spec, samples=4)
    pts = geo.sample_points()
    assert pts, f"{entry}:{chart}: no sample point"
    rels = tuple(spec.param_ranges) + tuple(spec.domain)
    for pd in pts:
        point = exact_point(pd.sample)
        for rel in rels:
            if rel is sp.true:
                continue
            assert holds(rel, point), (rel, pd.sample.shown)
        assert_generic(geo._sampler, pd.sample)


def test_kerr_without_a_theta_range_passes_signature_with_an_axis_note():
    # Kerr (R. P. Kerr, PRL 11 (1963) 237) in Boyer-Lindquist coordinates (Boyer & Lindquist, J. Math.
    # Phys. 8 (1967) 265) is Lorentzian off the axis; det g = -Sigma**2 sin(theta)**2 (sympy computes
    # it below), so sin(theta) = 0 is a set of measure zero where the chart is degenerate.
    from gravicat.plugins.signature import SignatureCheck

    spec = build_chart(load_file(DATA / "degenerate-axis.toml"), "boyer-lindquist")
    theta = spec.coords[2]
    det = sp.factor(sp.Matrix(spec.metric).det())
    assert sp.sin(theta) in {f.as_base_exp()[0] for f in sp.Mul.make_args(det)}, det
    geo = Geometry(spec)
    [res] = SignatureCheck().check(geo)
    assert res.status.value == "pass", res.detail
    assert "Lorentzian (-,+,+,+)" in res.detail and "sin(theta) = 0" in res.detail
    assert all(u != 0 for u, _q in (pd.sample.angles[spec.coords[2]] for pd in geo.sample_points()))
