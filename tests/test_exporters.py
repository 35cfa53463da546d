"""Code exporters (python, c, latex): the generated code is run and compared with sympy.

Reference for every numeric comparison: the chart's sympy metric (gravicat.format.metricfile.build_chart,
definitions substituted), differentiated independently with sympy.diff and evaluated with
sympy.lambdify in mpmath arithmetic at random rational points of the chart's domain (parameters
at the file's defaults); the reference inverse is mpmath's matrix inverse and the reference
Christoffel symbols are contracted from those. The reference works with 100 digits rather than
30 because sympy's own expressions cancel in places (1 - tanh(u)**2 far outside the Alcubierre
bubble is 1e-41 and 30 digits would give 0). Tolerances
follow the issue: g g^-1 = 1 to 1e-12, everything else to 1e-10 relative to the largest
component of the same tensor at that point.
"""

from __future__ import annotations

import ast
import ctypes
import importlib.util
import random
import re
import shutil
import subprocess
import sys
import zlib
from fractions import Fraction

import numpy as np
import pytest

from gravicat import CheckFailed, InputError, NotFound, UnsafeExpression
from gravicat.format.metricfile import build_chart
from gravicat.plugins.c_export import CExporter, c_identifier
from gravicat.plugins.latex_export import LatexExporter
from gravicat.plugins.python_export import PythonExporter
from gravicat.store import revisions as store

DOCS = {d.id: d for d in store.iter_bundled_documents()}
CASES = [(e, c) for e, d in sorted(DOCS.items()) for c in d.chart_names]
NUMERIC = [(e, c) for e, c in CASES if not DOCS[e].data["charts"][c]["functions"]]
WITH_FUNCTIONS = [(e, c) for e, c in CASES if DOCS[e].data["charts"][c]["functions"]]
POINTS = 3
GCC = shutil.which("gcc")
CFLAGS = ["-std=c99", "-Wall", "-Wextra", "-Wpedantic", "-Werror", "-O2"]


def ids(case):
    return f"{case[0]}:{case[1]}"


def context(entry, chart=None, **extra):
    doc = DOCS[entry]
    chart = chart or doc.chart_names[0]
    checks = [{"chart": c, "check": "signature", "status": "pass"} for c in doc.chart_names]
    return {"revision": doc.hash, "checks": checks, "chart": chart, "date": "2031-04-05", **extra}


# --------------------------------------------------------------------------- reference values


class Reference:
    """Sample points of one chart and the 30-digit sympy/mpmath values there."""

    def __init__(self, entry, chart):
        import mpmath
        import sympy as sp

        from gravicat.export.codegen import relation_margin

        doc = DOCS[entry]
        spec = build_chart(doc, chart)
        rng = random.Random(zlib.crc32(f"{entry}:{chart}".encode()))
        params = {}
        for p in spec.params:
            params[p] = spec.defaults[p] if p in spec.defaults else self._draw_parameter(spec, p, rng, params)
        self.spec, self.params = spec, params
        margins = [relation_margin(rel.xreplace(params))[0] for rel in spec.domain]
        screen = sp.lambdify(spec.coords, margins, modules="math")
        points = []
        for _ in range(20000):
            cand = [Fraction(rng.randint(-500, 500), 100) for _ in spec.coords]
            try:
                if any(m <= 1e-3 for m in screen(*[float(c) for c in cand])):
                    continue
            except (ValueError, ZeroDivisionError, OverflowError):
                continue
            subs = {c: sp.Rational(v.numerator, v.denominator) for c, v in zip(spec.coords, cand, strict=True)}
            if all(bool(rel.xreplace(params).xreplace(subs)) for rel in spec.domain):
                points.append(cand)
                if len(points) == POINTS:
                    break
        assert len(points) == POINTS, f"could not sample the domain of {entry}:{chart}"
        self.points = np.array([[float(v) for v in p] for p in points])
        n = len(spec.coords)
        args = list(spec.params) + list(spec.coords)
        g_fn = sp.lambdify(args, spec.metric, modules="mpmath")
        upper = [(a, b) for a in range(n) for b in range(a, n)]
        dg_exprs = [sp.diff(spec.metric[a, b], x) for x in spec.coords for a, b in upper]
        dg_fn = sp.lambdify(args, dg_exprs, modules="mpmath", cse=True)
        self.g, self.ginv, self.dg, self.gamma = [], [], [], []
        with mpmath.workdps(100):
            pvals = [mpmath.mpf(params[p].p) / params[p].q if params[p].is_Rational else mpmath.mpf(str(params[p]))
                     for p in spec.params]
            for p in points:
                vals = pvals + [mpmath.mpf(v.numerator) / v.denominator for v in p]
                g = mpmath.matrix(g_fn(*vals))
                gi = mpmath.inverse(g)
                flat = iter(dg_fn(*vals))
                dg = np.zeros((n, n, n), dtype=object)
                for c in range(n):
                    for a, b in upper:
                        dg[c, a, b] = dg[c, b, a] = next(flat)
                gam = [[[sum(gi[a, d] * (dg[b, d, c] + dg[c, d, b] - dg[d, b, c]) for d in range(n)) / 2
                         for c in range(n)] for b in range(n)] for a in range(n)]
                self.g.append(np.array(g.tolist(), dtype=float))
                self.ginv.append(np.array(gi.tolist(), dtype=float))
                self.dg.append(np.array(dg.tolist(), dtype=float))
                self.gamma.append(np.array(gam, dtype=float))
        self.param_values = {str(p): float(v) for p, v in params.items()}

    @staticmethod
    def _draw_parameter(spec, p, rng, known):
        import sympy as sp

        for _ in range(1000):
            v = sp.Rational(rng.randint(1, 300), 100)
            if all(bool(r.xreplace({**known, p: v})) for r in spec.param_ranges
                   if r.free_symbols <= set(known) | {p}):
                return v
        raise AssertionError(f"cannot draw {p}")  # pragma: no cover


_REFERENCES: dict = {}


def reference(case) -> Reference:
    if case not in _REFERENCES:
        _REFERENCES[case] = Reference(*case)
    return _REFERENCES[case]


def assert_close(got, want, rtol, what):
    got, want = np.asarray(got, dtype=float), np.asarray(want, dtype=float)
    assert got.shape == want.shape, what
    scale = np.max(np.abs(want)) if want.size else 0.0
    err = np.max(np.abs(got - want)) if want.size else 0.0
    assert np.all(np.isfinite(got)), f"{what}: non-finite values"
    assert err <= rtol * max(scale, 1e-300), f"{what}: max error {err:.3e} vs scale {scale:.3e}"


# Two evaluations of the same generated straight-line code, one on arrays and one on scalars, are
# not bit-identical on every CPU: numpy evaluates sin, cos, exp, log... of arrays with vectorised
# loops whose results may differ from the scalar library's by a few ulp (recalled from memory of
# numpy's notes on its SIMD loops; the 1.2e-16 difference seen on another CPU agrees), and the
# compiler may contract a*b + c differently. Standard rounding-error analysis (Higham, Accuracy
# and Stability of Numerical Algorithms, 2nd ed. 2002, sec. 3.1, the inner-product bound
# |fl(x.y) - x.y| <= gamma_n |x|.|y|, equation number not checked) bounds the difference of a
# sum of products by its length times the ulps of its terms. A Christoffel symbol contracts at
# most 5 x 5 terms, each carrying a few ulp from the elementary functions, and a term may exceed
# the largest component by the cancellation in g^-1 (the condition of the expression). Allowing
# 4 ulp x 25 terms x a condition of 10, relative to the largest component at the point, gives
# 1000 eps; the 1e-10 agreement with sympy's 100-digit reference is checked separately.
SAME_CODE_RTOL = 1000 * np.finfo(float).eps


def assert_same_to_rounding(got, want, what):
    assert_close(got, want, SAME_CODE_RTOL, what)


def check_against_reference(ref: Reference, k: int, g, gi, dg, gam, label: str):
    n = g.shape[-1]
    # issue text: g g^-1 = identity to 1e-12
    assert np.max(np.abs(g @ gi - np.eye(n))) <= 1e-12, f"{label}: g g^-1 - 1 = {np.max(np.abs(g @ gi - np.eye(n)))}"
    assert_close(g, ref.g[k], 1e-10, f"{label}: g")
    assert_close(gi, ref.ginv[k], 1e-10, f"{label}: g^-1")
    assert_close(dg, ref.dg[k], 1e-10, f"{label}: dg")
    assert_close(gam, ref.gamma[k], 1e-10, f"{label}: Gamma")


# --------------------------------------------------------------------------- generated files


@pytest.fixture(scope="module")
def outdir(tmp_path_factory):
    return tmp_path_factory.mktemp("exported")


_MODULES: dict = {}


def python_module(case, outdir):
    if case not in _MODULES:
        text = PythonExporter().export(DOCS[case[0]], context(*case))
        path = outdir / f"{c_identifier(*case)}.py"
        path.write_text(text)
        spec = importlib.util.spec_from_file_location(f"gen_{c_identifier(*case)}", path)
        mod = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(mod)
        _MODULES[case] = (mod, path, text)
    return _MODULES[case]


@pytest.fixture(scope="module")
def c_build(outdir):
    """Every numeric chart as a header; all compiled in one shared library (external linkage)."""
    if GCC is None:
        pytest.skip("gcc not available")
    headers = {}
    for case in NUMERIC:
        text = CExporter().export(DOCS[case[0]], context(*case))
        path = outdir / f"{c_identifier(*case)}.h"
        path.write_text(text)
        headers[case] = path
    names = [p.name for p in headers.values()]
    halves = [names[0::2], names[1::2]]  # two translation units, compiled in parallel
    procs = []
    for i, half in enumerate(halves):
        src = outdir / f"shared_{i}.c"
        src.write_text("#define GRAVICAT_API\n" + "".join(f'#include "{h}"\n' for h in half))
        procs.append(subprocess.Popen([GCC, *CFLAGS, "-fPIC", "-c", "-o", f"shared_{i}.o", src.name], cwd=outdir,
                                      stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True))
    inline = outdir / "all_inline.c"  # the default static inline form, every header in one unit
    inline.write_text("".join(f'#include "{h}"\n' for h in names) + "int gravicat_probe_tu(void);\n"
                      "int gravicat_probe_tu(void) { return 0; }\n")
    runs = [subprocess.run([GCC, *CFLAGS, "-c", "-o", "all_inline.o", inline.name], capture_output=True, text=True,
                           cwd=outdir)]
    for proc in procs:
        out, err = proc.communicate()
        runs.append(subprocess.CompletedProcess(proc.args, proc.returncode, out, err))
    lib = outdir / "all_shared.so"
    if all(r.returncode == 0 for r in runs):
        runs.append(subprocess.run([GCC, "-shared", "-o", lib.name, "shared_0.o", "shared_1.o", "-lm"],
                                   capture_output=True, text=True, cwd=outdir))
    ok = all(r.returncode == 0 for r in runs) and lib.exists()
    return {"headers": headers, "runs": runs, "lib": ctypes.CDLL(str(lib)) if ok else None}


# --------------------------------------------------------------------------- python target


@pytest.mark.parametrize("case", NUMERIC, ids=ids)
def test_python_agrees_with_sympy(case, outdir):
    mod, _, _ = python_module(case, outdir)
    ref = reference(case)
    n = len(ref.spec.coords)
    assert mod.COORDINATES == tuple(str(c) for c in ref.spec.coords) and mod.DIMENSION == n
    assert mod.REVISION == DOCS[case[0]].hash and mod.STATUS == "pass"
    x = ref.points
    # vectorised call over all points at once, parameters as a mapping
    g = mod.metric(x, ref.param_values)
    gi = mod.inverse_metric(x, ref.param_values)
    dg = mod.metric_derivatives(x, ref.param_values)
    gam = mod.christoffel(x, ref.param_values)
    assert g.shape == (POINTS, n, n) and gam.shape == dg.shape == (POINTS, n, n, n)
    assert np.all(mod.in_domain(x, ref.param_values))
    for k in range(POINTS):
        check_against_reference(ref, k, g[k], gi[k], dg[k], gam[k], f"{ids(case)} point {k}")
    # a single point with parameters as a sequence gives the same numbers, to rounding
    seq = [ref.param_values[p] for p in mod.PARAMETERS]
    assert_same_to_rounding(mod.christoffel(x[0], seq), gam[0], f"{ids(case)}: one point vs all points")


def test_generated_python_depends_only_on_numpy_and_passes_ruff(outdir):
    paths = [python_module(case, outdir)[1] for case in NUMERIC]
    for path in paths:
        tree = ast.parse(path.read_text())
        imported = {a.name for node in ast.walk(tree) if isinstance(node, ast.Import) for a in node.names}
        imported |= {node.module for node in ast.walk(tree) if isinstance(node, ast.ImportFrom)}
        assert imported == {"numpy"}, (path.name, imported)
    try:
        import ruff  # noqa: F401
    except ImportError:  # pragma: no cover
        pytest.skip("ruff is not installed")
    # --isolated: the project's own configuration must not excuse anything; a stricter rule set
    # than ruff's default (pycodestyle, pyflakes, bugbear, pyupgrade, isort) at the default width
    run = subprocess.run([sys.executable, "-m", "ruff", "check", "--isolated", "--select", "E,W,F,B,UP,I",
                          "--line-length", "88", *map(str, paths)], capture_output=True, text=True)
    assert run.returncode == 0, run.stdout + run.stderr


def test_python_fixed_parameters_give_the_same_numbers(outdir):
    base, _, _ = python_module(("kerr", "boyer-lindquist"), outdir)
    text = PythonExporter().export(DOCS["kerr"], context("kerr", params="M=1,a=0.9"))
    ns: dict = {}
    exec(compile(text, "kerr_fixed.py", "exec"), ns)  # noqa: S102 - our own generated code
    assert ns["PARAMETERS"] == () and ns["FIXED_PARAMETERS"] == {"M": 1.0, "a": 0.9}
    assert "M = 1 (fixed at export)" in text and "a = 9/10 (fixed at export)" in text
    x = np.array([[0.0, 4.5, 1.1, 0.3], [2.0, 7.0, 0.4, 5.0]])
    for name in ("metric", "inverse_metric", "metric_derivatives", "christoffel"):
        want = getattr(base, name)(x, {"M": 1.0, "a": 0.9})
        np.testing.assert_allclose(ns[name](x), want, rtol=1e-13, atol=1e-15)
    with pytest.raises(ValueError, match="fixed to 0.9"):
        ns["metric"](x, {"a": 0.5})
    # parameters broadcast: one x, several spins
    spins = np.array([0.0, 0.5, 0.9])
    g = base.metric(x[0], {"M": 1.0, "a": spins})
    assert g.shape == (3, 4, 4)
    # g_t phi of Kerr is proportional to a: at a = 0 the generated product is 0.0 exactly in IEEE
    # arithmetic (a finite number times zero), so this is a structural zero, not a rounded value
    assert g[0, 0, 3] == 0.0 and abs(g[2, 0, 3]) > 1e-3


def test_kruskal_code_is_finite_on_the_horizon(outdir):
    """At X = T (r = 2M) the generated code must not divide 0 by 0.

    Misner, Thorne & Wheeler, Gravitation (1973), eq. 31.14: g_TT = -32 M^3/r exp(-r/2M), so on
    the horizon g_TT = -16 M^2/e (value recalled from memory).
    """
    mod, _, _ = python_module(("schwarzschild", "kruskal-szekeres"), outdir)
    x = np.array([0.5, 0.5, 1.0, 0.0])
    g = mod.metric(x, {"M": 1.0})
    assert g[0, 0] == pytest.approx(-16 / np.e, rel=1e-14)
    for fn in (mod.metric_derivatives, mod.christoffel, mod.inverse_metric):
        assert np.all(np.isfinite(fn(x, {"M": 1.0})))


# --------------------------------------------------------------------------- C target


def test_generated_c_compiles_without_warnings(c_build):
    for run in c_build["runs"]:
        assert run.returncode == 0 and not run.stderr.strip(), run.stderr[:4000]


@pytest.mark.parametrize("case", NUMERIC, ids=ids)
def test_c_agrees_with_sympy(case, c_build):
    lib = c_build["lib"]
    assert lib is not None, "".join(r.stderr for r in c_build["runs"])[:2000]
    text = c_build["headers"][case].read_text()
    prefix = c_identifier(*case)
    ref = reference(case)
    n = len(ref.spec.coords)
    names = re.search(rf"#define {prefix.upper()}_PARAMETERS \{{(.*)\}}", text)
    order = [s.strip().strip('"') for s in names.group(1).split(",")] if names else []
    params = (ctypes.c_double * max(len(order), 1))(*[ref.param_values[p] for p in order])
    dbl = ctypes.POINTER(ctypes.c_double)
    fns = {}
    for name in ("metric", "inverse_metric", "metric_derivatives", "christoffel", "in_domain"):
        fn = getattr(lib, f"{prefix}_{name}")
        fn.restype = ctypes.c_int
        fn.argtypes = [dbl, dbl] + ([] if name == "in_domain" else [dbl])
        fns[name] = fn
    for k in range(POINTS):
        x = (ctypes.c_double * n)(*ref.points[k])
        outs = {}
        for name, size in (("metric", n * n), ("inverse_metric", n * n), ("metric_derivatives", n ** 3),
                           ("christoffel", n ** 3)):
            buf = (ctypes.c_double * size)()
            assert fns[name](x, params, buf) == 0, f"{prefix}_{name} failed"
            outs[name] = np.array(buf[:]).reshape((n,) * (2 if size == n * n else 3))
        assert fns["in_domain"](x, params) == 1
        check_against_reference(ref, k, outs["metric"], outs["inverse_metric"], outs["metric_derivatives"],
                                outs["christoffel"], f"C {ids(case)} point {k}")


def test_c_reports_points_off_the_chart(c_build):
    """r < 0 in Schwarzschild: sqrt of a negative number somewhere or a singular metric: nonzero status."""
    lib = c_build["lib"]
    fn = lib.schwarzschild_schwarzschild_metric
    dbl = ctypes.POINTER(ctypes.c_double)
    fn.argtypes, fn.restype = [dbl, dbl, dbl], ctypes.c_int
    g = (ctypes.c_double * 16)()
    assert fn((ctypes.c_double * 4)(0.0, 0.0, 1.0, 0.0), (ctypes.c_double * 1)(1.0), g) == 1  # r = 0
    inside = lib.schwarzschild_schwarzschild_in_domain
    inside.argtypes, inside.restype = [dbl, dbl], ctypes.c_int
    assert inside((ctypes.c_double * 4)(0.0, 1.5, 1.0, 0.0), (ctypes.c_double * 1)(1.0)) == 0  # r < 2M


# --------------------------------------------------------------------------- refusals and provenance


@pytest.mark.parametrize("case", WITH_FUNCTIONS, ids=ids)
def test_numeric_targets_refuse_arbitrary_functions(case):
    for exporter in (PythonExporter(), CExporter()):
        with pytest.raises(InputError) as err:
            exporter.export(DOCS[case[0]], context(*case))
        message = str(err.value)
        assert "\n" not in message and "arbitrary function" in message and f"charts.{case[1]}.functions" in message


@pytest.mark.parametrize("exporter", [PythonExporter(), CExporter(), LatexExporter()], ids=lambda e: e.name)
def test_header_and_verification_status(exporter):
    doc = DOCS["schwarzschild"]
    text = exporter.export(doc, context("schwarzschild"))
    head = text[:1500]
    for needle in ("schwarzschild", "chart schwarzschild", doc.hash, "status:    pass", "2031-04-05",
                   f"exporter {exporter.name} {exporter.version}"):
        assert needle in head, needle
    first = text.splitlines()[0]
    assert first.startswith(("#", "%", "/*"))
    # never verified: refused without the flag, with a warning in the header with it
    with pytest.raises(InputError, match="--allow-unverified"):
        exporter.export(doc, context("schwarzschild", checks=[]))
    text = exporter.export(doc, context("schwarzschild", checks=[], allow_unverified=True))
    assert "WARNING: exported with --allow-unverified" in text[:2000] and "never verified" in text[:2000]
    # failed checks: refused (exit 1), the failing check named
    failed = [{"chart": "schwarzschild", "check": "field-equations", "status": "fail"}]
    with pytest.raises(CheckFailed, match="schwarzschild/field-equations: fail"):
        exporter.export(doc, context("schwarzschild", checks=failed))
    text = exporter.export(doc, context("schwarzschild", checks=failed, allow_unverified=True))
    assert "did not pass its checks" in text[:2000]
    # inconclusive is exported, and says so
    unsure = [{"chart": "schwarzschild", "check": "limits", "status": "inconclusive"}]
    assert "status:    inconclusive" in exporter.export(doc, context("schwarzschild", checks=unsure))[:1500]


# Our own small charts in three and five dimensions (test fixtures, nothing bundled has them):
# the static BTZ black hole, Banados, Teitelboim & Zanelli, Phys. Rev. Lett. 69 (1992) 1849, eq. 3
# with J = 0; the five-dimensional Schwarzschild-Tangherlini metric, Tangherlini, Nuovo Cimento 27
# (1963) 636 (f = 1 - mu/r^2 in five dimensions; equation number not checked).
OTHER_DIMENSIONS = {
    3: """id = "halcyon-btz"
title = "Halcyon Reach planar black hole (test fixture)"
field-equations = "lambda-vacuum"
[parameters.M]
description = "mass"
assume = ["positive"]
default = "1"
[parameters.l]
description = "AdS length"
assume = ["positive"]
default = "2"
[charts.static]
coordinates = ["t", "r", "phi"]
domain = ["r > l*sqrt(M)"]
cosmological-constant = "-1/l**2"
line-element = "-(r**2/l**2 - M)*dt**2 + dr**2/(r**2/l**2 - M) + r**2*dphi**2"
""",
    5: """id = "halcyon-tangherlini"
title = "Halcyon Reach five-dimensional black hole (test fixture)"
field-equations = "vacuum"
[parameters.mu]
description = "mass parameter"
assume = ["positive"]
default = "1"
[charts.static]
coordinates = ["t", "r", "chi", "theta", "phi"]
domain = ["r > sqrt(mu)", "0 < chi", "chi < pi", "0 < theta", "theta < pi"]
define = { f = "1 - mu/r**2" }
line-element = "-f*dt**2 + dr**2/f + r**2*(dchi**2 + sin(chi)**2*(dtheta**2 + sin(theta)**2*dphi**2))"
""",
}


@pytest.mark.parametrize("exporter", [PythonExporter(), CExporter(), LatexExporter()], ids=lambda e: e.name)
def test_header_signature_has_the_chart_dimension(exporter, tmp_path):
    """Issue 13, item 13: the header printed (-,+,+,+) for every chart. A Lorentzian metric in n
    dimensions has one minus and n - 1 plus signs (Wald, General Relativity, 1984, sec. 2.2 states
    it for n = 4; the count in n dimensions is the definition); the signature verifier checks that."""
    from gravicat.format.metricfile import load_file

    assert "conventions: signature (-,+,+,+), G = c = 1" in exporter.export(
        DOCS["schwarzschild"], context("schwarzschild"))[:2000]
    for n, text in OTHER_DIMENSIONS.items():
        path = tmp_path / f"dim{n}.toml"
        path.write_text(text)
        doc = load_file(path)
        checks = [{"chart": "static", "check": "signature", "status": "pass"}]
        out = exporter.export(doc, {"revision": doc.hash, "checks": checks, "date": "2031-04-05"})
        head = out[:2500]
        want = "(" + ",".join(["-"] + ["+"] * (n - 1)) + ")"
        assert f"conventions: signature {want}, G = c = 1" in head, (n, head)
        assert "(-,+,+,+)" not in head


@pytest.mark.parametrize("params, field, words", [
    ("M=1,a=2", "a", "outside the range"),
    ("M=1,a=pi", "a", "outside the range"),
    ("M=-1", "M", "declared positive"),
    ("J=1", "J", "not a parameter"),
    ("M=1,M=2", "M", "given more than once"),
    ("M", None, "not NAME=VALUE"),
])
def test_bad_parameters_are_one_line_errors(params, field, words):
    with pytest.raises(InputError) as err:
        PythonExporter().export(DOCS["kerr"], context("kerr", params=params))
    assert err.value.source == "--set" and err.value.field == field and words in str(err.value)


def test_parameter_expressions_go_through_the_whitelist():
    with pytest.raises(UnsafeExpression):
        PythonExporter().export(DOCS["kerr"], context("kerr", params="M=__import__('os')"))
    with pytest.raises(UnsafeExpression):
        PythonExporter().export(DOCS["kerr"], context("kerr", params="M=x"))
    # "symbolic" keeps every parameter a runtime argument, like no --set at all
    assert PythonExporter().export(DOCS["kerr"], context("kerr", params="symbolic")) == \
        PythonExporter().export(DOCS["kerr"], context("kerr"))
    # pi and earlier values may be used; decimals are exact
    text = LatexExporter().export(DOCS["kerr"], context("kerr", params="M=2, a=M*45/100"))
    assert r"a = \frac{9}{10}" in text and "M = 2" in text


def test_unknown_chart():
    with pytest.raises(NotFound, match="no chart 'polar'"):
        PythonExporter().export(DOCS["kerr"], context("kerr", chart="polar"))


# --------------------------------------------------------------------------- latex target

KNOWN_MACROS = {  # LaTeX and amsmath control words the fragments may use (letters only)
    "begin", "end", "mathrm", "frac", "left", "right", "sqrt", "quad", "label", "nonumber", "text", "sin",
    "cos", "tan", "cot", "sec", "csc", "sinh", "cosh", "tanh", "coth", "operatorname", "log", "leq", "geq",
    "pi", "partial", "cdot", "Gamma", "asin", "acos", "atan",
    "alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta", "iota", "kappa", "lambda", "mu",
    "nu", "xi", "rho", "sigma", "tau", "upsilon", "phi", "chi", "psi", "omega", "Delta", "Theta", "Lambda",
    "Xi", "Pi", "Sigma", "Upsilon", "Phi", "Psi", "Omega", "varphi", "vartheta", "ell",
}


def latex_rows(text):
    body = [line for line in text.splitlines() if not line.startswith("%")]
    return body


@pytest.mark.parametrize("case", CASES, ids=ids)
def test_latex_is_well_formed(case):
    text = LatexExporter().export(DOCS[case[0]], context(*case))
    spec = build_chart(DOCS[case[0]], case[1])
    n = len(spec.coords)
    body = latex_rows(text)
    assert body[0] == r"\begin{align}" and body[-1] == r"\end{align}"
    joined = "\n".join(body)
    assert joined.count(r"\begin{align}") == joined.count(r"\end{align}") == 1
    assert joined.count("{") == joined.count("}")
    assert joined.count(r"\left") == joined.count(r"\right")
    assert joined.count(r"\label{") == 1 and f"\\label{{eq:{case[0]}:{case[1]}}}" in joined
    macros = set(re.findall(r"\\([A-Za-z]+)", joined))
    assert macros <= KNOWN_MACROS, macros - KNOWN_MACROS
    # one term per independent nonzero metric component
    nonzero = sum(1 for a in range(n) for b in range(a, n) if spec.metric[a, b] != 0)
    line_element = joined.split(r"\label")[0]
    assert line_element.count(r"\mathrm{d}") - 1 == sum(1 if a == b else 2 for a in range(n) for b in range(a, n)
                                                         if spec.metric[a, b] != 0), nonzero
    # every row but the last ends with \\, and no row is empty
    rows = body[1:-1]
    assert all(r.rstrip().endswith("\\\\") for r in rows[:-1]) and not rows[-1].rstrip().endswith("\\\\")
    if DOCS[case[0]].data["charts"][case[1]]["domain"]:
        assert r"\text{domain: }" in joined


def test_latex_compiles_where_tex_is_available(tmp_path):
    engine = shutil.which("pdflatex") or shutil.which("lualatex") or shutil.which("xelatex")
    if engine is None:
        pytest.skip("no TeX engine on this machine (the structure is checked in test_latex_is_well_formed)")
    fragments = [LatexExporter().export(DOCS[e], context(e, c, christoffel=(e == "schwarzschild")))
                 for e, c in [("kerr", "boyer-lindquist"), ("kerr", "kerr-schild"), ("schwarzschild", "schwarzschild"),
                              ("pp-wave", None)]]
    doc = tmp_path / "fragments.tex"
    doc.write_text("\\documentclass{article}\n\\usepackage{amsmath}\n\\begin{document}\n"
                   + "\n".join(fragments) + "\n\\end{document}\n")
    run = subprocess.run([engine, "-interaction=nonstopmode", "-halt-on-error", doc.name], cwd=tmp_path,
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stdout[-3000:]


def test_latex_christoffel_symbols_of_schwarzschild():
    """Carroll, Spacetime and Geometry (2004), eq. 5.15: the nine independent nonzero
    Gamma^a_bc of Schwarzschild (M/(r(r-2M)), M(r-2M)/r^3, ..., cot(theta))."""
    import sympy as sp

    from gravicat.export.codegen import christoffel_symbols

    spec = build_chart(DOCS["schwarzschild"], "schwarzschild")
    t, r, th, ph = spec.coords
    (M,) = spec.params
    expected = {
        (0, 0, 1): M / (r * (r - 2 * M)),
        (1, 0, 0): M * (r - 2 * M) / r**3,
        (1, 1, 1): -M / (r * (r - 2 * M)),
        (1, 2, 2): -(r - 2 * M),
        (1, 3, 3): -(r - 2 * M) * sp.sin(th) ** 2,
        (2, 1, 2): 1 / r,
        (2, 3, 3): -sp.sin(th) * sp.cos(th),
        (3, 1, 3): 1 / r,
        (3, 2, 3): sp.cos(th) / sp.sin(th),
    }
    got = christoffel_symbols(spec, budget=60)
    assert set(got) == set(expected)
    for key, value in expected.items():
        assert sp.simplify(got[key] - value) == 0, key
    text = LatexExporter().export(DOCS["schwarzschild"], context("schwarzschild", christoffel=True))
    rows = [r for r in text.splitlines() if r.strip().startswith(r"\Gamma")]
    assert len(rows) == 9
    assert rows[0].strip().startswith(r"\Gamma^{t}{}_{t r} &=")


def test_latex_christoffel_budget_is_a_clear_error():
    from gravicat import CatalogError

    with pytest.raises(CatalogError, match="did not reduce within 0.01 s"):
        LatexExporter().export(DOCS["kerr"], context("kerr", "kerr-schild", christoffel=True, budget=0.01))


def test_latex_line_element_uses_the_definitions_and_fixed_values():
    text = LatexExporter().export(DOCS["kerr"], context("kerr"))
    assert r"\frac{\Sigma}{\Delta} \, \mathrm{d}r^{2}" in text
    assert r"\Sigma &= a^{2} \cos^{2}{\left(\theta \right)} + r^{2}" in text
    assert r"0 \leq a \leq M" in text and r"r > M + \sqrt{M^{2} - a^{2}}" in text
    fixed = LatexExporter().export(DOCS["kerr"], context("kerr", params="M=1,a=0"))
    # a = 0: the cross term disappears (Schwarzschild in Boyer-Lindquist form)
    assert r"\mathrm{d}t \, \mathrm{d}\phi" not in fixed and r"a = 0" in fixed


def test_domain_relations_settled_by_fixed_values():
    """A domain relation the fixed values make true everywhere is dropped (Lambda r^2 < 3 at Lambda = -1/100:
    -r^2/100 < 3 for every real r); one they make false everywhere is a one-line error naming --set."""
    from gravicat.format.metricfile import validate

    raw = {
        "id": "static-lambda-demo", "title": "Static chart with a cosmological constant of either sign",
        "field-equations": "vacuum",
        "parameters": {"Lambda": {"description": "cosmological constant", "default": "1"}},
        "charts": {"static": {
            "coordinates": ["t", "r", "theta", "phi"], "domain": ["r > 0", "Lambda*r**2 < 3", "Lambda < 2",
                                                                    "0 < theta < pi"],
            "line-element": "-(1 - Lambda*r**2/3)*dt**2 + dr**2/(1 - Lambda*r**2/3) "
                            "+ r**2*(dtheta**2 + sin(theta)**2*dphi**2)"}},
    }
    doc = validate(raw, "static-lambda.toml")
    ctx = {"revision": doc.hash, "checks": [], "allow_unverified": True, "date": "2031-04-05"}
    for exporter in (PythonExporter(), CExporter()):
        text = exporter.export(doc, {**ctx, "params": "Lambda=-1/100"})
        assert "Lambda*r**2" not in text.split("DOMAIN", 1)[1].splitlines()[0]
    with pytest.raises(InputError) as err:
        PythonExporter().export(doc, {**ctx, "params": "Lambda=3"})
    assert err.value.source == "--set" and "holds nowhere" in str(err.value) and "\n" not in str(err.value)
