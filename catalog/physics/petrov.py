"""Algebraic (Petrov) type of the Weyl tensor, decided exactly, and the Weyl scalars in a stated tetrad.

Method (Stephani, Kramer, MacCallum, Hoenselaers & Herlt, Exact Solutions of Einstein's Field
Equations, 2nd ed. 2003, ch. 4): the Weyl tensor acts on the six-dimensional space of bivectors as
``W[(ab),(cd)] = C^ab_cd`` (index pairs a < b, c < d). It commutes with the Hodge dual ``*``
(``** = -1`` in Lorentzian signature), so ``W`` is the real form of a complex 3x3 traceless matrix
``Q`` (the Weyl matrix on self-dual bivectors), and the Petrov type is the Segre type of ``Q``:

* the complex traces ``p_k = tr Q^k`` come from real traces only: ``p_k = (tr W^k - i tr(* W^k))/2``,
  where ``*`` = ``sqrt(-det g)`` times a matrix rational in g (so ``p_k = a_k + i s b_k``,
  ``s = sqrt(-det g)``, with ``a_k``, ``b_k`` rational functions of the chart: no square root is
  needed to decide anything);
* the invariants are ``I = p_2 / 2`` and ``J = p_3 / 6`` (normalised so that a type D field with
  only ``Psi2`` has ``I = 3 Psi2^2``, ``J = -Psi2^3``; checked against the scalars of the automatic tetrad);
* algebraically special <=> a repeated eigenvalue of ``Q`` <=> ``p_2^3 = 6 p_3^2`` (the criterion
  ``I^3 = 27 J^2``), two rational identities (its real part and its imaginary part over ``s``);
* type O: ``W = 0``; type N: ``W^2 = 0``, ``W != 0``; type III: ``p_2 = p_3 = 0`` (``Q`` nilpotent),
  ``W^2 != 0``; type D: special, ``p_2 != 0`` and the minimal polynomial of ``Q`` is
  ``(x - lambda)(x + 2 lambda)`` with ``lambda = -p_3/p_2``, tested on the real form as
  ``(W^2 - 2 Re(lambda) W + |lambda|^2)(W^2 + 4 Re(lambda) W + 4 |lambda|^2) = 0``; type II: special,
  ``p_2 != 0``, that product non-zero; type I: not special.

The type is first read off at exact sample points of the domain (the engine's generic points);
then the identities that define it are proved on the whole domain with the engine's exact zero
test (:meth:`gravicat.engine.geometry.Geometry.verify`). If the proof does not finish within the
budget, the type is reported as holding at the N sample points (method ``sampled``). Sub-regions
where the type specialises (a set where a non-vanishing condition fails) are not searched.

Defined in four dimensions only; other dimensions get "not defined".

Status: a library slice (no command, no verifier plugin yet). Room: physics (uses only the engine's
curvature through the objects it is handed; never re-derives it).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

__all__ = ["PetrovResult", "TYPES", "weyl_bivector", "petrov_type", "weyl_scalars_at", "tetrad_at",
           "type_identities", "point_type"]

TYPES = ("I", "II", "D", "III", "N", "O")

_PAIRS = [(0, 1), (0, 2), (0, 3), (1, 2), (1, 3), (2, 3)]


def _levi(p):
    """Sign of the permutation ``p`` of (0, 1, 2, 3), 0 if an index repeats."""
    p = list(p)
    if len(set(p)) < 4:
        return 0
    s = 1
    for i in range(4):
        for j in range(i + 1, 4):
            if p[i] > p[j]:
                s = -s
    return s


@dataclass
class PetrovResult:
    type: str | None  # I, II, D, III, N, O; None when not decided or not defined
    method: str  # symbolic | sampled | none
    where: str
    points: int = 0
    weyl_scalars: dict[str, str] = field(default_factory=dict)
    invariants: dict[str, str] = field(default_factory=dict)
    tetrad: dict[str, Any] = field(default_factory=dict)
    detail: str = ""
    principal_null_direction: str | None = None

    def to_json(self) -> dict:
        out = {
            "type": self.type,
            "method": self.method,
            "where": self.where,
            "weyl_scalars": self.weyl_scalars,
            "invariants": self.invariants,
            "tetrad": self.tetrad,
        }
        if self.detail:
            out["detail"] = self.detail
        if self.principal_null_direction:
            out["principal_null_direction"] = self.principal_null_direction
        return out


# ---------------------------------------------------------------------------
# the Weyl map on bivectors, over any backend of the engine's curvature


class _Bivector:
    """W (6x6), the rational part R of the Hodge dual (``* = s R``, ``s = sqrt(-det g)``), on backend X."""

    def __init__(self, X):
        self.X = X
        self.zero = X.zero
        self.W = weyl_bivector(X)
        pairs, G2 = X._bivector_inverse
        iz = X._iz
        eps = [[_levi((*A, *B)) for B in _PAIRS] for A in _PAIRS]
        self.R = [
            [X._sum([G2[A, E] * eps[k][j] for k, E in enumerate(_PAIRS) if (A, E) in G2 and eps[k][j]])
             for j in range(6)]
            for A in _PAIRS
        ]
        self.s2 = -X.det
        self._iz = iz

    def mul(self, P, Q):
        X, iz = self.X, self._iz
        return [
            [X._sum([P[i][k] * Q[k][j] for k in range(6) if not iz(P[i][k]) and not iz(Q[k][j])]) for j in range(6)]
            for i in range(6)
        ]

    def trace(self, P):
        return self.X._sum([P[i][i] for i in range(6) if not self._iz(P[i][i])])

    def trace_prod(self, P, Q):
        iz = self._iz
        return self.X._sum([P[i][k] * Q[k][i] for i in range(6) for k in range(6)
                            if not iz(P[i][k]) and not iz(Q[k][i])])

    def invariants(self):
        """(a2, b2, a3, b3): p_k = a_k + i s b_k, s = sqrt(-det g)."""
        if "_inv" not in self.__dict__:
            W2 = self.W2
            a2 = self.trace(W2) / 2
            b2 = -self.trace_prod(self.R, W2) / 2
            a3 = self.trace_prod(W2, self.W) / 2
            W3 = self.mul(W2, self.W)
            b3 = -self.trace_prod(self.R, W3) / 2
            self.__dict__["_inv"] = (a2, b2, a3, b3)
        return self.__dict__["_inv"]

    @property
    def W2(self):
        if "_W2" not in self.__dict__:
            self.__dict__["_W2"] = self.mul(self.W, self.W)
        return self.__dict__["_W2"]

    def special(self):
        """Real part and imaginary part (over s) of p_2^3 - 6 p_3^2: both vanish exactly when the type is special."""
        a2, b2, a3, b3 = self.invariants()
        s2 = self.s2
        re = a2 * a2 * a2 - a2 * b2 * b2 * s2 * 3 - a3 * a3 * 6 + b3 * b3 * s2 * 6
        im = a2 * a2 * b2 * 3 - b2 * b2 * b2 * s2 - a3 * b3 * 12
        return re, im

    def d_product(self):
        """(W^2 - 2 Re(l) W + |l|^2)(W^2 + 4 Re(l) W + 4 |l|^2) with l = -p3/p2, scaled by (|p2|^2)^2 to stay
        polynomial: zero exactly when Q's minimal polynomial is (x - l)(x + 2 l) (given p2 != 0)."""
        a2, b2, a3, b3 = self.invariants()
        s2 = self.s2
        D = a2 * a2 + b2 * b2 * s2  # |p2|^2
        reD = -(a3 * a2 + b3 * b2 * s2)  # Re(l) |p2|^2
        absD = a3 * a3 + b3 * b3 * s2  # |l|^2 |p2|^2
        W, W2, X, iz = self.W, self.W2, self.X, self._iz

        def combo(c1, c0):
            return [
                [X._sum([t for t in (W2[i][j] * D if not iz(W2[i][j]) else None,
                                     W[i][j] * c1 if not iz(W[i][j]) else None,
                                     c0 if i == j else None) if t is not None])
                 for j in range(6)]
                for i in range(6)
            ]

        A = combo(reD * -2, absD)
        B = combo(reD * 4, absD * 4)
        return self.mul(A, B)

    def d_identity(self):
        """``p2^2 Q^2 - p2 p3 Q - 2 p3^2`` on the real form (6x6): zero exactly when Q's minimal polynomial is
        ``(x - l)(x + 2 l)``, ``l = -p3/p2`` (given p2 != 0). A complex scalar ``x + i s y`` acts on bivectors
        as ``x + y *`` = ``x + s^2 y R`` (``* = s R``, the convention of :meth:`invariants`), so every entry is
        rational; its degree is about half that of :meth:`d_product`'s."""
        a2, b2, a3, b3 = self.invariants()
        s2, X, iz = self.s2, self.X, self._iz
        x1, y1 = a2 * a2 - s2 * b2 * b2, a2 * b2 * 2
        x2, y2 = a2 * a3 - s2 * b2 * b3, a2 * b3 + a3 * b2
        x3, y3 = a3 * a3 - s2 * b3 * b3, a3 * b3 * 2
        W, W2, R = self.W, self.W2, self.R
        RW2, RW = self.mul(R, W2), self.mul(R, W)
        c1, c2, c3 = s2 * y1, s2 * y2, s2 * y3 * 2
        out = []
        for i in range(6):
            row = []
            for j in range(6):
                terms = []
                if not iz(W2[i][j]):
                    terms.append(x1 * W2[i][j])
                if not iz(RW2[i][j]):
                    terms.append(c1 * RW2[i][j])
                if not iz(W[i][j]):
                    terms.append(-(x2 * W[i][j]))
                if not iz(RW[i][j]):
                    terms.append(-(c2 * RW[i][j]))
                if i == j:
                    terms.append(-(x3 * 2))
                if not iz(R[i][j]):
                    terms.append(-(c3 * R[i][j]))
                row.append(X._sum(terms) if terms else X.zero)
            out.append(row)
        return out


def weyl_bivector(X):
    """The Weyl tensor as the bivector map ``W[(ab)][(cd)] = C^ab_cd`` (a < b, c < d; 4 dimensions), from the
    engine's mixed Riemann and Ricci tensors:
    ``C^ab_cd = R^ab_cd - (d^a_c R^b_d - d^a_d R^b_c - d^b_c R^a_d + d^b_d R^a_c)/2 + R (d^a_c d^b_d - d^a_d d^b_c)/6``.
    """
    Rm = X.riemann_mixed
    Ric = X.ricci_mixed
    R = X.ricci_scalar
    iz = X._iz
    out = []
    for a, b in _PAIRS:
        row = []
        for c, d in _PAIRS:
            terms = []
            v = Rm.get((a, b, c, d))
            if v is not None:
                terms.append(v)
            rt = []
            if a == c:
                rt.append(Ric[b][d])
            if a == d:
                rt.append(-Ric[b][c])
            if b == c:
                rt.append(-Ric[a][d])
            if b == d:
                rt.append(Ric[a][c])
            terms += [-t / 2 for t in rt if not iz(t)]
            if not iz(R):
                k = (1 if (a == c and b == d) else 0) - (1 if (a == d and b == c) else 0)
                if k:
                    terms.append(R * k / 6)
            row.append(X._sum(terms) if terms else X.zero)
        out.append(row)
    return out


def _all(mat):
    return [v for row in mat for v in row]


def type_identities(X, ptype: str) -> dict:
    """The identities (name -> value that must vanish) defining ``ptype`` on the backend ``X``."""
    B = _Bivector(X)
    out = {}
    if ptype == "O":
        for i, A in enumerate(_PAIRS):
            for j, C in enumerate(_PAIRS):
                out[f"C^{A}_{C}"] = B.W[i][j]
        return out
    if ptype == "N":
        for i in range(6):
            for j in range(6):
                out[f"W2[{i},{j}]"] = B.W2[i][j]
        return out
    if ptype == "I":
        return {}
    re, im = B.special()
    out["Re(I^3-27J^2)"] = re
    out["Im(I^3-27J^2)/s"] = im
    if ptype == "III":
        a2, b2, a3, b3 = B.invariants()
        out.update({"Re I": a2, "Im I/s": b2, "Re J": a3, "Im J/s": b3})
    if ptype == "D":
        P = B.d_identity()
        for i in range(6):
            for j in range(6):
                out[f"mD[{i},{j}]"] = P[i][j]
    return out


def point_type(pd) -> tuple[str, bool]:
    """The Petrov type at one sample point and whether a zero test there was only "0 within the working
    precision" (an interval or floating point value, taken as 0: the symbolic proof settles it)."""
    loose = [False]

    def z(v):
        t = pd.zero_test(v)
        if t is None:
            loose[0] = True
            return True
        return t

    with pd.precision():
        B = _Bivector(pd)
        if all(z(v) for v in _all(B.W)):
            return "O", loose[0]
        re, im = B.special()
        if not (z(re) and z(im)):
            return "I", loose[0]
        a2, b2, a3, b3 = B.invariants()
        if z(a2) and z(b2):
            return ("N" if all(z(v) for v in _all(B.W2)) else "III"), loose[0]
        return ("D" if all(z(v) for v in _all(B.d_identity())) else "II"), loose[0]


def petrov_type(geometry, *, budget: float | None = None) -> PetrovResult:
    """Decide the Petrov type of a prepared 4-dimensional chart (see the module docstring)."""
    if geometry.n != 4:
        return PetrovResult(None, "none", f"not defined: the Petrov classification is for 4 dimensions "
                                          f"(this chart has {geometry.n})")
    reason = geometry.degeneracy()
    if reason is not None:
        return PetrovResult(None, "none", f"not defined: the metric is degenerate ({reason})")
    from gravicat.engine.geometry import BudgetExceeded

    budget = geometry.budget if budget is None else budget
    found = {}
    loose = 0
    try:  # the sampled stage shares the budget (the symbolic values the points need count against it)
        with geometry.deadline(budget):
            points = geometry.sample_points()
            for pd in points:
                try:
                    t, inexact = point_type(pd)
                except (ZeroDivisionError, ValueError):
                    continue
                loose += inexact
                found.setdefault(t, []).append(pd)
    except BudgetExceeded:
        return PetrovResult(None, "none", f"not decided: the sample points were not ready within {budget:g} s")
    if not found:
        return PetrovResult(None, "none", "not decided: no valid sample point")
    if len(found) > 1:
        shown = ", ".join(f"{t} at {len(p)} point(s)" for t, p in found.items())
        return PetrovResult(None, "sampled", f"not constant on the domain: {shown}", points=len(points))
    (ptype, pts), = found.items()
    how = "exact" if not loose else f"({loose} in interval arithmetic)"
    result = PetrovResult(ptype, "sampled", f"at {len(pts)} sample points {how}", points=len(pts))
    ids = type_identities_fn(ptype)
    if ids is None:
        result.method = "symbolic"
        if loose:  # I^3 - 27 J^2 certainly non-zero somewhere only if one point decided it exactly
            result.method = "sampled"
        result.where = (f"I^3 != 27 J^2 at {len(pts)} sample points {how}: type I on the domain except on a set "
                        "of measure zero where it may specialise")
        return result
    outcome = geometry.verify(ids, budget=budget, what=f"the identities of type {ptype}")
    if outcome.status == "pass":
        result.method = "symbolic"
        result.where = "proved on the domain (defining identities reduce to 0)"
        if ptype != "O":
            result.where += "; it may specialise where the Weyl tensor vanishes"
    elif outcome.status == "fail":
        result.type = None
        result.where = f"not decided: {outcome.detail}"
    else:
        result.where = f"at {len(pts)} sample points {how} ({outcome.detail})"
    return result


def type_identities_fn(ptype):
    if ptype == "I":
        return None

    def fn(X):
        return type_identities(X, ptype)

    return fn


# ---------------------------------------------------------------------------
# the tetrad and the Weyl scalars at a point (reporting)


def tetrad_at(pd):
    """An automatic null tetrad at a sample point (mpmath values) and its description.

    e0: the unit normal of the first coordinate hypersurface x^i = const that is spacelike
    (g^ii < 0), e0^a = -g^ai / sqrt(-g^ii); e1..e3: Gram-Schmidt of the remaining coordinate vectors
    in chart order; then l, n = (e0 +- e1)/sqrt 2, m = (e2 + i e3)/sqrt 2 (l.n = -1, m.mbar = 1)."""
    import mpmath as mp

    n = pd.n
    g = [[mp.mpf(_num(pd.g[a][b])) for b in range(n)] for a in range(n)]
    gi = [[mp.mpf(_num(pd.ginv[a][b])) for b in range(n)] for a in range(n)]

    def dot(u, v):
        return mp.fsum(g[a][b] * u[a] * v[b] for a in range(n) for b in range(n))

    i0 = next((i for i in range(n) if gi[i][i] < 0), None)
    if i0 is None:
        # no coordinate hypersurface is spacelike (a null coordinate, as in Brinkmann's form): the
        # covector along the eigenvector of g^ab (as a matrix) with a negative eigenvalue is timelike
        E, V = mp.eigsy(mp.matrix(gi))
        k = min(range(n), key=lambda i: E[i])
        if not E[k] < 0:
            return None, "g^ab has no negative eigenvalue at the point"
        w = [V[a, k] for a in range(n)]
        up = [mp.fsum(gi[a][b] * w[b] for b in range(n)) for a in range(n)]
        e0 = [-x / mp.sqrt(-dot(up, up)) for x in up]
        first = None
    else:
        e0 = [-gi[a][i0] / mp.sqrt(-gi[i0][i0]) for a in range(n)]
        first = i0
    frame = [e0]
    used = []
    for j in range(n):
        if j == first or len(frame) == n:
            continue
        v = [mp.mpf(1 if a == j else 0) for a in range(n)]
        for k, e in enumerate(frame):
            sign = -1 if k == 0 else 1
            c = dot(v, e) * sign
            v = [v[a] - c * e[a] for a in range(n)]
        nv = dot(v, v)
        if first is None and abs(nv) <= mp.mpf(10) ** -20 * max(1, abs(g[j][j])):
            continue  # d/dx^j lies in the span of the vectors before it
        if nv <= 0:
            return None, "Gram-Schmidt met a non-spacelike vector"
        frame.append([x / mp.sqrt(nv) for x in v])
        used.append(j)
    if len(frame) != n:
        return None, "the coordinate vectors do not complete the frame"
    r2 = mp.sqrt(2)
    e0, e1, e2, e3 = frame
    tet = {
        "l": [(e0[a] + e1[a]) / r2 for a in range(n)],
        "n": [(e0[a] - e1[a]) / r2 for a in range(n)],
        "m": [mp.mpc(e2[a], e3[a]) / r2 for a in range(n)],
    }
    names = [str(c) for c in pd.coords]
    others = [names[j] for j in used]
    normal = (f"unit normal of {names[first]} = const" if first is not None else
              "unit timelike vector g^ab w_b, w the eigenvector of the matrix g^ab with a negative eigenvalue")
    text = (f"e0 = {normal}; e1, e2, e3 = Gram-Schmidt of "
            f"{', '.join('d/d' + x for x in others)}; l, n = (e0 +- e1)/sqrt(2), m = (e2 + i e3)/sqrt(2)")
    return tet, text


def _num(v):
    import mpmath as mp

    try:
        import flint

        if isinstance(v, flint.fmpq):
            return mp.mpf(int(v.p)) / int(v.q)
        if isinstance(v, flint.arb):
            return mp.mpf(v.mid().str(40, radius=False))
    except ImportError:  # pragma: no cover
        pass
    return mp.mpf(v) if not isinstance(v, mp.mpc) else v


def weyl_lower_at(pd):
    """C_abcd at a sample point as mpmath numbers (dict over all index quadruples)."""
    import mpmath as mp

    W = weyl_bivector(pd)
    n = pd.n
    g = [[_num(pd.g[a][b]) for b in range(n)] for a in range(n)]
    mixed = {}
    for i, (a, b) in enumerate(_PAIRS):
        for j, (c, d) in enumerate(_PAIRS):
            v = _num(W[i][j]) if not pd._iz(W[i][j]) else mp.mpf(0)
            for (p, q, s1) in ((a, b, 1), (b, a, -1)):
                for (r, t, s2) in ((c, d, 1), (d, c, -1)):
                    mixed[p, q, r, t] = v * s1 * s2
    low = {}
    for e in range(n):
        for f in range(n):
            for c in range(n):
                for d in range(n):
                    low[e, f, c, d] = mp.fsum(g[e][a] * g[f][b] * mixed.get((a, b, c, d), 0)
                                              for a in range(n) for b in range(n))
    return low


def weyl_scalars_at(pd, tetrad=None):
    """Psi0..Psi4 (mpmath complex) at a sample point in ``tetrad`` (default: :func:`tetrad_at`), with
    Psi0 = C(l,m,l,m), Psi1 = C(l,n,l,m), Psi2 = C(l,m,mbar,n), Psi3 = C(l,n,mbar,n), Psi4 = C(n,mbar,n,mbar)."""
    import mpmath as mp

    if tetrad is None:
        tetrad, _ = tetrad_at(pd)
        if tetrad is None:
            return None
    C = weyl_lower_at(pd)
    l, nn, m = tetrad["l"], tetrad["n"], tetrad["m"]
    mb = [mp.conj(x) for x in m]
    rng = range(pd.n)

    def c4(u, v, w, x):
        return mp.fsum(C[a, b, c, d] * u[a] * v[b] * w[c] * x[d]
                       for a in rng for b in rng for c in rng for d in rng if C[a, b, c, d])

    return {
        "Psi0": c4(l, m, l, m),
        "Psi1": c4(l, nn, l, m),
        "Psi2": c4(l, m, mb, nn),
        "Psi3": c4(l, nn, mb, nn),
        "Psi4": c4(nn, mb, nn, mb),
    }


def invariants_from_scalars(psi):
    """I = Psi0 Psi4 - 4 Psi1 Psi3 + 3 Psi2^2 and
    J = det[[Psi4, Psi3, Psi2], [Psi3, Psi2, Psi1], [Psi2, Psi1, Psi0]]."""
    p0, p1, p2, p3, p4 = (psi[f"Psi{k}"] for k in range(5))
    I = p0 * p4 - 4 * p1 * p3 + 3 * p2 * p2
    J = p4 * (p2 * p0 - p1 * p1) - p3 * (p3 * p0 - p1 * p2) + p2 * (p3 * p1 - p2 * p2)
    return I, J


def invariants_at(pd):
    """(I, J) at a sample point from the tetrad-free traces (mpmath complex)."""
    import mpmath as mp

    with pd.precision():
        B = _Bivector(pd)
        a2, b2, a3, b3 = (_num(v) if not pd._iz(v) else mp.mpf(0) for v in B.invariants())
        s = mp.sqrt(_num(B.s2))
    p2 = mp.mpc(a2, s * b2)
    p3 = mp.mpc(a3, s * b3)
    return p2 / 2, p3 / 6


def fmt_complex(z, digits: int = 12) -> str:
    import mpmath as mp

    z = mp.mpc(z)
    scale = max(abs(z), mp.mpf(1))
    re = z.real if abs(z.real) > scale * mp.mpf(10) ** -25 else mp.mpf(0)
    im = z.imag if abs(z.imag) > scale * mp.mpf(10) ** -25 else mp.mpf(0)
    if im == 0:
        return mp.nstr(re, digits)
    if re == 0:
        return f"{mp.nstr(im, digits)}*I"
    return f"{mp.nstr(re, digits)} {'+' if im > 0 else '-'} {mp.nstr(abs(im), digits)}*I"


# ---------------------------------------------------------------------------
# principal null directions at a point (types D and N)


def _adapted_frame(pd, l1, n1, m0):
    """A null tetrad (l, n, m) at ``pd`` with l = l1 and n along n1 (l.n = -1, m.mbar = 1), m from ``m0``
    projected on the spacelike 2-plane orthogonal to l and n (mpmath)."""
    import mpmath as mp

    n = pd.n
    g = [[_num(pd.g[a][b]) for b in range(n)] for a in range(n)]

    def dot(u, v):
        return mp.fsum(g[a][b] * u[a] * v[b] for a in range(n) for b in range(n))

    c = dot(l1, n1)
    nn = [x / -c for x in n1]

    def proj(v):
        return [v[a] + dot(v, nn) * l1[a] + dot(v, l1) * nn[a] for a in range(n)]

    # the spacelike 2-plane orthogonal to l and n: Gram-Schmidt of the projections of Re m, Im m and
    # of the coordinate vectors, keeping the two largest (a projection may be nearly 0)
    cands = [proj([mp.re(z) for z in m0]), proj([mp.im(z) for z in m0])]
    cands += [proj([mp.mpf(1 if a == j else 0) for a in range(n)]) for j in range(n)]
    basis = []
    for _ in range(2):
        best, size = None, mp.mpf(0)
        for v in cands:
            for e in basis:
                k = dot(v, e)
                v = [v[a] - k * e[a] for a in range(n)]
            q = dot(v, v)
            if q > size:
                best, size = v, q
        if best is None:
            raise ValueError("no spacelike complement")
        basis.append([v / mp.sqrt(size) for v in best])
    x, y = basis
    r2 = mp.sqrt(2)
    return {"l": l1, "n": nn, "m": [mp.mpc(x[a], y[a]) / r2 for a in range(n)]}


def _normalised(v):
    """Components scaled so the first non-negligible one (in chart order) is 1, as text."""
    import mpmath as mp

    big = max(abs(x) for x in v)
    lead = next(x for x in v if abs(x) > big * mp.mpf(10) ** -20)
    return [fmt_complex(x / lead) for x in v]


def principal_null_directions(pd, ptype: str) -> dict | None:
    """The repeated principal null directions at the sample point ``pd`` for type D (two double ones)
    or N (one quadruple one), or None when they cannot be stated.

    From the automatic tetrad: the roots b of ``Psi0 + 4 b Psi1 + 6 b^2 Psi2 + 4 b^3 Psi3 + b^4 Psi4``
    give the principal null directions ``l + conj(b) m + b mbar + |b|^2 n`` (a root at infinity: n)
    (Stephani et al. 2003, sec. 4.2; the convention of the rotation is fixed by checking Psi0 = 0 for
    the new l). They are stated only when the tetrad adapted to them has Psi0 = Psi1 = Psi3 = Psi4 = 0
    (D) or Psi0 = ... = Psi3 = 0 (N) within 10^-12 of the largest scalar."""
    import mpmath as mp

    if ptype not in ("D", "N") or pd.n != 4:
        return None
    with mp.workdps(40), pd.precision():
        tet, _ = tetrad_at(pd)
        if tet is None:
            return None
        psi = weyl_scalars_at(pd, tet)
        scale = max(abs(v) for v in psi.values())
        if scale == 0:
            return None
        tol = scale * mp.mpf(10) ** -12
        l, nv, m = tet["l"], tet["n"], tet["m"]
        coeffs = [psi["Psi4"], 4 * psi["Psi3"], 6 * psi["Psi2"], 4 * psi["Psi1"], psi["Psi0"]]  # highest first
        at_infinity = 0
        while coeffs and abs(coeffs[0]) <= tol:
            coeffs.pop(0)
            at_infinity += 1
        roots = []
        if len(coeffs) > 1:
            roots = mp.polyroots(coeffs, maxsteps=200, extraprec=200, error=False)
        # cluster repeated roots (a double root is found to about half the working digits)
        groups: list = []
        for z in roots:
            for grp in groups:
                if abs(grp[0] - z) <= mp.mpf(10) ** -8 * max(1, abs(z)):
                    grp.append(z)
                    break
            else:
                groups.append([z])
        dirs = []
        if at_infinity:
            dirs.append((at_infinity, list(nv)))
        centres = [(len(grp), mp.fsum(grp) / len(grp)) for grp in groups]

        def rotated(b, conj):
            bb = mp.conj(b) if conj else b
            return [mp.re(l[a] + mp.conj(bb) * m[a] + bb * mp.conj(m[a]) + abs(bb) ** 2 * nv[a]) for a in range(4)]

        def psi0(k):
            return abs(weyl_scalars_at(pd, _adapted_frame(pd, k, nv if abs(_dot(pd, k, nv)) > tol else l, m))["Psi0"])

        # one convention of the null rotation for all roots: the one that makes Psi0 vanish
        for conj in (False, True):
            ks = [(mult, rotated(b, conj)) for mult, b in centres]
            if all(psi0(k) <= tol * 10**4 for _, k in ks):
                dirs += ks
                break
        else:
            return None
        want = {"D": [2, 2], "N": [4]}[ptype]
        if sorted(mult for mult, _ in dirs) != want:
            return None
        if ptype == "D":
            (_, k1), (_, k2) = dirs
            frame = _adapted_frame(pd, k1, k2, m)
            vanish = ("Psi0", "Psi1", "Psi3", "Psi4")
        else:
            (_, k1), = dirs
            other = nv if abs(_dot(pd, k1, nv)) > tol else l
            frame = _adapted_frame(pd, k1, other, m)
            vanish = ("Psi0", "Psi1", "Psi2", "Psi3")
        check = weyl_scalars_at(pd, frame)
        if any(abs(check[k]) > tol for k in vanish):
            return None
        return {"directions": [{"multiplicity": mult, "vector": _normalised(k)} for mult, k in dirs],
                "adapted_weyl_scalars": {k: fmt_complex(v) for k, v in check.items()}}


def _dot(pd, u, v):
    import mpmath as mp

    n = pd.n
    return mp.fsum(_num(pd.g[a][b]) * u[a] * v[b] for a in range(n) for b in range(n))
