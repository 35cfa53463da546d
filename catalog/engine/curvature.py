"""Curvature, generic over the number type: one copy of the tensor formulas for every backend.

:class:`_Curvature` holds the formulas (Christoffel symbols, Riemann, Ricci, Ricci scalar, Einstein,
Kretschmann, Weyl square) over any number type with ``+``, ``-``, ``*`` and ``/``. Three backends use it:

* :class:`gravicat.engine.geometry.Geometry`: the symbolic chart (flint field elements on the fast path,
  sympy expressions on the slow path);
* :class:`gravicat.engine.pointdata.PointData`: the values at one sample point of ``Geometry``
  (exact rationals, or interval / floating values);
* :class:`BallCurvature`: values at one point given directly as numbers (python-flint ``arb`` balls
  or exact ``fmpq``), from the metric and its first and second derivatives there; repair screens
  its candidates with it (:mod:`gravicat.repair`), so repair and the verifiers share one curvature.

:func:`inertia` counts the signs of the eigenvalues of a symmetric matrix (the signature).
"""

from __future__ import annotations

from functools import cached_property

import flint

from gravicat.engine.ratfun import arb_precision

__all__ = ["BallCurvature", "inertia"]


class _Curvature:
    """Tensor formulas shared by the symbolic chart and the per-point data.

    Subclasses provide ``n``, ``g``, ``dg`` (``dg[c][a][b] = d_c g_ab``),
    ``ddg`` (``ddg[c][d][a][b]``), ``zero``, ``_iz(v)`` (is v certainly 0;
    only used to skip work), ``_nf(v)`` (normal form) and ``_inverse()``.
    Curvature needs no derivative of a Christoffel symbol: the lowered
    Riemann tensor comes from the second derivatives of g (see
    :attr:`riemann_lower`), and everything else from it by contraction.
    """

    n: int

    def vanishes(self, v) -> bool:
        """Cheap test that ``v`` is certainly zero (structural zeros; never a proof of non-zero)."""
        return self._iz(v)

    def _sum(self, terms):
        field = getattr(self, "field", None)
        if field is not None:
            return field.sum(terms)
        out = self.zero
        for t in terms:
            out = out + t
        return out

    @cached_property
    def _inv_det(self):
        return self._inverse()

    @cached_property
    def ginv(self):
        """Inverse metric g^ab (list of lists)."""
        return self._inv_det[0]

    @cached_property
    def det(self):
        """det g."""
        return self._inv_det[1]

    @cached_property
    def christoffel_first(self):
        """Gamma_abc = (d_b g_ac + d_c g_ab - d_a g_bc)/2 (first index lowered)."""
        n, dg, iz = self.n, self.dg, self._iz
        out = [[[self.zero] * n for _ in range(n)] for _ in range(n)]
        for a in range(n):
            for b in range(n):
                for c in range(b, n):
                    v = dg[b][a][c] + dg[c][a][b] - dg[a][b][c]
                    if not iz(v):
                        v = self._nf(v / 2)
                    out[a][b][c] = out[a][c][b] = v
        return out

    @cached_property
    def christoffel(self):
        """Gamma^a_bc (symmetric in b, c)."""
        n, gi, G1, iz = self.n, self.ginv, self.christoffel_first, self._iz
        out = [[[self.zero] * n for _ in range(n)] for _ in range(n)]
        for a in range(n):
            for b in range(n):
                for c in range(b, n):
                    v = self._sum(gi[a][e] * G1[e][b][c] for e in range(n) if not iz(gi[a][e]) and not iz(G1[e][b][c]))
                    v = self._nf(v)
                    out[a][b][c] = out[a][c][b] = v
        return out

    @cached_property
    def ricci(self):
        """R_bd = g^ac R_abcd (= d_a Gamma^a_bd - d_d Gamma^a_ab + Gamma^a_ae Gamma^e_bd - Gamma^a_de Gamma^e_ab)."""
        n, gi, L, iz = self.n, self.ginv, self.riemann_lower, self._iz
        out = [[self.zero] * n for _ in range(n)]
        for b in range(n):
            for d in range(b, n):
                terms = [
                    gi[a][c] * L[a][b][c][d]
                    for a in range(n)
                    for c in range(n)
                    if not iz(gi[a][c]) and not iz(L[a][b][c][d])
                ]
                if terms:
                    v = self._nf(self._sum(terms))
                    out[b][d] = out[d][b] = v
        return out

    @cached_property
    def riemann_lower(self):
        """R_abcd = (g_ad,bc + g_bc,ad - g_ac,bd - g_bd,ac)/2 + Gamma^e_bc Gamma_ead - Gamma^e_bd Gamma_eac.

        Only the 21 components with a < b, c < d, (a, b) <= (c, d) are computed; the others follow
        from the antisymmetry in each pair and the pair exchange symmetry. No derivative of a
        Christoffel symbol is needed (second derivatives of g only)."""
        n, ddg, G1, G, iz = self.n, self.ddg, self.christoffel_first, self.christoffel, self._iz
        out = [[[[self.zero] * n for _ in range(n)] for _ in range(n)] for _ in range(n)]
        pairs = [(a, b) for a in range(n) for b in range(a + 1, n)]
        for i, (a, b) in enumerate(pairs):
            for c, d in pairs[i:]:
                terms = [t for t in (ddg[b][c][a][d], ddg[a][d][b][c]) if not iz(t)]
                terms += [-t for t in (ddg[b][d][a][c], ddg[a][c][b][d]) if not iz(t)]
                v = self._sum(terms) / 2 if terms else self.zero
                quad = []
                for e in range(n):
                    if not iz(G[e][b][c]) and not iz(G1[e][a][d]):
                        quad.append(G[e][b][c] * G1[e][a][d])
                    if not iz(G[e][b][d]) and not iz(G1[e][a][c]):
                        quad.append(-(G[e][b][d] * G1[e][a][c]))
                if quad:
                    v = v + self._sum(quad)
                if iz(v):
                    continue
                v = self._nf(v)
                if iz(v):
                    continue
                w = -v
                out[a][b][c][d] = out[b][a][d][c] = out[c][d][a][b] = out[d][c][b][a] = v
                out[b][a][c][d] = out[a][b][d][c] = out[d][c][a][b] = out[c][d][b][a] = w
        return out

    @cached_property
    def riemann(self):
        """R^a_bcd = g^ae R_ebcd (convention R^a_bcd = d_c Gamma^a_db - d_d Gamma^a_cb + ...)."""
        n, gi, L, iz = self.n, self.ginv, self.riemann_lower, self._iz
        out = [[[[self.zero] * n for _ in range(n)] for _ in range(n)] for _ in range(n)]
        for a in range(n):
            for b in range(n):
                for c in range(n):
                    for d in range(c + 1, n):
                        terms = [
                            gi[a][e] * L[e][b][c][d] for e in range(n) if not iz(gi[a][e]) and not iz(L[e][b][c][d])
                        ]
                        if terms:
                            v = self._nf(self._sum(terms))
                            out[a][b][c][d] = v
                            out[a][b][d][c] = -v if not iz(v) else self.zero
        return out

    @cached_property
    def _bivector_inverse(self):
        """Index pairs a < b and G2[(a, b), (e, f)] = g^ae g^bf - g^af g^be (non-zero entries)."""
        n, gi, iz = self.n, self.ginv, self._iz
        pairs = [(a, b) for a in range(n) for b in range(a + 1, n)]
        G2 = {}
        for i, (a, b) in enumerate(pairs):
            for e, f in pairs[i:]:
                terms = []
                if not iz(gi[a][e]) and not iz(gi[b][f]):
                    terms.append(gi[a][e] * gi[b][f])
                if not iz(gi[a][f]) and not iz(gi[b][e]):
                    terms.append(-(gi[a][f] * gi[b][e]))
                if terms:
                    v = self._nf(self._sum(terms))
                    if not iz(v):
                        G2[(a, b), (e, f)] = G2[(e, f), (a, b)] = v
        return pairs, G2

    @cached_property
    def ricci_scalar(self):
        """R = g^ab R_ab."""
        n, gi, Ric, iz = self.n, self.ginv, self.ricci, self._iz
        return self._nf(
            self._sum(
                gi[a][b] * Ric[a][b] for a in range(n) for b in range(n) if not iz(gi[a][b]) and not iz(Ric[a][b])
            )
        )

    @cached_property
    def einstein(self):
        """G_ab = R_ab - R g_ab / 2."""
        n, g, Ric, R, iz = self.n, self.g, self.ricci, self.ricci_scalar, self._iz
        out = [[self.zero] * n for _ in range(n)]
        for a in range(n):
            for b in range(a, n):
                v = Ric[a][b]
                if not iz(g[a][b]) and not iz(R):
                    v = self._nf(v - g[a][b] * R / 2)
                out[a][b] = out[b][a] = v
        return out

    @cached_property
    def ricci_mixed(self):
        """R^a_b = g^ac R_cb."""
        n, gi, Ric, iz = self.n, self.ginv, self.ricci, self._iz
        return [
            [
                self._nf(self._sum(gi[a][c] * Ric[c][b] for c in range(n) if not iz(gi[a][c]) and not iz(Ric[c][b])))
                for b in range(n)
            ]
            for a in range(n)
        ]

    @cached_property
    def ricci_square(self):
        """R_ab R^ab."""
        n, M, iz = self.n, self.ricci_mixed, self._iz
        return self._nf(
            self._sum(M[a][b] * M[b][a] for a in range(n) for b in range(n) if not iz(M[a][b]) and not iz(M[b][a]))
        )

    @cached_property
    def riemann_mixed(self):
        """R^ab_cd = g^ae g^bf R_efcd: dict {(a, b, c, d): value} of the non-zero components with
        a < b and c < d (antisymmetric in both pairs)."""
        pairs, G2 = self._bivector_inverse
        L, iz = self.riemann_lower, self._iz
        out = {}
        for a, b in pairs:
            row = [(ef, G2[(a, b), ef]) for ef in pairs if ((a, b), ef) in G2]
            for c, d in pairs:
                terms = [v * L[e][f][c][d] for (e, f), v in row if not iz(L[e][f][c][d])]
                if terms:
                    v = self._nf(self._sum(terms))
                    if not iz(v):
                        out[a, b, c, d] = v
        return out

    @cached_property
    def kretschmann(self):
        """R_abcd R^abcd = sum R^ab_cd R^cd_ab."""
        M = self.riemann_mixed
        terms = []
        for (a, b, c, d), v in M.items():
            if a < b:
                w = M.get((c, d, a, b))
                if w is not None:
                    terms.append(v * w)
        return self._nf(self._sum(terms) * 4) if terms else self.zero

    @cached_property
    def weyl_square(self):
        """C_abcd C^abcd = K - 4/(n-2) R_ab R^ab + 2/((n-1)(n-2)) R^2 (n >= 3)."""
        n = self.n
        if n < 3:
            return self.zero
        R = self.ricci_scalar
        v = self.kretschmann - self.ricci_square * 4 / (n - 2) + R * R * 2 / ((n - 1) * (n - 2))
        return self._nf(v)


def _invert(M, n, iz, nf, one, zero, pick=None):
    """Inverse and determinant by Gauss-Jordan elimination, block by block."""
    # connected blocks of the non-zero pattern
    seen = [False] * n
    blocks = []
    for i in range(n):
        if seen[i]:
            continue
        stack, blk = [i], []
        seen[i] = True
        while stack:
            k = stack.pop()
            blk.append(k)
            for j in range(n):
                if not seen[j] and (not iz(M[k][j]) or not iz(M[j][k])):
                    seen[j] = True
                    stack.append(j)
        blocks.append(sorted(blk))
    inv = [[zero] * n for _ in range(n)]
    det = one
    for blk in blocks:
        m = len(blk)
        A = [[M[blk[i]][blk[j]] for j in range(m)] + [one if i == j else zero for j in range(m)] for i in range(m)]
        for col in range(m):
            cands = [r for r in range(col, m) if not iz(A[r][col])]
            if not cands:
                raise ZeroDivisionError("the metric is degenerate")
            piv = pick(A, cands, col) if pick else cands[0]
            if piv != col:
                A[col], A[piv] = A[piv], A[col]
                det = -det
            p = A[col][col]
            det = nf(det * p)
            pinv = one / p
            A[col] = [nf(x * pinv) if not iz(x) else zero for x in A[col]]
            for r in range(m):
                if r != col and not iz(A[r][col]):
                    f = A[r][col]
                    A[r] = [nf(A[r][j] - f * A[col][j]) if not iz(A[col][j]) else A[r][j] for j in range(2 * m)]
        for i in range(m):
            for j in range(m):
                inv[blk[i]][blk[j]] = A[i][m + j]
    return inv, det


class BallCurvature(_Curvature):
    """The third backend: curvature at one point from numbers.

    ``g[a][b]``, ``dg[c][a][b] = d_c g_ab`` and ``ddg[c][d][a][b] = d_c d_d g_ab`` are python-flint
    ``arb`` balls (or exact ``fmpq``); every derived value is a ball certain to contain the exact
    one. ``label`` names components as the other backends do (coordinate names when given).
    The inverse metric raises ``ZeroDivisionError`` when det g may be 0 at the point.
    """

    def __init__(self, g, dg, ddg, coords=None):
        self.n = len(g)
        self.g = g
        self.dg = dg
        self.ddg = ddg
        self.zero = flint.arb(0)
        self.one = flint.arb(1)
        self.coords = tuple(coords) if coords is not None else tuple(range(self.n))

    @staticmethod
    def _iz(v) -> bool:
        return v == 0  # a ball equals 0 only when it is exactly 0

    def _nf(self, v):
        return v

    def label(self, name, *idx):
        return f"{name}[{','.join(str(self.coords[i]) for i in idx)}]"

    def _inverse(self):
        n = self.n
        m = flint.arb_mat(n, n, [flint.arb(x) for row in self.g for x in row])
        det = m.det()
        if det.contains(0):
            raise ZeroDivisionError("the metric may be degenerate at the point")
        try:
            inv = m.inv()
        except (ZeroDivisionError, ValueError):
            raise ZeroDivisionError("the metric is degenerate at the point") from None
        return [[inv[a, b] for b in range(n)] for a in range(n)], det


def _descartes(coeffs) -> tuple[int, int]:
    """(negative, positive) root counts of a polynomial with only real roots (ascending coefficients)."""

    def changes(cs):
        signs = [c > 0 for c in cs if c != 0]
        return sum(1 for i in range(1, len(signs)) if signs[i] != signs[i - 1])

    return changes([c if i % 2 == 0 else -c for i, c in enumerate(coeffs)]), changes(coeffs)


def inertia(rows) -> tuple[tuple[int, int, int], bool]:
    """((negative, zero, positive) eigenvalue counts of a symmetric matrix, certain).

    The characteristic polynomial of a real symmetric matrix has only real roots, so Descartes'
    rule of signs on its coefficients counts the positive and negative eigenvalues exactly. With
    rational entries (``fmpq``) that is exact arithmetic; with interval entries (``arb`` balls of
    a sample point, or rationals mixed with balls) it is certain when the constant coefficient's
    ball excludes zero and every sign a coefficient whose ball contains zero might have gives the
    same counts. Otherwise (e.g. a nearly singular matrix) the floating-point eigenvalues of the
    midpoints are counted, and ``certain`` is False. Raises ValueError when an entry is not a
    finite number (never a numerical library's own exception).
    """
    n = len(rows)
    flat = [v for row in rows for v in row]
    if all(isinstance(v, flint.fmpq) for v in flat):
        p = flint.fmpq_mat(n, n, flat).charpoly()
        coeffs = [p[i] for i in range(n + 1)]  # ascending
        zero = next(i for i, c in enumerate(coeffs) if c != 0)
        neg, pos = _descartes(coeffs)
        return (neg, zero, pos), True
    if all(isinstance(v, (flint.fmpq, flint.fmpz, flint.arb, int)) for v in flat):
        # a floating-point entry (mpmath, float) carries no error bound: it is never taken as exact
        with arb_precision():
            balls = [v if isinstance(v, flint.arb) else flint.arb(v) for v in flat]
            if not all(b.is_finite() for b in balls):
                raise ValueError("a metric component is not a finite number")
            p = flint.arb_mat(n, n, balls).charpoly()
            coeffs = [p[i] for i in range(n + 1)]
        counts = _ball_descartes(coeffs)
        if counts is not None:
            return (counts[0], 0, counts[1]), True
    import numpy as np

    mids = [float(v.mid()) if hasattr(v, "mid") else float(v) for v in flat]
    if not all(np.isfinite(mids)):
        raise ValueError("a metric component is not a finite number")
    try:
        vals = np.linalg.eigvalsh(np.array(mids).reshape(n, n))
    except np.linalg.LinAlgError as exc:
        raise ValueError(f"the eigenvalues of the metric could not be computed ({exc})") from None
    tol = 1e-12 * max(1.0, float(np.max(np.abs(vals))))
    return (int(np.sum(vals < -tol)), int(np.sum(np.abs(vals) <= tol)), int(np.sum(vals > tol))), False


def _ball_descartes(coeffs) -> tuple[int, int] | None:
    """(negative, positive) root counts of a real-rooted polynomial with ball coefficients (ascending),
    or None when the balls do not decide them. The constant coefficient must exclude 0 (no zero
    root); a middle coefficient whose ball contains 0 may have either sign or be 0, and the counts
    are certain when every such choice gives the same counts (the true polynomial is one of them)."""
    from itertools import product

    if not (coeffs[0] > 0 or coeffs[0] < 0):
        return None
    signs = [1 if c > 0 else -1 if c < 0 else None for c in coeffs]
    open_ = [i for i, s in enumerate(signs) if s is None]
    if len(open_) > 6:
        return None
    found = set()
    for choice in product((-1, 0, 1), repeat=len(open_)):
        trial = list(signs)
        for i, v in zip(open_, choice, strict=True):
            trial[i] = v
        found.add(_descartes(trial))
        if len(found) > 1:
            return None
    return found.pop()


