"""Field, part 2: arithmetic of elements (see :mod:`gravicat.engine.ratfun`).

Sums, constants, reduced fractions (denominators factored once), products of the coefficient
maps, and the opaque sub-expressions with their explicit values for zero tests.
"""

from __future__ import annotations

import math
import time
from fractions import Fraction

import flint
import sympy as sp
from flint.utils.flint_exceptions import DomainError

from gravicat.engine.elements import Elem
from gravicat.engine.generators import (
    BaseGen,
    BudgetExceeded,
)
from gravicat.engine.rewrite import (
    prepare,
)


class FieldArith:
    """Element arithmetic and zero tests; a mixin of :class:`~gravicat.engine.ratfun.Field`."""

    # -- elements ------------------------------------------------------------
    def tick(self):
        self.ops += 1
        if self.deadline is not None and not self.ops & 63 and time.process_time() > self.deadline:
            raise BudgetExceeded()

    def sum(self, elems) -> Elem:
        """Sum of elements: terms with equal denominators are added before any gcd is taken."""
        groups: list = []  # [denominator, {mask: numerator}, the element when it is alone]
        for e in elems:
            if not e.c:
                continue
            for grp in groups:
                if grp[0] == e.d:
                    acc = grp[1]
                    for m, p in e.c.items():
                        q = acc.get(m)
                        acc[m] = p if q is None else q + p
                    grp[2] = None
                    break
            else:
                groups.append([e.d, dict(e.c), e])
        self.tick()
        out = self.zero
        for d, acc, alone in groups:
            out = out + (alone if alone is not None else self.make(acc, d))
        return out

    def const(self, v) -> Elem:
        if isinstance(v, Elem):
            return v
        if isinstance(v, (int, flint.fmpz)):
            v = flint.fmpq(v)
        elif isinstance(v, Fraction):
            v = flint.fmpq(v.numerator, v.denominator)
        elif isinstance(v, sp.Rational):
            v = flint.fmpq(int(v.p), int(v.q))
        if not isinstance(v, flint.fmpq):
            raise TypeError(f"not a rational constant: {v!r}")
        if v == 0:
            return self.zero
        return Elem(self, {0: self.ctx.constant(v.p)}, self.ctx.constant(v.q))

    def gen_elem(self, g: BaseGen) -> Elem:
        return Elem(self, {0: self.ctx.gens()[g.index]}, self.pone)

    def make(self, c, d) -> Elem:
        """Reduce ``c/d`` by the gcd (numerators modulo the algebraic generators' polynomials first)
        and normalise the sign of ``d``."""
        c = {m: p for m, p in c.items() if not p.is_zero()}
        if not c:
            return self.zero
        if self.algs or self.roots:
            c, d, _ = self._reduce_alg(c, d)
            if not c:
                return self.zero
        if not d.is_one():
            c, d = self._cancel(c, d)
        return self.make_reduced(c, d)

    def _den_factors(self, d):
        """``d = cont * prod f**e``: (cont, [(f, e)]) with ``f`` irreducible, cached; None when the
        part not found in the factor base is too large to factor cheaply (the caller takes a gcd).
        Factors met before are found by trial division; only what is left is factored."""
        key = str(d)
        if key in self._dfac:
            return self._dfac[key]
        cont = d.content()
        rest = d / self.ctx.constant(cont) if cont != 1 else d
        facs = []
        degs = rest.degrees()
        for f, fdeg in self._fbase:
            if rest.is_constant():
                break
            if any(x > y for x, y in zip(fdeg, degs, strict=True)):
                continue
            e = 0
            while True:
                try:
                    rest = rest / f
                except DomainError:
                    break
                e += 1
            if e:
                facs.append((f, e))
                degs = rest.degrees()
        out = None
        if rest.is_constant():
            out = (cont * rest.leading_coefficient(), facs)
        elif len(rest) <= self.FACTOR_LIMIT:
            unit, more = rest.factor()
            for f, e in more:
                self._fbase.append((f, f.degrees()))
                facs.append((f, e))
            out = (cont * unit, facs)
        if len(self._dfac) > 20000:
            self._dfac.clear()
        self._dfac[key] = out
        return out

    def _cancel(self, c, d):
        """``c/d`` with the gcd of ``d`` and every component divided out: trial division by the
        irreducible factors of ``d`` (much cheaper than a multivariate gcd when, as in curvature
        computations, denominators are products of powers of a few factors), then the integer content."""
        fd = None if d.is_constant() else self._den_factors(d)
        if fd is None:
            g = d
            for p in c.values():
                g = g.gcd(p)
                if g.is_one():
                    return c, d
            return {m: p / g for m, p in c.items()}, d / g
        cont, facs = fd
        c, div = self._divide_out(c, facs, cont)
        return c, (d / div if not div.is_one() else d)

    def _divide_out(self, c, facs, cont):
        """Divide every component of ``c`` by the largest ``prod f**k`` (``k <= e`` for each
        ``(f, e)`` of ``facs``) times the largest factor of the integer ``cont`` that divides them
        all: (new components, the divisor)."""
        div = self.pone
        for f, e in facs:
            k = 0
            while k < e:
                try:
                    c = {m: p / f for m, p in c.items()}
                except DomainError:
                    break
                k += 1
            if k:
                div = div * f**k
        if abs(cont) != 1:
            gi = abs(cont)
            for p in c.values():
                gi = flint.fmpz(math.gcd(int(gi), int(p.content())))
                if gi == 1:
                    break
            if gi != 1:
                k = self.ctx.constant(gi)
                c = {m: p / k for m, p in c.items()}
                div = div * k
        return c, div

    def make_reduced(self, c, d) -> Elem:
        if self.algs or self.roots:
            c, d, changed = self._reduce_alg(c, d)
            if not c:
                return self.zero
            if changed and not d.is_constant():
                # a full gcd costs more than it saves here; monomial factors (norms such as a**2 z**2) go
                g = d.term_content()
                for p in c.values():
                    if g.is_one():
                        break
                    g = g.gcd(p.term_content())
                if not g.is_one():
                    c = {m: p / g for m, p in c.items()}
                    d = d / g
        if d.leading_coefficient() < 0:
            c = {m: -p for m, p in c.items()}
            d = -d
        if d.is_zero():
            raise ZeroDivisionError("zero denominator")
        return Elem(self, c, d)

    def mulc(self, ac, bc, den):
        """Product of two component dicts; returns (components, denominator)."""
        overl = 0
        for m1 in ac:
            for m2 in bc:
                overl |= m1 & m2
        extra = self.pone
        out: dict = {}
        for m1, p1 in ac.items():
            for m2, p2 in bc.items():
                o = m1 & m2
                f = p1 * p2
                i = 0
                oo = overl
                while oo:
                    if oo & 1:
                        s = self.sqrts[i]
                        if o >> i & 1:
                            f = f * s.num
                        elif not s.den.is_one():
                            f = f * s.den
                    oo >>= 1
                    i += 1
                m = m1 ^ m2
                q = out.get(m)
                out[m] = f if q is None else q + f
        i = 0
        oo = overl
        while oo:
            if oo & 1 and not self.sqrts[i].den.is_one():
                extra = extra * self.sqrts[i].den
            oo >>= 1
            i += 1
        return out, den * extra

    def coefficients_in(self, p, j: int) -> dict:
        """The coefficients of the base polynomial ``p`` (an ``fmpz_mpoly`` of this field) in base
        generator number ``j``: ``{power: polynomial free of generator j}`` (powers that occur only).
        The one way to read a polynomial as a polynomial in one generator (roots, limits)."""
        out: dict = {}
        for exps, c in p.terms():
            e = exps[j]
            mono = list(exps)
            mono[j] = 0
            term = self.ctx.from_dict({tuple(mono): c})
            out[e] = out[e] + term if e in out else term
        return out

    # -- opaque sub-expressions ----------------------------------------------
    def alias_value(self, j: int) -> Elem:
        """The explicit value of alias generator number ``j`` (the derivative its index says)."""
        v = self._alias_vals.get(j)
        if v is None:
            g = self.base[j]
            alpha = g.data["alpha"]
            if not any(alpha):
                v = self._el(prepare(g.data["expr"]))
            else:
                k = next(i for i, e in enumerate(alpha) if e)
                lower = list(alpha)
                lower[k] -= 1
                h = self._gens[("func", g.data["func"], tuple(lower))]
                v = self.alias_value(h.index).diff(self.coord_index[g.data["args"][k]])
            self._alias_vals[j] = v
        return v

    def _alias_power(self, j: int, e: int) -> Elem:
        key = (j, e)
        v = self._alias_pows.get(key)
        if v is None:
            v = self.alias_value(j) if e == 1 else self._alias_power(j, e - 1) * self.alias_value(j)
            self._alias_pows[key] = v
        return v

    def uses_alias(self, a: Elem) -> bool:
        if not self.alias_index or not a.c:
            return False
        used, _bits = a._needs()
        return bool(used & self._alias_set)

    def _expand_poly(self, p) -> Elem:
        idx = self.alias_index
        groups: dict = {}
        for exps, c in p.terms():
            key = tuple(exps[j] for j in idx)
            rest = list(exps)
            for j in idx:
                rest[j] = 0
            groups.setdefault(key, {})[tuple(rest)] = c
        out = self.zero
        for key, terms in groups.items():
            t = Elem(self, {0: self.ctx.from_dict(terms)}, self.pone)
            for j, e in zip(idx, key, strict=True):
                if e:
                    t = t * self._alias_power(j, e)
            out = out + t
        return out

    def expand(self, a: Elem) -> Elem:
        """``a`` with every opaque generator replaced by its explicit value."""
        if not self.uses_alias(a):
            return a
        num = self.zero
        for m, p in a.c.items():
            t = self._expand_poly(p)
            if m:
                t = t * Elem(self, {m: self.pone}, self.pone)
            num = num + t
        if not num.c:
            return self.zero
        return num / self._expand_poly(a.d)

    def is_zero(self, a: Elem) -> bool:
        """Exact zero test (opaque generators are expanded first)."""
        if not a.c:
            return True
        if not self.uses_alias(a):
            return False
        return not self.expand(a).c
