"""Null geodesics and the camera against published results (source beside each check)."""

from __future__ import annotations

import math
import shutil
import subprocess

import numpy as np
import pytest

from gravicat.errors import InputError
from gravicat.export.hamiltonian import c99_source, hamiltonian_system
from gravicat.format.bundled import bundled_path, read_bundled
from gravicat.format.metricfile import build_chart
from gravicat.physics.camera import build_camera
from gravicat.physics.equatorial import EquatorialChart
from gravicat.physics.geodesics import ENDS, Stops, integrate


def _system(entry, chart, **values):
    doc = read_bundled(bundled_path(entry))
    spec = build_chart(doc, chart)
    vals = {str(k): v for k, v in spec.defaults.items()}
    vals.update(values)
    return doc, spec, hamiltonian_system(spec, vals, skip_domain=("theta",)), vals


def test_photon_orbit_followed_several_orbits_then_departs():
    # Circular photon orbit of Schwarzschild at r = 3M with b = L/E = 3 sqrt(3) M (Hartle, Gravity, 2003,
    # section 9.3); it is unstable (a deviation grows about e^(2 pi) per orbit: common practice, no source), so a
    # start 1e-12 M off the orbit departs after a few orbits.
    _, _, system, _ = _system("schwarzschild", "schwarzschild", M=1)
    x0 = np.array([[0.0, 3.0 + 1e-12, math.pi / 2, 0.0]])
    p0 = np.array([[-1.0, 0.0, 0.0, 3 * math.sqrt(3)]])
    track = []
    rays = integrate(system, x0, p0, Stops(radial=1, inner=2.05, outer=6.0), rtol=1e-13, atol=1e-14,
                     max_steps=4000, max_cpu=60, observer=lambda i, y: track.append((y[1, 0], y[3, 0])))
    r, phi = np.array(track).T
    departed = np.argmax(np.abs(r - 3) > 1e-3)
    assert np.abs(r - 3).max() > 1e-3  # it does depart
    assert phi[departed] > 3 * 2 * math.pi  # after several orbits on r = 3M
    assert np.all(np.abs(r[phi < 2 * 2 * math.pi] - 3) < 1e-6)  # two full orbits within 1e-6 M
    assert ENDS[rays.end[0]] in ("horizon", "escape")
    assert rays.drift[0] < 1e-10  # Hamiltonian drift (H = 0 for light) over the whole run


def test_weak_field_deflection():
    # Light bending 4M/b (Einstein 1915; e.g. Weinberg, Gravitation and Cosmology, 1972, eq. 8.5.8), next
    # order 15 pi M^2/(4 b^2) (value recalled from memory); b = 1e4 M, start and end at r = 1e6 M.
    _, _, system, _ = _system("schwarzschild", "schwarzschild", M=1)
    b, R = 1e4, 1e6
    pr = -math.sqrt(1 / (1 - 2 / R) ** 2 - b * b / (R * R * (1 - 2 / R)))
    x0 = np.array([[0.0, R, math.pi / 2, 0.0]])
    p0 = np.array([[-1.0, pr, 0.0, b]])
    rays = integrate(system, x0, p0, Stops(radial=1, inner=3.0, outer=R), rtol=1e-12, atol=1e-12,
                     max_steps=5000, max_cpu=60)
    assert ENDS[rays.end[0]] == "escape"
    r_end = rays.x[0, 1]
    swept = rays.x[0, 3]
    straight = math.pi - math.asin(b / R) - math.asin(b / r_end)
    deflection = swept - straight
    expected = 4 / b + 15 * math.pi / (4 * b * b)
    assert deflection == pytest.approx(expected, rel=2e-3)


def _shadow_edge(system, camera, stops, angles):
    x0, p0 = camera.rays(np.tan(angles), np.zeros_like(angles))
    rays = integrate(system, x0, p0, stops, rtol=1e-10, atol=1e-12, max_steps=4000, max_cpu=60)
    dark = rays.end == ENDS.index("horizon")
    assert dark[0] and not dark[-1]
    k = np.argmin(dark)
    return (angles[k - 1] + angles[k]) / 2, angles[1] - angles[0]


@pytest.mark.parametrize("r_obs", [10.0, 50.0])
def test_schwarzschild_shadow_radius(r_obs):
    # Synge (1966), Mon. Not. R. Astron. Soc. 131, 463: sin(alpha) = 3 sqrt(3) M sqrt(1 - 2M/r_O)/r_O for a
    # static observer at r_O.
    doc, spec, system, vals = _system("schwarzschild", "schwarzschild", M=1)
    model = EquatorialChart(spec, doc.chart_names)
    camera = build_camera(system, model, {"r": r_obs})
    assert camera.kind == "static"
    expected = math.asin(3 * math.sqrt(3) * math.sqrt(1 - 2 / r_obs) / r_obs)
    angles = np.linspace(0.97 * expected, 1.03 * expected, 121)
    found, step = _shadow_edge(system, camera, Stops(radial=1, inner=2.02, outer=2 * r_obs + 20), angles)
    assert abs(found - expected) <= step


def test_zamo_inside_ergoregion_and_refusals():
    # Kerr a = 0.9 M: on the equator the ergosurface is r = 2M (g_tt = 0), so at r = 1.8M no static observer
    # exists and the camera uses the zero-angular-momentum observer (Bardeen, Press and Teukolsky 1972).
    doc, spec, system, _ = _system("kerr", "boyer-lindquist")
    model = EquatorialChart(spec, doc.chart_names)
    assert build_camera(system, model, {"r": 1.8}).kind == "zamo"
    assert build_camera(system, model, {"r": 30.0}).kind == "static"
    tetrad, g = build_camera(system, model, {"r": 1.8, "theta": 1.0}).tetrad, system.metric(
        np.array([[0.0], [1.8], [1.0], [0.0]]))[:, :, 0]
    assert np.allclose(tetrad @ g @ tetrad.T, np.diag([-1.0, 1, 1, 1]), atol=1e-12)
    with pytest.raises(InputError, match="outside the chart's domain"):
        build_camera(system, model, {"r": 1.0})
    with pytest.raises(InputError, match="strictly between 0 and pi"):
        build_camera(system, model, {"r": 10.0, "theta": 0.0})


@pytest.mark.parametrize("inclination", [math.pi / 2, math.pi / 3])
def test_kerr_shadow_outline_against_bardeen(inclination):
    # Bardeen (1973), in Black Holes (Les Houches), eqs. for the critical impact parameters of spherical photon
    # orbits: xi = (r^2 (3M - r) - a^2 (r + M))/(a (r - M)), eta = r^3 (4 a^2 M - r (r - 3M)^2)/(a^2 (r - M)^2);
    # an observer far away at inclination theta_O sees the edge at alpha = -xi/sin(theta_O),
    # beta = +-sqrt(eta + a^2 cos^2(theta_O) - xi^2 cot^2(theta_O)) (units of M, divided
    # by the observer's r_O = 1000 M for angles; the finite distance changes them by O(M/r_O) = 1e-3 relative).
    # 40x40 pixels, field of view 0.024 rad (about 5 s); the 256x256 run is the benchmark.
    from _shadow import bardeen_curve

    from gravicat.physics.camera import shadow_outline, trace_image

    doc, spec, system, vals = _system("kerr", "boyer-lindquist")
    M, a, r_obs = 1.0, 0.9, 1000.0
    model = EquatorialChart(spec, doc.chart_names)
    camera = build_camera(system, model, {"r": r_obs, "theta": inclination})
    rh = M + math.sqrt(M * M - a * a)
    image = trace_image(system, camera, Stops(radial=1, inner=1.01 * rh, outer=2 * r_obs, polar=2), size=40,
                        fov=0.024, max_steps=4000, max_cpu=120)
    outline = np.array(shadow_outline(image))
    curve = bardeen_curve(M, a, inclination, r_obs)
    dist = np.min(np.hypot(outline[:, None, 0] - curve[None, :, 0], outline[:, None, 1] - curve[None, :, 1]), axis=1)
    assert len(outline) > 40
    assert dist.max() <= image.pixel
    assert image.rays.drift.max() < 1e-5


def test_c99_rhs_agrees_with_numpy(tmp_path):
    # The C99 body and the NumPy callables are printed from the same expressions; compiled, they agree.
    cc = shutil.which("cc") or shutil.which("gcc")
    if cc is None:
        pytest.skip("no C compiler")
    _, _, system, _ = _system("kerr", "boyer-lindquist")
    src = tmp_path / "rhs.c"
    src.write_text(c99_source(system) + """
#include <stdio.h>
int main(void) {
    double y[8] = {0.0, 7.3, 1.1, 0.4, -1.0, 0.2, 1.5, 2.5}, dy[8], h;
    gravicat_hamiltonian_rhs(1, y, dy, &h);
    for (int i = 0; i < 8; ++i) printf("%.17g\\n", dy[i]);
    printf("%.17g\\n", h);
    return 0;
}
""")
    exe = tmp_path / "rhs"
    subprocess.run([cc, "-std=c99", "-O1", str(src), "-o", str(exe), "-lm"], check=True, timeout=60)
    out = np.array([float(v) for v in subprocess.run([str(exe)], capture_output=True, text=True,
                                                      timeout=10).stdout.split()])
    x = np.array([[0.0], [7.3], [1.1], [0.4]])
    p = np.array([[-1.0], [0.2], [1.5], [2.5]])
    dx, dp = system.rhs(x, p)
    ref = np.concatenate([dx[:, 0], dp[:, 0], [system.hamiltonian(x, p)[0]]])
    assert np.allclose(out, ref, rtol=1e-12, atol=1e-14)


def test_hamiltonian_refuses_missing_values_and_functions():
    doc = read_bundled(bundled_path("kerr"))
    spec = build_chart(doc, "boyer-lindquist")
    with pytest.raises(InputError, match="no value given"):
        hamiltonian_system(spec, {"M": 1})


def _image_cli(tmp_path, *args):
    from typer.testing import CliRunner

    from gravicat.cli import app

    return CliRunner().invoke(app, ["--db", f"sqlite:///{tmp_path}/cat.sqlite", "image", *args])


def test_image_command_writes_png_npz_and_json(tmp_path):
    import json

    kerr = str(bundled_path("kerr"))
    out = tmp_path / "k.png"
    result = _image_cli(tmp_path, kerr, "--observer", "r=30,theta=1.3", "--size", "16", "--scene", "disk",
                        "--fov", "40deg", "-o", str(out), "--json")
    assert result.exit_code == 0, result.output
    report = json.loads(result.output)
    assert set(report) >= {"seconds", "rays", "drift", "pixel", "shadow"}
    assert report["rays"] == 256 and report["pixel"] == pytest.approx(math.radians(40) / 16)
    assert report["ends"]["disk"] > 0 and report["drift"]["max"] < 1e-5
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    data = np.load(tmp_path / "k.npz")
    on = data["end"] == "disk"
    # every disk pixel has a finite, positive redshift factor; some are blueshifted by the approaching side
    # (g > 1) and some strongly redshifted near the ISCO (common practice, no source)
    z = data["redshift"][on]
    assert np.all(np.isfinite(z) & (z > 0.02) & (z < 3.0)) and z.max() > 1.0 and z.min() < 0.7


@pytest.mark.parametrize("args, message", [
    (["--observer", "r=1"], "outside the chart's domain"),
    (["--observer", "r=30", "--fov", "wide"], "is not an angle"),
    (["--observer", "r=30", "--scene", "movie"], "is not one of sky, disk"),
    (["--observer", "x=3"], "x"),
])
def test_image_command_refusals(tmp_path, args, message):
    result = _image_cli(tmp_path, str(bundled_path("kerr")), *args, "-o", str(tmp_path / "k.png"))
    assert result.exit_code == 2
    assert message in result.output and "Traceback" not in result.output


def test_image_command_refuses_entries_without_a_camera(tmp_path):
    result = _image_cli(tmp_path, str(bundled_path("flrw-flat")), "--observer", "r=3", "-o", str(tmp_path / "f.png"))
    assert result.exit_code == 2 and "arbitrary functions" in result.output
    result = _image_cli(tmp_path, str(bundled_path("btz")), "--observer", "r=3", "-o", str(tmp_path / "b.png"))
    assert result.exit_code == 2 and result.output.startswith("Error: ") and "Traceback" not in result.output
