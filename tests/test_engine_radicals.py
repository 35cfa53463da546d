"""Radicals and powers the catalogue needs, decided exactly on the fast path (issue 20).

* ``(c**k)**x = c**(k x)`` where the region makes ``c > 0``: ``(r**(3/2))**(2/3) = r`` and
  ``sqrt(1/r) r = sqrt(r)`` for ``r > 0``; where the sign of ``c`` is not decided, nothing is
  merged (``sqrt(r**2)`` is not ``r`` for ``r > -1``).
* Powers with a symbolic exponent whose bases are one rational function written two ways are one
  generator (the base is brought to a canonical quotient first), as in the Zipoy-Voorhees
  prolate-to-spherical-like transform.

The reference for each identity is sympy itself (a general-purpose library, with the same signs
declared as assumptions), and the rule ``(c**k)**x = c**(k x)`` for real ``k``, ``x`` holds for
``c > 0`` only (any real-analysis text; W. Rudin, Principles of Mathematical Analysis, 3rd ed.
1976, chapter 1, exercise 6, recalled from memory).
"""

from __future__ import annotations

import sympy as sp

from gravicat.engine.ratfun import Field

r, x = sp.symbols("r x", real=True)
delta, M = sp.symbols("delta M", positive=True)
rp = sp.Symbol("r", positive=True)


def _zero(coords, params, relations, expr) -> bool:
    F = Field(coords, params, [expr], relations=relations)
    return F.is_zero(F.element(expr))


def _nested(b, e1, e2):
    return sp.Pow(sp.Pow(b, e1, evaluate=False), e2, evaluate=False)


def test_cube_of_a_half_power_reduces_for_positive_r():
    expr = _nested(r, sp.Rational(3, 2), sp.Rational(2, 3)) - r
    # sympy with r > 0 agrees
    assert sp.simplify(expr.xreplace({r: rp})) == 0
    assert _zero((r,), (), (r > 0,), expr)


def test_sqrt_of_inverse_times_r_is_sqrt_r_for_positive_r():
    expr = sp.sqrt(1 / r) * r - sp.sqrt(r)
    assert sp.simplify(expr.xreplace({r: rp})) == 0
    assert _zero((r,), (), (r > 0,), expr)
    # and derivatives stay consistent: d/dr of the difference is zero too
    assert _zero((r,), (), (r > 0,), sp.diff(expr, r))


def test_undecided_sign_is_not_merged():
    # sqrt(r**2) = |r|, not r, where r may be negative (r = -1/2 gives 1/2 vs -1/2)
    expr = _nested(r, 2, sp.Rational(1, 2)) - r
    assert expr.subs(r, sp.Rational(-1, 2)) != 0
    assert not _zero((r,), (), (r > -1,), expr)
    # a negative base: (r**(3/2))**(2/3) is not merged where r < 0 is allowed
    expr = _nested(r, 3, sp.Rational(1, 3)) - r
    assert not _zero((r,), (), (r > -1,), expr)


def test_symbolic_powers_of_one_base_written_two_ways():
    # Zipoy-Voorhees: prolate (x, y) to the spherical-like chart, delta the distortion parameter
    lhs = ((x - 1) / (x + 1)) ** delta
    rhs = (delta * (M * (x + 1) / delta - 2 * M / delta) / (M * (x + 1))) ** delta
    # sympy: the bases are the same rational function
    assert sp.cancel((x - 1) / (x + 1) - delta * (M * (x + 1) / delta - 2 * M / delta) / (M * (x + 1))) == 0
    assert _zero((x,), (delta, M), (x > 1,), lhs - rhs)
    # their derivatives agree as well (the generator carries one derivation)
    assert _zero((x,), (delta, M), (x > 1,), sp.diff(lhs - rhs, x))


def test_symbolic_powers_of_different_bases_stay_different():
    expr = ((x - 1) / (x + 1)) ** delta - ((x - 1) / (x + 2)) ** delta
    assert not _zero((x,), (delta,), (x > 1,), expr)


def test_half_power_of_a_symbolic_power_stays_the_root_of_that_element():
    # the static observer of Zipoy-Voorhees: u^t = f**(-1/2), f = ((x - 1)/(x + 1))**delta, and
    # g(u, u) = -f (u^t)**2 = -1 must still be decided (f**(-1/2) is not split into b**(-delta/2))
    f = ((x - 1) / (x + 1)) ** delta
    ut = sp.Pow(f, sp.Rational(-1, 2), evaluate=False)
    assert sp.simplify((f * ut**2 - 1).xreplace({x: sp.Symbol("x", positive=True) + 1})) == 0
    assert _zero((x,), (delta,), (x > 1,), f * ut**2 - 1)
