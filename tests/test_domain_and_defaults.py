"""Chart domains may not involve declared functions; parameter defaults must lie inside their ranges.

A domain inequality that names a declared function (bare, applied, differentiated, or through a
definition) cannot be honoured by the sampler, so the file is refused with one line naming
``FILE: charts.X.domain[i]``. A parameter default outside its range or its assumptions is refused
with one line naming ``FILE: parameters.X.default``. The bundled catalogue is cross-checked against
sympy (the reference library), which evaluates every range at the defaults independently of
gravicat's own number evaluator.
"""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

import pytest
import sympy

from gravicat.errors import InputError
from gravicat.format.metricfile import load_file

SPACETIMES = Path(__file__).resolve().parent.parent / "catalog" / "data" / "spacetimes"

# A test entry in our own scenario: the Halcyon Reach group's wormhole-shell exercise.
HEAD = '''id = "halcyon-shell"
title = "Halcyon Reach shell exercise"
summary = "Test fixture for domain and default rules."
field-equations = "vacuum"

[[references]]
citation = "M. S. Morris and K. S. Thorne, Am. J. Phys. 56 (1988) 395"
'''

SPHERE = "r**2*(dtheta**2 + sin(theta)**2*dphi**2)"


def chart_with_function(domain: str, define: str = "") -> str:
    """A chart declaring the shape function b(r) (the wormhole form of Morris and Thorne 1988)."""
    return f'''
[charts.shell]
coordinates = ["t", "r", "theta", "phi"]
functions = ["b(r)"]
{define}
domain = [{domain!r}, "0 < theta < pi"]
line-element = "-dt**2 + dr**2/(1 - b/r) + {SPHERE}"
'''.replace("'", '"')


def write(tmp_path: Path, body: str) -> Path:
    path = tmp_path / "shell.toml"
    path.write_text(HEAD + body)
    return path


def refused(path: Path) -> InputError:
    with pytest.raises(InputError) as info:
        load_file(path)
    message = str(info.value)
    assert "\n" not in message
    assert message.startswith(f"{path}: ")
    return info.value


# --------------------------------------------------------------------------- domains


@pytest.mark.parametrize("domain", ["r > b", "r > 2*b(r)", "r > diff(b, r)", "diff(b, r, 2) < 1"],
                         ids=["bare", "applied", "diff", "diff-order-2"])
def test_declared_function_in_domain_refused(tmp_path, domain):
    path = write(tmp_path, chart_with_function(domain))
    err = refused(path)
    assert err.field == "charts.shell.domain[0]"
    assert "declared function b(r)" in err.problem
    assert str(err).startswith(f"{path}: charts.shell.domain[0]: ")


def test_declared_function_through_definitions_refused(tmp_path):
    # k uses h, which uses b: the chain of definitions is followed
    define = 'define = { h = "b/2", k = "h + 1" }'
    path = write(tmp_path, chart_with_function("r > k", define))
    err = refused(path)
    assert err.field == "charts.shell.domain[0]"
    assert "'k'" in err.problem and "b(r)" in err.problem


def test_second_domain_entry_is_named(tmp_path):
    body = chart_with_function("r > 0").replace('"0 < theta < pi"', '"0 < theta < pi", "b < r"')
    err = refused(write(tmp_path, body))
    assert err.field == "charts.shell.domain[2]"


def test_shape_function_written_under_define_accepted(tmp_path):
    # the suggested alternative: the shape function b = b0**2/r written out under define
    body = f'''
[parameters.b0]
assume = ["positive"]
range = "b0 > 0"
default = "1"

[charts.shell]
coordinates = ["t", "r", "theta", "phi"]
define = {{ b = "b0**2/r" }}
domain = ["r > b0", "r > b", "0 < theta < pi"]
line-element = "-dt**2 + dr**2/(1 - b/r) + {SPHERE}"
'''
    doc = load_file(write(tmp_path, body))
    assert doc is not None


# --------------------------------------------------------------------------- defaults

FLAT = f'''
[charts.flat]
coordinates = ["t", "r", "theta", "phi"]
domain = ["r > 0", "0 < theta < pi"]
line-element = "-dt**2 + dr**2 + {SPHERE}"
'''


def params(**specs: tuple[str, str | None, str]) -> str:
    """``name=(assume, range or None, default)`` -> TOML parameter tables."""
    out = []
    for name, (assume, rng, default) in specs.items():
        out.append(f'[parameters.{name}]\nassume = ["{assume}"]\n'
                   + (f'range = "{rng}"\n' if rng else "") + f'default = "{default}"\n')
    return "\n".join(out) + FLAT


KERR_NEWMAN = {"M": ("positive", "M > 0", "1"), "Q": ("real", "-M <= Q <= M", "1/2"),
               "a": ("nonnegative", "0 <= a <= sqrt(M**2 - Q**2)", "1/2")}


def test_kerr_newman_defaults_accepted(tmp_path):
    load_file(write(tmp_path, params(**KERR_NEWMAN)))


def test_charge_above_mass_refused(tmp_path):
    # a horizon needs a**2 + Q**2 <= M**2 (Misner, Thorne and Wheeler, Gravitation, 1973, ch. 33;
    # equation number not given, recalled from memory), so |Q| <= M: Q = 3/2 with M = 1 is outside
    spec = dict(KERR_NEWMAN, Q=("real", "-M <= Q <= M", "3/2"), a=("nonnegative", None, "0"))
    err = refused(write(tmp_path, params(**spec)))
    assert err.field == "parameters.Q.default"
    assert "3/2" in err.problem and "-M <= Q <= M" in err.problem


def test_spin_outside_dependent_range_refused(tmp_path):
    spec = dict(KERR_NEWMAN, a=("nonnegative", "0 <= a <= sqrt(M**2 - Q**2)", "9/10"))
    err = refused(write(tmp_path, params(**spec)))
    assert err.field == "parameters.a.default"


def test_irrational_default_exactly_on_bound_accepted(tmp_path):
    # a = sqrt(M**2 - Q**2) = sqrt(3)/2 is the extremal Kerr-Newman value: on the bound, allowed
    spec = dict(KERR_NEWMAN, a=("nonnegative", "0 <= a <= sqrt(M**2 - Q**2)", "sqrt(3)/2"))
    load_file(write(tmp_path, params(**spec)))
    spec = dict(KERR_NEWMAN, a=("nonnegative", "0 <= a <= sqrt(M**2 - Q**2)", "sqrt(1 - 1/4)"))
    load_file(write(tmp_path, params(**spec)))


def test_irrational_default_just_outside_bound_refused(tmp_path):
    spec = dict(KERR_NEWMAN, a=("nonnegative", "0 <= a <= sqrt(M**2 - Q**2)", "sqrt(3)/2 + 1/10**30"))
    err = refused(write(tmp_path, params(**spec)))
    assert err.field == "parameters.a.default"


@pytest.mark.parametrize("assume, default, word", [("positive", "-1", "positive"), ("positive", "0", "positive"),
                                                   ("nonnegative", "-1/3", "non-negative"),
                                                   ("negative", "1", "negative")])
def test_default_violating_assumption_refused(tmp_path, assume, default, word):
    err = refused(write(tmp_path, params(k=(assume, None, default))))
    assert err.field == "parameters.k.default"
    assert f"not {word}" in err.problem and f"assume = {assume}" in err.problem


@pytest.mark.parametrize("default", ["sqrt(-1)", "log(0)", "1/0"])
def test_default_not_a_finite_real_refused(tmp_path, default):
    err = refused(write(tmp_path, params(k=("real", None, default))))
    assert err.field == "parameters.k.default"


# --------------------------------------------------------------------------- the command line


def one_error_line(result) -> str:
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("Error: ")
    assert "Traceback" not in result.output
    return lines[0]


@pytest.mark.parametrize("case", ["domain", "default"])
@pytest.mark.parametrize("command", ["check", "add"])
def test_cli_refuses_with_one_line_and_stores_nothing(empty_catalogue, tmp_path, case, command):
    cli = empty_catalogue
    if case == "domain":
        path, field = write(tmp_path, chart_with_function("r > b")), "charts.shell.domain[0]"
    else:
        spec = dict(KERR_NEWMAN, Q=("real", "-M <= Q <= M", "3/2"), a=("nonnegative", None, "0"))
        path, field = write(tmp_path, params(**spec)), "parameters.Q.default"
    result = cli(command, str(path))
    assert result.exit_code == 2, result.output
    line = one_error_line(result)
    assert field in line and str(path.name) in line
    listed = cli("list", "--json")
    assert listed.exit_code == 0 and listed.stdout.strip() == "[]"


# --------------------------------------------------------------------------- the bundled catalogue

_REL = re.compile(r"(<=|>=|<|>)")


def _sympy_range_holds(rng: str, values: dict[str, sympy.Expr]) -> bool:
    """Evaluate a chained range with sympy alone (the reference), at exact default values."""
    parts = _REL.split(rng)
    exprs = [sympy.sympify(p, locals={k: sympy.Symbol(k) for k in values}).subs(
        {sympy.Symbol(k): v for k, v in values.items()}) for p in parts[::2]]
    ops = parts[1::2]
    cmp = {"<": sympy.Lt, "<=": sympy.Le, ">": sympy.Gt, ">=": sympy.Ge}
    return all(bool(cmp[op](sympy.nsimplify(left), sympy.nsimplify(right)))
               for left, op, right in zip(exprs, ops, exprs[1:], strict=False))


BUNDLED = sorted(SPACETIMES.glob("*.toml"))


@pytest.mark.parametrize("path", BUNDLED, ids=[p.stem for p in BUNDLED])
def test_bundled_defaults_satisfy_ranges(path):
    load_file(path)  # gravicat's own check accepts it
    # independent cross-check with sympy (the reference library): every default is a finite real
    # number, satisfies its assumptions, and every range holds at the defaults
    raw = tomllib.loads(path.read_text())
    specs = raw.get("parameters", {})
    names = {k: sympy.Symbol(k) for k in specs}
    values: dict[str, sympy.Expr] = {}
    for _ in range(len(specs) + 1):  # defaults may refer to other defaults
        for name, spec in specs.items():
            if "default" in spec and name not in values:
                value = sympy.sympify(str(spec["default"]), locals=names).subs(
                    {names[k]: v for k, v in values.items()})
                if not value.free_symbols:
                    values[name] = value
    for name, value in values.items():
        assert value.is_real and value.is_finite, (path.name, name, value)
        assume = specs[name].get("assume", [])
        if "positive" in assume:
            assert value > 0, (path.name, name)
        if "nonnegative" in assume:
            assert value >= 0, (path.name, name)
        if "negative" in assume:
            assert value < 0, (path.name, name)
    for name, spec in specs.items():
        rng = spec.get("range")
        if rng and all(str(s) in values for s in sympy.sympify(_REL.split(rng)[0], locals=names).free_symbols
                       | set().union(*(sympy.sympify(p, locals=names).free_symbols
                                       for p in _REL.split(rng)[::2]))):
            assert _sympy_range_holds(rng, values), (path.name, name, rng)
