"""Field, part 3: roots (see :mod:`gravicat.engine.ratfun`).

Algebraic generators of nested roots (elimination or reduction by the defining polynomial),
real root generators ``rho**q = P`` (reduction, inverses by the norm), and square-root generators
(canonical radicands, products in the tower, square roots of elements).
"""

from __future__ import annotations

import math

import flint
import sympy as sp

from gravicat.engine.elements import Elem
from gravicat.engine.generators import (
    AlgGen,
    BaseGen,
    RootGen,
    SqrtGen,
    Unsupported,
)
from gravicat.engine.rewrite import (
    prepare,
)


class FieldRoots:
    """Algebraic, real-root and square-root generators; a mixin of :class:`~gravicat.engine.ratfun.Field`."""

    # -- algebraic generators ---------------------------------------------------
    def _setup_alg(self, g: BaseGen):
        """Defining polynomial of the algebraic generator ``g`` and the inner root it replaces."""
        d = g.data
        A, c, B = (self._el(prepare(d[k])) for k in ("A", "c", "B"))
        if not (A.is_plain() and c.is_plain() and B.is_plain()) or not c.c:
            raise Unsupported(f"nested root {g.sym}: parts outside the base field")
        j = g.index
        gens = self.ctx.gens()
        r = Elem(self, {0: gens[j]}, self.pone)
        u = r * r - A
        P = (u * u - c * c * B).num0()  # cleared of denominators (the algs list is still empty here)
        r2 = gens[j] * gens[j]
        L, rest = divmod(P, r2 * r2)
        P2, P0 = divmod(rest, r2)
        if any(q.degrees()[j] > 0 for q in (L, P2, P0)) or L.is_zero():
            raise Unsupported(f"nested root {g.sym}: unexpected defining polynomial")
        if L.leading_coefficient() < 0:
            P, L, P2, P0 = -P, -L, -P2, -P0
        _cf, facs = P.factor()
        if sum(e for f, e in facs if f.degrees()[j] > 0) != 1:
            self._alg_reducible = True  # a non-zero remainder is then not a definite non-zero
        al = AlgGen(g, j, P, L, P2, P0, gens[j], gens, A, c, B)
        self.algs.append(al)
        self._alg_of[j] = al
        # sqrt(B) = (r**2 - A)/c: the inner root is no generator of its own
        key, factor = self._canon_sqrt(B.c[0], B.d)
        self._alg_inner[key] = (r * r - A) / (c * self.const(factor))

    def _eliminate(self, al: AlgGen):
        """Trade the algebraic generator's relation for a square root: when ``F`` is ``F2 v**2 + F0``
        in a coordinate or parameter ``v`` that occurs in no other generator (Kerr-Schild's
        ``r**4 - (x**2 + y**2 + z**2 - a**2) r**2 - a**2 z**2`` in ``y``), the field
        ``Q(..., v)[r]/(F)`` is ``Q(..., r)[s]/(s**2 - R)`` with ``s = v``, ``R = -F0/F2``: ``r``
        becomes a free variable (no reduction, natural denominators such as ``r**4 + a**2 z**2``) and
        ``v`` a square-root generator with ``dv/dv = 1``. Keeps the reduction when no ``v`` fits."""
        P, j = al.poly, al.index
        gens = self.ctx.gens()
        best = None
        for g in self.base:
            k = g.index
            if g.kind not in ("coord", "param") or P.degrees()[k] != 2:
                continue
            if any(h is not g and h is not al.gen and g.sym in h.sym.free_symbols for h in self.base):
                continue
            if self.alias_sub and any(g.sym in X.free_symbols for X in self.alias_sub):
                continue
            v2 = gens[k] * gens[k]
            F2, F0 = divmod(P, v2)
            if F2.degrees()[k] > 0 or F0.degrees()[k] > 0 or F2.is_zero() or F0.degrees()[j] <= 0:
                continue
            rank = (g.kind != "coord", len(F2), -k)
            if best is None or rank < best[0]:
                best = (rank, g, F2, F0)
        if best is None:
            return
        _rank, v, F2, F0 = best
        self.algs = []  # r is free now
        s = self._new_sqrt(-F0, F2, v.sym) if F2.leading_coefficient() > 0 else self._new_sqrt(F0, -F2, v.sym)
        s.coord = v.index
        self._elim = {v.sym: Elem(self, {1 << s.bit: self.pone}, self.pone)}
        self._elim_gen = v
        # every conversion so far used v as a variable: start again
        self._memo.clear()
        self._mono.clear()
        self._dgen.clear()
        self._dlogsqrt.clear()
        self._alg_inner.clear()
        d = al.gen.data
        A, c, B = (self._el(prepare(d[k])) for k in ("A", "c", "B"))
        r = self.gen_elem(al.gen)
        inner = (r * r - A) / c
        if B.is_plain():
            key, factor = self._canon_sqrt(B.c[0], B.d)
            self._alg_inner[key] = inner / self.const(factor)
        self._alg_inner_sym = {d["B"]: inner}

    def _poly_el(self, p) -> Elem:
        """A polynomial of the context as an element (an eliminated variable becomes its root)."""
        if not self._elim or p.degrees()[self._elim_gen.index] <= 0:
            return self.make({0: p}, self.pone)
        k = self._elim_gen.index
        s = next(iter(self._elim.values()))
        out = self.zero
        power = self.one
        rest = p
        v = self.ctx.gens()[k]
        while not rest.is_zero():
            rest, low = divmod(rest, v)  # low: the terms free of v
            if not low.is_zero():
                out = out + Elem(self, {0: low}, self.pone) * power
            power = power * s
        return out

    def _root_free(self, a: Elem, limit: int = 600):
        """``a`` (eliminated form) rewritten over the original variables with the algebraic
        generator reduced modulo its polynomial, when the result does not use it; else None.
        For display only (the element lives in another representation); small elements only."""
        al = next(iter(self._alg_of.values()))
        v = self._elim_gen
        bit = next(iter(self._elim.values())).c
        (mask,) = bit
        if set(a.c) - {0, mask} or sum(len(p) for p in a.c.values()) + len(a.d) > limit:
            return None
        # necessary condition, cheap: r -> -r is an automorphism here (R is even in r); a value free of
        # the root is invariant under it
        flipped = self.make({m: p.compose(*al.flip) for m, p in a.c.items()}, self.pone) / self.make(
            {0: a.d.compose(*al.flip)}, self.pone
        )
        if (flipped - a).c:
            return None
        num = a.c.get(0, self.pzero)
        if mask in a.c:
            num = num + a.c[mask] * self.ctx.gens()[v.index]
        cont, facs = self._den_factors(a.d)
        saved = self.algs, self._elim
        self.algs, self._elim = [al], {}
        try:
            out = self.make({0: num}, self.ctx.constant(cont))
            cache = self.__dict__.setdefault("_root_free_inv", {})
            for f, e in facs:
                key = str(f)
                inv = cache.get(key)
                if inv is None:
                    inv = cache[key] = self._inv_plain(f, self.pone)
                out = out * inv**e
        except (ZeroDivisionError, Unsupported):
            return None
        finally:
            self.algs, self._elim = saved
        if any(p.degrees()[al.index] > 0 for p in out.c.values()) or out.d.degrees()[al.index] > 0:
            return None
        return out

    def _reduce_alg(self, c, d):
        """Numerators of degree >= 4 in an algebraic generator reduced modulo its polynomial
        (``L r**4 = -(P2 r**2 + P0)``; a non-constant ``L`` joins the denominator)."""
        changed = False
        for al in self.algs:
            j = al.index
            while any(p.degrees()[j] >= 4 for p in c.values()):
                changed = True
                out = {}
                for m, p in c.items():
                    if p.degrees()[j] >= 4:
                        q, rem = divmod(p, al.r4)
                        p = rem * al.L - q * al.low if not al.L.is_one() else rem - q * al.low
                    elif not al.L.is_one():
                        p = p * al.L
                    if not p.is_zero():
                        out[m] = p
                c = out
                if not al.L.is_one():
                    d = d * al.L
        for rg in self.roots:
            j, q = rg.index, rg.q
            if any(p.degrees()[j] >= q for p in c.values()):
                changed = True
                out = {}
                for m, p in c.items():
                    while p.degrees()[j] >= q:
                        quo, rem = divmod(p, rg.rq)  # rho**q = P
                        p = rem + quo * rg.P
                    if not p.is_zero():
                        out[m] = p
                c = out
        return c, d, changed

    def _uses_alg(self, p) -> bool:
        degs = p.degrees()
        return any(degs[al.index] > 0 for al in self.algs)

    def _inv_plain(self, num, den) -> Elem:
        """``den / num`` for base polynomials; an algebraic generator in ``num`` is removed by
        multiplying with its conjugates (``r -> -r``, then ``r**2 -> -P2/L - r**2``)."""
        if self.roots and any(num.degrees()[rg.index] > 0 for rg in self.roots):
            return self._inv_roots(num, den)
        if not self.algs or not self._uses_alg(num):
            return self.make_reduced({0: den}, num)
        x = Elem(self, {0: num}, self.pone)
        mult = Elem(self, {0: den}, self.pone)
        for al in self.algs:
            p = x.num0()
            if p.degrees()[al.index] <= 0:
                continue
            self.tick()
            xm = Elem(self, {0: p.compose(*al.flip)}, self.pone)
            y = x * xm  # even in r: (alpha + beta r**2) / y.d
            if not y.c:
                raise ZeroDivisionError("division by zero modulo a reducible defining polynomial")
            beta, alpha = divmod(y.num0(), al.r2)
            if beta.degrees()[al.index] > 0 or alpha.degrees()[al.index] > 0:  # pragma: no cover - defensive
                raise Unsupported("could not rationalise a denominator with a nested root")
            conj = alpha * al.L - beta * al.P2 - beta * al.L * al.r2
            nrm = alpha * alpha * al.L - alpha * beta * al.P2 + beta * beta * al.P0
            if nrm.is_zero():
                raise ZeroDivisionError("division by zero modulo a reducible defining polynomial")
            mult = mult * xm * Elem(self, {0: conj}, self.pone) * Elem(self, {0: y.d}, self.pone)
            x = Elem(self, {0: nrm}, self.pone)
        return mult * self.make_reduced({0: self.pone}, x.num0())

    # -- real root generators -------------------------------------------------
    def _setup_root(self, g: BaseGen):
        """The relation ``rho**q = P`` of the root generator ``g`` (see :meth:`_root_split_of`)."""
        P = self._el(prepare(g.data["base"]))
        if not P.is_plain() or not P.d.is_one() or not P.c:
            raise Unsupported(f"root {g.sym}: base outside the polynomials of the field")
        P = P.c[0]
        if any(P.degrees()[h.index] > 0 for h in self.base if h.kind in ("root", "alg", "pow")):
            raise Unsupported(f"root {g.sym}: base uses another root")
        j = g.index
        rg = RootGen(g, j, g.data["q"], P, self.ctx.gens()[j] ** g.data["q"])
        self.roots.append(rg)
        self._root_of[j] = rg

    def _roots_independent(self) -> bool:
        """No hidden relation among the root generators: prime ``q`` and bases that are distinct
        primes or distinct irreducible polynomials, none of them a ``q``-th power (then
        ``x**q - P`` is irreducible and the roots of different bases are independent)."""
        if not self.roots:
            return True
        seen = []
        for rg in self.roots:
            if not sp.isprime(rg.q):
                return False
            if rg.P.is_constant():
                n = int(rg.P.leading_coefficient())
                if not sp.isprime(n):
                    return False
            else:
                _c, facs = rg.P.factor()
                if len(facs) != 1 or facs[0][1] != 1 or abs(int(_c)) != 1:
                    return False
            key = str(rg.P)
            if key in seen:
                return False
            seen.append(key)
        return True

    def _inv_roots(self, num, den) -> Elem:
        """``den / num`` when ``num`` uses root generators: multiplied by the cofactor of each
        (the adjugate of its multiplication matrix), the denominator becomes the norm, free of it."""
        mult = Elem(self, {0: den}, self.pone)
        x = self.make({0: num}, self.pone)
        for rg in self.roots:
            p = x.num0()
            if p.degrees()[rg.index] <= 0:
                continue
            self.tick()
            cof, nrm = self._root_cofactor(p, rg)
            if not nrm.c:
                raise ZeroDivisionError("division by zero modulo a reducible root relation")
            mult = mult * cof * Elem(self, {0: x.d}, self.pone)
            x = nrm
        return mult * self._inv_plain(x.num0(), x.d)  # x is free of root generators now

    def _root_cofactor(self, p, rg: RootGen):
        """(w, N) with ``p w = N`` modulo ``rho**q - P``, ``N`` free of ``rho``: ``w`` is the first
        column of the adjugate of the multiplication-by-``p`` matrix on ``1, rho, ..., rho**(q-1)``
        and ``N`` its determinant (the norm)."""
        q = rg.q
        coeffs = self.coefficients_in(p, rg.index)
        a = [Elem(self, {0: coeffs[k]}, self.pone) if k in coeffs else self.zero for k in range(q)]
        Pel = Elem(self, {0: rg.P}, self.pone)
        # column k: p rho**k = sum_i a_i rho**(i+k), rho**q = P
        M = [[a[r - k] if r >= k else a[r - k + q] * Pel for k in range(q)] for r in range(q)]

        def det(rows, cols):
            if len(rows) == 1:
                return M[rows[0]][cols[0]]
            out = self.zero
            r0, rest = rows[0], rows[1:]
            for idx, cc in enumerate(cols):
                if not M[r0][cc].c:
                    continue
                t = M[r0][cc] * det(rest, cols[:idx] + cols[idx + 1 :])
                out = out + t if idx % 2 == 0 else out - t
            return out

        rows = list(range(1, q))
        w = [det(rows, [c for c in range(q) if c != i]) * (-1 if i % 2 else 1) for i in range(q)]
        N = self.sum([M[0][i] * w[i] for i in range(q)])
        rho = self.gen_elem(rg.gen)
        cof = self.sum([w[i] * rho**i for i in range(q)])
        return cof, N

    def _canon_sqrt(self, num, den):
        """``sqrt(num/den) = factor * sqrt(k pn / pd)``: the canonical radicand's key and ``factor``."""
        cn, cd = _content(num), _content(den)
        s, k = _square_split(int(cn) * int(cd))
        num = (num / self.ctx.constant(cn)) * k
        den = den / self.ctx.constant(cd)
        return (str(num), str(den)), flint.fmpq(s, int(cd))

    def _new_sqrt(self, num, den, sym, trig=None, radicand=None) -> SqrtGen:
        if len(self.sqrts) >= 24:
            raise Unsupported("too many square roots")
        s = SqrtGen(len(self.sqrts), num, den, sym, trig, tower=radicand is not None)
        self.sqrts.append(s)
        if radicand is not None:
            s.radicand = radicand
            self.tower_mask |= 1 << s.bit
        else:
            s.radicand = self.make({0: num}, den)
        return s

    def _mono_elem(self, m1: int, m2: int) -> Elem:
        """``s^m1 * s^m2`` as an element (nested roots replaced by their radicands)."""
        key = (m1, m2) if m1 <= m2 else (m2, m1)
        r = self._mono.get(key)
        if r is None:
            o = m1 & m2
            if not o:
                r = Elem(self, {m1 ^ m2: self.pone}, self.pone)
            else:
                i = o.bit_length() - 1  # the highest common root
                bit = 1 << i
                r = self.sqrts[i].radicand * self._mono_elem(m1 ^ bit, m2 ^ bit)
            self._mono[key] = r
        return r

    def mul_tower(self, a: Elem, b: Elem) -> Elem:
        """Product when nested roots occur in both factors (each square reduced to its radicand)."""
        groups: dict = {}  # denominator (as text) -> (denominator, {mask: polynomial})
        for m1, p1 in a.c.items():
            for m2, p2 in b.c.items():
                f = p1 * p2
                mono = self._mono_elem(m1, m2)
                key = str(mono.d)
                grp = groups.get(key)
                if grp is None:
                    grp = groups[key] = (mono.d, {})
                acc = grp[1]
                for m, q in mono.c.items():
                    t = f * q if not q.is_one() else f
                    old = acc.get(m)
                    acc[m] = t if old is None else old + t
        den = a.d * b.d
        out = self.zero
        for d, acc in groups.values():
            out = out + self.make(acc, d * den)
        return out

    def _sqrt_of(self, R: Elem) -> Elem:
        """``sqrt(R)`` as an element (principal root), creating the generator if new."""
        if not R.c:
            return self.zero
        if not R.is_plain():
            return self._nested_sqrt(R)
        num, den = R.c[0], R.d
        outer = None
        if self._alg_of and any(num.degrees()[j] > 0 for j in self._alg_of):
            # sqrt(r**2 Q) = r sqrt(Q): an algebraic generator is a principal root, so r >= 0
            tc = num.term_content().degrees()
            gens = self.ctx.gens()
            for al in self._alg_of.values():
                k2 = tc[al.index] // 2
                if k2:
                    num = num / gens[al.index] ** (2 * k2)
                    t = Elem(self, {0: gens[al.index] ** k2}, self.pone)
                    outer = t if outer is None else outer * t
            if outer is not None:
                rest = self._sqrt_of(self.make_reduced({0: num}, den))
                return outer * rest
        # canonical radicand: sqrt((cn pn)/(cd pd)) = (s/cd) sqrt(k pn / pd) with cn cd = s^2 k, so that
        # sqrt(Lambda/3) and sqrt(3 Lambda) share one generator
        cn, cd = _content(num), _content(den)
        s, k = _square_split(int(cn) * int(cd))
        num = (num / self.ctx.constant(cn)) * k
        den = den / self.ctx.constant(cd)
        factor = flint.fmpq(s, int(cd))
        if self._alg_inner:
            inner = self._alg_inner.get((str(num), str(den)))
            if inner is not None:  # the inner root of a nested one: (r**2 - A)/c
                return self.const(factor) * inner
        if num.is_constant() and den.is_constant():
            # a rational constant: exact when it is a square
            v = flint.fmpq(int(num.leading_coefficient()), int(den.leading_coefficient()))
            if v > 0 and v.p.isqrt() ** 2 == v.p and v.q.isqrt() ** 2 == v.q:
                return self.const(factor * flint.fmpq(v.p.isqrt(), v.q.isqrt()))
        key = (str(num), str(den))
        s = self._sqrt_by_key.get(key)
        if s is None:
            Rsym = self.poly_to_sympy(num) / self.poly_to_sympy(den)
            s = self._new_sqrt(num, den, sp.sqrt(Rsym))
            self._sqrt_by_key[key] = s
        return self.const(factor) * Elem(self, {1 << s.bit: self.pone}, self.pone)

    def _nested_sqrt(self, R: Elem) -> Elem:
        """``sqrt(R)`` for a radicand that uses square roots: a new root on top of them (a tower).

        The relation ``s**2 = R`` is applied; ``R`` being a square in the lower field would be a
        hidden relation, so such a field is never :attr:`complete`."""
        key = ("nested", tuple(sorted((m, str(p)) for m, p in R.c.items())), str(R.d))
        s = self._sqrt_by_key.get(key)
        if s is None:
            s = self._new_sqrt(None, R.d, sp.sqrt(self.to_sympy(R, factor=False)), radicand=R)
            self._sqrt_by_key[key] = s
        return Elem(self, {1 << s.bit: self.pone}, self.pone)


def _content(p):
    c = flint.fmpz(0)
    for x in p.coeffs():
        c = flint.fmpz(math.gcd(int(c), int(x)))
        if c == 1:
            break
    return abs(c)


def _square_split(c):
    """``c = s**2 * r`` with ``s`` the product of small square factors (trial division)."""
    c = int(c)
    s = 1
    if c == 0:
        return 1, 0
    for p in (2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37, 41, 43, 47):
        while c % (p * p) == 0:
            c //= p * p
            s *= p
    r = math.isqrt(c)
    if r * r == c:
        s *= r
        c = 1
    return s, c
