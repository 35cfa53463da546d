"""Field, part 1: from sympy to the field (see :mod:`gravicat.engine.ratfun`).

Scanning the chart's expressions for the generators they need, and converting an expression
(whose atoms were scanned) to an :class:`~gravicat.engine.elements.Elem`.
"""

from __future__ import annotations

import math
from itertools import combinations_with_replacement

import sympy as sp

from gravicat.engine.elements import Elem
from gravicat.engine.generators import (
    BaseGen,
    Unsupported,
    _has_root,
    nested_parts,
)
from gravicat.engine.rewrite import (
    _SIGNED,
    _principal,
    _split_linear,
    merge_powers,
    prepare,
    settle_signs,
    simplify_lambertw,
)


class FieldScan:
    """Scanning and conversion; a mixin of :class:`~gravicat.engine.ratfun.Field`."""

    # -- scanning (phase 1: which generators exist) ------------------------
    def _gen(self, key, kind, sym, data=None, label=""):
        g = self._gens.get(key)
        if g is None:
            g = BaseGen(kind, sym, key, data, label)
            self._gens[key] = g
        return g

    def _scan_func(self, f, order):
        if not isinstance(f, sp.core.function.AppliedUndef):
            raise Unsupported(f"not a function application: {f}")
        for a in f.args:
            if a not in self.coord_index:
                raise Unsupported(f"function {f} has an argument that is not a coordinate")
        if len(set(f.args)) != len(f.args):
            raise Unsupported(f"repeated argument in {f}")
        old = self._funcs.get(f.func)
        if old is not None and old[0] != f.args:
            raise Unsupported(f"function {f.func} used with different arguments")
        self._funcs[f.func] = (f.args, max(order, old[1] if old else 0))

    def _scan(self, e):
        if e.is_Rational:
            return
        if e.is_Symbol:
            if e in self.coord_index:
                self._gen(("coord", e), "coord", e)
            else:
                self._gen(("param", e), "param", e)
            return
        if e is sp.pi or e is sp.E:
            self._gen(("const", e), "const", e)
            return
        if e.is_Number:
            raise Unsupported(f"inexact number {e}")
        if isinstance(e, sp.core.function.AppliedUndef):
            self._scan_func(e, 0)
            return
        if isinstance(e, sp.Derivative):
            f = e.expr
            if not isinstance(f, sp.core.function.AppliedUndef):
                raise Unsupported(f"derivative of a non-function: {e}")
            self._scan_func(f, sum(n for _, n in e.variable_count))
            return
        if isinstance(e, (sp.Add, sp.Mul)):
            for a in e.args:
                self._scan(a)
            return
        if isinstance(e, sp.Pow):
            b, x = e.args
            if x.is_Integer:
                self._scan(b)
                return
            if x.is_Rational and x.q == 2:
                self._scan(b)
                if not self._scan_alg(b) and b not in self._sqrt_keys:
                    self._sqrt_keys.append(b)
                return
            if x.is_Rational:
                self._scan(b)
                split = self._root_split_of(b, x.q)
                if split is not None:
                    for key, _e in split:
                        base = key[1]
                        self._scan(base)
                        self._gen(key, "root", base ** sp.Rational(1, x.q), {"base": base, "q": x.q})
                    return
                # b**(p/q) of a base with roots: a generator rho = b**(1/q) with d rho = rho db / (q b);
                # rho**q = b is not applied
                self._gen(
                    ("pow", b, sp.Rational(1, x.q)),
                    "pow",
                    b ** sp.Rational(1, x.q),
                    {"base": b, "exp": sp.Rational(1, x.q)},
                )
                return
            if b is sp.E:
                self._scan(sp.exp(x))
                return
            self._scan(b)
            c0, terms = _split_linear(x)
            if c0.q not in (1, 2):
                raise Unsupported(f"power {e}")
            if c0.q == 2 and b not in self._sqrt_keys:
                self._sqrt_keys.append(b)
            for c, m in terms:
                if m.free_symbols & set(self.coords) or m.has(sp.core.function.AppliedUndef):
                    raise Unsupported(f"exponent depending on a coordinate: {e}")
                self._scan(m)
                self._gen(("pow", b, m / c.q), "pow", b ** (m / c.q), {"base": b, "exp": m / c.q})
            return
        if isinstance(e, sp.exp):
            c0, terms = _split_linear(e.args[0])
            if c0 != 0:
                self._gen(("const", sp.E), "const", sp.E)
            for c, m in terms:
                self._scan(m)
                # one generator exp(m/q) per atom m, q the lcm of the denominators met (exp(m/2) = exp(m/4)**2)
                self._expq[m] = math.lcm(self._expq.get(m, 1), c.q)
            return
        if isinstance(e, sp.log):
            w = e.args[0]
            self._scan(w)
            self._gen(("log", w), "log", e, {"arg": w})
            return
        if isinstance(e, sp.LambertW):
            if not _principal(e):
                raise Unsupported(f"a non-principal branch of LambertW: {e}")
            z = e.args[0]
            self._scan(z)
            self._gen(("lambertw", z), "lambertw", e, {"arg": z})
            return
        if isinstance(e, (sp.sin, sp.cos)):
            w = e.args[0]
            c, m = sp.expand(w).as_coeff_Mul()
            if not c.is_Rational or c == 0:
                raise Unsupported(f"trigonometric argument {w}")
            if isinstance(m, sp.Add):
                # a sum is its own angle: no addition theorem is applied
                c, m = sp.Integer(1), sp.expand(w)
            if m not in self.coord_index:
                self._scan(m)
            self._trig[m] = math.lcm(self._trig.get(m, 1), sp.Rational(c).q)
            self._pending_trig.append(m)
            return
        raise Unsupported(f"{type(e).__name__} is not on the fast path: {e}")

    def _root_split_of(self, b, q):
        """``b**(1/q)`` (``q >= 3``, ``b`` a rational function free of roots) as a product of root
        generators: ``[(key, e)]`` with ``b**(1/q) = prod rho_key**e``, from
        ``b = (c_n n) / (c_d d)``, the contents split into primes and ``n``, ``d`` primitive with a
        positive leading coefficient. None when ``b`` is not of that kind (then a generator with no
        relation, as before)."""
        key = (b, q)
        if key in self._root_split:
            return self._root_split[key]
        out = None
        numeric = b.is_Rational and b > 0
        if self.real_roots and 3 <= q <= 5 and (b.free_symbols or numeric) and not _has_root(b) and not b.atoms(
            sp.Function
        ):
            out = []
            num, den = sp.fraction(sp.together(b))
            for part, sign in ((num, 1), (den, -1)):
                c, rest = sp.factor_terms(sp.expand(part)).as_coeff_Mul()
                rest = sp.expand(rest)
                if c < 0:
                    c, rest = -c, sp.expand(-rest)
                if rest.is_number:
                    if rest != 1:
                        out = None
                        break
                else:
                    out.append((("root", rest, q), sign))
                c = sp.Rational(c)
                for n, sg in ((int(c.p), sign), (int(c.q), -sign)):
                    if n > 10**12:
                        out = None
                        break
                    for prime, e in sp.factorint(n).items():
                        out.append((("root", sp.Integer(prime), q), sg * e))
                if out is None:
                    break
        self._root_split[key] = out
        return out

    def _scan_alg(self, b) -> bool:
        """Register ``sqrt(b)`` as an algebraic generator when ``b = A + c sqrt(B)`` with ``A``, ``c``,
        ``B`` free of roots (see :func:`nested_parts`), unless an earlier one has the same inner root
        (two defining polynomials sharing ``sqrt(B)`` would hide a relation between them; the later
        root then becomes an ordinary square root over the field of the first)."""
        key = ("alg", b)
        if key in self._gens:
            return True
        if not self.algebraic_roots:
            return False
        parts = nested_parts(b)
        if parts is None:
            return False
        A, c, B = parts
        Bx = sp.expand(B)
        if any(g.kind == "alg" and g.data["Bx"] == Bx for g in self._gens.values()):
            return False
        self._gen(key, "alg", sp.sqrt(b), {"A": A, "c": c, "B": B, "Bx": Bx, "radicand": b})
        return True

    def _finish_scan(self, extra_order):
        for m, q in self._expq.items():
            self._gen(("exp", m), "exp", sp.exp(m / q), {"arg": m / q, "q": q})
        for m, q in self._trig.items():
            angle = m / q
            self._gen(("cos", m), "cos", sp.cos(angle), {"atom": m, "q": q, "angle": angle})
        for func, (args, order) in self._funcs.items():
            top = order + extra_order
            for k in range(top + 1):
                for combo in combinations_with_replacement(range(len(args)), k):
                    alpha = tuple(combo.count(j) for j in range(len(args)))
                    f = func(*args)
                    sym = f
                    if k:
                        sym = sp.Derivative(f, *[(args[j], n) for j, n in enumerate(alpha) if n])
                    label = func.__name__ + ("_" + "".join(str(args[j]) * n for j, n in enumerate(alpha)) if k else "")
                    data = {"func": func, "args": args, "alpha": alpha, "top": top}
                    kind = "func"
                    if func in self.alias_expr:
                        kind = "alias"
                        data["expr"] = self.alias_expr[func]
                        label = "[" + label + "]"
                    self._gen(("func", func, alpha), kind, sym, data, label)

    def element(self, expr) -> Elem:
        """Convert a sympy expression (whose atoms were scanned) to an element."""
        expr = sp.sympify(expr)
        if self.relations is not None and expr.has(*_SIGNED):
            expr = settle_signs(expr, self.coords, self.relations)
        if self.relations is not None and expr.has(sp.LambertW):
            expr = simplify_lambertw(expr, self.coords, self.params, self.relations)
        if self.relations is not None:
            expr = merge_powers(expr, self.coords, self.relations)
        if self.alias_sub:
            expr = expr.xreplace(self.alias_sub)
        expr = prepare(expr)
        return self._el(expr)

    def _el(self, e) -> Elem:
        r = self._memo.get(e)
        if r is not None:
            return r
        r = self._el_new(e)
        self._memo[e] = r
        return r

    def _g(self, key) -> Elem:
        g = self._gens.get(key)
        if g is None:
            raise Unsupported(f"expression outside this field: {key}")
        return self.gen_elem(g)

    def _el_new(self, e) -> Elem:
        if e.is_Rational:
            return self.const(e)
        if e.is_Symbol:
            if self._elim and e in self._elim:
                return self._elim[e]
            return self._g(("coord", e) if e in self.coord_index else ("param", e))
        if e is sp.pi or e is sp.E:
            return self._g(("const", e))
        if isinstance(e, sp.core.function.AppliedUndef):
            return self._g(("func", e.func, (0,) * len(e.args)))
        if isinstance(e, sp.Derivative):
            f = e.expr
            alpha = [0] * len(f.args)
            for v, n in e.variable_count:
                if v not in f.args:
                    return self.zero
                alpha[f.args.index(v)] += n
            return self._g(("func", f.func, tuple(alpha)))
        if isinstance(e, sp.Add):
            out = self.zero
            for a in e.args:
                out = out + self._el(a)
            return out
        if isinstance(e, sp.Mul):
            out = self.one
            for a in e.args:
                out = out * self._el(a)
            return out
        if isinstance(e, sp.Pow):
            b, x = e.args
            if x.is_Integer:
                return self._el(b) ** int(x)
            if x.is_Rational and x.q == 2:
                g = self._gens.get(("alg", b))
                if g is not None:
                    return self.gen_elem(g) ** int(x.p)
                if self._elim and b in self._alg_inner_sym:
                    return self._alg_inner_sym[b] ** int(x.p)
                return self._sqrt_of(self._el(b)) ** int(x.p)
            if x.is_Rational:
                split = self._root_split.get((b, x.q))
                if split is not None:
                    out = self.one
                    for key, e in split:
                        out = out * self._g(key) ** int(e * x.p)
                    return out
                return self._g(("pow", b, sp.Rational(1, x.q))) ** int(x.p)
            if b is sp.E:
                return self._el(sp.exp(x))
            c0, terms = _split_linear(x)
            out = self.one
            if c0 != 0:
                bb = self._el(b)
                out = bb ** int(c0.p // 1) if c0.q == 1 else self._sqrt_of(bb) ** int(c0.p)
            for c, m in terms:
                out = out * self._g(("pow", b, m / c.q)) ** int(c * c.q)
            return out
        if isinstance(e, sp.exp):
            c0, terms = _split_linear(e.args[0])
            out = self.one
            if c0 != 0:
                if not c0.is_Integer:
                    raise Unsupported(f"exp of a non-integer constant: {e}")
                out = self._g(("const", sp.E)) ** int(c0)
            for c, m in terms:
                g = self._gens.get(("exp", m))
                if g is None:
                    raise Unsupported(f"expression outside this field: {e}")
                out = out * self.gen_elem(g) ** int(c * g.data["q"])
            return out
        if isinstance(e, sp.log):
            return self._g(("log", e.args[0]))
        if isinstance(e, sp.LambertW) and _principal(e):
            return self._g(("lambertw", e.args[0]))
        if isinstance(e, (sp.sin, sp.cos)):
            w = e.args[0]
            c, m = sp.expand(w).as_coeff_Mul()
            if isinstance(m, sp.Add):
                c, m = sp.Integer(1), sp.expand(w)
            g = self._gens[("cos", m)]
            k = int(sp.Rational(c) * g.data["q"])  # multiple of the base angle
            C = self.gen_elem(g)
            S = Elem(self, {1 << g.data["sin"].bit: self.pone}, self.pone)
            sign = 1
            if k < 0:
                k = -k
                sign = -1
            if isinstance(e, sp.cos):
                return _cheb_T(self, C, k)
            return S * _cheb_U(self, C, k - 1) * sign if k else self.zero
        raise Unsupported(f"{type(e).__name__}: {e}")



def _cheb_T(F, C, k):
    if k == 0:
        return F.one
    t0, t1 = F.one, C
    for _ in range(k - 1):
        t0, t1 = t1, C * t1 * 2 - t0
    return t1


def _cheb_U(F, C, k):
    if k < 0:
        return F.zero
    if k == 0:
        return F.one
    u0, u1 = F.one, C * 2
    for _ in range(k - 1):
        u0, u1 = u1, C * u1 * 2 - u0
    return u1
