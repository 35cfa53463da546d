"""Property tests of the whitelist expression parser (gravicat.format.expr) against sympy (the reference).

1. Random well-formed expressions from a small grammar are rendered as text, parsed by the
   whitelist and built by ``to_sympy``; the result must equal sympy's own construction of the same
   tree (sympy, the reference library, builds it directly from the grammar tree, never from text).
2. Random garbage strings either parse or raise a CatalogError subclass whose message is one line;
   no other exception may escape (a library exception must never reach the user).
"""

from __future__ import annotations

import sympy
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from gravicat.errors import CatalogError
from gravicat.format.expr import Names, check_expression, check_relation, to_sympy

SYMBOLS = {"x": sympy.Symbol("x", real=True), "y": sympy.Symbol("y", real=True),
           "M": sympy.Symbol("M", positive=True)}
F_APPLIED = sympy.Function("f", real=True)(SYMBOLS["x"])
NAMES = Names(symbols=frozenset(SYMBOLS), functions={"f": ("x",)}, coordinates=frozenset({"x", "y"}))
FUNCTIONS = {"f": F_APPLIED}
SETTINGS = settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])

# --------------------------------------------------------------------------- a small grammar
# A tree is (text, sympy value); every composite is fully parenthesised so the text has one parse.

MATH = {"sin": sympy.sin, "cos": sympy.cos, "exp": sympy.exp, "log": sympy.log, "sqrt": sympy.sqrt,
        "atan": sympy.atan, "sinh": sympy.sinh, "Abs": sympy.Abs}

leaves = st.one_of(
    st.sampled_from([(name, sym) for name, sym in SYMBOLS.items()]),
    st.integers(1, 99).map(lambda n: (str(n), sympy.Integer(n))),
    # decimal literals are exact fractions (sympy.Rational of the decimal string is the reference)
    st.sampled_from(["0.5", "1.25", "2.75", "0.125"]).map(lambda s: (s, sympy.Rational(s))),
    st.just(("pi", sympy.pi)),
    st.just(("f", F_APPLIED)),
    st.just(("f(x)", F_APPLIED)),
    st.just(("diff(f, x)", sympy.Derivative(F_APPLIED, SYMBOLS["x"]).doit())),
)


def _binary(children):
    def make(op, a, b):
        (ta, va), (tb, vb) = a, b
        value = {"+": lambda: sympy.Add(va, vb), "-": lambda: sympy.Add(va, -vb),
                 "*": lambda: sympy.Mul(va, vb), "/": lambda: sympy.Mul(va, sympy.Pow(vb, -1))}[op]()
        return (f"({ta}) {op} ({tb})", value)

    return st.builds(make, st.sampled_from("+-*/"), children, children)


def _power(children):
    exponents = st.sampled_from([("2", sympy.Integer(2)), ("3", sympy.Integer(3)), ("-1", sympy.Integer(-1)),
                                 ("1/2", sympy.Rational(1, 2)), ("-3/2", sympy.Rational(-3, 2))])
    return st.builds(lambda a, e: (f"({a[0]})**({e[0]})", sympy.Pow(a[1], e[1])), children, exponents)


def _call(children):
    return st.builds(lambda name, a: (f"{name}({a[0]})", MATH[name](a[1])), st.sampled_from(sorted(MATH)), children)


def _negate(children):
    return st.builds(lambda a: (f"-({a[0]})", -a[1]), children)


expressions = st.recursive(
    leaves, lambda children: st.one_of(_binary(children), _power(children), _call(children), _negate(children)),
    max_leaves=12)


@SETTINGS
@given(expressions)
def test_well_formed_expression_matches_sympy_construction(tree):
    text, reference = tree
    # a constant division by zero is refused by the parser by design; sympy gives zoo/nan there
    assume(not reference.has(sympy.zoo, sympy.nan, sympy.oo, -sympy.oo))
    parsed = check_expression(text, NAMES, source="prop", field="e")
    built = to_sympy(parsed, SYMBOLS, FUNCTIONS)
    if built != reference:  # same value written differently: compare numerically at a generic point
        point = {SYMBOLS["x"]: sympy.Rational(7, 10), SYMBOLS["y"]: sympy.Rational(13, 10),
                 SYMBOLS["M"]: sympy.Rational(21, 10)}
        fpoint = {F_APPLIED: sympy.Rational(3, 10)}
        a = sympy.N(built.subs(fpoint).subs(point), 30)
        b = sympy.N(reference.subs(fpoint).subs(point), 30)
        assert abs(a - b) <= sympy.Float("1e-20", 30) * (1 + abs(b)), (text, built, reference)


@SETTINGS
@given(expressions, expressions, st.sampled_from(["<", "<=", ">", ">="]))
def test_well_formed_relation_parses_to_two_sides(left, right, op):
    relations = check_relation(f"{left[0]} {op} {right[0]}", NAMES, source="prop", field="r")
    assert len(relations) == 1 and relations[0].op == op


# --------------------------------------------------------------------------- garbage

GARBAGE_ALPHABET = st.sampled_from(list("xyMf0123456789.+-*/()[]{},<>=!~^&|%@:;'\"\\ _eEjJ") +
                                   ["**", "diff", "sin", "sqrt", "lambda", "import", "__", "pi", "\n", "\t",
                                    "\x00", "é", "∂", "１", "\u200b"])
garbage = st.one_of(
    st.text(max_size=60),
    st.lists(GARBAGE_ALPHABET, max_size=40).map("".join),
)


def _one_line(exc: CatalogError) -> None:
    message = str(exc)
    assert message and "\n" not in message and "\r" not in message, repr(message)


@SETTINGS
@given(garbage)
def test_garbage_expression_parses_or_raises_one_line_catalog_error(text):
    try:
        tree = check_expression(text, NAMES, source="fuzz.toml", field="charts.c.metric[0][0]")
    except CatalogError as exc:
        _one_line(exc)
        assert str(exc).startswith("fuzz.toml: charts.c.metric[0][0]: ")
        return
    # accepted: sympy must be able to build it without another exception
    try:
        to_sympy(tree, SYMBOLS, FUNCTIONS)
    except CatalogError as exc:
        _one_line(exc)


@SETTINGS
@given(garbage)
def test_garbage_relation_parses_or_raises_one_line_catalog_error(text):
    try:
        check_relation(text, NAMES, source="fuzz.toml", field="charts.c.domain[0]")
    except CatalogError as exc:
        _one_line(exc)
        assert str(exc).startswith("fuzz.toml: charts.c.domain[0]: ")


@settings(max_examples=50, deadline=None)
@given(st.one_of(st.integers(), st.floats(), st.booleans(), st.none(), st.lists(st.integers(), max_size=3)))
def test_non_string_values_parse_or_raise_catalog_error(value):
    try:
        check_expression(value, NAMES, source="fuzz.toml", field="parameters.k.default")
    except CatalogError as exc:
        _one_line(exc)
