"""Elements of the exact field and points of evaluation (see :mod:`gravicat.engine.ratfun`).

:class:`Elem` is ``sum_m c_m * s^m / d`` with its ring operations, exact and ball-arithmetic
evaluation; :class:`Point` holds the values of the generators at one sample point.
"""

from __future__ import annotations

import math

import flint

from gravicat.engine.generators import (
    Unsupported,
    arb_precision,
)

# ---------------------------------------------------------------------------
# elements


class Elem:
    """``sum_m c[m] * s^m / d`` (see the module docstring). Immutable."""

    __slots__ = ("F", "c", "d", "_q")

    def __init__(self, F, c, d):
        self.F = F
        self.c = c  # dict mask -> non-zero fmpz_mpoly
        self.d = d  # fmpz_mpoly, positive leading coefficient
        self._q = None  # cached fmpq_mpoly copies for evaluation

    # -- predicates -------------------------------------------------------
    def is_zero(self) -> bool:
        return not self.c

    def is_const(self) -> bool:
        return not self.c or (set(self.c) == {0} and self.c[0].is_constant() and self.d.is_constant())

    def is_plain(self) -> bool:
        """No square-root generator occurs."""
        return not self.c or (len(self.c) == 1 and 0 in self.c)

    def num0(self):
        return self.c.get(0, self.F.pzero)

    def __repr__(self):
        return f"Elem({self.F.to_sympy(self)})"

    # -- arithmetic -------------------------------------------------------
    def _coerce(self, other):
        if isinstance(other, Elem):
            return other
        return self.F.const(other)

    def __neg__(self):
        return Elem(self.F, {m: -p for m, p in self.c.items()}, self.d)

    def __add__(self, other):
        other = self._coerce(other)
        if not self.c:
            return other
        if not other.c:
            return self
        F = self.F
        F.tick()
        a, b = self, other
        if a.d == b.d:
            return F.make(_addc(a.c, b.c), a.d)
        if a.d.is_one():
            return F.make_reduced(_addc(_scalec(a.c, b.d), b.c), b.d)
        if b.d.is_one():
            return F.make_reduced(_addc(a.c, _scalec(b.c, a.d)), a.d)
        fa = F._den_factors(a.d) if not a.d.is_constant() else None
        fb = F._den_factors(b.d) if fa is not None and not b.d.is_constant() else None
        if fb is not None:
            # gcd of the denominators from their factorisations; the sum can only cancel factors of it
            eb = {str(f): e for f, e in fb[1]}
            common = [(f, min(e, eb[str(f)])) for f, e in fa[1] if str(f) in eb]
            gi = flint.fmpz(math.gcd(int(fa[0]), int(fb[0])))
            g = F.ctx.constant(gi)
            for f, e in common:
                g = g * f**e
            da = a.d / g
            db = b.d / g
            num = _addc(_scalec(a.c, db), _scalec(b.c, da))
            if not num:
                return F.zero
            num, h = F._divide_out(num, common, gi)
            return F.make_reduced(num, (a.d / h) * db if not h.is_one() else a.d * db)
        g = a.d.gcd(b.d)
        if g.is_one():
            return F.make_reduced(_addc(_scalec(a.c, b.d), _scalec(b.c, a.d)), a.d * b.d)
        da = a.d / g
        db = b.d / g
        num = _addc(_scalec(a.c, db), _scalec(b.c, da))
        if not num:
            return F.zero
        h = g
        for p in num.values():
            h = h.gcd(p)
            if h.is_one():
                break
        if h.is_one():
            return F.make_reduced(num, a.d * db)
        return F.make_reduced({m: p / h for m, p in num.items()}, (a.d / h) * db)

    __radd__ = __add__

    def __sub__(self, other):
        return self + (-self._coerce(other))

    def __rsub__(self, other):
        return self._coerce(other) + (-self)

    def __mul__(self, other):
        other = self._coerce(other)
        F = self.F
        if not self.c or not other.c:
            return F.zero
        F.tick()
        a, b = self, other
        if len(a.c) == 1 and len(b.c) == 1 and 0 in a.c and 0 in b.c:
            an, bn, ad, bd = a.c[0], b.c[0], a.d, b.d
            if not bd.is_one():
                cc, bd = F._cancel({0: an}, bd)
                an = cc[0]
            if not ad.is_one():
                cc, ad = F._cancel({0: bn}, ad)
                bn = cc[0]
            return F.make_reduced({0: an * bn}, ad * bd)
        if F.tower_mask:
            ov = 0
            for m1 in a.c:
                for m2 in b.c:
                    ov |= m1 & m2
            if ov & F.tower_mask:
                return F.mul_tower(a, b)
        return F.make(*F.mulc(a.c, b.c, a.d * b.d))

    __rmul__ = __mul__

    def inv(self):
        F = self.F
        if not self.c:
            raise ZeroDivisionError("division by an element that is identically zero")
        if self.is_plain():
            return F._inv_plain(self.c[0], self.d)
        # rationalise: multiply by the conjugates until the norm is free of square roots
        n = Elem(F, dict(self.c), F.pone)
        mult = F.one
        # highest root first: a nested root's radicand only uses lower ones
        for i in reversed(range(len(F.sqrts))):
            bit = 1 << i
            if not any(m & bit for m in n.c):
                continue
            conj = Elem(F, {m: (-p if m & bit else p) for m, p in n.c.items()}, n.d)
            mult = mult * conj
            n = n * conj
            if not n.c:
                raise ZeroDivisionError("division by an element that is zero (dependent square roots)")
        if not n.is_plain():  # pragma: no cover - only with dependent radicands
            raise Unsupported("could not rationalise a denominator")
        return Elem(F, {0: self.d}, F.pone) * mult * n.inv()

    def __truediv__(self, other):
        other = self._coerce(other)
        return self * other.inv()

    def __rtruediv__(self, other):
        return self._coerce(other) * self.inv()

    def __pow__(self, k: int):
        if not isinstance(k, int):
            raise TypeError("only integer powers of elements")
        if k < 0:
            return self.inv() ** (-k)
        out = self.F.one
        base = self
        while k:
            if k & 1:
                out = out * base
            k >>= 1
            if k:
                base = base * base
        return out

    # -- calculus ---------------------------------------------------------
    def diff(self, i: int) -> Elem:
        """Derivative with respect to chart coordinate number ``i``."""
        return self.F.diff(self, i)

    # -- evaluation -------------------------------------------------------
    def _needs(self):
        """(base generator indices, square-root bits) this element uses."""
        used = set()
        bits = 0
        for m, p in self.c.items():
            bits |= m
            used.update(j for j, e in enumerate(p.degrees()) if e)
        used.update(j for j, e in enumerate(self.d.degrees()) if e)
        return used, bits

    def evaluate(self, pt):
        """Value at a :class:`Point`: ``fmpq`` when every generator it uses has
        an exact value there, else an ``arb`` ball (the polynomials are still
        evaluated exactly in the generators that have exact values)."""
        F = self.F
        if not self.c:
            return flint.fmpq(0)
        if self._q is None:
            used, bits = self._needs()
            self._q = [used, bits, None]
        used, bits, qpolys = self._q
        if pt.fill is not None:
            missing = [j for j in used if pt.abase[j] is None]
            if missing:
                with arb_precision():
                    for j in missing:
                        pt.fill(j)
        if qpolys is None:
            qpolys = ({m: F.to_q(p) for m, p in self.c.items()}, F.to_q(self.d))
            self._q[2] = qpolys
        qc, qd = qpolys
        if all(pt.base[j] is not None for j in used):
            vals = pt.exact_values()
            den = qd(*vals)
            if den == 0:
                raise ZeroDivisionError("denominator vanishes at the point")
            sq_exact = True
            i = 0
            m = bits
            while m:
                if m & 1 and pt.sqrt[i] is None:
                    sq_exact = False
                    break
                m >>= 1
                i += 1
            if sq_exact:
                total = flint.fmpq(0)
                for m, p in qc.items():
                    v = p(*vals)
                    if m:
                        v = v * pt.sqrt_product(m, True)
                    total += v
                return total / den
            with arb_precision():
                total = flint.arb(0)
                for m, p in qc.items():
                    v = p(*vals)
                    if v == 0:
                        continue
                    total += flint.arb(v) * pt.sqrt_product(m, False) if m else flint.arb(v)
                return total / den
        # some generator has no exact value: substitute the exact ones, then interval arithmetic
        with arb_precision():
            sub = {j: pt.base[j] for j in used if pt.base[j] is not None}

            def ev(q):
                return F.eval_arb(q.subs(sub) if sub else q, pt.abase)

            den = ev(qd)
            if den.contains(0):
                raise ZeroDivisionError("denominator not separated from zero at the point")
            total = flint.arb(0)
            for m, p in qc.items():
                v = ev(p)
                if m:
                    v = v * pt.sqrt_product(m, False)
                total += v
            return total / den


def _addc(a, b):
    out = dict(a)
    for m, p in b.items():
        q = out.get(m)
        if q is None:
            out[m] = p
        else:
            s = q + p
            if s.is_zero():
                del out[m]
            else:
                out[m] = s
    return out


def _scalec(c, f):
    return {m: p * f for m, p in c.items()}


# ---------------------------------------------------------------------------
# the field


class Point:
    """Values of the generators at one point: exact (``fmpq`` or None) and interval."""

    __slots__ = ("base", "sqrt", "abase", "asqrt", "_prod", "_vals", "fill")

    def __init__(self, base, sqrt, abase, asqrt):
        self.base = base  # fmpq or None (not rational) per base generator
        self.sqrt = sqrt  # fmpq or None per square-root generator
        self.abase = abase  # arb per base generator
        self.asqrt = asqrt  # arb per square-root generator
        self._prod = {}
        self._vals = None
        self.fill = None  # computes a generator value on first use (opaque generators)

    def exact_values(self):
        """The exact values as evaluation arguments (0 stands in for generators without one)."""
        if self._vals is None:
            self._vals = [v if v is not None else flint.fmpq(0) for v in self.base]
        return self._vals

    def sqrt_product(self, mask, exact):
        key = (mask, exact)
        v = self._prod.get(key)
        if v is None:
            vals = self.sqrt if exact else self.asqrt
            v = flint.fmpq(1) if exact else flint.arb(1)
            i = 0
            m = mask
            while m:
                if m & 1:
                    v = v * vals[i]
                m >>= 1
                i += 1
            self._prod[key] = v
        return v
