"""gravicat compare: side-by-side facts and the equivalence verdict, against textbook results.

The metrics are written out here (files in tmp_path, in our Halcyon Reach scenario) or taken
from the bundled reference files by path, so that no database is needed unless an entry id is
compared. Sources of the physics are given beside each check.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
import sympy as sp
from typer.testing import CliRunner

from gravicat.cli import app
from gravicat.store import revisions as store

BUNDLED = {p.stem: p for p in store.bundled_files()}
M, Q, Lam, r = sp.symbols("M Q Lambda r")
NO_DB = "sqlite:////nonexistent-folder/never.sqlite"  # any use of the database would fail loudly


def S(text: str):
    """Our own JSON output read back by sympy (the reference); 'Lambda' is the cosmological constant."""
    return sp.sympify(text, locals={"Lambda": Lam, "Q": Q, "M": M, "r": r})


def run(*args: str, db: str = NO_DB):
    return CliRunner().invoke(app, ["--db", db, *args])


def verdict_of(*args: str, db: str = NO_DB) -> dict:
    result = run("compare", *args, "--json", db=db)
    assert result.exit_code == 0, result.output
    return json.loads(result.stdout)


def one_error_line(result) -> str:
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("Error: ") and "Traceback" not in result.output
    return lines[0]


def write(tmp_path: Path, name: str, text: str) -> str:
    path = tmp_path / name
    path.write_text(text)
    return str(path)


SCHWARZSCHILD = '''
id = "halcyon-exterior"
title = "Halcyon Reach exterior (Schwarzschild form)"
field-equations = "vacuum"
[[references]]
citation = "C. W. Misner, K. S. Thorne and J. A. Wheeler, Gravitation (1973), eq. 31.1"
[parameters.M]
assume = ["positive"]
range = "M > 0"
[charts.areal]
coordinates = ["t", "r", "theta", "phi"]
domain = ["r > 2*M", "0 < theta < pi"]
line-element = "-(1 - 2*M/r)*dt**2 + dr**2/(1 - 2*M/r) + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
'''

# Isotropic form: MTW (1973), exercise 31.7 / Weinberg (1972) eq. 8.2.14 (recalled from memory):
# ds^2 = -((1 - M/2R)/(1 + M/2R))^2 dt^2 + (1 + M/2R)^4 (dR^2 + R^2 dOmega^2), with r = R (1 + M/2R)^2.
ISOTROPIC = '''
id = "halcyon-isotropic"
title = "Halcyon Reach exterior (isotropic form, from a new preprint)"
field-equations = "vacuum"
[[references]]
citation = "Halcyon Reach preprint HR-12"
[parameters.M]
assume = ["positive"]
range = "M > 0"
[charts.iso]
coordinates = ["t", "R", "theta", "phi"]
domain = ["R > M/2", "0 < theta < pi"]
define = { psi = "1 + M/(2*R)" }
line-element = "-((1 - M/(2*R))/psi)**2*dt**2 + psi**4*(dR**2 + R**2*(dtheta**2 + sin(theta)**2*dphi**2))"
'''


def test_schwarzschild_and_isotropic_equivalent_with_the_known_radial_map(tmp_path):
    a = write(tmp_path, "a.toml", SCHWARZSCHILD)
    b = write(tmp_path, "b.toml", ISOTROPIC)
    out = verdict_of(a, b, "--map", "r=R*(1+M/(2*R))**2", "--no-search")
    assert out["verdict"] == "equivalent"
    proof = out["evidence"][0]
    assert proof["kind"] == "map" and proof["result"] == "proved" and proof["method"] == "symbolic"
    assert out["map"]["direction"] == "A coordinates in terms of B coordinates"
    # the table facts: both static and spherically symmetric, 2 obvious symmetries (t, phi)
    assert out["a"]["symmetries"] == {"dimension": 2, "coordinates": ["t", "phi"]}
    assert out["b"]["symmetries"] == {"dimension": 2, "coordinates": ["t", "phi"]}
    assert out["a"]["signature"] == out["b"]["signature"] == "(-,+,+,+)"
    assert out["a"]["status"] == "not stored" and out["a"]["revision"] is None
    # Kretschmann 48 M^2 / r^6 (MTW 1973, eq. 31.4, recalled from memory) becomes, with the map,
    # 48 M^2 / (R (1 + M/2R)^2)^6 in the isotropic chart
    ka, kb = (S(s["invariants"]["kretschmann"]) for s in (out["a"], out["b"]))
    R = sp.Symbol("R")
    assert sp.simplify(ka - 48 * M**2 / r**6) == 0
    assert sp.simplify(kb - 48 * M**2 / (R * (1 + M / (2 * R)) ** 2) ** 6) == 0


# The isotropic chart of a second paper that calls the mass m. The isotropic radius relation
# r = R (1 + m/(2R))^2: C. W. Misner, K. S. Thorne and J. A. Wheeler, Gravitation (1973), chapter 31
# (the eq. (31.22) and exercise 31.7 attributions are recalled from memory, not checked); S. Weinberg,
# Gravitation and Cosmology (1972), section 8.2 (recalled from memory).
ISOTROPIC_M = ISOTROPIC.replace("halcyon-isotropic", "halcyon-isotropic-m").replace(
    "[parameters.M]", "[parameters.m]").replace('range = "M > 0"', 'range = "m > 0"').replace("M/", "m/")


def test_map_may_use_the_second_charts_own_parameter_names(tmp_path):
    a = write(tmp_path, "a.toml", SCHWARZSCHILD)
    b = write(tmp_path, "b.toml", ISOTROPIC_M)
    assert "M" not in ISOTROPIC_M.split("[charts.iso]")[1]
    # B's m, identified with A's M by --set: the map is written in B's own symbols
    out = verdict_of(a, b, "--set", "m=M", "--map", "r=R*(1 + m/(2*R))**2", "--no-search")
    assert out["verdict"] == "equivalent", out["summary"]
    proof = out["evidence"][0]
    assert proof["kind"] == "map" and proof["result"] == "proved"
    assert S(proof["map"]["r"]).equals(sp.Symbol("R") * (1 + M / (2 * sp.Symbol("R"))) ** 2)
    # the same in A's symbol, and a map that states the identification the wrong way round is refuted
    assert verdict_of(a, b, "--set", "m=M", "--map", "r=R*(1 + M/(2*R))**2", "--no-search")["verdict"] \
        == "equivalent"
    wrong = verdict_of(a, b, "--set", "m=2*M", "--map", "r=R*(1 + m/(2*R))**2", "--no-search")
    assert wrong["verdict"] != "equivalent"
    assert wrong["evidence"][0]["kind"] == "map" and wrong["evidence"][0]["result"] == "failed"
    # B's coordinates written in terms of A's, with A's M and B's m both accepted
    back = verdict_of(b, a, "--set", "m=M", "--map", "r=R*(1 + m/(2*R))**2", "--no-search")
    assert back["verdict"] == "equivalent" and back["map"]["direction"] == "B coordinates in terms of A coordinates"


def test_map_without_match_keeps_the_parameters_apart(tmp_path):
    # no identification: m stays B's own free parameter, so the map cannot be proved an isometry for all m, M
    a = write(tmp_path, "a.toml", SCHWARZSCHILD)
    b = write(tmp_path, "b.toml", ISOTROPIC_M)
    out = verdict_of(a, b, "--map", "r=R*(1 + m/(2*R))**2", "--no-search")
    assert out["verdict"] == "undecided"
    assert out["evidence"][0]["kind"] == "map" and out["evidence"][0]["result"] == "failed"


def test_a_wrong_map_gives_a_counterexample_not_a_verdict(tmp_path):
    a = write(tmp_path, "a.toml", SCHWARZSCHILD)
    b = write(tmp_path, "b.toml", ISOTROPIC)
    out = verdict_of(a, b, "--map", "r=R*(1+M/(2*R))**3", "--no-search")
    assert out["verdict"] == "undecided"  # a failed map refutes the map, not the equivalence
    failed = out["evidence"][0]
    assert failed["kind"] == "map" and failed["result"] == "failed"
    point = failed["counterexample"]["point"]
    assert {"M", "R"} <= set(point)


def test_the_map_is_found_from_the_kretschmann_scalar(tmp_path):
    # "is the metric of this new paper one we already have?": no map given
    a = write(tmp_path, "a.toml", SCHWARZSCHILD)
    b = write(tmp_path, "b.toml", ISOTROPIC)
    out = verdict_of(a, b)
    assert out["verdict"] == "equivalent"
    found = [e for e in out["evidence"] if e["kind"] == "found-map"][0]
    assert found["result"] == "proved"
    R = sp.Symbol("R", positive=True)
    r_of_R = sp.sympify(found["map"]["r"], locals={"R": R, "M": sp.Symbol("M", positive=True)})
    Mp = sp.Symbol("M", positive=True)
    assert sp.simplify(r_of_R - R * (1 + Mp / (2 * R)) ** 2) == 0
    # without the search and without a map: not shown equivalent, and the invariants agree
    plain = verdict_of(a, b, "--no-search")
    assert plain["verdict"] == "undecided"
    assert any(e["kind"] == "invariant-relation" and e["result"] == "consistent" for e in plain["evidence"])


def test_kerr_with_zero_spin_is_schwarzschild():
    # Kerr (1963) in Boyer-Lindquist form with a = 0 is the Schwarzschild metric (Carroll, Spacetime
    # and Geometry (2004), section 6.6)
    out = verdict_of(str(BUNDLED["kerr"]), str(BUNDLED["schwarzschild"]), "--set", "a=0")
    assert out["verdict"] == "identical"
    assert out["match"] == {"A.a": "0"}
    assert "a = 0" in out["summary"]
    assert [p for p in out["a"]["parameters"] if p["name"] == "a"][0]["matched"] == "0"


def test_kerr_with_spin_is_not_schwarzschild():
    # Both vacuum (R = 0, Weyl square = Kretschmann); the gradient of the Kretschmann scalar
    # separates them: in Schwarzschild it is a function of K (both depend on r only), in Kerr not.
    out = verdict_of(str(BUNDLED["kerr"]), str(BUNDLED["schwarzschild"]))
    assert out["verdict"] == "not-equivalent"
    assert "generic values of a" in out["summary"]
    proof = [e for e in out["evidence"] if e["result"] == "disproved"][0]
    assert proof["kind"] == "invariant-rank"
    assert proof["counterexample"]["point"]


def test_de_sitter_static_and_flat_slicing_equivalent_through_invariants(tmp_path):
    # de Sitter (1917) in static and flat-slicing forms, e.g. Hawking & Ellis (1973), section 5.2.
    # Trace of G_ab + Lambda g_ab = 0 in four dimensions: R = 4 Lambda (derivation, not a recalled value).
    static = write(tmp_path, "static.toml", '''
id = "halcyon-ds-static"
title = "Halcyon Reach de Sitter, static patch"
field-equations = "lambda-vacuum"
[parameters.Lambda]
assume = ["positive"]
range = "Lambda > 0"
[charts.static]
coordinates = ["t", "r", "theta", "phi"]
domain = ["0 < r < sqrt(3/Lambda)", "0 < theta < pi"]
cosmological-constant = "Lambda"
line-element = "-(1 - Lambda*r**2/3)*dt**2 + dr**2/(1 - Lambda*r**2/3) + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
''')
    flat = write(tmp_path, "flat.toml", '''
id = "halcyon-ds-flat"
title = "Halcyon Reach de Sitter, flat slicing"
field-equations = "lambda-vacuum"
[parameters.Lambda]
assume = ["positive"]
range = "Lambda > 0"
[charts.flat]
coordinates = ["t", "x", "y", "z"]
cosmological-constant = "Lambda"
line-element = "-dt**2 + exp(2*sqrt(Lambda/3)*t)*(dx**2 + dy**2 + dz**2)"
''')
    out = verdict_of(static, flat)
    assert out["verdict"] == "equivalent"
    for side in (out["a"], out["b"]):
        assert sp.simplify(S(side["invariants"]["ricci-scalar"]) - 4 * Lam) == 0
        assert S(side["invariants"]["weyl-square"]) == 0
    proof = [e for e in out["evidence"] if e["kind"] == "constant-curvature"][0]
    assert proof["result"] == "proved"
    assert sp.simplify(S(proof["curvature"]) - Lam / 3) == 0  # K = R/12 = Lambda/3
    assert "Weinberg" in proof["source"]
    assert out["b"]["symmetries"]["coordinates"] == ["x", "y", "z"]

    # the same spacetime with the constant named L: without --set nothing that depends on how
    # the parameters are identified is used; with it, equivalent again
    renamed = write(tmp_path, "renamed.toml", Path(flat).read_text().replace("Lambda", "L"))
    loose = verdict_of(static, renamed)
    assert loose["verdict"] == "undecided"
    assert any(e["kind"] == "parameters" and e["result"] == "skipped" for e in loose["evidence"])
    # the old spelling --match still works (a hidden alias of --set with a deprecation note)
    assert verdict_of(static, renamed, "--match", "L=Lambda")["verdict"] == "equivalent"
    # and with a different cosmological constant, not equivalent (R = 4 Lambda versus 8 Lambda)
    other = verdict_of(static, renamed, "--set", "L=2*Lambda")
    assert other["verdict"] == "not-equivalent"
    assert [e for e in other["evidence"] if e["result"] == "disproved"][0]["kind"] == "invariant-constant"
    # anti-de Sitter (the same formula with Lambda < 0) is never de Sitter: R = 4 Lambda changes sign, so
    # the two parameters named Lambda are kept apart and the proof holds for every value of both
    ads = write(tmp_path, "ads.toml", Path(static).read_text().replace('"positive"', '"negative"')
                .replace('range = "Lambda > 0"', 'range = "Lambda < 0"')
                .replace('"0 < r < sqrt(3/Lambda)"', '"r > 0"').replace("halcyon-ds-static", "halcyon-ads"))
    anti = verdict_of(ads, static)
    assert anti["verdict"] == "not-equivalent" and "generic" not in anti["summary"]
    assert "signs differ for every parameter value" in [e for e in anti["evidence"]
                                                         if e["result"] == "disproved"][0]["detail"]


def test_reissner_nordstrom_is_not_schwarzschild_with_evidence():
    out = verdict_of(str(BUNDLED["reissner-nordstrom"]), str(BUNDLED["schwarzschild"]))
    assert out["verdict"] == "not-equivalent"
    # published closed forms, C. Cherubini, D. Bini, S. Capozziello and R. Ruffini, Int. J. Mod. Phys. D 11
    # (2002) 827 (recalled from memory): K = 8 (6 M^2 r^2 - 12 M Q^2 r + 7 Q^4) / r^8 and
    # C_abcd C^abcd = 48 (M r - Q^2)^2 / r^8; Schwarzschild K = C^2 = 48 M^2 / r^6 (MTW 1973, eq. 31.4).
    k_rn = S(out["a"]["invariants"]["kretschmann"])
    w_rn = S(out["a"]["invariants"]["weyl-square"])
    assert sp.simplify(k_rn - 8 * (6 * M**2 * r**2 - 12 * M * Q**2 * r + 7 * Q**4) / r**8) == 0
    assert sp.simplify(w_rn - 48 * (M * r - Q**2) ** 2 / r**8) == 0
    proof = [e for e in out["evidence"] if e["result"] == "disproved"][0]
    assert proof["kind"] == "invariant-relation" and "kretschmann" in proof["detail"]
    # the evidence: K = C^2 holds in Schwarzschild; in Reissner-Nordstrom C^2 - K = -8 Q^4 / r^8
    assert proof["relation"] == "weyl-square = kretschmann" and proof["in"] == "B"
    assert sp.simplify(S(proof["residual"]) + 8 * Q**4 / r**8) == 0
    assert "Q = 0" in proof["detail"]  # the only exception: the uncharged case
    assert "generic values of Q" in out["summary"]


def test_flat_is_not_curved():
    out = verdict_of(f"{BUNDLED['minkowski']}:spherical", str(BUNDLED["schwarzschild"]))
    assert out["verdict"] == "not-equivalent"
    proof = [e for e in out["evidence"] if e["result"] == "disproved"][0]
    assert proof["kind"] == "invariant-constant" and proof["invariant"] == "kretschmann"
    assert out["a"]["chart"] == "spherical"


def test_identical_up_to_renaming(tmp_path):
    a = write(tmp_path, "a.toml", SCHWARZSCHILD)
    b = write(tmp_path, "b.toml", '''
id = "halcyon-renamed"
title = "Halcyon Reach exterior, other symbols"
field-equations = "vacuum"
[parameters.m]
assume = ["positive"]
range = "m > 0"
[charts.main]
coordinates = ["T", "rr", "th", "ph"]
domain = ["rr > 2*m", "0 < th < pi"]
line-element = "-(1 - 2*m/rr)*dT**2 + drr**2/(1 - 2*m/rr) + rr**2*(dth**2 + sin(th)**2*dph**2)"
''')
    out = verdict_of(a, b)
    assert out["verdict"] == "identical"
    assert out["evidence"][0]["renaming"] == {"t": "T", "r": "rr", "theta": "th", "phi": "ph", "M": "m"}


def test_compare_entries_from_the_catalogue(empty_catalogue, db_url):
    cli = empty_catalogue
    assert cli("add", str(BUNDLED["schwarzschild"])).exit_code == 0
    out = verdict_of("schwarzschild:schwarzschild", "schwarzschild:isotropic", db=db_url)
    assert out["verdict"] == "equivalent"
    assert out["evidence"][0]["kind"] == "declared-map"
    assert out["a"]["number"] == 1 and len(out["a"]["revision"]) == 64
    assert out["a"]["status"] == "unverified"
    human = cli("compare", "schwarzschild", "schwarzschild@1:isotropic")
    assert human.exit_code == 0
    assert "verdict: equivalent" in human.stdout and "Kretschmann" in human.stdout


@pytest.mark.parametrize("args, where", [
    (("--set", "q=0"), "--set: q: not a parameter"),
    (("--set", "a=2*M"), "outside its range"),
    (("--set", "a"), "--set: 'a' is not NAME=VALUE"),
    (("--set", "a=0,a=0"), "--set: a: given more than once"),
    (("--set", "a=0", "--set", "a=0"), "--set: a: given more than once"),
    (("--map", "r"), "--map: 'r' is not NAME=VALUE"),
    (("--map", "r=__import__('os')"), "--map"),
    (("--map", "r=r*foo"), "foo"),
    (("--map", "x=r"), "must all be coordinates"),
])
def test_bad_options_are_one_line_errors(args, where):
    result = run("compare", str(BUNDLED["kerr"]), str(BUNDLED["schwarzschild"]), *args)
    assert result.exit_code == 2
    assert where in one_error_line(result)


def test_unknown_subjects_are_one_line_errors(empty_catalogue, tmp_path):
    cli = empty_catalogue
    missing = cli("compare", "no-such-entry", str(BUNDLED["kerr"]))
    assert missing.exit_code == 2 and "no entry 'no-such-entry'" in one_error_line(missing)
    chart = cli("compare", f"{BUNDLED['kerr']}:nope", str(BUNDLED["kerr"]))
    assert chart.exit_code == 2 and "no chart 'nope'" in one_error_line(chart)
    nofile = cli("compare", str(tmp_path / "absent.toml"), str(BUNDLED["kerr"]))
    assert nofile.exit_code == 2 and "no such file" in one_error_line(nofile)
