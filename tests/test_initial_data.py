"""Initial-data entries (kind = "initial-data"): parsing, the constraints verifier, the bundled
Brill-Lindquist and Misner data, and the initial-data-c / initial-data-numpy exporters (issue 16)."""

from __future__ import annotations

import ast
import importlib.util
import json
import math
import shutil
import subprocess

import numpy as np
import pytest
import sympy as sp

from gravicat.format.bundled import initial_data_files
from gravicat.format.metricfile import build_chart, load_file

FILES = {p.stem: p for p in initial_data_files()}
BL, MISNER = FILES["brill-lindquist"], FILES["misner-wormhole"]
SPACETIMES = BL.parent.parent / "spacetimes"
GCC = shutil.which("gcc")

BL_TEXT = BL.read_text()

# The Painleve-Gullstrand slice of Schwarzschild as initial data: flat spatial metric, lapse 1,
# shift beta^r = sqrt(2M/r), K_rr = -sqrt(M/(2 r^3)), K_thth = sqrt(2 M r) (and sin^2 theta times it)
# (K. Martel and E. Poisson, Regular coordinate systems for Schwarzschild and other spherical
# spacetimes, Am. J. Phys. 69 (2001) 476 - recalled from memory; the signs are those of the bundled
# painleve-gullstrand chart under the convention of physics/split.py, checked below against the split).
PG = """
kind = "initial-data"
id = "pg-slice"
title = "Painleve-Gullstrand slice"
field-equations = "vacuum"
[parameters.M]
assume = ["positive"]
default = "1"
[charts.pg]
coordinates = ["r", "theta", "phi"]
domain = ["r > 0", "0 < theta < pi"]
conformal-factor = "1"
flat-metric = "spherical"
lapse = "1"
shift = { r = "sqrt(2*M/r)" }
extrinsic-curvature = [["KRR", 0, 0], [0, "sqrt(2*M*r)", 0], [0, 0, "sqrt(2*M*r)*sin(theta)**2"]]
"""


def _write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text)
    return path


def _one_line(result) -> str:
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1, result.stderr
    return lines[0]


# --------------------------------------------------------------------------- the CLI, end to end


def test_bundled_entries_add_list_show_verify_export(empty_catalogue, tmp_path):
    cli = empty_catalogue
    r = cli("add", str(BL), str(MISNER))
    assert r.exit_code == 0, r.output
    r = cli("list", "--json")
    assert r.exit_code == 0, r.output
    assert {"brill-lindquist", "misner-wormhole"} <= {e["id"] for e in json.loads(r.stdout)}
    for command in (("show", "misner-wormhole"), ("history", "brill-lindquist"), ("find", "wormhole")):
        r = cli(*command)
        assert r.exit_code == 0, (command, r.output)
    r = cli("verify", "brill-lindquist", "misner-wormhole", "--json")
    assert r.exit_code == 0, r.output
    r = cli("show", "misner-wormhole", "--json")
    checks = json.loads(r.stdout)["checks"]
    proved = {(c["chart"], c["check"]) for c in checks if c["status"] == "pass"}
    # every chart: both constraints proved; every spacetime-only verifier skipped, none failed
    for chart in ("images-1", "images-2"):
        assert {(chart, "constraints.hamiltonian"), (chart, "constraints.momentum")} <= proved
    assert all(c["status"] in ("pass", "skipped") for c in checks), checks
    assert any("not a spacetime" in c["detail"] for c in checks if c["status"] == "skipped")
    out = tmp_path / "bl.py"
    r = cli("export", "brill-lindquist", "--to", "initial-data-numpy", "-o", str(out))
    assert r.exit_code == 0, r.output
    assert "status:    pass" in out.read_text()
    r = cli("site", str(tmp_path / "site"))
    assert r.exit_code == 0, r.output
    page = (tmp_path / "site" / "entries" / "brill-lindquist.html").read_text()
    assert "not a spacetime" in page and (tmp_path / "site" / "downloads" / "brill-lindquist.initial-data-c.h").exists()
    # a spacetime-only target refuses initial data with one line
    r = cli("export", "brill-lindquist", "--to", "c")
    assert r.exit_code == 2 and "not a spacetime" in _one_line(r)


def test_unverified_initial_data_is_not_exported(empty_catalogue):
    cli = empty_catalogue
    assert cli("add", str(BL)).exit_code == 0
    r = cli("export", "brill-lindquist", "--to", "initial-data-c")
    assert r.exit_code == 2 and "gravicat verify" in _one_line(r)


def test_spacetime_charts_skip_the_constraints_verifier(cli):
    r = cli("check", str(SPACETIMES / "minkowski.toml"), "--only", "constraints", "--json")
    assert r.exit_code == 0, r.output
    checks = [c for chart in json.loads(r.stdout)["charts"] for c in chart["checks"]]
    assert checks and all(c["status"] == "skipped" for c in checks)


# --------------------------------------------------------------------------- the constraints


def test_wrong_conformal_power_fails_the_hamiltonian_constraint(cli, tmp_path):
    # gamma = psi^2 delta instead of psi^4 delta: R = -8 psi^-5 lap(psi) holds only for the fourth power
    # (Brill and Lindquist 1963, eq. 2; York, Kinematics and dynamics of general relativity, 1979)
    text = BL_TEXT.replace('id = "brill-lindquist"', 'id = "bl-wrong-power"')
    text = text.replace('conformal-factor = "1 + m1/(2*r1) + m2/(2*r2)"\nflat-metric = "cartesian"',
                        'spatial-metric = [["psi**2", 0, 0], [0, "psi**2", 0], [0, 0, "psi**2"]]')
    text = text.replace('r2 = "sqrt(x**2 + y**2 + (z + d/2)**2)" }',
                        'r2 = "sqrt(x**2 + y**2 + (z + d/2)**2)", psi = "1 + m1/(2*r1) + m2/(2*r2)" }')
    assert "psi**2" in text
    r = cli("check", str(_write(tmp_path, "bl-wrong.toml", text)), "--only", "constraints", "--json")
    assert r.exit_code == 1, r.output
    checks = {c["check"]: c for c in json.loads(r.stdout)["charts"][0]["checks"]}
    ham = checks["constraints.hamiltonian"]
    assert ham["status"] == "fail" and ham["counterexample"]["component"] == "hamiltonian"
    assert set(ham["counterexample"]["point"]) == {"m1", "m2", "d", "x", "y", "z"}


def test_painleve_gullstrand_slice_and_a_slipped_sign(cli, tmp_path):
    from gravicat.physics.initial_data import initial_slice
    from gravicat.physics.split import split_chart

    good = load_file(_write(tmp_path, "pg.toml", PG.replace("KRR", "-sqrt(M/(2*r**3))")))
    mine = initial_slice(build_chart(good))
    split = split_chart(build_chart(load_file(SPACETIMES / "schwarzschild.toml"), "painleve-gullstrand"))
    at = {"M": sp.Rational(13, 10), "r": sp.Rational(27, 10), "theta": sp.Rational(9, 10), "phi": sp.Rational(1, 3)}

    def value(e):  # both at one point of the domain (r > 0, where the two spellings of the roots agree)
        return sp.N(sp.sympify(e).xreplace({s: at[str(s)] for s in sp.sympify(e).free_symbols if str(s) in at}), 30)

    for i in range(3):  # the file's data are the split of the bundled chart (one convention)
        assert abs(value(mine.shift[i]) - value(split.shift[i])) < 1e-25
        for j in range(3):
            assert abs(value(mine.extrinsic[i][j]) - value(split.extrinsic[i][j])) < 1e-25
    r = cli("check", str(tmp_path / "pg.toml"), "--only", "constraints")
    assert r.exit_code == 0, r.output
    bad = _write(tmp_path, "pg-bad.toml", PG.replace("KRR", "sqrt(M/(2*r**3))"))
    r = cli("check", str(bad), "--only", "constraints", "--json")
    assert r.exit_code == 1, r.output
    ham = {c["check"]: c for c in json.loads(r.stdout)["charts"][0]["checks"]}["constraints.hamiltonian"]
    assert ham["status"] == "fail" and {"M", "r", "theta", "phi"} <= set(ham["counterexample"]["point"])


SPHERE = """
kind = "initial-data"
id = "round-three-sphere"
title = "A round three-sphere at a moment of time symmetry"
field-equations = "CLAIM"
[parameters.a]
assume = ["positive"]
default = "2"
[charts.hyperspherical]
coordinates = ["chi", "theta", "phi"]
domain = ["0 < chi < pi", "0 < theta < pi"]
spatial-metric = [["a**2", 0, 0], [0, "a**2*sin(chi)**2", 0], [0, 0, "a**2*sin(chi)**2*sin(theta)**2"]]
time-symmetric = true
EXTRA
"""


@pytest.mark.parametrize("claim, extra, status", [
    # de Sitter's waist t = 0 in global coordinates, ds^2 = -dt^2 + a^2 cosh^2(t/a) dOmega_3^2: K_ij = 0 and
    # R = 6/a^2 = 2 Lambda with Lambda = 3/a^2 (Hawking and Ellis, The Large Scale Structure of Space-Time,
    # 1973, section 5.2 - recalled from memory)
    ("lambda-vacuum", 'cosmological-constant = "3/a**2"', 0),
    ("lambda-vacuum", 'cosmological-constant = "2/a**2"', 1),
    # closed dust universe at its maximum expansion (H = 0): 8 pi rho / 3 = 1/a^2 (Friedmann's equation,
    # e.g. Weinberg, Gravitation and Cosmology, 1972, eq. 15.1.20 - recalled from memory)
    ("matter", 'matter = { density = "3/(8*pi*a**2)" }', 0),
    ("matter", 'matter = { density = "3/(8*pi*a**2)", momentum = { chi = "1/a" } }', 1),
])
def test_lambda_and_matter_claims(cli, tmp_path, claim, extra, status):
    path = _write(tmp_path, "sphere.toml", SPHERE.replace("CLAIM", claim).replace("EXTRA", extra))
    r = cli("check", str(path), "--only", "constraints", "--json")
    assert r.exit_code == status, r.output
    checks = {c["check"]: c["status"] for c in json.loads(r.stdout)["charts"][0]["checks"]}
    if status == 0:
        assert checks == {"constraints.hamiltonian": "pass", "constraints.momentum": "pass"}
    else:
        assert "fail" in checks.values()


def test_adm_masses_of_the_bundled_data():
    from gravicat.physics.adm import adm_mass
    from gravicat.physics.initial_data import initial_slice

    # Brill and Lindquist (1963): the ADM mass of the two-puncture slice is m1 + m2
    sl = initial_slice(build_chart(load_file(BL)))
    assert adm_mass(sl, {"m1": 0.5, "m2": 0.75, "d": 4}) == pytest.approx(1.25, rel=1e-4)
    # Misner (1960): M = 4 sum_n 1/sinh(n mu0) for the scale a = 1 (recalled from memory), here summed to
    # the truncation N of each chart, whose psi has the monopole 2 sum_n 2/sinh(n mu0)
    doc = load_file(MISNER)
    for chart, n_images in (("images-1", 1), ("images-2", 2)):
        sl = initial_slice(build_chart(doc, chart))
        expected = 4 * sum(1 / math.sinh(n * 1.5) for n in range(1, n_images + 1))
        assert adm_mass(sl, {"mu0": 1.5}) == pytest.approx(expected, rel=1e-4)


# --------------------------------------------------------------------------- malformed files


@pytest.mark.parametrize("edit, field", [
    (('kind = "initial-data"', 'kind = "slice"'), "kind"),
    (("time-symmetric = true", ""), "charts.cartesian"),
    (('flat-metric = "cartesian"', 'flat-metric = "polar"'), "charts.cartesian.flat-metric"),
    (('coordinates = ["x", "y", "z"]', 'coordinates = ["x", "y"]'), "charts.cartesian.coordinates"),
    (('field-equations = "vacuum"', 'field-equations = "perfect-fluid"'), "field-equations"),
    (('field-equations = "vacuum"', 'field-equations = "matter"'), "charts.cartesian.matter"),
    (('conformal-factor = "1 + m1/(2*r1) + m2/(2*r2)"', 'conformal-factor = "__import__(\'os\')"'),
     "charts.cartesian.conformal-factor"),
    (("time-symmetric = true", "time-symmetric = true\nlapse = \"1 +\""), "charts.cartesian.lapse"),
    (("time-symmetric = true", "time-symmetric = true\nshift = { w = \"1\" }"), "charts.cartesian.shift.w"),
    (("time-symmetric = true", "extrinsic-curvature = [[1, 0], [0, 1]]"), "charts.cartesian.extrinsic-curvature"),
    (("time-symmetric = true", "time-symmetric = true\nline-element = \"dx**2\""), "charts.cartesian.line-element"),
])
def test_malformed_initial_data_is_one_line_naming_the_field(cli, tmp_path, edit, field):
    old, new = edit
    assert old in BL_TEXT
    path = _write(tmp_path, "bad.toml", BL_TEXT.replace(old, new, 1))
    r = cli("check", str(path))
    assert r.exit_code == 2, r.output
    line = _one_line(r)
    assert str(path) in line and field in line, line


def test_limits_belong_to_spacetimes_only(cli, tmp_path):
    path = _write(tmp_path, "bad.toml", BL_TEXT + '\n[limits.flat]\nreduces-to = "minkowski:cartesian"\n')
    r = cli("add", str(path))
    assert r.exit_code == 2 and "limits" in _one_line(r)


@pytest.mark.parametrize("args", [["classify"], ["orbits"], ["image", "--observer", "r=10", "-o", "x.png"],
                                  ["probe", "--from", "x=1,y=1,z=1"]])
def test_spacetime_commands_refuse_initial_data(cli, args):
    """A 3-geometry has no Petrov type, orbits or light rays: one line naming the field kind (exit 2)."""
    r = cli(args[0], str(BL), *args[1:])
    line = _one_line(r)
    assert r.exit_code == 2 and ": kind: brill-lindquist is initial data" in line and "gravicat split" in line


# --------------------------------------------------------------------------- exporters


def _export(cli, subject, target, out):
    r = cli("export", subject, "--to", target, "--allow-unverified", "-o", str(out))
    assert r.exit_code == 0, r.output
    return out.read_text()


def _load_module(path):
    spec = importlib.util.spec_from_file_location(path.stem, path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _reference(slice_, values, point):
    """alpha, beta^i, gamma_ij, K_ij and d_k gamma_ij at one point, by sympy evaluation of the Slice."""
    subs = {s: values[str(s)] for s in slice_.spatial_spec.params if str(s) in values}
    subs.update({c: x for c, x in zip(slice_.coords, point, strict=True)})
    if slice_.spec.coords[slice_.time] not in subs:
        subs[slice_.spec.coords[slice_.time]] = values.get(str(slice_.time_symbol), 0)

    def ev(e):
        return float(sp.N(sp.sympify(e).xreplace(subs), 30))

    return {"lapse": ev(slice_.lapse), "shift": [ev(b) for b in slice_.shift],
            "gamma": [[ev(slice_.spatial_metric[i][j]) for j in range(3)] for i in range(3)],
            "K": [[ev(slice_.extrinsic[i][j]) for j in range(3)] for i in range(3)],
            "dgamma": [[[ev(sp.diff(slice_.spatial_metric[i][j], slice_.coords[k])) for k in range(3)]
                        for j in range(3)] for i in range(3)]}


CASES = [  # (subject, parameter values, points) - generic points, off axes and punctures
    (f"{BL}", {"m1": 0.5, "m2": 0.75, "d": 4.0}, [(0.3, -0.7, 1.1), (2.5, 1.25, -3.0)]),
    (f"{SPACETIMES / 'kerr.toml'}:kerr-schild", {"M": 1.0, "a": 0.9}, [(3.1, -1.7, 0.9), (-4.2, 2.3, -1.4)]),
]


@pytest.mark.parametrize("subject, values, points", CASES)
def test_numpy_export_matches_sympy(cli, tmp_path, subject, values, points):
    from gravicat.physics.initial_data import slice_of_chart

    path, _, chart = subject.partition(":")
    text = _export(cli, subject, "initial-data-numpy", tmp_path / "id_module.py")
    ast.parse(text)
    mod = _load_module(tmp_path / "id_module.py")
    sl = slice_of_chart(build_chart(load_file(path), chart or None))
    params = {k: values[k] for k in mod.PARAMETERS if k in values}
    x = np.array(points)
    got = mod.initial_data(x, params)
    dgot = mod.initial_data_derivatives(x, params)
    assert got["spatial_metric"].shape == (len(points), 3, 3) and dgot["d_spatial_metric"].shape[-1] == 3
    for m, point in enumerate(points):
        ref = _reference(sl, values, point)
        # tolerance: double-precision evaluation of cse'd expressions against 30-digit sympy values
        assert got["lapse"][m] == pytest.approx(ref["lapse"], rel=1e-11, abs=1e-12)
        assert np.allclose(got["shift"][m], ref["shift"], rtol=1e-11, atol=1e-12)
        assert np.allclose(got["spatial_metric"][m], ref["gamma"], rtol=1e-11, atol=1e-12)
        assert np.allclose(got["extrinsic_curvature"][m], ref["K"], rtol=1e-11, atol=1e-12)
        assert np.allclose(dgot["d_spatial_metric"][m], ref["dgamma"], rtol=1e-10, atol=1e-12)


@pytest.mark.skipif(GCC is None, reason="gcc not available")
@pytest.mark.parametrize("subject, values, points", CASES)
def test_c_export_compiles_and_matches_sympy(cli, tmp_path, subject, values, points):
    from gravicat.physics.initial_data import slice_of_chart

    path, _, chart = subject.partition(":")
    header = _export(cli, subject, "initial-data-c", tmp_path / "data.h")
    prefix = header.split("GRAVICAT_API int ", 1)[1].split("_initial_data(", 1)[0]
    nparams = int(header.split("_ID_NUM_PARAMETERS ", 1)[1].split()[0])
    names = header.split("_ID_PARAMETERS {", 1)[1].split("}", 1)[0] if nparams else ""
    order = [n.strip().strip('"') for n in names.split(",")] if nparams else []
    pvals = ", ".join(repr(float(values[n])) for n in order) or "0.0"
    flat = ", ".join(repr(float(c)) for pt in points for c in pt)
    main = f"""
#include <stdio.h>
#include "data.h"
int main(void) {{
    const double x[] = {{{flat}}};
    const double p[] = {{{pvals}}};
    double a[{len(points)}], b[{3 * len(points)}], g[{9 * len(points)}], k[{9 * len(points)}];
    double da[3], db[3][3], dg[3][3][3], dk[3][3][3];
    size_t bad = {prefix}_initial_data_points({len(points)}, x, p, a, b, g, k);
    int m, i;
    printf("%zu\\n", bad);
    for (m = 0; m < {len(points)}; ++m) {{
        printf("%.17g", a[m]);
        for (i = 0; i < 3; ++i) printf(" %.17g", b[3 * m + i]);
        for (i = 0; i < 9; ++i) printf(" %.17g", g[9 * m + i]);
        for (i = 0; i < 9; ++i) printf(" %.17g", k[9 * m + i]);
        if ({prefix}_initial_data_derivatives(x + 3 * m, p, da, db, dg, dk)) return 3;
        for (i = 0; i < 27; ++i) printf(" %.17g", (&dg[0][0][0])[i]);
        printf("\\n");
    }}
    return 0;
}}
"""
    (tmp_path / "main.c").write_text(main)
    subprocess.run([GCC, "-std=c99", "-Wall", "-Wextra", "-pedantic", "-Werror", "-o", str(tmp_path / "main"),
                    str(tmp_path / "main.c"), "-lm"], check=True, capture_output=True, cwd=tmp_path)
    lines = subprocess.run([str(tmp_path / "main")], check=True, capture_output=True, text=True).stdout.split("\n")
    assert lines[0] == "0"
    sl = slice_of_chart(build_chart(load_file(path), chart or None))
    for m, point in enumerate(points):
        v = [float(s) for s in lines[1 + m].split()]
        ref = _reference(sl, values, point)
        want = ([ref["lapse"]] + ref["shift"] + [e for row in ref["gamma"] for e in row]
                + [e for row in ref["K"] for e in row]
                + [e for row in ref["dgamma"] for col in row for e in col])
        # tolerance: double precision against 30-digit sympy values (see the NumPy test)
        assert np.allclose(v, want, rtol=1e-10, atol=1e-12)


@pytest.mark.parametrize("subject", ["btz.toml", "myers-perry-5d.toml"])
def test_only_four_dimensional_spacetimes_are_split_for_export(cli, subject):
    r = cli("export", str(SPACETIMES / subject), "--to", "initial-data-numpy", "--allow-unverified")
    assert r.exit_code == 2 and "3+1 data" in _one_line(r)


def test_hostile_title_stays_escaped(cli, tmp_path):
    title = 'BL */ #include <stdlib.h> """ \\ \' end'
    text = BL_TEXT.replace('title = "Brill-Lindquist data: two black holes at a moment of time symmetry"',
                           "title = " + json.dumps(title))
    path = _write(tmp_path, "hostile.toml", text)
    header = _export(cli, str(path), "initial-data-c", tmp_path / "h.h")
    comment = header.split("*/", 1)[0]
    assert "#include <stdlib.h>" not in header.split("*/", 1)[1]  # nothing leaves the comment block
    assert comment.startswith("/*")
    module = _export(cli, str(path), "initial-data-numpy", tmp_path / "hostile_mod.py")
    ast.parse(module)
    assert _load_module(tmp_path / "hostile_mod.py").TITLE == title
