"""The geodesic-c and geodesic-numpy export targets against sympy's own inverse metric and its derivatives.

Reference (general-purpose library, outside the project's engine): for each chart the test inverts the metric
with sympy (``Matrix.inv``), differentiates g^ab with ``sympy.diff`` and evaluates Hamilton's equations
dx^a/dl = g^ab p_b, dp_a/dl = -1/2 d_a g^bc p_b p_c and H = 1/2 g^ab p_a p_b at generic points. Agreement to
1e-10 relative to the largest component of each output (double rounding of differently arranged
expressions: common practice, no source).
"""

from __future__ import annotations

import importlib.util
import shutil
import subprocess

import numpy as np
import pytest

from gravicat import CheckFailed, InputError
from gravicat.checks import ExportContext
from gravicat.format.bundled import bundled_path, read_bundled
from gravicat.format.metricfile import build_chart, load_file
from gravicat.plugins.geodesic_export import GeodesicCExporter, GeodesicNumpyExporter

# (entry, chart, --set values, sampler of positions): Kerr (t-phi block), a cosmological constant with charge,
# five dimensions
CASES = [
    ("kerr", "boyer-lindquist", "M=1,a=9/10", lambda rng: [0.3, rng.uniform(3, 20), rng.uniform(0.3, 2.8),
                                                            rng.uniform(0, 6)]),
    ("reissner-nordstrom-de-sitter", "static", None, lambda rng: [0.0, rng.uniform(2.5, 4.0),
                                                                   rng.uniform(0.3, 2.8), 1.0]),
    ("tangherlini-5d", None, "mu=2", lambda rng: [0.0, rng.uniform(2, 20), rng.uniform(0.2, 1.3), 0.5, 0.7]),
]


def _context(doc, chart, params, allow=True):
    return ExportContext(revision=doc.hash, chart=chart, params=params, allow_unverified=allow)


def _reference(doc, chart, params):
    """Hamilton's equations from sympy's inverse metric of the chart (parameters substituted)."""
    import sympy

    spec = build_chart(doc, chart or doc.chart_names[0])
    values = {str(k): v for k, v in spec.defaults.items()}
    for item in (params or "").split(","):
        if item:
            name, value = item.split("=")
            values[name] = sympy.Rational(value)
    subs = {p: values[str(p)] for p in spec.params}
    g = sympy.Matrix(spec.metric).xreplace(subs)
    ginv = g.inv()
    n = len(spec.coords)
    ps = sympy.symbols(f"q0:{n}")
    dx = [sum(ginv[a, b] * ps[b] for b in range(n)) for a in range(n)]
    h = sum(ginv[a, b] * ps[a] * ps[b] for a in range(n) for b in range(n)) / 2
    dp = [-sympy.diff(h, c) for c in spec.coords]
    return sympy.lambdify([spec.coords, ps], dx + dp + [h], "numpy"), n


def _points(sampler, n, count=5, seed=7):
    rng = np.random.default_rng(seed)
    x = np.array([sampler(rng) for _ in range(count)])
    p = rng.uniform(-2, 2, size=(count, n))
    return x, p


def _compare(got, want):
    want = np.asarray(want, dtype=float)
    scale = np.max(np.abs(want), axis=-1, keepdims=True)
    assert np.all(np.abs(got - want) <= 1e-10 * np.maximum(scale, 1e-300)), np.max(np.abs(got - want) / scale)


def _load(path):
    spec = importlib.util.spec_from_file_location(path.stem, path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.mark.parametrize("entry, chart, params, sampler", CASES)
def test_numpy_target_matches_sympy(entry, chart, params, sampler, tmp_path):
    doc = read_bundled(bundled_path(entry))
    text = GeodesicNumpyExporter().export(doc, _context(doc, chart, params))
    assert text.startswith(f"# gravicat export of {doc.title} ({entry}), chart")
    assert "generator: gravicat" in text and "exporter geodesic-numpy 1" in text
    path = tmp_path / f"{entry.replace('-', '_')}_rays.py"
    path.write_text(text)
    module = _load(path)
    ref, n = _reference(doc, chart, params)
    assert module.DIMENSION == n
    x, p = _points(sampler, n)
    dx, dp = module.rhs(x, p)  # five rays at once
    assert dx.shape == dp.shape == (5, n)
    want = np.array([ref(x[k], p[k]) for k in range(len(x))], dtype=float)
    _compare(np.hstack([dx, dp, module.hamiltonian(x, p)[:, None]]), want)
    # one ray without a leading axis, and broadcasting one position against several momenta
    dx1, _ = module.rhs(x[0], p[0])
    assert dx1.shape == (n,) and np.allclose(dx1, dx[0], rtol=1e-15, atol=0)
    assert module.hamiltonian(x[0], p).shape == (5,)
    ruff = shutil.which("ruff")
    if ruff:
        assert subprocess.run([ruff, "check", "--isolated", "--line-length", "88", str(path)],
                              capture_output=True, timeout=60).returncode == 0


@pytest.mark.parametrize("entry, chart, params, sampler", CASES)
def test_c_target_compiles_and_matches_sympy(entry, chart, params, sampler, tmp_path):
    cc = shutil.which("gcc") or shutil.which("cc")
    if cc is None:
        pytest.skip("no C compiler")
    doc = read_bundled(bundled_path(entry))
    header = GeodesicCExporter().export(doc, _context(doc, chart, params))
    assert header.startswith(f"/*\n * gravicat export of {doc.title} ({entry}), chart ")
    prefix = f"{entry}_{chart or doc.chart_names[0]}".replace("-", "_") + "_geodesic"
    ref, n = _reference(doc, chart, params)
    x, p = _points(sampler, n)
    y = np.hstack([x, p]).ravel()
    (tmp_path / "rays.h").write_text(header)
    (tmp_path / "main.c").write_text(f"""
#include <stdio.h>
#include "rays.h"
int main(void) {{
    double y[] = {{{", ".join(repr(float(v)) for v in y)}}};
    double dy[{y.size}], h[{len(x)}];
    int i;
    {prefix}_rhs({len(x)}, y, dy, h);
    for (i = 0; i < {y.size}; ++i) printf("%.17g\\n", dy[i]);
    for (i = 0; i < {len(x)}; ++i) printf("%.17g\\n", h[i]);
    {prefix}_rhs({len(x)}, y, dy, NULL); /* h may be NULL */
    return 0;
}}
""")
    exe = tmp_path / "rays"
    build = subprocess.run([cc, "-std=c99", "-Wall", "-Wextra", "-Wpedantic", "-Werror", "-O1",
                            str(tmp_path / "main.c"), "-o", str(exe), "-lm"], capture_output=True, text=True,
                           timeout=120)
    assert build.returncode == 0, build.stderr
    values = np.array([float(v) for v in subprocess.run([str(exe)], capture_output=True, text=True,
                                                        timeout=30).stdout.split()])
    k = len(x)
    got = np.hstack([values[: y.size].reshape(k, 2 * n), values[y.size:, None]])
    want = np.array([ref(x[i], p[i]) for i in range(k)], dtype=float)
    _compare(got, want)


def test_only_checked_data_and_escaped_text(tmp_path):
    doc = read_bundled(bundled_path("schwarzschild"))
    for exporter in (GeodesicCExporter(), GeodesicNumpyExporter()):
        with pytest.raises(InputError, match="no checks have been run"):
            exporter.export(doc, _context(doc, None, None, allow=False))
        failed = ExportContext(revision=doc.hash, checks=({"check": "signature", "status": "fail",
                                                           "chart": "schwarzschild"},))
        with pytest.raises(CheckFailed, match="failed its checks"):
            exporter.export(doc, failed)
        assert "WARNING: exported with --allow-unverified" in exporter.export(doc, _context(doc, None, None))
    # hostile catalogue text: a title that tries to close the comment or the docstring and inject code (control
    # characters such as a line break are refused by the file format itself)
    source = bundled_path("schwarzschild").read_text(encoding="utf-8")
    evil = 'title = "Evil */ int pwned; /* \\"\\"\\" import os \'\'\'"'
    lines = [evil if line.startswith("title = ") else line for line in source.splitlines()]
    path = tmp_path / "evil.toml"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    hostile = load_file(path)
    c_text = GeodesicCExporter().export(hostile, _context(hostile, "schwarzschild", "M=1"))
    comment = c_text[: c_text.index(" */\n")]
    assert "int pwned" in comment and "*/ int" not in comment
    py_text = GeodesicNumpyExporter().export(hostile, _context(hostile, "schwarzschild", "M=1"))
    code_lines = [line for line in py_text.splitlines() if not line.startswith("#")]
    assert not any("import os" in line for line in code_lines)
    compile(py_text, "evil.py", "exec")  # still one valid module


def test_parameters_are_numbers_and_refusals():
    doc = read_bundled(bundled_path("kerr"))
    text = GeodesicNumpyExporter().export(doc, _context(doc, None, "a=1/2"))
    assert "  a = 1/2 (--set)" in text and "  M = 1 (the file's default)" in text
    assert "PARAMETERS = {'M': 1.0, 'a': 0.5}" in text
    with pytest.raises(InputError, match="a"):
        GeodesicCExporter().export(doc, _context(doc, None, "a=2"))  # outside 0 <= a <= M
    schw = read_bundled(bundled_path("schwarzschild"))
    with pytest.raises(InputError, match="cannot print LambertW"):
        GeodesicCExporter().export(schw, _context(schw, "kruskal-szekeres", None))
    numpy_text = GeodesicNumpyExporter().export(schw, _context(schw, "kruskal-szekeres", None))
    assert "def _lambertw(z):" in numpy_text


def test_cli_lists_and_writes_the_geodesic_targets(cli, tmp_path):
    listed = cli("export", "--list")
    assert listed.exit_code == 0
    assert {"geodesic-c", "geodesic-numpy"} <= {line.split("\t")[0] for line in listed.stdout.splitlines()}
    source = str(bundled_path("kerr"))
    refused = cli("export", source, "--to", "geodesic-c")
    assert refused.exit_code == 2 and refused.stderr.count("\n") == 1 and "--allow-unverified" in refused.stderr
    out = tmp_path / "kerr_rays.py"
    done = cli("export", source, "--to", "geodesic-numpy", "--set", "M=1,a=0.9", "--allow-unverified",
               "-o", str(out))
    assert done.exit_code == 0, done.stderr
    module = _load(out)
    assert module.PARAMETERS == {"M": 1.0, "a": 0.9} and module.COORDINATES == ("t", "r", "theta", "phi")
