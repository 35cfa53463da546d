"""Self-consistency of the observer physics: `orbits` against `probe` and against its own definitions.

For every bundled entry with a stationary, axisymmetric chart that `orbits` accepts, at parameters drawn
at random (fixed seed) inside the declared ranges:

* a circular orbit from `orbits` agrees with `probe` (a different code path: the exported Python module,
  its Christoffel symbols and a DOP853 integration over 0.45 revolutions) in Omega, E, L and the
  coordinate period;
* the ISCO is an extremum of L(r) (dL/dr = 0, computed here by numerical differentiation, not by the
  chain rule `orbits` uses) and of E(r);
* the photon orbit is a double root of the photon potential P(r) = g_phiphi + 2 b g_tphi + b**2 g_tt
  at the impact parameter b = L/E of the orbit (null circular orbit: the radial null geodesic equation
  and its derivative vanish, the textbook effective-potential criterion, e.g. S. Chandrasekhar, The
  Mathematical Theory of Black Holes, 1983, section 63; stated from memory);
* every horizon bounding the region is where g^rr vanishes (the exported inverse metric) or, in a chart
  regular there, where the Killing block degenerates.

Tolerances are stated beside each assertion; they reflect the integrator tolerance (1e-12) and the
40-digit root refinement.
"""

from __future__ import annotations

import math
import random
from fractions import Fraction
from functools import cache

import mpmath
import numpy as np
import pytest

from gravicat.errors import InputError
from gravicat.format.metricfile import build_chart
from gravicat.physics import orbits
from gravicat.physics.probe import exported_module, probe
from gravicat.plugins.python_export import PythonExporter
from gravicat.store import revisions as store

DOCS = {d.id: d for d in store.iter_bundled_documents()}
EXPORTER = PythonExporter()
SEED = 20261205
# the black-hole entries every run must cover (a refusal here is a regression, not a skip)
MUST_COVER = {"schwarzschild", "kerr", "kerr-newman", "reissner-nordstrom", "schwarzschild-de-sitter",
              "kerr-de-sitter", "reissner-nordstrom-de-sitter", "schwarzschild-anti-de-sitter"}
# Linet-Tian's metric grows like a power of rho with a parameter exponent: at the radii where this test draws
# its orbits the components are ~1e33 and the orbit nearly null, beyond what a float integration of the
# exported metric can follow (left out here; a known limit of the float probe, noted for a later issue).
FLOAT_UNFOLLOWABLE = {"linet-tian"}


def _stationary_charts():
    out = []
    for doc in DOCS.values():
        if doc.id in FLOAT_UNFOLLOWABLE:
            continue
        for chart in doc.chart_names:
            spec = build_chart(doc, chart)
            if spec.functions or any(spec.metric.has(spec.coords[0]) for _ in [0]):
                continue
            try:  # refusals (not stationary, not axisymmetric, no reflection symmetry) are tested elsewhere
                orbits.EquatorialChart(spec, doc.chart_names).bind(orbits.resolve_parameters(doc, spec, ()))
            except InputError:
                continue
            out.append((doc.id, chart))
            break  # the first chart orbits accepts
    return sorted(out)


CASES = _stationary_charts()


def _draw(doc, spec, rng):
    """Parameters NAME=VALUE (short decimals, exact) near the defaults, accepted by the declared ranges."""
    for _ in range(40):
        texts = []
        for p in spec.params:
            default = float(spec.defaults[p]) if p in spec.defaults and not spec.defaults[p].free_symbols else 1.0
            value = default * (1 + rng.uniform(-0.3, 0.3)) if default != 0 else rng.uniform(-0.05, 0.05)
            texts.append(f"{p}={Fraction(round(value, 6)).limit_denominator(10**6)}")
        try:
            return texts, orbits.resolve_parameters(doc, spec, texts)
        except InputError:
            continue
    texts = []
    return texts, orbits.resolve_parameters(doc, spec, texts)


@cache
def _model(entry, chart):
    doc = DOCS[entry]
    spec = build_chart(doc, chart)
    rng = random.Random(f"{SEED}:{entry}")
    texts, params = _draw(doc, spec, rng)
    return doc, spec, texts, orbits.EquatorialChart(spec, doc.chart_names).bind(params)


def _circular_radius(m, d):
    """A radius with a timelike circular geodesic in the region: stable if there is one, else any."""
    marks = m.landmarks
    lo, hi = m.inner_edge, m.outer_edge
    if marks["isco"][d] is not None and marks["isco"][d] > lo:
        top = min(marks["osco"][d] or (m.static_radius if m.static_radius else 3 * marks["isco"][d]), hi)
        return math.sqrt(marks["isco"][d] * top) if top > marks["isco"][d] else marks["isco"][d] * 1.3
    base = lo if lo > 0 else m.scale
    top = hi if m.cosmological_horizon is not None or m.domain_bounds[1] is not None else base * 50
    for x in np.geomspace(base * 1.05, top * 0.95, 60):
        if m.circular(float(x), d)["exists"]:
            return float(x)
    return None


def test_the_black_hole_entries_are_covered():
    assert MUST_COVER <= {entry for entry, _ in CASES}, CASES


@pytest.mark.parametrize("entry, chart", CASES)
def test_circular_orbits_agree_with_probe_integrations(entry, chart):
    doc, spec, texts, m = _model(entry, chart)
    names = m.chart.coordinate_names
    checked = 0
    for d in orbits.DIRECTIONS:
        r = _circular_radius(m, d)
        if r is None:
            continue
        c = m.circular(r, d)
        assert c["exists"], c
        # the orbit itself is a geodesic of the full metric: residuals at rounding level (1e-9 allows for
        # the conditioning of the float metric near a horizon)
        assert c["norm_residual"] < 1e-9 and c["geodesic_residual"] < 1e-9, c
        if c["Omega"] == 0 or (c["Omega"] > 0) != (d == "prograde"):
            # the probe names directions by the sign of Omega (orbits by the frame dragging); Omega = 0 is a
            # static observer in free fall (flat space, Goedel's dust, the static radius), not a direction
            continue
        # start at azimuth pi and integrate 0.45 revolutions: stays inside a chart with 0 < phi < 2 pi
        start = f"{names['radial']}={r!r},{names['azimuthal']}=pi" + (f",{names['polar']}=pi/2"
                                                                          if names["polar"] else "")
        try:
            out = probe(doc, EXPORTER, chart=chart, params=",".join(texts) or None, start=start, orbit="circular",
                        direction=d, orbits=0.45, azimuth=names["azimuthal"])
        except InputError as exc:
            # Hopf-type charts of five dimensions (0 < theta < pi/2) have their equator theta = pi/2 on the edge
            # of the chart's domain, where the probe does not start; orbits evaluates the limit there
            if entry in MUST_COVER or "outside the domain" not in str(exc) or "theta < pi/2" not in str(exc):
                raise
            continue
        assert out["termination"] == "completed", out["detail"]
        # Omega from the probe's own root of the geodesic equation: rel 1e-9 (two float evaluations of the
        # metric derivatives, conditioning of the quadratic)
        assert out["circular"]["Omega"] == pytest.approx(c["Omega"], rel=1e-9)
        # the conserved momenta at the start, from the exported metric: rel 1e-9
        assert out["energy"] == pytest.approx(c["energy"], rel=1e-9)
        assert out["angular_momentum"] == pytest.approx(c["angular_momentum"], rel=1e-9)
        # Omega measured over the integrated arc (integrator tolerance 1e-12): rel 1e-8
        assert out["circular"]["Omega_measured"] == pytest.approx(c["Omega"], rel=1e-8)
        # the coordinate period: the time elapsed over the integrated angle, against 2 pi/Omega
        elapsed = out["end"][names["time"]] - out["start"][names["time"]]
        angle = out["end"][names["azimuthal"]] - out["start"][names["azimuthal"]]
        assert 2 * math.pi * elapsed / abs(angle) == pytest.approx(2 * math.pi / abs(c["Omega"]), rel=1e-8)
        # the orbit stays circular over the arc: rel 1e-7 in r
        assert out["drift"]["coordinates"][names["radial"]] < 1e-7
        checked += 1
    if entry in MUST_COVER:
        assert checked >= 1, f"{entry}: no circular orbit compared"


def _L(m, d):
    return lambda x: m.orbit_mp(x, d)["L"]


def _E(m, d):
    return lambda x: m.orbit_mp(x, d)["energy"]


@pytest.mark.parametrize("entry, chart", CASES)
def test_isco_is_an_extremum_of_L_and_E(entry, chart):
    _doc, _spec, _texts, m = _model(entry, chart)
    for d in orbits.DIRECTIONS:
        for key in ("isco", "osco"):
            x = m.landmarks[key][d]
            if x is None or x <= m.inner_edge * (1 + 1e-9):
                continue  # absent, or the degenerate limit on the horizon (tested in test_orbits.py)
            with mpmath.workdps(40):
                for fn in (_L(m, d), _E(m, d)):
                    slope = mpmath.diff(fn, mpmath.mpf(x))
                    scale = abs(fn(mpmath.mpf(x))) / x
                    # the root is refined to 40 digits and returned as a float: |dF/dr| ~ F'' * 1e-16 * x
                    assert abs(slope) < 1e-10 * scale, (entry, d, key, slope)


@pytest.mark.parametrize("entry, chart", CASES)
def test_photon_orbit_is_a_double_root_of_the_photon_potential(entry, chart):
    _doc, _spec, _texts, m = _model(entry, chart)
    for d in orbits.DIRECTIONS:
        x = m.landmarks["photon_orbits"][d]
        if x is None or x <= m.inner_edge * (1 + 1e-9):
            continue
        with mpmath.workdps(40):
            s = m.series_mp(x)
            A, B, C = s[0], s[3], s[6]
            omega = m.orbit_mp(x, d)["Omega"]
            b = (B + C * omega) / -(A + B * omega)  # impact parameter L/E of the null orbit

            def potential(y, b=b):
                t = m.series_mp(y)
                return t[6] + 2 * b * t[3] + b * b * t[0]

            size = abs(C) + abs(b * b * A)
            # a double root: the value and the slope vanish (float radius: 1e-12 relative)
            assert abs(potential(mpmath.mpf(x))) < 1e-12 * size, (entry, d)
            assert abs(mpmath.diff(potential, mpmath.mpf(x))) < 1e-10 * size / x, (entry, d)


@pytest.mark.parametrize("entry, chart", CASES)
def test_horizons_are_where_g_rr_or_the_killing_norm_vanishes(entry, chart):
    doc, spec, _texts, m = _model(entry, chart)
    module = exported_module(doc, EXPORTER, {"chart": chart, "revision": doc.hash, "checks": []})
    p = tuple(float(m.params.exact[name]) for name in module.PARAMETERS)
    names = [str(c) for c in spec.coords]
    ir = names.index(str(m.chart.radial))
    for q in m.horizons.roots:
        x = np.zeros(len(names))
        x[ir] = q.radius
        if m.chart.polar is not None:
            x[names.index(str(m.chart.polar))] = math.pi / 2
        far = x.copy()
        far[ir] = 2 * q.radius
        with np.errstate(all="ignore"):
            grr, grr_far = module.inverse_metric(x, p)[ir, ir], module.inverse_metric(far, p)[ir, ir]
        killing = float(m.killing_norm_np([q.radius])[0])
        killing_far = float(m.killing_norm_np([2 * q.radius])[0])
        # g^rr = 0 on the horizon (to 1e-9 of its value at twice the radius: the radius is a float), or, in a
        # chart regular across it, the Killing block is degenerate there
        on_grr = math.isfinite(grr) and abs(grr) <= 1e-9 * max(abs(grr_far), 1.0)
        on_killing = abs(killing) <= 1e-9 * max(abs(killing_far), 1.0)
        assert on_grr or on_killing, (entry, q.radius, grr, killing)
