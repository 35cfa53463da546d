"""`gravicat split`: JSON shape, published slices of Schwarzschild, Kerr's ADM mass and angular momentum,
a slipped sign caught by the constraints, one-line errors, and the grid writer's data satisfying the
constraints to second order under independent finite differences."""

from __future__ import annotations

import json

import numpy as np
import pytest
import sympy as sp
from conftest import DATA

from gravicat.format.bundled import bundled_path

CARTESIAN = DATA / "split-schwarzschild-cartesian.toml"
SLIPPED = DATA / "split-slipped-sign.toml"
KEYS = {"chart", "time", "convention", "lapse", "shift", "shift_lower", "spatial_metric", "extrinsic_curvature",
        "trace_K", "constraints", "adm"}


def _one_error_line(result) -> str:
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("Error: ") and "Traceback" not in result.output
    return lines[0]


def _split_json(cli, *args):
    out = cli("split", *args, "--json")
    assert out.exit_code in (0, 1), out.output
    return out, json.loads(out.stdout)


def _expr(text, names):
    return sp.sympify(text, locals={n: sp.Symbol(n, positive=True) for n in names})


def test_json_keys_and_isotropic_cartesian_slice(cli):
    # Schwarzschild in isotropic Cartesian coordinates: time symmetric (K_ij = 0), conformally flat,
    # gamma_ij = psi^4 delta_ij with psi = 1 + M/(2R), lapse (1 - M/(2R))/(1 + M/(2R)).
    # Source: C. W. Misner, K. S. Thorne and J. A. Wheeler, Gravitation (1973), chapter 31 (isotropic form
    # of the Schwarzschild metric; equation number recalled from memory, not checked); T. W. Baumgarte and
    # S. L. Shapiro, Numerical Relativity (2010), sec. 3.1 (recalled from memory).
    out, data = _split_json(cli, f"{CARTESIAN}:isotropic")
    assert out.exit_code == 0
    assert set(data) >= {"metric", "charts", "status"} and data["metric"] == "split-schwarzschild-cartesian"
    assert data["status"] == "proved" and data["refused"] == []
    (chart,) = data["charts"]
    assert KEYS <= set(chart)
    assert set(chart["constraints"]) == {"hamiltonian", "momentum"}
    for c in chart["constraints"].values():
        assert {"status", "method", "counterexample"} <= set(c) and c["status"] == "proved"
    assert set(chart["adm"]) >= {"mass", "angular_momentum"}
    assert chart["time"] == "t" and chart["coordinates"] == ["x", "y", "z"]
    names = ("M", "x", "y", "z")
    M, x, y, z = (sp.Symbol(n, positive=True) for n in names)
    R = sp.sqrt(x**2 + y**2 + z**2)
    psi = 1 + M / (2 * R)
    for i in range(3):
        for j in range(3):
            assert _expr(chart["extrinsic_curvature"][i][j], names) == 0
            g = _expr(chart["spatial_metric"][i][j], names)
            assert sp.simplify(g - (psi**4 if i == j else 0)) == 0
    lapse = _expr(chart["lapse"], names)
    # compare at a point outside R = M/2 (exact rationals): the printed lapse may keep Abs/sqrt forms
    point = {M: sp.Rational(3, 2), x: sp.Rational(7, 3), y: sp.Rational(-5, 4), z: sp.Rational(2, 7)}
    want = ((1 - M / (2 * R)) / psi).subs(point)
    assert abs(float(lapse.subs(point) - want)) < 1e-12
    # ADM mass of the isotropic slice: M (Arnowitt, Deser and Misner 1962; E. Gourgoulhon, 3+1 Formalism in
    # General Relativity, 2012, sec. 8.3); numerical surface integral, relative tolerance 1e-4
    assert chart["adm"]["mass"] == pytest.approx(1.0, rel=1e-4)
    assert chart["adm"]["mass_check"] == "matches M"
    assert abs(chart["adm"]["angular_momentum"]) < 1e-6


def test_painleve_gullstrand_slice_is_flat_with_unit_lapse(cli):
    # Painleve-Gullstrand slices of Schwarzschild: flat spatial metric, alpha = 1, beta^r = sqrt(2M/r).
    # Source: E. Poisson, A Relativist's Toolkit (2004), the Painleve-Gullstrand coordinates of the
    # Schwarzschild chapter's problems (section recalled from memory); K. Martel and E. Poisson,
    # Am. J. Phys. 69 (2001) 476 (recalled from memory).
    out, data = _split_json(cli, f"{bundled_path('schwarzschild')}:painleve-gullstrand")
    (chart,) = data["charts"]
    names = ("M", "r", "theta")
    M, r, theta = (sp.Symbol(n, positive=True) for n in names)
    assert _expr(chart["lapse"], names) == 1
    flat = [[1, 0, 0], [0, r**2, 0], [0, 0, r**2 * sp.sin(theta) ** 2]]
    for i in range(3):
        for j in range(3):
            assert sp.simplify(_expr(chart["spatial_metric"][i][j], names) - flat[i][j]) == 0
    assert sp.simplify(_expr(chart["shift"][0], names) - sp.sqrt(2 * M / r)) == 0
    assert sp.simplify(_expr(chart["trace_K"], names) - sp.Rational(3, 2) * sp.sqrt(2 * M / r**3)) == 0
    assert {c["status"] for c in chart["constraints"].values()} == {"proved"}
    # K_ij ~ r^(-3/2): the ADM integrals are refused with the rate, not given as 0 (Gourgoulhon 2012,
    # sec. 8.2, fall-off conditions; recalled from memory)
    assert chart["adm"]["mass"] is None and "r^-1.50" in chart["adm"]["note"]


def test_kerr_adm_mass_and_angular_momentum(cli):
    # Kerr: ADM mass M and angular momentum J = a M (R. P. Kerr 1963; E. Gourgoulhon, 3+1 Formalism in
    # General Relativity, 2012, sec. 8.5, where Kerr is the worked example - recalled from memory), in the
    # Kerr-Schild chart (horizon-penetrating slices) through the command, and in Boyer-Lindquist below.
    # Tolerance: relative 1e-4 (surface integrals at R = 400, 800, 1600 extrapolated in 1/R).
    out, data = _split_json(cli, f"{bundled_path('kerr')}:kerr-schild", "--set", "M=3/2", "--set", "a=6/5")
    (chart,) = data["charts"]
    assert {c["status"] for c in chart["constraints"].values()} == {"proved"}
    adm = chart["adm"]
    assert adm["mass"] == pytest.approx(1.5, rel=1e-4) and adm["mass_check"] == "matches M"
    assert adm["angular_momentum"] == pytest.approx(1.8, rel=1e-4) and adm["angular_momentum_check"] == "matches a*M"


def test_kerr_boyer_lindquist_and_schwarzschild_angular_momentum():
    from gravicat.format.bundled import read_bundled
    from gravicat.format.metricfile import build_chart
    from gravicat.physics.adm import adm_quantities
    from gravicat.physics.split import split_chart

    sl = split_chart(build_chart(read_bundled(bundled_path("kerr")), "boyer-lindquist"))
    adm = adm_quantities(sl, {"M": 2, "a": 1}, asymptotically_flat=True)
    assert adm["mass"] == pytest.approx(2.0, rel=1e-4)
    assert adm["angular_momentum"] == pytest.approx(2.0, rel=1e-4)  # J = a M
    sl = split_chart(build_chart(read_bundled(bundled_path("schwarzschild")), "schwarzschild"))
    adm = adm_quantities(sl, {"M": 2}, asymptotically_flat=True)
    assert adm["mass"] == pytest.approx(2.0, rel=1e-4) and abs(adm["angular_momentum"]) < 1e-9


def test_slipped_sign_fails_a_constraint_with_a_counterexample(cli):
    # Kerr-Schild Schwarzschild with the sign of the (2M/r) n_i n_j term of gamma_ij slipped: not a vacuum
    # solution, so a constraint (Gauss-Codazzi: H = 2 G_ab n^a n^b) must fail at a point
    out = cli("split", str(SLIPPED), "--json")
    assert out.exit_code == 1, out.output
    data = json.loads(out.stdout)
    assert data["status"] == "violated"
    (chart,) = data["charts"]
    failed = [c for c in chart["constraints"].values() if c["status"] == "violated"]
    assert failed and all(c["counterexample"] and c["counterexample"]["point"] for c in failed)
    human = cli("split", str(SLIPPED))
    assert human.exit_code == 1 and "counterexample (" in human.stdout
    assert "constraints are violated" in _one_error_line(human)


@pytest.mark.parametrize(("args", "words"), [
    (["--chart", "schwarzschild", "--time", "tau"], "'tau' is not a coordinate"),
    (["--time", "w"], "'w' is not a coordinate of any chart"),
    (["--chart", "ingoing-eddington-finkelstein"], "are null"),
    (["--chart", "schwarzschild", "--time", "r"], "not spacelike at"),
    (["--grid", "r=3:9:5"], "needs -o"),
    (["--chart", "isotropic", "--grid", "rho=9:3:5", "--grid", "theta=1:2:5", "--grid", "phi=0:1:5",
      "-o", "{tmp}/g.h5"], "is empty"),
    (["--chart", "isotropic", "--grid", "rho=3:9:5", "--grid", "theta=1:2", "--grid", "phi=0:1:5",
      "-o", "{tmp}/g.h5"], "not NAME=LO:HI:N"),
    (["--chart", "isotropic", "--grid", "rho=3:9:5", "--grid", "x=1:2:5", "-o", "{tmp}/g.h5"],
     "not a spatial coordinate"),
    (["--chart", "isotropic", "--grid", "rho=3:9:5", "-o", "{tmp}/g.txt"], "unknown grid format"),
    (["--chart", "isotropic", "--grid", "rho=0.1:9:5", "--grid", "theta=1:2:5", "--grid", "phi=0:1:5",
      "-o", "{tmp}/g.h5"], "leaves the chart's domain"),
])
def test_bad_input_is_one_line_exit_2(cli, tmp_path, args, words):
    args = [a.replace("{tmp}", str(tmp_path)) for a in args]
    out = cli("split", str(bundled_path("schwarzschild")), *args)
    assert out.exit_code == 2, out.output
    assert words in _one_error_line(out)
    assert not (tmp_path / "g.h5").exists()


# --- the grid writer, checked by independent finite differences --------------------------------------


def _fd_residuals(path):
    """Hamiltonian and momentum residuals of gridded (gamma, K) by second-order central differences at the
    interior points (numpy only; the formulas: R + K^2 - K_ij K^ij and D_j K^j_i - D_i K)."""
    d = np.load(path)
    axes = [d["axis_x"], d["axis_y"], d["axis_z"]]
    h = [a[1] - a[0] for a in axes]
    g, K = d["gamma"], d["K"]

    def d1(f, k):  # central first derivative along grid axis k (component axes first)
        ax = f.ndim - 3 + k
        return (np.roll(f, -1, ax) - np.roll(f, 1, ax)) / (2 * h[k])

    dg = np.stack([d1(g, k) for k in range(3)])  # dg[k, i, j]
    ddg = np.stack([np.stack([d1(dg[k], m) for k in range(3)]) for m in range(3)])  # ddg[m, k, i, j]
    for k in range(3):  # the pure second derivatives from the three-point formula
        ax = g.ndim - 3 + k
        ddg[k, k] = (np.roll(g, -1, ax) - 2 * g + np.roll(g, 1, ax)) / h[k] ** 2
    gi = np.moveaxis(np.linalg.inv(np.moveaxis(g, (0, 1), (-2, -1))), (-2, -1), (0, 1))
    G1 = 0.5 * (np.einsum("ilj...->lij...", dg) + np.einsum("jli...->lij...", dg) - dg)  # Gamma_lij, l first
    G = np.einsum("kl...,lij...->kij...", gi, G1)
    dgi = -np.einsum("ka...,mab...,bl...->mkl...", gi, dg, gi)
    dG1 = 0.5 * (np.einsum("milj...->mlij...", ddg) + np.einsum("mjli...->mlij...", ddg) - ddg)
    dG = np.einsum("mkl...,lij...->mkij...", dgi, G1) + np.einsum("kl...,mlij...->mkij...", gi, dG1)  # d_m G^k_ij
    ricci = (np.einsum("kkij...->ij...", dG) - np.einsum("jkik...->ij...", dG)
             + np.einsum("kkl...,lij...->ij...", G, G) - np.einsum("kjl...,lik...->ij...", G, G))
    R = np.einsum("ij...,ij...->...", gi, ricci)
    Kmix = np.einsum("ia...,aj...->ij...", gi, K)
    trK = np.einsum("ii...->...", Kmix)
    ham = R + trK**2 - np.einsum("ij...,ji...->...", Kmix, Kmix)
    dK = np.stack([d1(K, k) for k in range(3)])  # dK[c, i, j]
    DK = dK - np.einsum("lcj...,li...->cji...", G, K) - np.einsum("lci...,jl...->cji...", G, K)  # D_c K_ji
    mom = np.einsum("jc...,cji...->i...", gi, DK) - np.stack([d1(trK, k) for k in range(3)])
    return ham, mom


def test_grid_data_satisfy_the_constraints_to_second_order(cli, tmp_path):
    # Second-order central differences: residual ~ C h^2, so halving h divides it by ~4 (common practice,
    # no source). Both grids cover the same box [2, 4]^3 of the Kerr-Schild chart (r from 3.5 to 6.9 with
    # M = 1: across no singularity; the horizon r = 2M lies outside). Tolerance: ratio in [3, 5.5].
    res = []
    for n, inner in ((9, slice(2, 7)), (17, slice(4, 13, 2))):  # the same points: x, y, z in 2.5, 2.75, ..., 3.5
        path = tmp_path / f"ks{n}.npz"
        out = cli("split", f"{CARTESIAN}:kerr-schild", *[f"--grid={c}=2:4:{n}" for c in "xyz"], "-o", str(path))
        assert out.exit_code == 0, out.output
        ham, mom = _fd_residuals(path)  # two layers off the faces: np.roll wraps there
        res.append((np.max(np.abs(ham[inner, inner, inner])), np.max(np.abs(mom[:, inner, inner, inner]))))
    (h_coarse, m_coarse), (h_fine, m_fine) = res
    assert 3.0 < h_coarse / h_fine < 5.5, res
    assert 3.0 < m_coarse / m_fine < 5.5, res
    assert h_fine < 1e-3 and m_fine < 1e-3, res  # and small: the exact data satisfy both constraints


def test_grid_file_layout_and_provenance(cli, tmp_path):
    import h5py

    path = tmp_path / "iso.h5"
    out = cli("split", f"{CARTESIAN}:isotropic", "--set", "M=2", "--grid", "x=2:3:3", "--grid", "y=-1:1:4",
              "--grid", "z=1:2:5", "-o", str(path), "--json")
    assert out.exit_code == 0, out.output
    summary = json.loads(out.stdout)
    assert summary["constraints"] == {"hamiltonian": "proved", "momentum": "proved"}
    with h5py.File(path) as fh:
        assert fh["alpha"].shape == (3, 4, 5) and fh["beta"].shape == (3, 3, 4, 5)
        assert fh["gamma"].shape == (3, 3, 3, 4, 5) and fh["K"].shape == (3, 3, 3, 4, 5)
        assert fh.attrs["entry"] == "split-schwarzschild-cartesian" and fh.attrs["chart"] == "isotropic"
        assert json.loads(fh.attrs["parameters"]) == {"M": 2.0}
        assert "K_ij = -(1/(2 alpha))" in fh.attrs["convention"] and len(fh.attrs["revision"]) == 64
        x, y, z = fh["axis_x"][2], fh["axis_y"][0], fh["axis_z"][4]
        psi = 1 + 2.0 / (2 * np.sqrt(x**2 + y**2 + z**2))
        assert fh["gamma"][0, 0, 2, 0, 4] == pytest.approx(psi**4, rel=1e-12)
        assert fh["gamma"][0, 1, 2, 0, 4] == 0 and np.all(np.asarray(fh["K"]) == 0)
    assert not list(tmp_path.glob(".*part*"))  # the temporary file was renamed, not left behind


def test_schwarzschild_adm_mass_in_every_chart_with_spacelike_slices(cli):
    # ADM mass M in every chart whose slices satisfy the ADM conditions (ADM 1962; Gourgoulhon 2012, sec. 8.3);
    # the Eddington-Finkelstein charts have null slices (refused), Painleve-Gullstrand K ~ r^-3/2 (not
    # computed, with the rate), Kruskal-Szekeres and Lemaitre slices are not in (r, theta, phi) or (x, y, z)
    out, data = _split_json(cli, str(bundled_path("schwarzschild")), "--set", "M=5/4")
    assert out.exit_code == 0
    by_chart = {c["chart"]: c for c in data["charts"]}
    assert {r["chart"] for r in data["refused"]} == {"ingoing-eddington-finkelstein", "outgoing-eddington-finkelstein"}
    assert all("null" in r["error"] for r in data["refused"])
    for name in ("schwarzschild", "isotropic"):
        assert by_chart[name]["adm"]["mass"] == pytest.approx(1.25, rel=1e-4), name
    assert "r^-1.50" in by_chart["painleve-gullstrand"]["adm"]["note"]
    for name in ("kruskal-szekeres", "lemaitre"):
        assert by_chart[name]["adm"]["mass"] is None and by_chart[name]["adm"]["note"], name
    assert all(c["status"] == "proved" for ch in data["charts"] for c in ch["constraints"].values())
