"""`gravicat classify`: the Petrov type, the Killing vectors, the matter and the energy conditions of
a chart, checked against published results (sources beside each check; "recalled from memory" marks
values not re-read from the publication while writing the test), its stable JSON keys and its
one-line errors.

Charts are named as FILE:CHART so that no catalogue is needed; each run forks one child per chart.
"""

from __future__ import annotations

import json
from fractions import Fraction
from pathlib import Path

import pytest
import sympy as sp

ROOT = Path(__file__).resolve().parent.parent
SPACETIMES = ROOT / "catalog" / "data" / "spacetimes"

CHART_KEYS = {"chart", "dimension", "petrov", "killing_vectors", "killing_tensors", "matter", "energy_conditions"}
PETROV_KEYS = {"type", "method", "where", "weyl_scalars", "invariants", "tetrad", "principal_null_directions",
               "specialisations"}
CONDITION_KEYS = {"status", "method", "counterexample"}


def _classify(cli, subject, *args, code=0):
    result = cli("classify", subject, *args, "--json")
    assert result.exit_code == code, result.output
    return json.loads(result.stdout)


def _file(entry, chart):
    return f"{SPACETIMES / (entry + '.toml')}:{chart}"


def _expr(text, names):
    return sp.sympify(text, locals={n: sp.Symbol(n) for n in names})


def _point_value(text):
    return Fraction(text)


def test_reissner_nordstrom_electrovacuum_holds_every_condition_proved(cli):
    # 8 pi T_ab of a radial field E = Q/r^2: rho = Q^2/(8 pi r^4), principal pressures (-rho, rho, rho)
    # (Griffiths & Podolsky, Exact Space-Times in Einstein's General Relativity, 2009, sec. 9.2, the
    # Maxwell stress tensor of the Reissner-Nordstrom field; recalled from memory), so NEC, WEC, SEC and DEC
    # hold with equality in rho + p_r = 0 (Hawking & Ellis 1973, sec. 4.3)
    out = _classify(cli, _file("reissner-nordstrom", "static"))
    assert out["metric"] == "reissner-nordstrom"
    (chart,) = out["charts"]
    assert CHART_KEYS <= set(chart) and PETROV_KEYS <= set(chart["petrov"])
    assert chart["petrov"]["type"] == "D" and chart["petrov"]["method"] == "symbolic"
    ev = chart["matter"]["eigenvalues"]
    names = ("Q", "r", "pi")
    rho = _expr(ev["rho"], names)
    Q, r = sp.Symbol("Q"), sp.Symbol("r")
    assert sp.simplify(rho - Q**2 / (8 * sp.Symbol("pi") * r**4)) == 0
    p = {k: _expr(v, names) for k, v in ev["pressures"].items()}
    assert sp.simplify(p["r"] + rho) == 0 and sp.simplify(p["theta"] - rho) == 0 and sp.simplify(p["phi"] - rho) == 0
    assert ev["timelike"] == "t" and chart["matter"]["hawking_ellis_type"] == "I"
    for cond in ("null", "weak", "strong", "dominant"):
        item = chart["energy_conditions"][cond]
        assert CONDITION_KEYS <= set(item)
        assert (item["status"], item["method"], item["counterexample"]) == ("holds", "proved", None)
    assert [k["vector"] for k in chart["killing_vectors"] if k["source"] != "declared"] == ["d/dt", "d/dphi"]
    assert "wrong_declarations" not in out


def test_morris_thorne_violates_the_null_condition_with_an_exact_point(cli):
    # b(r) = b0^2/r, Phi = 0: rho = b'/(8 pi r^2) = -b0^2/(8 pi r^4) and tension tau = b/(8 pi r^3) = b0^2/(8 pi r^4),
    # p_r = -tau, so rho + p_r = -b0^2/(4 pi r^4) < 0 everywhere, -1/(4 pi b0^2) at the throat r = b0 (Morris &
    # Thorne, Am. J. Phys. 56 (1988) 395, eqs. 14a-14c: rho = b'/(8 pi r^2), tau = [b/r - 2(r - b) Phi']/(8 pi r^2))
    out = _classify(cli, _file("morris-thorne", "areal"))
    (chart,) = out["charts"]
    nec = chart["energy_conditions"]["null"]
    assert nec["status"] == "violated" and nec["method"] == "proved"
    cex = nec["counterexample"]
    assert cex["quantity"] == "rho + p[r]" and cex["vector_kind"] == "null"
    b0, r = _point_value(cex["point"]["b0"]), _point_value(cex["point"]["r"])
    b0_, r_ = sp.Rational(b0.numerator, b0.denominator), sp.Rational(r.numerator, r.denominator)
    expected = -b0_**2 / (4 * sp.pi * r_**4)
    assert sp.simplify(sp.sympify(cex["value"]) - expected) == 0
    rho = _expr(chart["matter"]["eigenvalues"]["rho"], ("b0", "r", "pi"))
    p_r = _expr(chart["matter"]["eigenvalues"]["pressures"]["r"], ("b0", "r", "pi"))
    at_throat = (rho + p_r).subs(sp.Symbol("r"), sp.Symbol("b0"))
    assert sp.simplify(at_throat + 1 / (4 * sp.Symbol("pi") * sp.Symbol("b0") ** 2)) == 0
    # the violating vector is null: g(k, k) = 0 with g of the areal chart at the point (15 digits)
    t, k_r, k_th, k_ph = (float(x) for x in cex["vector"])
    th = sp.sympify(cex["point"]["theta"])
    g = [-1, 1 / (1 - float(b0) ** 2 / float(r) ** 2), float(r) ** 2, float(r) ** 2 * float(sp.sin(th)) ** 2]
    norm = g[0] * t * t + g[1] * k_r**2 + g[2] * k_th**2 + g[3] * k_ph**2
    assert abs(norm) < 1e-9 * (abs(g[0] * t * t) + abs(g[1] * k_r**2))
    # the file declares the violation: nothing is wrong
    assert "wrong_declarations" not in out


def test_hayward_core_violates_the_strong_condition(cli):
    # Hayward's regular black hole, f = 1 - 2 M r^2/(r^3 + 2 M l^2): a de Sitter core (rho = -p), so
    # rho + sum p_i < 0 for r^3 < M l^2 near the centre, while the null condition holds (Hayward, Phys. Rev.
    # Lett. 96 (2006) 031103; the sign change at r^3 = M l^2 derived here from 2 p_theta = rho + sum p_i)
    out = _classify(cli, _file("hayward", "ingoing-eddington-finkelstein"))
    (chart,) = out["charts"]
    ec = chart["energy_conditions"]
    assert (ec["null"]["status"], ec["null"]["method"]) == ("holds", "proved")
    assert (ec["weak"]["status"], ec["weak"]["method"]) == ("holds", "proved")
    sec = ec["strong"]
    assert sec["status"] == "violated" and sec["method"] == "proved"
    pt = {k: _point_value(v) for k, v in sec["counterexample"]["point"].items() if k in ("M", "l", "r")}
    assert pt["r"] ** 3 < pt["M"] * pt["l"] ** 2  # inside the core
    assert chart["matter"]["eigenvalues"]["timelike"] == "v,r"  # the (v, r) block of the Eddington-Finkelstein form


def test_de_sitter_lambda_as_matter_violates_the_strong_condition(cli):
    # Convention: 8 pi T_ab = G_ab + Lambda g_ab, so a Lambda-vacuum has T = 0 and every condition holds; with
    # Lambda counted as matter (8 pi T_ab = G_ab = -Lambda g_ab) rho = Lambda/(8 pi) = -p, and
    # rho + 3 p = -Lambda/(4 pi) < 0 for Lambda > 0 (Hawking & Ellis 1973, sec. 4.3: de Sitter space
    # violates the strong energy condition; recalled from memory)
    out = _classify(cli, _file("de-sitter", "static"))
    (chart,) = out["charts"]
    assert all(chart["energy_conditions"][c]["status"] == "holds" for c in ("null", "weak", "strong", "dominant"))
    lam = chart["lambda_as_matter"]
    assert "counted as matter" in lam["matter"]["convention"]
    rho = _expr(lam["matter"]["eigenvalues"]["rho"], ("Lambda",))
    assert sp.simplify(rho - sp.Symbol("Lambda") / (8 * sp.pi)) == 0
    assert lam["energy_conditions"]["strong"]["status"] == "violated"
    assert lam["energy_conditions"]["null"]["status"] == "holds"
    assert chart["petrov"]["type"] == "O"  # constant curvature (Stephani et al. 2003, sec. 8.5)


def test_einstein_de_sitter_dust_holds_every_condition(cli):
    # flat dust universe a = t^(2/3): H = 2/(3 t), rho = 3 H^2/(8 pi) = 1/(6 pi t^2), p = 0 (Weinberg,
    # Cosmology, 2008, sec. 1.5; recalled from memory): all four conditions hold (rho > 0, p = 0)
    out = _classify(cli, _file("einstein-de-sitter", "comoving-cartesian"))
    (chart,) = out["charts"]
    assert sp.simplify(sp.sympify(chart["matter"]["eigenvalues"]["rho"]) - 1 / (6 * sp.pi * sp.Symbol("t") ** 2)) == 0
    for cond in ("null", "weak", "strong", "dominant"):
        assert (chart["energy_conditions"][cond]["status"], chart["energy_conditions"][cond]["method"]) == \
            ("holds", "proved")


def test_kerr_with_a_zero_is_still_d_and_its_principal_null_directions_are_stated(cli):
    # Kerr is type D with the repeated principal null directions of Kinnersley's l and n (Chandrasekhar, The
    # Mathematical Theory of Black Holes, 1983, ch. 6; recalled from memory); with a = 0 it is Schwarzschild,
    # still type D (Stephani et al. 2003, sec. 15.4)
    out = _classify(cli, _file("kerr", "boyer-lindquist"))
    p = out["charts"][0]["petrov"]
    assert p["type"] == "D"
    assert [d["multiplicity"] for d in p["principal_null_directions"]["directions"]] == [2, 2]
    assert {"where": "a = 0", "type": "D"}.items() <= p["specialisations"][0].items()


def test_with_set_the_parameters_are_fixed(cli):
    out = _classify(cli, _file("kerr", "boyer-lindquist"), "--set", "a=0")
    chart = out["charts"][0]
    assert chart["parameters"] == {"a": "0"} and chart["petrov"]["type"] == "D"


def test_other_dimensions_say_the_type_is_not_defined(cli):
    # the Petrov classification is of the 4-dimensional Weyl tensor (Stephani et al. 2003, ch. 4)
    out = _classify(cli, _file("tangherlini-5d", "static"))
    chart = out["charts"][0]
    assert chart["dimension"] == 5 and chart["petrov"]["type"] is None
    assert chart["petrov"]["where"].startswith("not defined") and "4 dimensions" in chart["petrov"]["where"]
    assert "d/dt" in [k["vector"] for k in chart["killing_vectors"]]
    assert chart["energy_conditions"]["null"]["status"] == "holds"  # vacuum


def test_text_output_names_type_and_conditions(cli):
    result = cli("classify", _file("reissner-nordstrom", "static"))
    assert result.exit_code == 0, result.output
    assert "Petrov type: D" in result.stdout and "holds (proved)" in result.stdout


def test_a_wrong_declaration_exits_1(cli, tmp_path):
    text = (SPACETIMES / "reissner-nordstrom.toml").read_text(encoding="utf-8")
    assert text.count('petrov-type = "D"') >= 1
    bad = tmp_path / "rn-wrong.toml"
    bad.write_text(text.replace('petrov-type = "D"', 'petrov-type = "N"', 1), encoding="utf-8")
    out = _classify(cli, f"{bad}:static", code=1)
    assert any("petrov-type is declared N but the type is D" in w for w in out["wrong_declarations"])
    result = cli("classify", f"{bad}:static")
    assert result.exit_code == 1
    assert result.stderr.strip().count("\n") == 0 and result.stderr.startswith("Error:")


@pytest.mark.parametrize(("args", "words"), [
    (["--chart", "nowhere"], "no such chart"),
    (["--set", "b=1"], "not a parameter"),
    (["--set", "M=1", "--set", "a=2"], "outside the range"),
    (["--set", "a=x"], "a"),
])
def test_bad_input_is_one_line_exit_2(cli, args, words):
    result = cli("classify", str(SPACETIMES / "kerr.toml"), *args)
    assert result.exit_code == 2, result.output
    assert result.stderr.startswith("Error:") and result.stderr.strip().count("\n") == 0
    assert words in result.stderr


def test_a_missing_file_is_one_line_exit_2(cli, tmp_path):
    result = cli("classify", str(tmp_path / "none.toml"))
    assert result.exit_code == 2 and result.stderr.startswith("Error:")
