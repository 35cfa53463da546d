"""Field, part 4: derivatives, conversion back to sympy, and points (see :mod:`gravicat.engine.ratfun`).

The derivation of every generator along each coordinate, the sympy form of an element, and
the values of the generators at a sample point (exact rationals, else balls).
"""

from __future__ import annotations

from fractions import Fraction

import flint
import sympy as sp

from gravicat.engine.elements import Elem, Point
from gravicat.engine.generators import (
    Unsupported,
    arb_precision,
)


class FieldCalculus:
    """Derivatives, sympy output and points; a mixin of :class:`~gravicat.engine.ratfun.Field`."""

    # -- derivatives ---------------------------------------------------------
    def dgen(self, j: int, i: int):
        """Derivative of base generator ``j`` along coordinate ``i`` (Elem or None)."""
        key = (j, i)
        if key in self._dgen:
            return self._dgen[key]
        g = self.base[j]
        x = self.coords[i]
        r = None
        if g.kind == "coord":
            r = self.one if g.sym == x else None
        elif g.kind in ("param", "const"):
            r = None
        elif g.kind in ("func", "alias"):
            args, alpha = g.data["args"], g.data["alpha"]
            if x in args:
                a = list(alpha)
                a[args.index(x)] += 1
                h = self._gens.get(("func", g.data["func"], tuple(a)))
                if h is None:
                    raise Unsupported(f"derivative order of {g.data['func'].__name__} beyond {g.data['top']}")
                r = self.gen_elem(h)
        elif g.kind == "exp":
            dw = self._el(g.data["arg"]).diff(i)
            r = None if dw.is_zero() else self.gen_elem(g) * dw
        elif g.kind == "pow":
            b = self._el(g.data["base"])
            db = b.diff(i)
            r = None if db.is_zero() else self.gen_elem(g) * self._el(g.data["exp"]) * db / b
        elif g.kind == "log":
            w = self._el(g.data["arg"])
            dw = w.diff(i)
            r = None if dw.is_zero() else dw / w
        elif g.kind == "root":
            # rho**q = P: d rho = rho dP / (q P)
            rg = self._root_of[j]
            dP = self.dpoly(rg.P, i)
            if dP.c:
                r = self.gen_elem(g) * dP / (Elem(self, {0: rg.P}, self.pone) * rg.q)
        elif g.kind == "alg":
            # implicit differentiation of F(r) = 0: dr = -(sum_k dF/dg_k dg_k) / (dF/dr)
            al = self._alg_of[j]
            P = al.poly
            terms = []
            for k, dk in enumerate(P.degrees()):
                if k == j or not dk:
                    continue
                rk = self.dgen(k, i)
                if rk is not None:
                    terms.append(self._poly_el(P.derivative(k)) * rk)
            if terms:
                Fx = self.sum(terms)
                if Fx.c:
                    r = -(Fx / self._poly_el(P.derivative(j)))
        elif g.kind == "lambertw":
            # W exp(W) = z: dW = W dz / (z (1 + W))
            z = self._el(g.data["arg"])
            dz = z.diff(i)
            if not dz.is_zero():
                W = self.gen_elem(g)
                r = W * dz / (z * (W + 1))
        elif g.kind == "cos":
            atom = g.data["atom"]
            if atom in self.coord_index:
                dw = self.const(flint.fmpq(1, g.data["q"])) if atom == x else self.zero
            else:
                dw = self._el(g.data["angle"]).diff(i)
            if not dw.is_zero():
                S = Elem(self, {1 << g.data["sin"].bit: self.pone}, self.pone)
                r = -(S * dw)
        if r is not None and r.is_zero():
            r = None
        self._dgen[key] = r
        return r

    def dlogsqrt(self, k: int, i: int):
        """``d s_k / s_k`` along coordinate ``i``: ``dR / (2 R)`` (Elem or None)."""
        key = (k, i)
        if key in self._dlogsqrt:
            return self._dlogsqrt[key]
        s = self.sqrts[k]
        if s.coord is not None:
            # s is the eliminated variable itself: ds/s = dv/v = s/R along v, 0 along the others
            v = self.base[s.coord]
            r = Elem(self, {1 << s.bit: self.pone}, self.pone) / s.radicand if v.sym == self.coords[i] else None
        elif s.trig is not None:
            # s = sin(w), c = cos(w): ds/s = c dw / s = -c dc / s^2 = -c dc / (1 - c^2)
            C = self.gen_elem(s.trig)
            dc = self.dgen(s.trig.index, i)
            r = None if dc is None else -(C * dc) / s.radicand
        else:
            dR = s.radicand.diff(i)
            r = None if dR.is_zero() else dR / (s.radicand * 2)
        self._dlogsqrt[key] = r
        return r

    def dpoly(self, p, i: int) -> Elem:
        """Derivative of a base polynomial along coordinate ``i``."""
        degs = p.degrees()
        acc_poly = None
        acc = None
        for j, dj in enumerate(degs):
            if not dj:
                continue
            r = self.dgen(j, i)
            if r is None:
                continue
            pj = p.derivative(j)
            if r.is_plain() and r.d.is_one():
                t = pj * r.c[0]
                acc_poly = t if acc_poly is None else acc_poly + t
            else:
                t = Elem(self, {0: pj}, self.pone) * r
                acc = t if acc is None else acc + t
        out = self.zero
        if acc_poly is not None and not acc_poly.is_zero():
            out = (
                Elem(self, {0: acc_poly}, self.pone)
                if not (self.algs or self.roots)
                else self.make({0: acc_poly}, self.pone)
            )
        if acc is not None:
            out = out + acc
        return out

    def diff(self, a: Elem, i: int) -> Elem:
        if not a.c:
            return self.zero
        self.tick()
        # d(N/d) = dN/d - N dd/d^2, N = sum c_m s^m
        dn = self.zero
        for m, p in a.c.items():
            sm = Elem(self, {m: self.pone}, self.pone)
            term = self.dpoly(p, i)
            if m:
                lg = self.zero
                k = 0
                mm = m
                while mm:
                    if mm & 1:
                        r = self.dlogsqrt(k, i)
                        if r is not None:
                            lg = lg + r
                    mm >>= 1
                    k += 1
                if not lg.is_zero():
                    term = term + Elem(self, {0: p}, self.pone) * lg
                term = term * sm
            dn = dn + term
        if a.d.is_constant():
            return dn / Elem(self, {0: a.d}, self.pone) if not a.d.is_one() else dn
        dd = self.dpoly(a.d, i)
        if dd.is_zero():
            return dn * Elem(self, {0: self.pone}, a.d)
        if a.is_plain() and dn.is_plain() and dd.is_plain() and dn.d.is_one() and dd.d.is_one():
            n = a.c[0]
            num = dn.num0() * a.d - n * dd.num0()
            return self.make({0: num}, a.d * a.d)
        inv_d = Elem(self, {0: self.pone}, a.d)
        return dn * inv_d - Elem(self, dict(a.c), self.pone) * dd * inv_d * inv_d

    # -- conversions ---------------------------------------------------------
    def to_q(self, p):
        return flint.fmpq_mpoly(p, self.qctx)

    def eval_arb(self, p, base):
        if p.is_constant():
            return flint.arb(p.leading_coefficient()) if not p.is_zero() else flint.arb(0)
        total = flint.arb(0)
        pows: dict = {}
        for exps, coeff in p.terms():
            t = flint.arb(coeff)
            for j, e in enumerate(exps):
                if e:
                    key = (j, e)
                    v = pows.get(key)
                    if v is None:
                        v = pows[key] = base[j] ** e
                    t = t * v
            total += t
        return total

    def gen_sym(self, j: int, opaque: bool = False):
        """sympy form of base generator ``j``: an opaque one as its explicit expression (its
        derivatives evaluated), or with ``opaque`` as its placeholder function (``X1(t, x)``,
        ``Derivative(X1(t, x), x)``; :attr:`alias_sub` maps each expression to its placeholder)."""
        g = self.base[j]
        if g.kind != "alias" or opaque:
            return g.sym
        cache = self.__dict__.setdefault("_gen_sym_cache", {})
        key = (j, opaque)
        v = cache.get(key)
        if v is None:
            alpha, args = g.data["alpha"], g.data["args"]
            spec = [(args[k], e) for k, e in enumerate(alpha) if e]
            X = g.data["expr"]
            if not spec:
                v = X
            elif opaque:
                v = sp.Derivative(X, *spec, evaluate=False)
            else:
                v = sp.diff(X, *spec)
            cache[key] = v
        return v

    def gen_syms(self, opaque: bool = False):
        return [self.gen_sym(j, opaque) for j in range(len(self.base))]

    def poly_to_sympy(self, p, opaque: bool = False):
        terms = []
        for exps, coeff in p.terms():
            t = sp.Integer(int(coeff))
            for j, e in enumerate(exps):
                if e:
                    t = t * self.gen_sym(j, opaque) ** e
            terms.append(t)
        return sp.Add(*terms)

    def _factored(self, p, opaque: bool = False):
        if p.is_constant():
            return sp.Integer(int(p.leading_coefficient()))
        c, facs = p.factor()
        out = sp.Integer(int(c))
        facs = [[f, e] for f, e in facs]
        # (cos w - 1)(cos w + 1) = -sin(w)**2
        for g in self.base:
            if g.kind != "cos":
                continue
            C = self.ctx.gens()[g.index]
            lo = next((fe for fe in facs if fe[0] == C - 1), None)
            hi = next((fe for fe in facs if fe[0] == C + 1), None)
            if lo is not None and hi is not None:
                m = min(lo[1], hi[1])
                out = out * (-1) ** m * g.data["sin"].sym ** (2 * m)
                lo[1] -= m
                hi[1] -= m
        facs = [(f, e) for f, e in facs if e]
        for f, e in facs:
            out = out * self.poly_to_sympy(f, opaque) ** e
        return out

    def to_sympy(self, a: Elem, factor: bool = True, opaque: bool = False):
        """The element as a sympy expression in the chart's own symbols (see :meth:`gen_sym`).

        With an eliminated variable (see :meth:`_eliminate`) a value that is free of the nested root
        (Kerr's Kretschmann scalar in Kerr-Schild coordinates) is shown as a rational function of
        the chart's own symbols; otherwise the root appears as its explicit expression."""
        if not a.c:
            return sp.Integer(0)
        if self._elim:
            alt = self._root_free(a)
            if alt is not None:
                a = alt
        conv = self._factored if factor else self.poly_to_sympy
        num = sp.Integer(0)
        for m, p in a.c.items():
            t = conv(p, opaque)
            k = 0
            mm = m
            while mm:
                if mm & 1:
                    t = t * self.sqrts[k].sym
                mm >>= 1
                k += 1
            num = num + t
        return num / conv(a.d, opaque)

    # -- points --------------------------------------------------------------
    def point(self, values: dict, angles: dict | None = None) -> Point:
        """Generator values at a point.

        ``values``: sympy symbol (coordinate, parameter) or function generator
        key ``(func, alpha)`` -> rational (Fraction / fmpq / int), or an
        ``arb`` for a coordinate whose value is not rational (an angle that
        also occurs outside trigonometric functions). ``angles``: angle atom ->
        rational ``u = tan(angle/2)``: exact cos and sin of that angle. The
        remaining generators (pi, exp, log, other angles, square roots of
        non-squares) get interval values; an element that needs none of them
        still evaluates exactly. A negative radicand raises ValueError.
        """
        angles = angles or {}
        nb, ns = len(self.base), len(self.sqrts)
        ex: list = [None] * nb
        sq: list = [None] * ns

        def q(v):
            if isinstance(v, Fraction):
                return flint.fmpq(v.numerator, v.denominator)
            if isinstance(v, sp.Rational):
                return flint.fmpq(int(v.p), int(v.q))
            if isinstance(v, (flint.fmpq, flint.arb)):
                return v
            return flint.fmpq(v)

        with arb_precision():
            ab: list = [None] * nb
            asq: list = [None] * ns
            pending = []
            for g in self.base:
                v = None
                if g.kind in ("coord", "param"):
                    if g.sym not in values:
                        raise KeyError(f"no value for {g.sym}")
                    v = q(values[g.sym])
                elif g.kind == "func":
                    v = q(values[(g.data["func"], g.data["alpha"])])
                elif g.kind == "cos" and g.data["atom"] in angles:
                    u = q(angles[g.data["atom"]])
                    v = (1 - u * u) / (1 + u * u)
                    s = 2 * u / (1 + u * u)
                    sq[g.data["sin"].bit] = s
                    asq[g.data["sin"].bit] = flint.arb(s)
                else:
                    pending.append(g)
                    continue
                if isinstance(v, flint.fmpq):
                    ex[g.index] = v
                ab[g.index] = flint.arb(v)
            pt = Point(ex, sq, ab, asq)
            pend = {g.index: g for g in pending}

            def ensure(el):
                used, bits = el._needs()
                for j in used:
                    ensure_base(j)
                i = 0
                while bits:
                    if bits & 1:
                        ensure_sqrt(i)
                    bits >>= 1
                    i += 1

            def ensure_base(j):
                if ab[j] is not None:
                    return
                g = pend[j]
                if g.kind == "const":
                    val = flint.arb.pi() if g.sym is sp.pi else flint.arb(1).exp()
                elif g.kind == "alias":
                    w = self.alias_value(j)
                    ensure(w)
                    val = w.evaluate(pt)
                    if isinstance(val, flint.fmpq):
                        ex[j] = val
                        pt._vals = None
                    val = flint.arb(val)
                elif g.kind == "alg":
                    # r = sqrt(A + c sqrt(B)) from its explicit expression (exact when both are squares)
                    al = self._alg_of[j]
                    for part in (al.A, al.c, al.B):
                        ensure(part)
                    vB = al.B.evaluate(pt)
                    sB = _sqrt_value(vB)
                    val = _sqrt_value(al.A.evaluate(pt) + al.c.evaluate(pt) * sB)
                    if isinstance(val, flint.fmpq):
                        ex[j] = val
                        pt._vals = None
                    val = flint.arb(val)
                elif g.kind == "root":
                    rg = self._root_of[j]
                    Pel = Elem(self, {0: rg.P}, self.pone)
                    ensure(Pel)
                    val = _root_value(Pel.evaluate(pt), rg.q)
                    if isinstance(val, flint.fmpq):
                        ex[j] = val
                        pt._vals = None
                    val = flint.arb(val)
                elif g.kind == "lambertw":
                    w = self._el(g.data["arg"])
                    ensure(w)
                    val = flint.arb(w.evaluate(pt)).lambertw()
                    if not val.is_finite():
                        raise ValueError("LambertW of an argument below -1/e")
                elif g.kind in ("exp", "log"):
                    w = self._el(g.data["arg"])
                    ensure(w)
                    w = flint.arb(w.evaluate(pt))
                    val = w.exp() if g.kind == "exp" else w.log()
                elif g.kind == "pow":
                    b, e = self._el(g.data["base"]), self._el(g.data["exp"])
                    ensure(b)
                    ensure(e)
                    val = (flint.arb(b.evaluate(pt)).log() * e.evaluate(pt)).exp()
                else:  # cos of a general angle
                    w = self._el(g.data["angle"])
                    ensure(w)
                    w = flint.arb(w.evaluate(pt))
                    val = w.cos()
                    asq[g.data["sin"].bit] = w.sin()
                ab[j] = val

            def ensure_sqrt(i):
                if asq[i] is not None:
                    return
                s = self.sqrts[i]
                if s.trig is not None:
                    ensure_base(s.trig.index)
                    return
                if s.coord is not None:  # the eliminated coordinate or parameter: its own value
                    sq[i] = ex[s.coord]
                    asq[i] = ab[s.coord]
                    return
                ensure(s.radicand)
                rv = s.radicand.evaluate(pt)
                if isinstance(rv, flint.fmpq):
                    if rv < 0:
                        raise ValueError("negative radicand")
                    if rv.p.isqrt() ** 2 == rv.p and rv.q.isqrt() ** 2 == rv.q:
                        sq[i] = flint.fmpq(rv.p.isqrt(), rv.q.isqrt())
                        asq[i] = flint.arb(sq[i])
                        return
                    rv = flint.arb(rv)
                if rv < 0:
                    raise ValueError("negative radicand")
                if rv.contains(0):
                    raise ValueError("radicand too close to zero")
                asq[i] = rv.sqrt()

            for g in pending:
                if g.kind != "alias":  # opaque generators (and their derivatives) on first use only
                    ensure_base(g.index)
            for i in range(len(self.sqrts)):
                ensure_sqrt(i)
        pt.fill = ensure_base
        return pt


def _sqrt_value(v):
    """Principal square root of an ``fmpq`` (exact when it is a square) or of an ``arb``."""
    if isinstance(v, flint.fmpq):
        if v < 0:
            raise ValueError("negative radicand")
        if v.p.isqrt() ** 2 == v.p and v.q.isqrt() ** 2 == v.q:
            return flint.fmpq(v.p.isqrt(), v.q.isqrt())
        v = flint.arb(v)
    if v < 0:
        raise ValueError("negative radicand")
    if v.contains(0):
        raise ValueError("radicand too close to zero")
    return v.sqrt()


def _root_value(v, q):
    """Real ``q``-th root of a positive ``fmpq`` (exact when it is a ``q``-th power) or ``arb``; a
    base that is not positive is outside the chart's real domain (ValueError)."""
    if isinstance(v, flint.fmpq):
        if v <= 0:
            raise ValueError("a root of a base that is not positive")
        a, ea = sp.integer_nthroot(int(v.p), q)
        b, eb = sp.integer_nthroot(int(v.q), q)
        if ea and eb:
            return flint.fmpq(a, b)
        v = flint.arb(v)
    if not v > 0:
        raise ValueError("a root of a base not separated from zero")
    return v.root(q)
