"""Declared statements of a chart (petrov-type, killing, killing-tensors, energy-conditions) and the
verifier plugins ``petrov``, ``killing`` and ``energy-conditions`` that prove them.

Each verifier runs on a correct declaration (it passes) and on a corrupted one (it fails with a
counterexample). Sources beside each check; "recalled from memory" marks values not re-read from the
publication while writing the test.
"""

from __future__ import annotations

import copy
import tomllib

import pytest

from gravicat.checks import Method, Status
from gravicat.engine.geometry import Geometry
from gravicat.errors import InputError
from gravicat.format.bundled import bundled_path
from gravicat.format.metricfile import build_chart, validate


def _raw(entry):
    return tomllib.loads(bundled_path(entry).read_text(encoding="utf-8"))


def _declare(entry, chart, **keys):
    """The bundled ``entry`` with its own declarations of ``chart`` replaced by ``keys`` (TOML names with '_'
    for '-'), validated."""
    raw = copy.deepcopy(_raw(entry))
    c = raw["charts"][chart]
    for key in ("petrov-type", "killing", "killing-tensors", "energy-conditions"):
        c.pop(key, None)
    c.update({k.replace("_", "-"): v for k, v in keys.items()})
    return validate(raw, f"{entry}.toml")


def _run(name, doc, chart, budget=20):
    import importlib

    mod = importlib.import_module(f"gravicat.plugins.{name.replace('-', '_')}")
    (verifier,) = mod.register_verifiers()
    res = verifier.check(Geometry(build_chart(doc, chart), budget=budget))
    return {r.check: r for r in res}


# -- the file format ---------------------------------------------------------------------------------


def test_declarations_enter_the_canonical_form():
    doc = _declare("schwarzschild", "schwarzschild", petrov_type="D",
                   killing={"time": ["1", "0", "0", "0"], "axial": {"phi": "1"}},
                   energy_conditions={"weak": "holds", "null": "holds"})
    c = doc.data["charts"]["schwarzschild"]
    assert c["petrov-type"] == "D"
    assert c["killing"] == {"time": ["1", "0", "0", "0"], "axial": ["0", "0", "0", "1"]}  # table form -> list
    assert list(c["energy-conditions"]) == ["null", "weak"]  # canonical order
    spec = build_chart(doc, "schwarzschild")
    assert spec.extra["declarations"]["petrov-type"] == "D"
    assert spec.extra["declarations"]["killing"]["axial"] == (0, 0, 0, 1)


def test_a_file_without_declarations_keeps_its_canonical_form():
    raw = _raw("minkowski")
    for c in raw["charts"].values():
        for key in ("petrov-type", "killing", "killing-tensors", "energy-conditions"):
            c.pop(key, None)
    doc = validate(raw, "minkowski.toml")
    assert all(not {"petrov-type", "killing", "killing-tensors", "energy-conditions"} & set(c)
               for c in doc.data["charts"].values())
    assert "declarations" not in build_chart(doc).extra


@pytest.mark.parametrize(
    ("keys", "field", "words"),
    [
        ({"petrov_type": "E"}, "charts.schwarzschild.petrov-type", "not a Petrov type"),
        ({"petrov_type": 4}, "charts.schwarzschild.petrov-type", "must be a string"),
        ({"killing": {"time": ["1", "0"]}}, "charts.schwarzschild.killing.time", "has 2 components"),
        ({"killing": {"time": {"T": "1"}}}, "charts.schwarzschild.killing.time.T", "not a coordinate"),
        ({"killing": {"time": ["0", "0", "0", "0"]}}, "charts.schwarzschild.killing.time", "every component is 0"),
        ({"killing": {"Time": ["1", "0", "0", "0"]}}, "charts.schwarzschild.killing.Time", "slugs"),
        ({"killing": {"time": ["1", "0", "0", "__import__('os')"]}}, "charts.schwarzschild.killing.time[3]", ""),
        ({"killing": {"time": ["1", "0", "0", "q"]}}, "charts.schwarzschild.killing.time[3]", "q"),
        ({"killing_tensors": {"k": {"components": [["1"]]}}}, "charts.schwarzschild.killing-tensors.k.indices",
         "missing"),
        ({"killing_tensors": {"k": {"indices": "mixed", "components": [["1"]]}}},
         "charts.schwarzschild.killing-tensors.k.indices", "'lower'"),
        ({"killing_tensors": {"k": {"indices": "lower", "components": [["1"]]}}},
         "charts.schwarzschild.killing-tensors.k.components", "4x4"),
        ({"energy_conditions": {"nul": "holds"}}, "charts.schwarzschild.energy-conditions.nul", "unknown key"),
        ({"energy_conditions": {"null": "yes"}}, "charts.schwarzschild.energy-conditions.null", "'holds'"),
        ({"energy_conditions": {}}, "charts.schwarzschild.energy-conditions", "no condition"),
    ],
)
def test_bad_declarations_are_one_line_errors_naming_the_field(keys, field, words):
    with pytest.raises(InputError) as err:
        _declare("schwarzschild", "schwarzschild", **keys)
    message = str(err.value)
    assert "\n" not in message and err.value.field == field and words in message, message
    assert message.startswith("schwarzschild.toml: ")


def test_petrov_type_is_refused_outside_four_dimensions():
    with pytest.raises(InputError) as err:
        _declare("tangherlini-5d", "static", petrov_type="D")
    assert "4 dimensions" in str(err.value)


def test_an_asymmetric_killing_tensor_is_a_one_line_error():
    comps = [["0"] * 4 for _ in range(4)]
    comps[0][1] = "r"
    doc = _declare("schwarzschild", "schwarzschild", killing_tensors={"k": {"indices": "lower", "components": comps}})
    with pytest.raises(InputError) as err:
        build_chart(doc, "schwarzschild")
    assert "not symmetric" in str(err.value) and err.value.field.endswith("components[0][1]")


# -- petrov --------------------------------------------------------------------------------------------


def test_petrov_passes_a_correct_type_and_skips_an_undeclared_one():
    # Schwarzschild and Kerr are type D (Stephani et al., Exact Solutions of Einstein's Field Equations, 2nd ed.
    # 2003, sec. 15.4 and 21.1)
    res = _run("petrov", _declare("kerr", "boyer-lindquist", petrov_type="D"), "boyer-lindquist")["petrov"]
    assert res.status == Status.PASS and res.method == Method.SYMBOLIC, res.detail
    res = _run("petrov", _declare("schwarzschild", "schwarzschild"), "schwarzschild")["petrov"]
    assert res.status == Status.SKIPPED and res.method == Method.NONE


def test_petrov_fails_a_wrong_type_with_a_counterexample():
    # Schwarzschild is type D, not N (Stephani et al. 2003, sec. 15.4)
    res = _run("petrov", _declare("schwarzschild", "schwarzschild", petrov_type="N"), "schwarzschild")["petrov"]
    assert res.status == Status.FAIL, res.detail
    assert res.counterexample["point"] and "type D" in res.counterexample["residual"]
    # the plane wave is type N (Stephani et al. 2003, ch. 24), not O
    res = _run("petrov", _declare("plane-wave", "brinkmann", petrov_type="O"), "brinkmann")["petrov"]
    assert res.status == Status.FAIL and "type N" in res.counterexample["residual"], res.detail


# -- killing -------------------------------------------------------------------------------------------

# Carter's Killing tensor of Kerr in Boyer-Lindquist coordinates, lower indices:
# K_ab = Sigma^2 dtheta_a dtheta_b + sin^2(theta) w_a w_b - a^2 cos^2(theta) g_ab, w = a dt - (r^2 + a^2) dphi,
# so that K^ab p_a p_b = p_theta^2 + (a E sin(theta) - L/sin(theta))^2 + a^2 cos^2(theta) mu^2 is Carter's constant
# (B. Carter, Phys. Rev. 174 (1968) 1559; M. Walker and R. Penrose, Commun. Math. Phys. 18 (1970) 265; the form
# recalled from memory). ``sign`` = -1 flips the sign of the metric term: no longer a Killing tensor.
def carter(sign=1):
    s = "+" if sign == 1 else "-"
    t = "-" if sign == 1 else "+"
    return [
        [f"a**2*sin(theta)**2 {s} a**2*cos(theta)**2*(1 - 2*M*r/Sigma)", "0", "0",
         f"-a*(r**2 + a**2)*sin(theta)**2 {s} 2*M*a**3*r*cos(theta)**2*sin(theta)**2/Sigma"],
        ["0", f"{t}a**2*cos(theta)**2*Sigma/Delta", "0", "0"],
        ["0", "0", f"Sigma**2 {t} a**2*cos(theta)**2*Sigma", "0"],
        [f"-a*(r**2 + a**2)*sin(theta)**2 {s} 2*M*a**3*r*cos(theta)**2*sin(theta)**2/Sigma", "0", "0",
         f"(r**2 + a**2)**2*sin(theta)**2 {t} a**2*cos(theta)**2*(r**2 + a**2 + 2*M*a**2*r*sin(theta)**2/Sigma)"
         "*sin(theta)**2"],
    ]


def test_killing_vectors_pass_and_a_wrong_one_fails_with_a_counterexample():
    # d_t, d_phi and the rotations of a spherically symmetric metric are Killing vectors (Wald, General
    # Relativity, 1984, sec. C.3 and 6.1); flipping the sign of one term of a rotation breaks Killing's equation
    doc = _declare("schwarzschild", "schwarzschild", killing={
        "time": {"t": "1"}, "axial": {"phi": "1"},
        "rotation-x": {"theta": "-sin(phi)", "phi": "-cos(theta)/sin(theta)*cos(phi)"},
        "wrong": {"theta": "-sin(phi)", "phi": "cos(theta)/sin(theta)*cos(phi)"},
        "boost": {"r": "1"}})
    res = _run("killing", doc, "schwarzschild")
    for name in ("time", "axial", "rotation-x"):
        assert res[f"killing:{name}"].status == Status.PASS and res[f"killing:{name}"].method == Method.SYMBOLIC
    for name in ("wrong", "boost"):
        bad = res[f"killing:{name}"]
        assert bad.status == Status.FAIL and bad.counterexample["point"] and bad.counterexample["component"]


def test_carters_killing_tensor_passes_and_a_wrong_sign_is_caught():
    doc = _declare("kerr", "boyer-lindquist", killing_tensors={
        "carter": {"indices": "lower", "components": carter(+1)},
        "wrong-sign": {"indices": "lower", "components": carter(-1)}})
    res = _run("killing", doc, "boyer-lindquist")
    good, bad = res["killing:tensor:carter"], res["killing:tensor:wrong-sign"]
    assert good.status == Status.PASS and good.method == Method.SYMBOLIC, good.detail
    assert bad.status == Status.FAIL and bad.counterexample["point"], bad.detail


def test_a_killing_tensor_with_upper_indices_is_lowered_with_the_metric():
    # g^ab is trivially a Killing tensor (nabla g = 0); 'upper' lowers it to g_ab. r^2 g^ab is not one.
    f = "(1 - 2*M/r)"
    inverse = [[f"-1/{f}", "0", "0", "0"], ["0", f, "0", "0"], ["0", "0", "1/r**2", "0"],
               ["0", "0", "0", "1/(r**2*sin(theta)**2)"]]
    scaled = [[f"r**2*({x})" if x != "0" else "0" for x in row] for row in inverse]
    doc = _declare("schwarzschild", "schwarzschild", killing_tensors={
        "metric": {"indices": "upper", "components": inverse},
        "scaled": {"indices": "upper", "components": scaled}})
    res = _run("killing", doc, "schwarzschild")
    assert res["killing:tensor:metric"].status == Status.PASS
    assert res["killing:tensor:scaled"].status == Status.FAIL and res["killing:tensor:scaled"].counterexample


# -- energy-conditions ---------------------------------------------------------------------------------


def test_morris_thorne_null_condition_violated_as_declared_and_a_wrong_holds_fails():
    import sympy as sp

    # the throat of a traversable wormhole needs matter violating the null energy condition (Morris & Thorne,
    # Am. J. Phys. 56 (1988) 395, eqs. 12-14: rho + p_r = -b0^2/(4 pi r^4) < 0 for b = b0^2/r, Phi = 0)
    doc = _declare("morris-thorne", "areal", energy_conditions={"null": "violated"})
    res = _run("energy-conditions", doc, "areal")["energy-conditions:null"]
    # T^a_b is diagonal here: the violation is shown at an exact point
    assert res.status == Status.PASS and res.method == Method.SYMBOLIC and "exact point" in res.detail, res.detail
    doc = _declare("morris-thorne", "areal", energy_conditions={"null": "holds", "weak": "holds"})
    res = _run("energy-conditions", doc, "areal")
    for cond in ("null", "weak"):  # the weak condition includes the null one (Hawking & Ellis 1973, sec. 4.3)
        bad = res[f"energy-conditions:{cond}"]
        assert bad.status == Status.FAIL and bad.counterexample["point"] and bad.counterexample["vector"], bad.detail
        assert sp.sympify(bad.counterexample["residual"].lstrip("~")) < 0  # our own output, not file input


def test_vacuum_conditions_hold_on_the_domain_and_a_declared_violation_fails():
    # T_ab = 0: every energy condition holds trivially (Hawking & Ellis 1973, sec. 4.3)
    doc = _declare("schwarzschild", "schwarzschild", energy_conditions={"null": "holds", "strong": "violated"})
    res = _run("energy-conditions", doc, "schwarzschild")
    assert res["energy-conditions:null"].status == Status.PASS
    assert res["energy-conditions:null"].method == Method.SYMBOLIC
    bad = res["energy-conditions:strong"]
    assert bad.status == Status.FAIL and bad.method == Method.SYMBOLIC and bad.counterexample


def test_alcubierre_negative_energy_density():
    # the Eulerian observers see a negative energy density (Alcubierre, Class. Quantum Grav. 11 (1994) L73,
    # eq. 19), so the weak condition is violated; a declared 'holds' fails with the point and the observer
    doc = _declare("alcubierre", "comoving-grid", energy_conditions={"weak": "violated"})
    assert _run("energy-conditions", doc, "comoving-grid")["energy-conditions:weak"].status == Status.PASS
    doc = _declare("alcubierre", "comoving-grid", energy_conditions={"weak": "holds"})
    bad = _run("energy-conditions", doc, "comoving-grid")["energy-conditions:weak"]
    assert bad.status == Status.FAIL and bad.counterexample["point"]


@pytest.mark.parametrize("chart", ["original", "cylindrical"])
def test_goedel_dust_conditions_proved_in_its_rotating_frame(chart):
    """Goedel's dust, rho = 1/(8 pi a^2) > 0 and p = 0 with Lambda = -1/(2 a^2) on the geometric side
    (K. Goedel, Rev. Mod. Phys. 21 (1949) 447): T^a_b is not diagonal in either chart (u is not a
    coordinate direction of an orthogonal frame), so the proof goes through the declared fluid,
    8 pi T_ab = (rho + p) u_a u_b + p g_ab checked identically; every condition holds
    (Hawking & Ellis 1973, sec. 4.3)."""
    from gravicat.physics.energy_proof import proved_energy_conditions

    doc = _declare("godel", chart)
    geo = Geometry(build_chart(doc, chart), budget=20)
    out = proved_energy_conditions(geo, build_chart(doc, chart))
    for cond in ("null", "weak", "strong", "dominant"):
        assert out[cond]["status"] == "holds" and out[cond]["method"] == "proved", (cond, out[cond])
        assert "declared fluid" in out[cond]["where"]
    assert out["eigenvalues"]["pressures"] == {"fluid": "0"}


def test_a_fluid_that_is_not_the_metric_source_is_not_used():
    """A declared density twice the right one is not Goedel's stress tensor: the fluid shortcut refuses it
    (the general analysis then answers from the Einstein tensor itself)."""
    from gravicat.physics.energy_proof import _perfect_fluid

    raw = copy.deepcopy(_raw("godel"))
    raw["charts"]["original"]["fluid"]["density"] = "1/(4*pi*a**2)"
    doc = validate(raw, "godel.toml")
    spec = build_chart(doc, "original")
    assert _perfect_fluid(Geometry(spec, budget=20), spec, True) is None


@pytest.mark.parametrize("name", ["petrov", "killing", "energy-conditions"])
def test_undeclared_charts_are_skipped(name):
    res = _run(name, _declare("minkowski", "cartesian"), "cartesian")
    assert [r.status for r in res.values()] == [Status.SKIPPED]


def test_declarations_on_a_chart_off_the_fast_path_get_an_answer():
    # r**2 > 4 M**2 does not settle the sign of r, so Abs(r) keeps the chart on the sympy path; each declaration
    # still gets pass, skipped or an honest inconclusive, never a crash (Schwarzschild: type D, d/dt Killing,
    # vacuum: Stephani et al. 2003, sec. 15.4; Wald 1984, sec. C.3)
    import importlib

    import sympy as sp
    from _charts import M, chart, ph, r, sph, t, th

    f = 1 - 2 * M / sp.Abs(r)
    decl = {"petrov-type": "D", "killing": {"d-t": (1, 0, 0, 0), "d-phi": (0, 0, 0, 1)},
            "killing-tensors": {"metric": {"indices": "lower", "components": sp.ImmutableMatrix(sph(-f, 1 / f))}},
            "energy-conditions": {"null": "holds"}}
    spec = chart((t, r, th, ph), sph(-f, 1 / f), (M,), domain=(r**2 > 4 * M**2, th > 0, th < sp.pi),
                 ranges=(M > 0,), extra={"declarations": decl})
    assert Geometry(spec, budget=0.5).path == "sympy"
    for name in ("petrov", "killing", "energy_conditions"):
        (verifier,) = importlib.import_module(f"gravicat.plugins.{name}").register_verifiers()
        for res in verifier.check(Geometry(spec, budget=0.5)):
            assert res.status in (Status.PASS, Status.INCONCLUSIVE), (res.check, res.status, res.detail)
