"""Curvature benchmark: exact proofs on the flint fast path against pure-sympy baselines, same run.

Not collected by pytest (the file name does not start with test_). Run by hand:

    python tests/benchmarks/bench_curvature.py [--repeat N] [--textbook-cap SECONDS] [--no-textbook]

Cases (the claims of the issue "Fast exact curvature"):

* Kerr vacuum, Boyer-Lindquist chart: R_ab = 0 proved;
* Kerr-Newman electrovacuum: G_ab = 8 pi T_ab (Maxwell stress tensor) and Maxwell's equations;
* Kerr Kretschmann scalar equal to its closed form;
* a deliberately broken Kerr metric (one flipped sign: g_rr = Delta/Sigma instead of Sigma/Delta),
  which must be reported as failed with a counterexample.

Nested roots (issue "nested square roots on the fast path without a tower", ``--nested``): every
built-in verifier on the bundled ``kerr:kerr-schild`` and ``kerr-newman:kerr-schild`` charts (what
``gravicat check`` runs per chart, file already parsed), and on every bundled chart in turn (the
whole catalogue), with the Kerr-Schild radius as an algebraic generator (the engine) against the
same engine with nested roots as a tower of quadratic extensions (``Field.algebraic_roots = False``,
the representation before), measured in the same run. Targets from the issue: 0.4 s and 1 s CPU.

Fast path: ``Geometry(spec).verify(fn)``, the whole verification a verifier runs (field built,
sampled stage at 3 random points of the domain, exact proof; the other 5 of the default 8 points
are only evaluated when a proof does not succeed), from a prepared ChartSpec, in process (no
interpreter start, no file parsing).

Baselines, measured in the same run on the same machine:

* **careful pure sympy**: sympy expressions on the chart with x = cos(theta), so that every
  component is a rational function; ``cancel()`` as the normal form after each component;
  Christoffel symbols for b <= c only, Ricci straight from the Christoffel symbols (no Riemann
  tensor), R_bd for b <= d only;
* **textbook pipeline**: sympy on the chart as written (theta, sin, cos), ``simplify()`` on each
  of the 64 Christoffel symbols and the 256 Riemann components, then contraction and
  ``simplify()`` again; stopped after ``--textbook-cap`` CPU seconds (default 120), in which case
  its ratio is a lower bound (shown with ">=");
* **sympy fraction field** (extra column, stronger than the issue's baseline): the engine's own
  tensor formulas over sympy's gcd-reduced rational-function field (``sympy.polys.fields``).

Every run of a case (fast path or baseline) is a forked child process, so the times are CPU
seconds of that case alone (``time.process_time``; robust on a loaded machine; wall time is shown
too) and the peak memory is the child's maximum resident set size (``ru_maxrss``; it includes the
interpreter with sympy and python-flint already imported, about 100 MB).
"""

from __future__ import annotations

import argparse
import multiprocessing
import os
import platform
import resource
import signal
import sys
import time
from pathlib import Path

import sympy as sp

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from _charts import M, chart, kerr, kerr_metric, kerr_newman, ph, r, t, th  # noqa: E402
from _charts import a as spin  # noqa: E402

from gravicat.engine.geometry import Geometry, _invert  # noqa: E402
from gravicat.plugins.field_equations import residuals  # noqa: E402

X = sp.Symbol("x", real=True)
TARGETS = {"kerr": 0.15, "kerr-newman": 0.2, "kretschmann": 0.2, "broken": 0.3}  # seconds, from the issue


# ----------------------------------------------------------------------------- running in a child


def in_child(fn, cpu_limit: float | None = None):
    """Run ``fn()`` in a forked child: dict with value, cpu, wall, rss (MB), error.

    With ``cpu_limit`` the child gets RLIMIT_CPU; a child stopped by it reports error "cap"."""
    ctx = multiprocessing.get_context("fork")
    recv, send = ctx.Pipe(duplex=False)

    def child():
        if cpu_limit:
            soft, hard = resource.getrlimit(resource.RLIMIT_CPU)
            lim = max(1, int(cpu_limit + 0.999))
            resource.setrlimit(
                resource.RLIMIT_CPU, (lim, hard if hard == resource.RLIM_INFINITY or hard > lim else lim)
            )
        c0, w0 = time.process_time(), time.perf_counter()
        try:
            value, err = fn(), None
        except Exception as e:  # noqa: BLE001 - reported in the table
            value, err = None, f"{type(e).__name__}: {e}"
        cpu, wall = time.process_time() - c0, time.perf_counter() - w0
        rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        send.send({"value": value, "cpu": cpu, "wall": wall, "rss": rss, "error": err})
        send.close()

    w0 = time.perf_counter()
    proc = ctx.Process(target=child)
    proc.start()
    send.close()
    try:
        out = recv.recv()
    except EOFError:
        proc.join()
        capped = proc.exitcode in (-signal.SIGXCPU, -signal.SIGKILL)
        out = {
            "value": None,
            "cpu": cpu_limit,
            "wall": time.perf_counter() - w0,
            "rss": None,
            "error": "cap" if capped else f"exit code {proc.exitcode}",
        }
    proc.join()
    recv.close()
    return out


def best_of(fn, repeat: int, cpu_limit=None):
    """The run with the least CPU time among ``repeat`` runs, each in a fresh child."""
    runs = [in_child(fn, cpu_limit) for _ in range(max(1, repeat))]
    return min(runs, key=lambda o: o["cpu"] if o["cpu"] is not None else float("inf"))


# ----------------------------------------------------------------------------- the cases


def vacuum(X_):
    return {X_.label("R", i, j): X_.ricci[i][j] for i in range(4) for j in range(i, 4)}


def kretschmann_closed_form(c):
    # R. C. Henry, Kretschmann scalar for a Kerr-Newman black hole, ApJ 535 (2000) 350, eq. 1 with Q = 0
    # (recalled from memory; the engine tests check the same formula)
    S = r**2 + spin**2 * c**2
    return 48 * M**2 * (r**6 - 15 * spin**2 * r**4 * c**2 + 15 * spin**4 * r**2 * c**4 - spin**6 * c**6) / S**6


def kretschmann_residual(X_):
    return {"K": X_.kretschmann - X_.val(kretschmann_closed_form(sp.cos(th)))}


def cases():
    """(key, label, spec in the chart as written, engine residual function)."""
    kn = kerr_newman()
    return [
        ("kerr", "Kerr vacuum R_ab = 0 (proof)", kerr(), vacuum),
        ("kerr-newman", "Kerr-Newman G = 8 pi T + Maxwell (proof)", kn, residuals(kn, "electrovacuum")),
        ("kretschmann", "Kerr Kretschmann = closed form (proof)", kerr(), kretschmann_residual),
        ("broken", "broken Kerr (g_rr flipped): counterexample", kerr(kerr_metric(swap=True)), vacuum),
    ]


def fast_run(spec, fn):
    def run():
        out = Geometry(spec).verify(fn)
        return {"status": out.status, "method": out.method, "path": out.path, "cex": out.counterexample}

    return run


# ----------------------------------------------------------------------------- pure sympy baselines


def to_x(spec):
    """The chart with theta replaced by x = cos(theta) (dtheta = -dx / sqrt(1 - x^2)): rational throughout."""
    rep = {sp.sin(th) ** 2: 1 - X**2}

    def conv(e):
        return sp.sympify(e).subs(rep).subs(sp.cos(th), X)

    g = sp.Matrix(spec.metric).applyfunc(conv)
    assert all(g[2, j] == 0 for j in (0, 1, 3)), "benchmark charts have no theta cross terms"
    g[2, 2] = sp.cancel(g[2, 2] / (1 - X**2))
    pot = None
    if spec.potential is not None:
        # A_theta = 0 here, so only the components along t, r, phi are converted
        assert sp.sympify(spec.potential[2]) == 0
        pot = tuple(conv(p) for p in spec.potential)
    return (t, r, X, ph), g, pot


class ExprCurvature:
    """Curvature of sympy expressions with a chosen normal form.

    ``careful``: ``simplify=sp.cancel``, symmetric components computed once, Ricci straight from
    the Christoffel symbols. ``textbook``: ``simplify=sp.simplify``, every Christoffel and Riemann
    component computed and simplified, Ricci by contraction of the Riemann tensor."""

    def __init__(self, coords, g, simplify, textbook=False):
        self.x = coords
        self.n = len(coords)
        self.g = g
        self.s = simplify
        self.textbook = textbook
        n = self.n
        if textbook:
            self.ginv = g.inv().applyfunc(simplify)
        else:
            inv, _det = _invert(
                [[g[i, j] for j in range(n)] for i in range(n)],
                n,
                lambda v: v == 0,
                lambda v: sp.cancel(v) if v != 0 else v,
                sp.Integer(1),
                sp.Integer(0),
            )
            self.ginv = sp.Matrix(inv)
        self._G = None
        self._riem = None

    def total(self, terms):
        """Sum in the normal form: careful = cancel after each addition (the common denominator
        stays reduced; one cancel of the whole sum is far slower); textbook = simplify the sum."""
        if self.textbook:
            return self.s(sp.Add(*terms))
        acc = sp.Integer(0)
        for term in terms:
            if term != 0:
                acc = sp.cancel(acc + term)
        return acc

    @property
    def christoffel(self):
        if self._G is None:
            n, g, gi, x = self.n, self.g, self.ginv, self.x
            dg = [[[sp.diff(g[a, b], x[c]) for b in range(n)] for a in range(n)] for c in range(n)]
            G = [[[None] * n for _ in range(n)] for _ in range(n)]
            for a in range(n):
                for b in range(n):
                    for c in range(n) if self.textbook else range(b, n):
                        v = self.total([gi[a, d] * (dg[b][d][c] + dg[c][d][b] - dg[d][b][c]) / 2 for d in range(n)])
                        G[a][b][c] = v
                        if not self.textbook:
                            G[a][c][b] = v
            self._G = G
        return self._G

    @property
    def riemann(self):
        """R^a_bcd, every component (textbook) or c < d only."""
        if self._riem is None:
            n, G, x = self.n, self.christoffel, self.x
            R = {}
            for a in range(n):
                for b in range(n):
                    for c in range(n):
                        for d in range(n):
                            if not self.textbook and d <= c:
                                continue
                            terms = [sp.diff(G[a][d][b], x[c]), -sp.diff(G[a][c][b], x[d])]
                            terms += [G[a][c][e] * G[e][d][b] - G[a][d][e] * G[e][c][b] for e in range(n)]
                            R[a, b, c, d] = self.total(terms)
            self._riem = R
        return self._riem

    def ricci_component(self, b, d):
        n, G, x = self.n, self.christoffel, self.x
        if self.textbook:
            return self.total([self.riemann[a, b, a, d] for a in range(n)])
        terms = [sp.diff(G[a][b][d], x[a]) for a in range(n)]
        terms.append(-sp.diff(self.total([G[a][a][b] for a in range(n)]), x[d]))
        terms += [G[a][a][e] * G[e][b][d] - G[a][d][e] * G[e][a][b] for a in range(n) for e in range(n)]
        return self.total(terms)

    def ricci(self):
        n = self.n
        out = sp.zeros(n)
        for b in range(n):
            for d in range(b, n):
                out[b, d] = out[d, b] = self.ricci_component(b, d)
        return out

    def kretschmann(self):
        """K = R^ab_cd R^cd_ab with R^ab_cd = g^bf R^a_fcd."""
        n, gi, R = self.n, self.ginv, self.riemann
        pairs = [(c, d) for c in range(n) for d in range(n) if c != d and (self.textbook or c < d)]
        up = {}
        for a in range(n):
            for b in range(n):
                for c, d in pairs:
                    up[a, b, c, d] = self.total([gi[b, f] * R[a, f, c, d] for f in range(n)])

        def get(a, b, c, d):
            if (a, b, c, d) in up:
                return up[a, b, c, d]
            return -up[a, b, d, c] if c != d else 0

        factor = 1 if self.textbook else 2  # c < d only: each pair counted once
        return self.total([factor * up[a, b, c, d] * get(c, d, a, b) for (a, b, c, d) in up])


def expr_electrovacuum(curv, A):
    """Residuals of G_ab = 8 pi T_ab and nabla_a F^ab = 0 (sympy expressions)."""
    n, x, g, gi = curv.n, curv.x, curv.g, curv.ginv
    Ric = curv.ricci()
    R = curv.total([gi[a, b] * Ric[a, b] for a in range(n) for b in range(n)])
    F = [[sp.diff(A[b], x[a]) - sp.diff(A[a], x[b]) for b in range(n)] for a in range(n)]
    Fmix = [[curv.total([F[a][c] * gi[c, b] for c in range(n)]) for b in range(n)] for a in range(n)]
    F2 = curv.total([Fmix[a][b] * Fmix[b][a] for a in range(n) for b in range(n)])
    out = []
    for a in range(n):
        for b in range(a, n):
            T8 = [-2 * F[a][c] * Fmix[b][c] for c in range(n)] + [-g[a, b] * F2 / 2]
            out.append(curv.total([Ric[a, b], -g[a, b] * R / 2, *T8]))
    G = curv.christoffel
    for b in range(n):
        terms = []
        for a in range(n):
            for c in range(n):
                if gi[a, c] == 0:
                    continue
                terms.append(gi[a, c] * sp.diff(F[a][b], x[c]))
                terms += [-gi[a, c] * (G[e][c][a] * F[e][b] + G[e][c][b] * F[a][e]) for e in range(n)]
        out.append(curv.total(terms))
    return out


def sympy_job(key, spec, style):
    """A pure-sympy verification of case ``key`` (style "careful" or "textbook"): the result string."""
    simplify = sp.cancel if style == "careful" else sp.simplify

    def run():
        if style == "careful":
            coords, g, pot = to_x(spec)
        else:
            coords, g, pot = (t, r, th, ph), sp.Matrix(spec.metric), spec.potential
        curv = ExprCurvature(coords, g, simplify, textbook=style == "textbook")
        if key in ("kerr", "broken"):
            n = curv.n
            for b in range(n):
                for d in range(b, n):
                    if curv.ricci_component(b, d) != 0:
                        return f"non-zero R[{coords[b]},{coords[d]}]: failed"
            return "vacuum proved"
        if key == "kerr-newman":
            bad = [v for v in expr_electrovacuum(curv, pot) if v != 0]
            return "electrovacuum proved" if not bad else f"{len(bad)} residuals not reduced to 0"
        c = X if style == "careful" else sp.cos(th)
        diff = simplify(curv.kretschmann() - kretschmann_closed_form(c))
        return "closed form proved" if diff == 0 else "residual not reduced to 0"

    return run


class FracGeometry(Geometry):
    """Extra baseline: the engine's formulas over sympy's rational-function field (pure sympy)."""

    def __init__(self, spec):
        from sympy import QQ
        from sympy.polys.fields import field

        self.spec = spec
        self.coords = tuple(spec.coords)
        self.params = tuple(spec.params)
        self.n = len(self.coords)
        self.field = None
        self.path = "sympy-frac"
        self.fallback_reason = ""
        self._dcache = {}
        self.K, *gens = field(list(self.coords) + list(self.params), QQ)
        self.cgens = gens[: self.n]
        self.zero, self.one = self.K.zero, self.K.one
        self.g = [[self.K.from_expr(sp.sympify(spec.metric[i, j])) for j in range(self.n)] for i in range(self.n)]

    def _iz(self, v):
        return not v

    def _nf(self, v):
        return v

    def is_zero(self, v):
        return not v

    def _diff(self, v, i):
        return v.diff(self.cgens[i])

    def val(self, expr):
        return self.K.from_expr(sp.sympify(expr))

    def _inverse(self):
        return _invert(self.g, self.n, self._iz, self._nf, self.one, self.zero)


def frac_job(key, spec):
    def run():
        coords, g, pot = to_x(spec)
        xspec = chart(coords, g, spec.params, claim=spec.field_equations, potential=pot)
        geo = FracGeometry(xspec)
        if key == "kerr-newman":
            res = residuals(xspec, "electrovacuum")(geo)
        elif key == "kretschmann":
            res = {"K": geo.kretschmann - geo.val(kretschmann_closed_form(X))}
        else:
            res = vacuum(geo)
        bad = [k for k, v in res.items() if v]
        return "identically zero" if not bad else f"non-zero {bad[0]}"

    return run


# ----------------------------------------------------------------------------- reporting


def machine() -> str:
    model = ""
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    load = ", ".join(f"{x:.2f}" for x in os.getloadavg())
    import flint

    return (
        f"{platform.machine()} {model or platform.processor()}, {os.cpu_count()} cores, load average {load}; "
        f"Python {platform.python_version()}, sympy {sp.__version__}, python-flint {flint.__version__}"
    )


def fmt_ratio(base, fast, lower_bound=False):
    if base is None or fast is None or fast <= 0:
        return "-"
    return (">=" if lower_bound else "") + f"{base / fast:,.0f}x"


def run_cases(repeat=3, textbook_cap=120.0, textbook=True, frac=True):
    """Measure every case; returns the table rows (dicts)."""
    rows = []
    for key, label, spec, fn in cases():
        fast = best_of(fast_run(spec, fn), repeat)
        careful = in_child(sympy_job(key, spec, "careful"), cpu_limit=600)
        fr = in_child(frac_job(key, spec), cpu_limit=600) if frac else None
        tb = in_child(sympy_job(key, spec, "textbook"), cpu_limit=textbook_cap) if textbook else None
        rows.append({"key": key, "case": label, "fast": fast, "careful": careful, "frac": fr, "textbook": tb})
        print(f"  measured: {label}", file=sys.stderr, flush=True)
    return rows


def print_case_table(rows, textbook_cap):
    head = (
        f"{'case':44s} {'path':6s} {'seconds':>8s} {'wall':>7s} {'target':>7s} {'vs careful sympy':>17s} "
        f"{'vs textbook':>12s} {'vs sympy field':>15s} {'peak MB':>8s}  result"
    )
    print(head)
    print("-" * len(head))
    for row in rows:
        f, c, fr, tb = row["fast"], row["careful"], row["frac"], row["textbook"]
        v = f["value"] or {}
        res = f"{v.get('status')}/{v.get('method')}" if v else f["error"]
        if v.get("cex"):
            cex = v["cex"]
            res += f" at {cex['component']}"
        tb_cpu = tb["cpu"] if tb else None
        tb_capped = bool(tb) and tb["error"] == "cap"
        target = TARGETS[row["key"]]
        print(
            f"{row['case']:44s} {v.get('path', '?'):6s} {f['cpu']:8.3f} {f['wall']:7.3f} "
            f"{('<=' + format(target, 'g')):>7s} "
            f"{fmt_ratio(c['cpu'], f['cpu']):>17s} {fmt_ratio(tb_cpu, f['cpu'], tb_capped):>12s} "
            f"{fmt_ratio(fr['cpu'] if fr else None, f['cpu']):>15s} {f['rss']:8.0f}  {res}"
        )
    print()
    print("baselines (CPU seconds; each in its own process):")
    for row in rows:
        c, fr, tb = row["careful"], row["frac"], row["textbook"]
        parts = [f"careful sympy {c['cpu']:.2f} s ({c['value'] or c['error']})"]
        if tb:
            parts.append(
                f"textbook > {textbook_cap:g} s (stopped)"
                if tb["error"] == "cap"
                else f"textbook {tb['cpu']:.1f} s ({tb['value'] or tb['error']})"
            )
        if fr:
            parts.append(f"sympy fraction field {fr['cpu']:.2f} s ({fr['value'] or fr['error']})")
        print(f"  {row['case']}: " + "; ".join(parts))


# ----------------------------------------------------------------------------- nested roots

NESTED_TARGETS = {"kerr:kerr-schild": 0.4, "kerr-newman:kerr-schild": 1.0}  # CPU seconds, from the issue


def checks_job(units, algebraic=True):
    """Every built-in verifier on each (entry, chart) of ``units``: {unit: statuses} (charts built first,
    outside the timing of the other units' checks but inside the child's CPU time)."""

    def run():
        from gravicat.engine import ratfun as _ratfun
        from gravicat.engine.runner import bundled_documents, check_chart, make_resolver
        from gravicat.registry import make_plugin_manager, verifiers

        _ratfun.Field.algebraic_roots = algebraic
        docs = bundled_documents()
        chosen = list(verifiers(make_plugin_manager()).values())
        resolve = make_resolver(docs)
        # everything imported and parsed before the clock that matters starts (a small chart warms up the
        # verifiers' own lazy imports; numpy is the signature verifier's, imported on its first real use)
        import numpy  # noqa: F401

        check_chart(docs["minkowski"], "cartesian", chosen, resolve=resolve)
        c0 = time.process_time()
        out = {}
        for unit in units:
            entry, chart_name = unit.split(":")
            report = check_chart(docs[entry], chart_name, chosen, resolve=resolve)
            statuses = sorted({r.status.value for r in report.results})
            out[unit] = {"statuses": statuses, "path": report.path}
        out["_cpu"] = time.process_time() - c0
        return out

    return run


def run_nested(repeat=3):
    from gravicat.engine.runner import bundled_documents

    docs = bundled_documents()
    every = [f"{e}:{c}" for e, d in sorted(docs.items()) for c in d.chart_names]
    rows = []
    for unit in NESTED_TARGETS:
        fast = min((in_child(checks_job([unit])) for _ in range(max(1, repeat))), key=lambda o: o["value"]["_cpu"])
        tower = in_child(checks_job([unit], algebraic=False), cpu_limit=600)
        rows.append((unit, fast, tower))
        print(f"  measured: {unit}", file=sys.stderr, flush=True)
    fast = in_child(checks_job(every))
    tower = in_child(checks_job(every, algebraic=False), cpu_limit=1200)
    rows.append((f"whole catalogue ({len(every)} charts)", fast, tower))
    return rows


def print_nested_table(rows):
    head = f"{'every check of':40s} {'seconds':>8s} {'target':>7s} {'tower':>8s} {'vs tower':>9s}"
    head += "  statuses (engine / tower)"
    print(head)
    print("-" * len(head))
    for unit, fast, tower in rows:
        f, tw = fast["value"] or {}, tower["value"] or {}
        fc, tc = f.get("_cpu"), tw.get("_cpu")
        st = sorted({s for k, v in f.items() if k != "_cpu" for s in v["statuses"]}) if f else [fast["error"]]
        st2 = sorted({s for k, v in tw.items() if k != "_cpu" for s in v["statuses"]}) if tw else [tower["error"]]
        target = NESTED_TARGETS.get(unit)
        print(
            f"{unit:40s} {fc if fc is not None else float('nan'):8.3f} "
            f"{('<=' + format(target, 'g')) if target else '-':>7s} {tc if tc is not None else float('nan'):8.3f} "
            f"{fmt_ratio(tc, fc):>9s}  {','.join(st)} / {','.join(st2)}"
        )
    print("(CPU seconds of the checks in a forked child, chart building included, imports excluded; the tower column")
    print(" is the same engine with Field.algebraic_roots = False, i.e. nested roots as quadratic extensions)")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3, help="runs of the fast path per case (the fastest is shown)")
    ap.add_argument("--textbook-cap", type=float, default=120.0, help="CPU seconds before the textbook run stops")
    ap.add_argument("--no-textbook", action="store_true", help="skip the textbook baseline (saves ~8 minutes)")
    ap.add_argument("--nested", action="store_true", help="only the nested-root (Kerr-Schild) and catalogue rows")
    args = ap.parse_args(argv)
    print(f"machine: {machine()}")
    if not args.nested:
        rows = run_cases(args.repeat, args.textbook_cap, not args.no_textbook)
        print_case_table(rows, args.textbook_cap)
        print()
    print_nested_table(run_nested(args.repeat))
    print(f"machine at the end: {machine()}")


if __name__ == "__main__":
    main()
