"""Generators of the exact field (see :mod:`gravicat.engine.ratfun`): base, square-root, algebraic
and real-root generators, the recognition of nested roots, and the engine's two exceptions and
ball-arithmetic precision.
"""

from __future__ import annotations

from contextlib import contextmanager

import flint
import sympy as sp

ARB_BITS = 320  # working precision of the interval-arithmetic sampling fallback


class Unsupported(Exception):
    """The expression cannot be represented on the flint fast path."""


class BudgetExceeded(Exception):
    """The time budget of the running proof is spent."""


@contextmanager
def arb_precision(bits: int = ARB_BITS):
    old = flint.ctx.prec
    flint.ctx.prec = bits
    try:
        yield
    finally:
        flint.ctx.prec = old


# ---------------------------------------------------------------------------
# generators


class BaseGen:
    """A base generator: one variable of the polynomial context."""

    __slots__ = ("kind", "sym", "key", "index", "data", "label")

    def __init__(self, kind, sym, key, data=None, label=""):
        self.kind = kind  # coord | param | const | func | exp | pow | cos | log
        self.sym = sym  # the sympy expression it stands for
        self.key = key
        self.index = -1
        self.data = data or {}
        self.label = label or str(sym)


class SqrtGen:
    """A square-root generator ``s`` with ``s**2 = num/den`` (both base polynomials), or, for a
    nested root (``tower``), ``s**2 = radicand``, an element that uses earlier square roots."""

    __slots__ = ("bit", "num", "den", "sym", "trig", "radicand", "tower", "coord")

    def __init__(self, bit, num, den, sym, trig=None, tower=False):
        self.coord = None  # index of the eliminated coordinate or parameter it stands for (see Field._eliminate)
        self.bit = bit
        self.num = num  # None for a nested root
        self.den = den
        self.sym = sym  # sympy expression (sqrt(R) or sin(w))
        self.trig = trig  # the BaseGen of the matching cos, for sin generators
        self.radicand = None  # Elem, set after creation
        self.tower = tower


class AlgGen:
    """An algebraic generator ``r = sqrt(A + c sqrt(B))`` (base generator ``index``), a root of
    ``F = L r**4 + P2 r**2 + P0`` (``(r**2 - A)**2 - c**2 B`` cleared of denominators; ``L``, ``P2``,
    ``P0`` free of ``r``). While it is in :attr:`Field.algs`, numerators are kept reduced modulo
    ``F`` (degree < 4 in ``r``) and denominators free of ``r``, so an element is zero exactly when
    its numerator is; after :meth:`Field._eliminate` it only serves derivatives and point values."""

    __slots__ = ("gen", "index", "poly", "L", "P2", "P0", "low", "r2", "r4", "flip", "A", "c", "B")

    def __init__(self, gen, index, poly, L, P2, P0, r, ngens, A, c, B):
        self.gen = gen  # the BaseGen
        self.index = index
        self.poly = poly  # F
        self.L, self.P2, self.P0 = L, P2, P0
        self.r2 = r * r
        self.r4 = self.r2 * self.r2
        self.low = P2 * self.r2 + P0  # L r**4 = -low modulo F
        self.flip = [-x if k == index else x for k, x in enumerate(ngens)]  # r -> -r
        self.A, self.c, self.B = A, c, B  # elements (free of every root)


class RootGen:
    """A real root generator ``rho = P**(1/q)`` (``q >= 3``; base generator ``index``) of a
    polynomial ``P`` free of roots: a prime, or a primitive polynomial such as ``rho - tau``. While
    it is in :attr:`Field.roots`, numerators are kept reduced modulo ``rho**q - P`` (degree < q in
    ``rho``) and denominators free of ``rho`` (inverses through the adjugate of the
    multiplication matrix, whose determinant is the norm), so an element is zero exactly when its
    numerator is. ``d rho = rho dP / (q P)``."""

    __slots__ = ("gen", "index", "q", "P", "rq")

    def __init__(self, gen, index, q, P, rq):
        self.gen, self.index, self.q, self.P, self.rq = gen, index, q, P, rq


def _has_root(e) -> bool:
    """``e`` uses a square-root generator (a non-integer power or ``sin``)."""
    if e.has(sp.sin):
        return True
    return any(not p.exp.is_Integer for p in e.atoms(sp.Pow))


def nested_parts(b):
    """``(A, c, B)`` with ``b = A + c*sqrt(B)`` and ``A``, ``c``, ``B`` free of roots, ``c != 0``
    (powers of ``sqrt(B)`` are reduced with ``sqrt(B)**2 = B``), or None."""
    if not isinstance(b, sp.Add) or b.has(sp.sin):
        return None
    halves = [p for p in b.atoms(sp.Pow) if not p.exp.is_Integer]
    if not halves or any(not p.exp.is_Rational or p.exp.q != 2 for p in halves):
        return None
    bases = {p.base for p in halves}
    if len(bases) != 1:
        return None
    B = bases.pop()
    if _has_root(B) or not B.free_symbols:
        return None
    S = sp.Dummy("S")
    e = b.replace(lambda x: x.is_Pow and x.base == B and not x.exp.is_Integer, lambda x: S ** int(2 * x.exp))
    e = sp.expand(e)
    A = sp.Integer(0)
    c = sp.Integer(0)
    for k, coeff in sp.collect(e, S, evaluate=False).items():
        if k == 1:
            k_exp = 0
        elif k == S:
            k_exp = 1
        elif k.is_Pow and k.base == S and k.exp.is_Integer:
            k_exp = int(k.exp)
        else:
            return None
        if coeff.has(S):
            return None
        term = coeff * B ** (k_exp // 2)
        if k_exp % 2:
            c += term
        else:
            A += term
    if c == 0 or _has_root(A) or _has_root(c):
        return None
    return A, c, B
