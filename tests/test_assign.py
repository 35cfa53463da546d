"""The one NAME=VALUE parser (gravicat.format.assign): every --set-like option reads through it.

Exact values are compared with sympy's own arithmetic (sympy.Rational, sympy.pi), the reference
library the whole engine trusts; no float is compared bit for bit.
"""

from __future__ import annotations

import pytest
import sympy

from gravicat.errors import InputError, UnsafeExpression
from gravicat.format.assign import parse_assignments, real_number, split_assignments

KERR = {"M": sympy.Symbol("M"), "a": sympy.Symbol("a")}


def parse(items, **kw):
    kw.setdefault("allowed", KERR)
    kw.setdefault("owner", "kerr")
    return parse_assignments(items, "--set", **kw)


# --------------------------------------------------------------------------- shapes of input


def test_one_text_a_list_and_repetitions_mean_the_same():
    want = {"M": sympy.Integer(1), "a": sympy.Rational(9, 10)}
    assert parse("M=1,a=0.9") == want
    assert parse(["M=1,a=0.9"]) == want
    assert parse(["M=1", "a=0.9"]) == want
    assert parse([" M = 1 ", "a= 9/10 "]) == want
    assert list(parse(["a=0.9", "M=1"])) == ["a", "M"]  # the user's order is kept


def test_decimals_are_exact_and_pi_is_known():
    out = parse("M=0.1,a=pi/4")
    assert out["M"] == sympy.Rational(1, 10)
    assert out["a"] == sympy.pi / 4


def test_commas_inside_parentheses_belong_to_the_value():
    assert split_assignments("a=sqrt((1)),b=2", "--set") == [("a", "sqrt((1))"), ("b", "2")]


@pytest.mark.parametrize("items", ["", [], [""], ["  "], ",", "M=1,,", ["M=1", ""]])
def test_empty_texts_and_pieces_are_ignored(items):
    expected = {"M": 1} if "M=1" in str(items) else {}
    assert parse(items) == expected


def test_chained_values_may_use_earlier_names():
    out = parse("M=2,a=M*45/100")
    assert out == {"M": 2, "a": sympy.Rational(9, 10)}
    with pytest.raises(UnsafeExpression):  # not before it is given
        parse("a=M/2,M=2")
    with pytest.raises(UnsafeExpression):
        parse("M=2,a=M/2", chained=False)


def test_expressions_in_an_environment():
    """--match style: values are expressions in another chart's parameters."""
    e = sympy.Symbol("e")
    out = parse_assignments(["Q=e"], "--match", allowed=["Q"], env={"e": e}, numbers=False)
    assert out == {"Q": e}


def test_any_name_when_nothing_is_declared():
    assert parse_assignments("x=1,y=2", "--from") == {"x": 1, "y": 2}


# --------------------------------------------------------------------------- errors


def one_line(exc) -> str:
    text = str(exc.value)
    assert "\n" not in text
    return text


@pytest.mark.parametrize("text", ["M", "M=", "=1", " = ", "M:1", "M=1,a"])
def test_malformed_pairs(text):
    with pytest.raises(InputError) as exc:
        parse(text)
    assert exc.value.source == "--set" and exc.value.field is None
    assert "is not NAME=VALUE" in one_line(exc)


@pytest.mark.parametrize("text", ["a.b=1", "1x=2", "M a=1"])
def test_a_name_must_be_an_identifier(text):
    with pytest.raises(InputError) as exc:
        parse(text)
    assert "is not a name" in one_line(exc)


@pytest.mark.parametrize("items", ["M=1,M=2", ["M=1", "M=2"], ["M=1,a=0", "a=0"]])
def test_repeats_are_refused_also_across_repetitions(items):
    with pytest.raises(InputError) as exc:
        parse(items)
    assert exc.value.field in ("M", "a") and "given more than once" in one_line(exc)


def test_unknown_names_list_the_choices():
    with pytest.raises(InputError) as exc:
        parse("b=1")
    assert one_line(exc) == "--set: b: not a parameter of kerr (parameters: M, a)"
    with pytest.raises(InputError) as exc:
        parse_assignments("z=1", "--from", ["r", "theta"], kind="coordinate")
    assert one_line(exc) == "--from: z: not a coordinate (choose from: r, theta)"
    with pytest.raises(InputError) as exc:
        parse_assignments("z=1", "--set", {}, owner="minkowski")
    assert one_line(exc) == "--set: z: not a parameter of minkowski (parameters: none)"


@pytest.mark.parametrize("text, words", [
    ("a=sqrt(-1)", "'sqrt(-1)' is not a real number"),
    ("a=log(-1)", "'log(-1)' is not a real number"),
    ("a=1/0", "division by zero"),  # the whitelist folds constants first
    ("a=log(0)", "'log(0)' is not a finite number"),
])
def test_non_numeric_values(text, words):
    with pytest.raises(InputError) as exc:
        parse(text)
    assert exc.value.field == "a" and words in one_line(exc)


@pytest.mark.parametrize("text", ["M=x", "M=__import__('os')", "M=open('f')", "M=(1).real", "M=[1]", "M='1'"])
def test_values_go_through_the_whitelist(text):
    with pytest.raises(UnsafeExpression) as exc:
        parse(text)
    assert exc.value.source == "--set" and exc.value.field == "M"
    one_line(exc)


def test_unicode():
    theta = sympy.Symbol("θ")
    assert parse_assignments("θ=pi/2", "--from", {"θ": theta}) == {"θ": sympy.pi / 2}
    # NFKC, as Python reads identifiers: the script capital M is the parameter M
    assert parse("ℳ=1") == {"M": 1}
    # a unicode minus is not an operator: a one-line error, not a traceback
    with pytest.raises(UnsafeExpression) as exc:
        parse("M=\u22121")
    assert "U+2212" in one_line(exc)
    # a control character in the text stays escaped on one line
    with pytest.raises(InputError) as exc:
        parse("M\n")
    one_line(exc)


def test_real_number_accepts_real_values_sympy_cannot_name():
    value = sympy.cos(1) ** 2 + sympy.sin(1) ** 2
    assert abs(float(real_number(value, "--set", "M", "cos(1)**2+sin(1)**2")) - 1.0) < 1e-25
    with pytest.raises(InputError, match="is not a number"):
        real_number(sympy.Symbol("x"), "--set", "M", "x")


def test_codegen_names_still_import():
    from gravicat.export import codegen

    assert codegen.parse_assignments is parse_assignments
    assert codegen.split_assignments is split_assignments
    assert codegen.real_number is real_number
