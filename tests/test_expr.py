"""Hostile input against the expression whitelist (gravicat.format.expr) and the metric-file validator.

Metric files are exchanged between groups, so every expression in them is untrusted text. Each
code-injection payload below tries to create a sentinel file in the test's own temporary
directory; the tests assert that the payload is refused with a one-line message naming the
source, the field and the offending token, and that the sentinel never appears:

* checked on its own (``check_expression`` / ``check_relation``),
* inside every expression field of a TOML (or JSON) file read by ``load_file``,
* slipped into an already validated document, which ``build_chart`` checks again,
* through the command line (``gravicat add`` exits 2 with one ``Error:`` line).

Valid expressions are compared with sympy objects built directly in this file: sympy, not
gravicat, is the reference. Tests marked ``xfail(strict=True, reason="BUG: ...")`` document
defects found in gravicat.format.expr / gravicat.format.metricfile; they start passing (and then fail as
XPASS) once the defect is fixed, so the marker must be removed with the fix.
"""

from __future__ import annotations

import copy
import json
import signal
from contextlib import contextmanager
from pathlib import Path

import pytest
import sympy
from typer.testing import CliRunner

from gravicat.cli import app
from gravicat.errors import InputError, UnsafeExpression
from gravicat.format.expr import (
    MAX_CHARS,
    MAX_CONSTANT_BITS,
    MAX_DEPTH,
    MAX_DIFF_ORDER,
    MAX_EXPONENT,
    MAX_LITERAL_DIGITS,
    MAX_NODES,
    Names,
    check_expression,
    check_relation,
    relation_to_sympy,
    to_sympy,
)
from gravicat.format.metricfile import MetricDocument, build_chart, load_file, validate

SOURCE = "fen-group/toy-exterior.toml"
FIELD = "charts.main.define.x"

NAMES = Names(
    symbols=frozenset({"t", "r", "theta", "phi", "M", "Q"}),
    functions={"a": ("t",), "H": ("t", "r")},
    coordinates=frozenset({"t", "r", "theta", "phi"}),
)

# The reference objects, built with sympy directly.
T, R, TH, PH = (sympy.Symbol(n, real=True) for n in ("t", "r", "theta", "phi"))
M = sympy.Symbol("M", positive=True)
Q = sympy.Symbol("Q", real=True)
A_OF_T = sympy.Function("a")(T)
H_OF_TR = sympy.Function("H")(T, R)
ENV = {"t": T, "r": R, "theta": TH, "phi": PH, "M": M, "Q": Q}
FUNCTIONS = {"a": A_OF_T, "H": H_OF_TR}


def parse(text: str):
    return to_sympy(check_expression(text, NAMES, source=SOURCE, field=FIELD), ENV, FUNCTIONS)


def assert_one_line(message: str) -> None:
    assert message, "empty message"
    assert "\n" not in message and "\r" not in message, repr(message)


def refused(text, names: Names = NAMES, *, field: str = FIELD, relation: bool = False) -> str:
    """Check ``text``; it must be refused with a one-line 'SOURCE: FIELD: problem' message."""
    check = check_relation if relation else check_expression
    with pytest.raises(UnsafeExpression) as info:
        check(text, names, source=SOURCE, field=field)
    exc = info.value
    message = str(exc)
    assert_one_line(message)
    assert message.startswith(f"{SOURCE}: {field}: "), message
    assert (exc.source, exc.field) == (SOURCE, field)
    assert exc.exit_code == 2
    return message


@contextmanager
def time_limit(seconds: float):
    """Fail (TimeoutError) instead of hanging when a computation runs away."""

    def on_alarm(signum, frame):
        raise TimeoutError(f"still running after {seconds} s")

    previous = signal.signal(signal.SIGALRM, on_alarm)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


# --------------------------------------------------------------------------- injection payloads
#
# "@S@" is replaced by the path of a sentinel file under the test's tmp_path. Every payload would
# create that file if Python ran it; the second element is the token the message must name.

PATHLIB = "__import__('pathlib').Path('@S@').touch()"

INJECTIONS = [
    ("import-pathlib", PATHLIB, "__import__('pathlib').Path("),
    ("import-os-system", "__import__('os').system('touch @S@')", "__import__('os').system"),
    ("subclasses-walk",
     "().__class__.__bases__[0].__subclasses__()[-1].__init__.__globals__['__builtins__']['open']('@S@', 'w')",
     "().__class__.__bases__[0]"),
    ("lambda-called", f"(lambda: {PATHLIB})()", "lambda: __import__"),
    ("lambda-bare", f"lambda: {PATHLIB}", "lambda: __import__"),
    ("list-comprehension", f"[{PATHLIB} for _ in (1,)]", "[__import__('pathlib')"),
    ("set-comprehension", f"{{{PATHLIB} for _ in (1,)}}", "{__import__('pathlib')"),
    ("generator", f"({PATHLIB} for _ in (1,))", "(__import__('pathlib')"),
    ("dict-comprehension", f"{{k: {PATHLIB} for k in (1,)}}", "{k: __import__('pathlib')"),
    ("attribute-chain", "t.__class__.__init__.__globals__['__builtins__']['open']('@S@', 'w')",
     "t.__class__.__init__"),
    ("builtins-subscript", "__builtins__['open']('@S@', 'w')", "__builtins__['open']"),
    ("builtins-attribute", "__builtins__.open('@S@', 'w')", "__builtins__.open"),
    ("math-function-globals", "sin.__globals__['__builtins__']['open']('@S@', 'w')", "sin.__globals__"),
    ("f-string", f'f"{{{PATHLIB}}}"', "f\"{__import__('pathlib')"),
    ("walrus", f"(p := {PATHLIB})", "(p := __import__('pathlib')"),
    ("string", f'"{PATHLIB}"', "\"__import__('pathlib')"),
    ("bytes", f'b"{PATHLIB}"', "b\"__import__('pathlib')"),
    ("getattr", "getattr(__import__('pathlib').Path('@S@'), 'touch')()", "getattr(__import__("),
    ("eval", f'eval("{PATHLIB}")', "unknown function 'eval'"),
    ("exec", f'exec("{PATHLIB}")', "unknown function 'exec'"),
    ("open", "open('@S@', 'w')", "unknown function 'open'"),
    ("compile", f'eval(compile("{PATHLIB}", "x", "eval"))', "unknown function 'eval'"),
    ("keyword-argument", f"sin(x={PATHLIB})", "sin(x=__import__("),
    ("starred-argument", f"sin(*[{PATHLIB}])", "sin(*[__import__("),
    ("unknown-call", "system('touch @S@')", "unknown function 'system'"),
    ("sympify-call", f'sympify("{PATHLIB}")', "unknown function 'sympify'"),
    ("parse-expr-call", f'parse_expr("{PATHLIB}")', "unknown function 'parse_expr'"),
    ("dunder-call", "__import__('subprocess').call(['touch', '@S@'])", "__import__('subprocess')"),
    ("inside-math-function", f"1 + sin({PATHLIB})", "__import__('pathlib').Path("),
    ("inside-declared-function", f"a({PATHLIB})", "declared as a(t)"),
    ("inside-diff", f"diff(a, t, {PATHLIB})", "diff()"),
    ("declared-symbol-called", "M('@S@')", "'M' is not a function"),
    ("conditional", f"{PATHLIB} if t else 0", "__import__('pathlib').Path("),
    ("boolean-operator", f"t and {PATHLIB}", "t and __import__("),
    ("unicode-lookalike", f'ｅｖａｌ("{PATHLIB}")', "unknown function 'eval'"),
]


def _payload(template: str, sentinel: Path) -> str:
    return template.replace("@S@", str(sentinel))


def test_the_sentinel_payload_is_live_when_python_itself_runs_it(tmp_path):
    """Control: the payload really creates the sentinel, so its absence below means something."""
    sentinel = tmp_path / "SENTINEL"
    payload = _payload(PATHLIB, sentinel)
    exec(compile(payload, "<control>", "eval"), {})  # the test's own constant, never file text
    assert sentinel.exists()


@pytest.mark.parametrize(("template", "token"), [(t, k) for _, t, k in INJECTIONS],
                         ids=[name for name, _, _ in INJECTIONS])
def test_injection_is_refused_and_never_runs(tmp_path, template, token):
    sentinel = tmp_path / "SENTINEL"
    message = refused(_payload(template, sentinel))
    assert token in message
    assert not sentinel.exists()


@pytest.mark.parametrize(("template", "token"), [(t, k) for _, t, k in INJECTIONS[:6]],
                         ids=[name for name, _, _ in INJECTIONS[:6]])
def test_injection_in_an_inequality_is_refused(tmp_path, template, token):
    sentinel = tmp_path / "SENTINEL"
    message = refused(f"0 < ({_payload(template, sentinel)}) < pi", field="charts.main.domain[0]",
                      relation=True)
    assert token in message
    assert not sentinel.exists()


# --------------------------------------------------------------------------- refused constructs

CONSTRUCTS = [
    ("'abc'", "'abc'"),
    ('"abc"', "'abc'"),
    ("b'abc'", "b'abc'"),
    ("True", "'True'"),
    ("False", "'False'"),
    ("None", "'None'"),
    ("1j", "'1j'"),
    ("2 + 3j", "'3j'"),
    ("...", "'...'"),
    ("t.real", "'t.real' is not allowed (attribute access)"),
    ("t[0]", "'t[0]' is not allowed (subscript)"),
    ("lambda: 1", "'lambda: 1' is not allowed (lambda)"),
    ("[t for t in r]", "(comprehension)"),
    ("f'{t}'", "(string)"),
    ("(y := 1)", "'(y := 1)' is not allowed (assignment)"),
    ("(t, r)", "'(t, r)' is not allowed (tuple)"),
    ("[t]", "'[t]' is not allowed (list)"),
    ("{t}", "'{t}' is not allowed (set)"),
    ("{t: r}", "'{t: r}' is not allowed (dict)"),
    ("t < r", "'t < r' is not allowed (comparison)"),
    ("t and r", "'t and r' is not allowed (boolean operator)"),
    ("t if r else M", "(conditional expression)"),
    ("not t", "'not t'"),
    ("~t", "'~t'"),
    ("t % r", "'t % r'"),
    ("t // r", "'t // r'"),
    ("t @ r", "'t @ r'"),
    ("t << r", "'t << r'"),
    ("t | r", "'t | r'"),
    ("t ^ r", "'t ^ r'"),
    ("await t", "'await t'"),
    ("*t", "invalid syntax"),
    ("yield t", "invalid syntax"),
    ("_t", "name '_t'"),
    ("__t", "name '__t'"),
    ("_", "name '_'"),
    ("__builtins__", "name '__builtins__'"),
    ("__class__", "name '__class__'"),
    ("t + __loader__", "name '__loader__'"),
    ("getattr(t, 'real')", "unknown function 'getattr'"),
    ("print(t)", "unknown function 'print'"),
    ("Symbol(t)", "unknown function 'Symbol'"),
    ("S(1)", "unknown function 'S'"),
    ("Integer(1)", "unknown function 'Integer'"),
    ("sin(x=t)", "call 'sin(x=t)' may only have plain positional arguments"),
    ("sin(*t)", "call 'sin(*t)' may only have plain positional arguments"),
    ("sin(**t)", "call 'sin(**t)' may only have plain positional arguments"),
    ("t(r)", "'t' is not a function"),
    ("pi(t)", "unknown function 'pi'"),
    ("sin", "function 'sin' used without arguments"),
    ("diff", "function 'diff' used without arguments"),
    ("", "empty expression"),
    ("   ", "empty expression"),
    ("t\x00", "NUL"),
    ("t +", "not a valid expression"),
    ("t²", "'²'"),
]


@pytest.mark.parametrize(("text", "token"), CONSTRUCTS, ids=[repr(t) for t, _ in CONSTRUCTS])
def test_construct_outside_the_whitelist_is_refused(text, token):
    assert token in refused(text)


@pytest.mark.parametrize("value", [None, ["t"], {"t": 1}, True, b"t", 1 + 2j])
def test_non_text_values_are_refused(value):
    assert "expected an expression string" in refused(value)


# --------------------------------------------------------------------------- names, diff(), arity

@pytest.mark.parametrize("name", ["x", "dt", "Lambda", "I", "E", "oo", "zoo", "nan", "inf", "exp1", "os", "sys"])
def test_undeclared_name_is_refused(name):
    assert f"unknown name '{name}'" in refused(f"1 + {name}")


BAD_DIFF = [
    ("diff(t, t)", "diff() applies to a declared function, not 't'"),
    ("diff(5, t)", "diff() applies to a declared function, not '5'"),
    ("diff(sin(t), t)", "diff() applies to a declared function, not 'sin(t)'"),
    ("diff(x, t)", "not 'x'"),
    ("diff(a, r)", "diff(): 'r' is not an argument of function 'a'"),
    ("diff(a, 2)", "diff(): '2' is not an argument of function 'a'"),
    ("diff(a, t + r)", "diff(): 't + r' is not an argument"),
    ("diff(H, theta)", "diff(): 'theta' is not an argument of function 'H'"),
    ("diff(a)", "diff() takes a function, a coordinate and an optional order"),
    ("diff(a, t, 2, 3)", "diff() takes a function, a coordinate and an optional order"),
    ("diff(a, t, 0)", f"order must be an integer from 1 to {MAX_DIFF_ORDER}"),
    ("diff(a, t, -1)", "order must be an integer"),
    (f"diff(a, t, {MAX_DIFF_ORDER + 1})", "order must be an integer"),
    ("diff(a, t, 2.0)", "order must be an integer"),
    ("diff(a, t, True)", "order must be an integer"),
    ("diff(a, t, M)", "order must be an integer"),
    ("diff(a, t=t)", "may only have plain positional arguments"),
    ("diff(a(r), t)", "declared as a(t)"),
]


@pytest.mark.parametrize(("text", "token"), BAD_DIFF, ids=[t for t, _ in BAD_DIFF])
def test_bad_diff_is_refused(text, token):
    assert token in refused(text)


WRONG_ARITY = [
    ("sin(t, r)", "sin() takes 1 argument, got 2"),
    ("sqrt()", "sqrt() takes 1 argument, got 0"),
    ("LambertW(t, 1)", "LambertW() takes 1 argument, got 2"),
    ("log(r, 10)", "log() takes 1 argument, got 2"),
    ("a(r)", "function 'a' is declared as a(t)"),
    ("a(t, r)", "function 'a' is declared as a(t)"),
    ("a()", "function 'a' is declared as a(t)"),
    ("a(1)", "function 'a' is declared as a(t)"),
    ("H(r, t)", "function 'H' is declared as H(t, r)"),
    ("H(t)", "function 'H' is declared as H(t, r)"),
]


@pytest.mark.parametrize(("text", "token"), WRONG_ARITY, ids=[t for t, _ in WRONG_ARITY])
def test_wrong_arity_is_refused(text, token):
    assert token in refused(text)


# --------------------------------------------------------------------------- oversized input

def test_text_over_the_limit_is_refused():
    text = "1" + "+1" * (MAX_CHARS // 2)
    assert len(text) > MAX_CHARS
    assert f"{len(text)} characters long (limit {MAX_CHARS})" in refused(text)


@pytest.mark.parametrize("digits", [MAX_LITERAL_DIGITS + 1, 400, 5000])
def test_huge_integer_literal_is_refused(digits):
    message = refused("9" * digits + " * t")
    assert "digits" in message and str(digits) in message


def test_largest_allowed_integer_literal_is_exact():
    text = "9" * MAX_LITERAL_DIGITS
    assert parse(text) == sympy.Integer(int(text))


def test_non_finite_decimal_is_refused():
    assert "exponent beyond" in refused("1e400 * t")


@pytest.mark.parametrize("text", [
    "(" * 300 + "t" + ")" * 300,                      # the Python tokenizer's nesting limit
    "sin(" * (MAX_DEPTH + 20) + "t" + ")" * (MAX_DEPTH + 20),
    "-" * (MAX_DEPTH + 20) + "t",
    "(" * 150 + "-(" * 100 + "t" + ")" * 250,
], ids=["parentheses", "calls", "unary-minus", "mixed"])
def test_deep_nesting_is_refused(text):
    assert "nested" in refused(text)


@pytest.mark.parametrize("terms", [3_000, 9_000])
def test_very_long_sums_are_refused(terms):
    text = "+".join(["t"] * terms)
    assert len(text) <= MAX_CHARS
    message = refused(text)
    assert "nested" in message or "parts" in message


def test_too_many_parts_is_refused():
    # a balanced sum (shallow, so only the node count can stop it): 4096 leaves, 8191 nodes
    parts = ["t"] * 4096
    while len(parts) > 1:
        parts = [f"({x}+{y})" for x, y in zip(parts[::2], parts[1::2], strict=True)]
    assert len(parts[0]) <= MAX_CHARS
    assert f"more than {MAX_NODES} parts" in refused(parts[0])


ABSURD_REFUSED = [
    ("2**1001", "exponent '1001'"),
    ("t**-1001", "exponent '-1001'"),
    ("t**1e4", "exponent '10000'"),
    ("r**(-(-(2000)))", "exponent"),
    ("(2**1000)**1000", "constant '(2 ** 1000) ** 1000' is too large"),
    ("(2**1000)**1000**1000", "is too large"),
    ("10**1000 * 10**1000", "is too large"),
    ("9**1000 * 9**1000", "is too large"),
]


@pytest.mark.parametrize(("text", "token"), ABSURD_REFUSED, ids=[t for t, _ in ABSURD_REFUSED])
def test_absurd_exponent_is_refused(text, token):
    assert token in refused(text)


@pytest.mark.parametrize("text", [
    pytest.param("10**10**10"),
    pytest.param("2**(10**10)"),
    pytest.param("2**-(10**10)"),
    pytest.param("2**(1000*1000)"),
    pytest.param("(2**1000)**(1000**2)"),
    pytest.param("t**(10**10)"),
])
def test_computed_absurd_exponent_is_refused(text):
    # only the checker runs here: to_sympy on these would never finish
    refused(text)


def test_decimal_constant_cannot_exceed_the_constant_limit():
    try:
        value = parse("1e300**200")
    except UnsafeExpression:
        return
    assert max(value.p.bit_length(), value.q.bit_length()) <= MAX_CONSTANT_BITS


# --------------------------------------------------------------------------- valid expressions

VALID = [
    ("sin(theta)", sympy.sin(TH)),
    ("sqrt(1 - 2*M/r)", sympy.sqrt(1 - 2 * M / R)),
    ("LambertW((r/(2*M) - 1)*exp(r/(2*M)))", sympy.LambertW((R / (2 * M) - 1) * sympy.exp(R / (2 * M)))),
    ("exp(-r/M)*cosh(t) - asinh(Q)", sympy.exp(-R / M) * sympy.cosh(T) - sympy.asinh(Q)),
    ("Abs(Q)*sign(t) + atan(r)", sympy.Abs(Q) * sympy.sign(T) + sympy.atan(R)),
    ("pi*r**2", sympy.pi * R**2),
    ("r**2*(1 + sin(theta)**2)", R**2 * (1 + sympy.sin(TH) ** 2)),
    ("-(1 - 2*M/r)", -(1 - 2 * M / R)),
    ("1/2", sympy.Rational(1, 2)),
    ("2**-1", sympy.Rational(1, 2)),
    ("2**1000", sympy.Integer(2) ** 1000),
    ("0.1", sympy.Rational(1, 10)),
    ("-0.25", sympy.Rational(-1, 4)),
    ("2.5e-3", sympy.Rational(1, 400)),
    ("1.5*M", sympy.Rational(3, 2) * M),
    ("0.1 + 0.2", sympy.Rational(3, 10)),
    ("1_000", sympy.Integer(1000)),
    ("a(t)", A_OF_T),
    ("a", A_OF_T),
    ("H(t, r)", H_OF_TR),
    ("H", H_OF_TR),
    ("a**2*r**2", A_OF_T**2 * R**2),
    ("diff(a, t)", sympy.Derivative(A_OF_T, T)),
    ("diff(a(t), t)", sympy.Derivative(A_OF_T, T)),
    ("diff(a, t, 2)", sympy.Derivative(A_OF_T, (T, 2))),
    ("diff(H, r, 4)", sympy.Derivative(H_OF_TR, (R, 4))),
    ("diff(diff(H, t), r)", sympy.diff(sympy.diff(H_OF_TR, T), R)),
    ("diff(a, t)**2/a**2", sympy.Derivative(A_OF_T, T) ** 2 / A_OF_T**2),
    ("  M  *  ( r )  ", M * R),
    ("((((t))))", T),
]


@pytest.mark.parametrize(("text", "expected"), VALID, ids=[t for t, _ in VALID])
def test_valid_expression_matches_sympy(text, expected):
    got = parse(text)
    assert got == expected, (got, expected)
    assert not got.has(sympy.Float), "a decimal must be read as an exact fraction"


def test_decimal_is_an_exact_rational():
    got = parse("0.1")
    assert isinstance(got, sympy.Rational) and not isinstance(got, sympy.Float)
    assert got == sympy.Rational(1, 10) and got * 10 == 1


@pytest.mark.parametrize("text", ["0.1000000000000000000001", "1.0000000000000001", "1e-400"])
def test_decimal_keeps_every_written_digit(text):
    try:
        got = parse(text)
    except UnsafeExpression:
        return  # refusing a decimal that cannot be read exactly is acceptable
    assert got == sympy.Rational(text)


def test_a_long_but_reasonable_polynomial_is_accepted():
    text = " + ".join(f"{k + 1}*r**{k}" for k in range(120))
    got = parse(text)
    assert got == sum((k + 1) * R**k for k in range(120))


def test_nested_diff_cannot_exceed_the_maximum_order():
    refused("diff(diff(diff(a, t, 4), t, 4), t, 4)")


CHAINS = [
    ("0 < theta < pi", [sympy.Lt(0, TH, evaluate=False), sympy.Lt(TH, sympy.pi, evaluate=False)]),
    ("0 <= Q <= M", [sympy.Le(0, Q, evaluate=False), sympy.Le(Q, M, evaluate=False)]),
    ("r > 2*M", [sympy.Gt(R, 2 * M, evaluate=False)]),
    ("-1 < t <= r < 2*M", [sympy.Lt(-1, T, evaluate=False), sympy.Le(T, R, evaluate=False),
                          sympy.Lt(R, 2 * M, evaluate=False)]),
    ("a >= 0.5", [sympy.Ge(A_OF_T, sympy.Rational(1, 2), evaluate=False)]),
]


@pytest.mark.parametrize(("text", "expected"), CHAINS, ids=[t for t, _ in CHAINS])
def test_chained_inequality_matches_sympy(text, expected):
    relations = check_relation(text, NAMES, source=SOURCE, field="charts.main.domain[0]")
    assert [relation_to_sympy(rel, ENV, FUNCTIONS) for rel in relations] == expected


@pytest.mark.parametrize(("text", "token"), [
    ("t", "'t' is not an inequality"),
    ("t == r", "comparison 'Eq' is not allowed"),
    ("t != r", "comparison 'NotEq' is not allowed"),
    ("0 < t == r", "comparison 'Eq' is not allowed"),
    ("t in r", "comparison 'In' is not allowed"),
    ("t is r", "comparison 'Is' is not allowed"),
    ("0 < x", "unknown name 'x'"),
    ("0 < t < 'pi'", "'pi'"),
])
def test_bad_inequality_is_refused(text, token):
    assert token in refused(text, field="charts.main.domain[2]", relation=True)


# --------------------------------------------------------------------------- through a whole file

SAFE = {
    "range": "M > 0",
    "default": "1",
    "domain": "0 < theta < pi",
    "define": "1 - 2*M/r + Q**2/r**2",
    "line": "-f*dt**2 + dr**2/f + r**2*(dtheta**2 + sin(theta)**2*dphi**2)",
    "lambda": "0",
    "potential": "-Q/r",
    "observer": "1/sqrt(f)",
    "transform": "t",
    "invariant": "0",
    "metric": "1",
    "limit": "0",
    "flat": "0",
}

# field key in SAFE -> the field path the error must name
FIELDS = {
    "range": "parameters.M.range",
    "default": "parameters.M.default",
    "domain": "charts.main.domain[1]",
    "define": "charts.main.define.f",
    "line": "charts.main.line-element",
    "lambda": "charts.main.cosmological-constant",
    "potential": "charts.main.potential.t",
    "observer": "charts.main.observers.static.t",
    "transform": "charts.main.transforms.box.T",
    "invariant": "charts.main.invariants.ricci-scalar.value",
    "metric": "charts.box.metric[1][1]",
    "limit": "limits.uncharged.set.Q",
    "flat": "flat-when[0].M",
}
RELATION_FIELDS = {"range", "domain"}


def q(text: str) -> str:
    """A TOML basic string (JSON string syntax is valid TOML for these texts)."""
    return json.dumps(text, ensure_ascii=False)


def toy_toml(**values: str) -> str:
    """A charged toy exterior of the Tessaly Fen group, with any expression field replaced."""
    v = {**SAFE, **values}
    return f"""\
# Tessaly Fen group: charged toy exterior, used by the test suite only
id = "fen-toy-exterior"
title = "Fen charged toy exterior"
field-equations = "electrovacuum"
tags = ["toy", "static"]
flat-when = [{{ M = {q(v["flat"])}, Q = "0" }}]

[parameters.M]
description = "mass"
assume = ["positive"]
range = {q(v["range"])}
default = {q(v["default"])}

[parameters.Q]
description = "charge"
range = "0 <= Q < M"
default = "0.5"

[charts.main]
coordinates = ["t", "r", "theta", "phi"]
domain = ["r > 2*M", {q(v["domain"])}]
define = {{ f = {q(v["define"])} }}
line-element = {q(v["line"])}
cosmological-constant = {q(v["lambda"])}

[charts.main.potential]
t = {q(v["potential"])}

[charts.main.observers.static]
t = {q(v["observer"])}

[charts.main.transforms.box]
T = {q(v["transform"])}
X = "r*sin(theta)*cos(phi)"
Y = "r*sin(theta)*sin(phi)"
Z = "r*cos(theta)"

[charts.main.invariants.ricci-scalar]
value = {q(v["invariant"])}
source = "traceless electromagnetic stress"

[charts.box]
coordinates = ["T", "X", "Y", "Z"]
metric = [["-1", "0", "0", "0"], ["0", {q(v["metric"])}, "0", "0"], ["0", "0", "1", "0"], ["0", "0", "0", "1"]]

[limits.uncharged]
set = {{ Q = {q(v["limit"])} }}
reduces-to = "schwarzschild:schwarzschild"
"""


def test_the_toy_file_is_valid_as_written(tmp_path):
    path = tmp_path / "toy.toml"
    path.write_text(toy_toml(), encoding="utf-8")
    doc = load_file(path)
    spec = build_chart(doc)
    m = sympy.Symbol("M", positive=True, real=True)  # assume = ["positive"] (real is implied)
    f = 1 - 2 * m / R + Q**2 / R**2
    expected = sympy.diag(-f, 1 / f, R**2, R**2 * sympy.sin(TH) ** 2)
    assert sympy.simplify(spec.metric - expected) == sympy.zeros(4, 4)
    assert build_chart(doc, "box").metric == sympy.diag(-1, 1, 1, 1)
    # chained inequalities are split in two; decimals are exact fractions all the way through
    assert spec.domain == (sympy.Gt(R, 2 * m, evaluate=False), sympy.Lt(0, TH, evaluate=False),
                           sympy.Lt(TH, sympy.pi, evaluate=False))
    assert spec.param_ranges == (sympy.Gt(m, 0, evaluate=False), sympy.Le(0, Q, evaluate=False),
                                 sympy.Lt(Q, m, evaluate=False))
    assert spec.defaults == {m: sympy.Integer(1), Q: sympy.Rational(1, 2)}


FILE_PAYLOADS = [
    ("import-pathlib", PATHLIB, "__import__('pathlib').Path("),
    ("subclasses-walk", INJECTIONS[2][1], "().__class__.__bases__[0]"),
    ("eval-string", f'eval("{PATHLIB}")', "unknown function 'eval'"),
]


def _file_value(key: str, payload: str) -> str:
    if key == "range":
        return f"M > ({payload})"
    if key == "domain":
        return f"0 < ({payload}) < pi"
    return payload


@pytest.mark.parametrize("key", list(FIELDS))
@pytest.mark.parametrize(("template", "token"), [(t, k) for _, t, k in FILE_PAYLOADS],
                         ids=[n for n, _, _ in FILE_PAYLOADS])
def test_injection_in_a_toml_file_is_refused(tmp_path, key, template, token):
    sentinel = tmp_path / "SENTINEL"
    path = tmp_path / "toy.toml"
    path.write_text(toy_toml(**{key: _file_value(key, _payload(template, sentinel))}), encoding="utf-8")
    with pytest.raises(UnsafeExpression) as info:
        load_file(path)
    message = str(info.value)
    assert not sentinel.exists()
    assert_one_line(message)
    assert message.startswith(f"{path}: {FIELDS[key]}: "), message
    assert token in message


def test_injection_in_a_json_export_is_refused(tmp_path):
    sentinel = tmp_path / "SENTINEL"
    good = tmp_path / "good.toml"
    good.write_text(toy_toml(), encoding="utf-8")
    data = copy.deepcopy(load_file(good).data)
    data["charts"]["main"]["line-element"] = _payload(PATHLIB, sentinel)
    path = tmp_path / "export.json"
    path.write_text(json.dumps({"format": "gravicat-export/1", "revision": "0" * 64, "metric": data}),
                    encoding="utf-8")
    with pytest.raises(UnsafeExpression) as info:
        load_file(path)
    assert not sentinel.exists()
    assert str(info.value).startswith(f"{path}: charts.main.line-element: '__import__('pathlib')")


# Tampered documents: a document that passed validation once (say, read back from a shared database)
# with a payload put into its canonical data afterwards. build_chart checks every expression again.

TAMPER = {  # key in FIELDS -> (path in the canonical data, chart to build)
    "range": (("parameters", "M", "range"), "main"),
    "default": (("parameters", "M", "default"), "main"),
    "domain": (("charts", "main", "domain", 1), "main"),
    "define": (("charts", "main", "define", "f"), "main"),
    "line": (("charts", "main", "line-element"), "main"),
    "lambda": (("charts", "main", "cosmological-constant"), "main"),
    "potential": (("charts", "main", "potential", "t"), "main"),
    "observer": (("charts", "main", "observers", "static", "t"), "main"),
    "transform": (("charts", "main", "transforms", "box", "T"), "main"),
    "invariant": (("charts", "main", "invariants", "ricci-scalar", "value"), "main"),
    "metric": (("charts", "box", "metric", 1, 1), "box"),
    "limit": (("limits", "uncharged", "set", "Q"), "main"),
    "flat": (("flat-when", 0, "M"), "main"),
}
def _tampered(tmp_path, key: str, payload: str) -> tuple[MetricDocument, str]:
    path = tmp_path / "toy.toml"
    path.write_text(toy_toml(), encoding="utf-8")
    data = copy.deepcopy(load_file(path).data)
    where, chart = TAMPER[key]
    node = data
    for step in where[:-1]:
        node = node[step]
    node[where[-1]] = _file_value(key, payload)
    return MetricDocument(data, "db:fen-toy-exterior"), chart


@pytest.mark.parametrize("key", list(TAMPER))
def test_injection_in_a_validated_document_is_refused_by_build_chart(tmp_path, key):
    sentinel = tmp_path / "SENTINEL"
    doc, chart = _tampered(tmp_path, key, _payload(PATHLIB, sentinel))
    with pytest.raises(UnsafeExpression) as info:
        build_chart(doc, chart)
    message = str(info.value)
    assert not sentinel.exists()
    assert_one_line(message)
    assert message.startswith(f"db:fen-toy-exterior: {FIELDS[key]}: "), message
    assert "__import__('pathlib').Path(" in message


def test_injection_in_a_validated_parameter_range_is_still_refused(tmp_path):
    sentinel = tmp_path / "SENTINEL"
    doc, chart = _tampered(tmp_path, "range", _payload(PATHLIB, sentinel))
    with pytest.raises(UnsafeExpression) as info:
        build_chart(doc, chart)
    assert not sentinel.exists()
    assert_one_line(str(info.value))
    assert str(info.value).startswith("db:fen-toy-exterior: parameters")


# --------------------------------------------------------------------------- runaway computations

def _runaway_entry(line_element: str, define: dict[str, str] | None = None) -> dict:
    chart = {"coordinates": ["t", "r", "theta", "phi"], "line-element": line_element}
    if define:
        chart["define"] = define
    return {"id": "fen-runaway", "title": "Runaway", "field-equations": "none", "charts": {"main": chart}}


def test_a_high_power_of_differentials_is_refused_quickly():
    # a 30-character line element whose expansion has ~10**8 terms: it must be refused, not expanded
    # (since issue 14 item 3 already at validation, by the size estimates of gravicat.format.size)
    with time_limit(1.0), pytest.raises(InputError) as info:
        build_chart(validate(_runaway_entry("(dt + dr + dtheta + dphi)**1000"), SOURCE))
    assert str(info.value).startswith(f"{SOURCE}: charts.main.line-element: ")


def test_definitions_cannot_build_a_constant_past_the_limit():
    raw = _runaway_entry("-dt**2 + b*dr**2 + r**2*(dtheta**2 + sin(theta)**2*dphi**2)",
                 define={"a": "10**500", "b": "a**8"})
    try:
        spec = build_chart(validate(raw, SOURCE))
    except InputError as exc:
        assert_one_line(str(exc))
        assert str(exc).startswith(f"{SOURCE}: charts.main.define.b: ")
        return
    bits = max(max(abs(n.p).bit_length(), n.q.bit_length()) for n in spec.metric.atoms(sympy.Rational))
    assert bits <= MAX_CONSTANT_BITS


def test_limits_are_what_the_readme_documents():
    # README: exponents larger than 1000 in size, more than 20 000 characters are refused
    assert MAX_EXPONENT == 1_000
    assert MAX_CHARS == 20_000
    refused(f"t**{MAX_EXPONENT + 1}")
    assert parse(f"t**{MAX_EXPONENT}") == T**MAX_EXPONENT


# --------------------------------------------------------------------------- through the command line

@pytest.fixture(scope="module")
def gravicat(tmp_path_factory):
    """``gravicat --db URL ...`` on one empty catalogue (initialised once for this module)."""
    home = tmp_path_factory.mktemp("cli")
    url = f"sqlite:///{home / 'c.sqlite'}"
    env = {"GRAVICAT_CONFIG": str(home / "no-config.toml"), "GRAVICAT_DB": None,
           "GRAVICAT_DISABLE_PLUGINS": None, "GRAVICAT_AUTHOR": "Fen test runner"}
    runner = CliRunner()

    def run(*args: str):
        return runner.invoke(app, ["--db", url, *args], env=env)

    result = run("init", "--empty")
    assert result.exit_code == 0, result.output
    return run


CLI_CASES = [
    ("line", PATHLIB),
    ("define", "__import__('os').system('touch @S@')"),
    ("transform", INJECTIONS[2][1]),
    ("invariant", f'eval("{PATHLIB}")'),
    ("domain", f"exec(\"{PATHLIB}\")"),
    ("default", f"(lambda: {PATHLIB})()"),
]


@pytest.mark.parametrize(("key", "template"), CLI_CASES, ids=[k for k, _ in CLI_CASES])
def test_gravicat_add_refuses_the_payload(gravicat, tmp_path, key, template):
    sentinel = tmp_path / "SENTINEL"
    path = tmp_path / "toy.toml"
    path.write_text(toy_toml(**{key: _file_value(key, _payload(template, sentinel))}), encoding="utf-8")
    result = gravicat("add", str(path))
    assert not sentinel.exists()
    assert result.exit_code == 2, result.output
    assert result.stdout == ""
    assert "Traceback" not in result.output
    lines = result.stderr.splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith(f"Error: {path}: {FIELDS[key]}: "), lines[0]


def test_refused_files_leave_the_catalogue_empty(gravicat, tmp_path):
    sentinel = tmp_path / "SENTINEL"
    path = tmp_path / "toy.toml"
    path.write_text(toy_toml(line=_payload(PATHLIB, sentinel)), encoding="utf-8")
    assert gravicat("add", str(path)).exit_code == 2
    listed = gravicat("list", "--json")
    assert listed.exit_code == 0, listed.output
    assert json.loads(listed.stdout) == []
    assert not sentinel.exists()
