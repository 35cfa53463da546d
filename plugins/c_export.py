"""Built-in exporter: a C99 header with the metric functions (no allocation, cse'd expressions).

One file, ``<entry>_<chart>.h``, holding for the chart (``P`` is the prefix, the entry and chart
ids with '-' turned into '_'):

    int P_metric(const double x[N], const double *params, double g[N][N]);
    int P_inverse_metric(const double x[N], const double *params, double ginv[N][N]);
    int P_metric_derivatives(const double x[N], const double *params, double dg[N][N][N]);
    int P_christoffel(const double x[N], const double *params, double gamma[N][N][N]);
    int P_domain_margins(const double x[N], const double *params, double margins[]);
    int P_in_domain(const double x[N], const double *params);

``dg[c][a][b] = d_c g_ab``, ``gamma[a][b][c] = Gamma^a_bc``; ``params`` in the order of
``P_PARAMETERS`` (may be NULL when there are none). The first four return 0 on success, 1 when
a result is not finite (a point off the chart) and 2 when the metric is singular. Catalogue
text reaches the header only through :mod:`gravicat.export.escape` (``c_comment`` in the comment
block, ``c_string`` for literals). The functions are ``static inline`` unless ``GRAVICAT_API``
is defined before the header is included (define it empty in one translation unit to get ordinary external definitions).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import ExportContext
    from gravicat.format.metricfile import MetricDocument

WIDTH = 100

C_RESERVED = frozenset("""
auto break case char const continue default do double else enum extern float for goto if inline int long
register restrict return short signed sizeof static struct switch typedef union unsigned void volatile while
_Bool _Complex _Imaginary bool true false complex imaginary
acos acosh asin asinh atan atan2 atanh cbrt ceil copysign cos cosh erf erfc exp exp2 expm1 fabs fdim floor fma
fmax fmin fmod frexp hypot ilogb ldexp lgamma llrint llround log log10 log1p log2 logb lrint lround modf nan
nearbyint nextafter nexttoward pow remainder remquo rint round scalbln scalbn sin sinh sqrt tan tanh tgamma trunc
isfinite isinf isnan isnormal signbit fpclassify isgreater isless NAN INFINITY HUGE_VAL
gamma j0 j1 jn y0 y1 yn main errno assert NULL
""".split())

_LAMBERTW = """
static inline double {p}_lambertw(double z)
{{
    /* principal branch W0 (z >= -1/e), Halley's iteration */
    const double e = 2.718281828459045235360287;
    double w;
    int k;
    if (z < -1.0 / e) {{
        return NAN;
    }}
    if (z < -0.25) {{
        const double q = sqrt(2.0 * (e * z + 1.0));
        w = -1.0 + q - q * q / 3.0 + 11.0 / 72.0 * q * q * q;
    }} else if (z < 3.0) {{
        w = log1p(z);
    }} else {{
        const double l1 = log(z);
        w = l1 - log(l1) + log(l1) / l1;
    }}
    for (k = 0; k < 12; ++k) {{
        const double ew = exp(w);
        const double f = w * ew - z;
        double step;
        if (f == 0.0) {{
            break;
        }}
        step = f / (ew * (w + 1.0) - (w + 2.0) * f / (2.0 * w + 2.0));
        if (!isfinite(step)) {{
            break;
        }}
        w -= step;
    }}
    return w;
}}
"""


def _printer(names, prefix):
    from sympy.printing.c import C99CodePrinter

    class Printer(C99CodePrinter):
        uses_lambertw = False

        def _print_Symbol(self, expr):
            return names.get(expr, str(expr))

        def _print_NumberSymbol(self, expr):  # no M_PI and friends: they are not C99
            return f"{float(expr.evalf(25))!r}"

        _print_Pi = _print_Exp1 = _print_EulerGamma = _print_Catalan = _print_GoldenRatio = _print_NumberSymbol

        def _print_LambertW(self, expr):
            if len(expr.args) != 1:
                return self._print_not_supported(expr)
            self.uses_lambertw = True
            return f"{prefix}_lambertw({self._print(expr.args[0])})"

    return Printer({"math_macros": {}})


def _statement(lhs: str, rhs: str, indent: str = "    ") -> list[str]:
    from gravicat.export.codegen import wrap

    line = f"{indent}{lhs} = {rhs};"
    if len(line) <= WIDTH:
        return [line]
    body = wrap(rhs + ";", WIDTH - len(indent) - 8, "")
    return [f"{indent}{lhs} ="] + [indent + "    " + b for b in body]


def c_identifier(entry: str, chart: str) -> str:
    name = f"{entry}_{chart}".replace("-", "_")
    return name if name[0].isalpha() else "m" + name


class CExporter:
    name = "c"
    version = "2"
    suffix = ".h"

    def export(self, document: MetricDocument, context: ExportContext) -> str:
        import sympy

        from gravicat.export.codegen import identifiers, numeric_parts, prepare, relation_margin, wrap
        from gravicat.export.escape import c_comment, c_string

        prep = prepare(document, context, self, numeric=True)
        parts = numeric_parts(prep)
        n = prep.n
        prefix = c_identifier(document.id, prep.chart)
        upper = prefix.upper()
        coords, free = prep.coords, prep.free
        defined = tuple(d for d, _ in prep.layered.defines)
        reserved = C_RESERVED | {prefix + s for s in ("_lambertw", "_invert", "_finite", "_jet")}
        ids = identifiers([str(s) for s in coords + free + defined], reserved)
        names = {s: ids[str(s)] for s in coords + free + defined}
        printer = _printer(names, prefix)

        def body(named, target_of, arrays) -> list[str]:
            """A function body: zero the output ``arrays`` ((name, size)), then locals, temporaries and
            the nonzero output slots."""
            assignments, reduced = parts.program(named)
            free_syms = set()
            for _, e in assignments:
                free_syms |= e.free_symbols
            for e in reduced.values():
                free_syms |= e.free_symbols
            lines = []
            if arrays:
                lines.append("    int _i;")
            for name, size in arrays:
                flat = f"&{name}" + "[0]" * (size.count("*") + 1)
                lines += [f"    for (_i = 0; _i < {size}; ++_i) {{", f"        ({flat})[_i] = 0.0;", "    }"]
            used_x = [s for s in coords if s in free_syms]
            used_p = [s for s in free if s in free_syms]
            for s in used_x:
                lines.append(f"    const double {names[s]} = _x[{coords.index(s)}];")
            for s in used_p:
                lines.append(f"    const double {names[s]} = _p[{free.index(s)}];")
            if not used_x:
                lines.append("    (void)_x;")
            if not used_p:
                lines.append("    (void)_p;")
            for sym, expr in assignments:
                lines += _statement(f"const double {printer._print_Symbol(sym)}", printer.doprint(expr))
            for key, expr in reduced.items():
                for slot in target_of(key):
                    lines += _statement(slot, printer.doprint(expr))
            return lines

        def pair(name, a, b):
            return [f"{name}[{a}][{b}]"] if a == b else [f"{name}[{a}][{b}]", f"{name}[{b}][{a}]"]

        n2, n3 = f"{n} * {n}", f"{n} * {n} * {n}"
        metric_body = body(parts.metric, lambda k: pair("_g", *k), [("_g", n2)])
        joint = {("g",) + k: v for k, v in parts.metric.items()}
        joint.update({("d",) + k: v for k, v in parts.derivatives.items()})

        def joint_target(key):
            if key[0] == "g":
                return pair("_g", key[1], key[2])
            return [s.replace("_g[", f"_dg[{key[1]}][") for s in pair("_g", key[2], key[3])]

        jet_body = body(joint, joint_target, [("_g", n2), ("_dg", n3)])
        inverse_body = None
        if parts.inverse is not None:
            inverse_body = body(parts.inverse, lambda k: pair("_gi", *k), [("_gi", n2)])
        margins, strict = [], []
        for rel in prep.domain:
            m, s = relation_margin(rel)
            margins.append(m)
            strict.append(s)
        margin_body = body({(i,): m for i, m in enumerate(margins)}, lambda k: [f"_m[{k[0]}]"], [])
        if not margins:
            margin_body.append("    (void)_m;")

        prov = prep.provenance
        header = prep.header_lines() + [
            f"inverse metric: {parts.inverse_method}; Christoffel symbols contracted numerically",
            "Generated file: regenerate it with 'gravicat export' rather than editing it.",
        ]
        out = ["/*"]
        for line in header:
            for part in wrap(c_comment(line), WIDTH - 3, "    "):
                out.append(f" * {part}".rstrip())
        out.append(" */")
        guard = f"GRAVICAT_{upper}_H"
        defaults = [prep.spec.defaults.get(p) for p in free]

        cstr = c_string
        out += [
            f"#ifndef {guard}",
            f"#define {guard}",
            "",
            "#include <math.h>",
            "",
            "#ifndef GRAVICAT_API",
            "#define GRAVICAT_API static inline",
            "#endif",
            "",
            f"#define {upper}_DIMENSION {n}",
            f"#define {upper}_NUM_PARAMETERS {len(free)}",
            f"#define {upper}_NUM_DOMAIN {len(margins)}",
            f"#define {upper}_COORDINATES {{{', '.join(cstr(str(c)) for c in coords)}}}",
        ]
        if free:
            out.append(f"#define {upper}_PARAMETERS {{{', '.join(cstr(str(p)) for p in free)}}}")
            if all(d is not None for d in defaults):
                out.append(f"#define {upper}_DEFAULTS {{{', '.join(repr(float(d)) for d in defaults)}}}")
        out += [
            f"#define {upper}_ENTRY {cstr(document.id)}",
            f"#define {upper}_CHART {cstr(prep.chart)}",
            f"#define {upper}_REVISION {cstr(prov.revision)}",
            f"#define {upper}_STATUS {cstr(prov.status)}",
            f"#define {upper}_DATE {cstr(prov.date)}",
            f"#define {upper}_DOMAIN {cstr('; '.join(str(sympy.sstr(r)) for r in prep.domain))}",
            f"#define {upper}_INVERSE {cstr(parts.inverse_method)}",
            "",
            f"static inline int {prefix}_finite(const double *_v, int _n)",
            "{",
            "    int _i;",
            "    for (_i = 0; _i < _n; ++_i) {",
            "        if (!isfinite(_v[_i])) {",
            "            return 1;",
            "        }",
            "    }",
            "    return 0;",
            "}",
        ]
        sig_x = f"const double _x[{n}], const double *_p"
        funcs = []
        funcs += ["", "/* the metric g_ab */",
                  f"GRAVICAT_API int {prefix}_metric({sig_x}, double _g[{n}][{n}])", "{"]
        funcs += metric_body + [f"    return {prefix}_finite(&_g[0][0], {n * n});", "}"]
        funcs += ["", f"static inline int {prefix}_jet({sig_x}, double _g[{n}][{n}], double _dg[{n}][{n}][{n}])",
                  "{"]
        funcs += jet_body + [f"    return {prefix}_finite(&_g[0][0], {n * n}) || "
                             f"{prefix}_finite(&_dg[0][0][0], {n * n * n});", "}"]
        funcs += ["", "/* first derivatives dg[c][a][b] = d_c g_ab */",
                  f"GRAVICAT_API int {prefix}_metric_derivatives({sig_x}, double _dg[{n}][{n}][{n}])", "{",
                  f"    double _g[{n}][{n}];",
                  f"    return {prefix}_jet(_x, _p, _g, _dg);", "}"]
        if inverse_body is None:
            funcs += ["", "/* Gauss-Jordan elimination with partial pivoting; _a is overwritten */",
                      f"static inline int {prefix}_invert(double _a[{n}][{n}], double _inv[{n}][{n}])", "{",
                      "    int _i, _j, _k;",
                      f"    for (_i = 0; _i < {n}; ++_i) {{",
                      f"        for (_j = 0; _j < {n}; ++_j) {{",
                      "            _inv[_i][_j] = (_i == _j) ? 1.0 : 0.0;",
                      "        }",
                      "    }",
                      f"    for (_k = 0; _k < {n}; ++_k) {{",
                      "        int _piv = _k;",
                      "        double _best = fabs(_a[_k][_k]);",
                      "        double _d;",
                      f"        for (_i = _k + 1; _i < {n}; ++_i) {{",
                      "            if (fabs(_a[_i][_k]) > _best) {",
                      "                _best = fabs(_a[_i][_k]);",
                      "                _piv = _i;",
                      "            }",
                      "        }",
                      "        if (!(_best > 0.0) || !isfinite(_best)) {",
                      "            return 2;",
                      "        }",
                      "        if (_piv != _k) {",
                      f"            for (_j = 0; _j < {n}; ++_j) {{",
                      "                double _t = _a[_k][_j];",
                      "                _a[_k][_j] = _a[_piv][_j];",
                      "                _a[_piv][_j] = _t;",
                      "                _t = _inv[_k][_j];",
                      "                _inv[_k][_j] = _inv[_piv][_j];",
                      "                _inv[_piv][_j] = _t;",
                      "            }",
                      "        }",
                      "        _d = _a[_k][_k];",
                      f"        for (_j = 0; _j < {n}; ++_j) {{",
                      "            _a[_k][_j] /= _d;",
                      "            _inv[_k][_j] /= _d;",
                      "        }",
                      f"        for (_i = 0; _i < {n}; ++_i) {{",
                      "            const double _f = _a[_i][_k];",
                      "            if (_i == _k || _f == 0.0) {",
                      "                continue;",
                      "            }",
                      f"            for (_j = 0; _j < {n}; ++_j) {{",
                      "                _a[_i][_j] -= _f * _a[_k][_j];",
                      "                _inv[_i][_j] -= _f * _inv[_k][_j];",
                      "            }",
                      "        }",
                      "    }",
                      "    return 0;", "}"]
            funcs += ["", "/* the inverse metric g^ab (numeric: the metric is not made of small blocks) */",
                      f"GRAVICAT_API int {prefix}_inverse_metric({sig_x}, double _gi[{n}][{n}])", "{",
                      f"    double _g[{n}][{n}];",
                      f"    int _s = {prefix}_metric(_x, _p, _g);",
                      "    if (_s) {", "        return _s;", "    }",
                      f"    return {prefix}_invert(_g, _gi);", "}"]
        else:
            funcs += ["", "/* the inverse metric g^ab (closed form) */",
                      f"GRAVICAT_API int {prefix}_inverse_metric({sig_x}, double _gi[{n}][{n}])", "{"]
            funcs += inverse_body + [f"    return {prefix}_finite(&_gi[0][0], {n * n});", "}"]
        funcs += ["", "/* Christoffel symbols gamma[a][b][c] = Gamma^a_bc = g^ad (d_b g_dc + d_c g_db - d_d g_bc)/2 */",
                  f"GRAVICAT_API int {prefix}_christoffel({sig_x}, double _chr[{n}][{n}][{n}])", "{",
                  f"    double _g[{n}][{n}], _dg[{n}][{n}][{n}], _gi[{n}][{n}];",
                  "    int _a, _b, _c, _d;",
                  f"    int _s = {prefix}_jet(_x, _p, _g, _dg);",
                  "    if (_s) {", "        return _s;", "    }",
                  (f"    _s = {prefix}_invert(_g, _gi);" if inverse_body is None
                   else f"    _s = {prefix}_inverse_metric(_x, _p, _gi);"),
                  "    if (_s) {", "        return _s;", "    }",
                  f"    for (_a = 0; _a < {n}; ++_a) {{",
                  f"        for (_b = 0; _b < {n}; ++_b) {{",
                  f"            for (_c = _b; _c < {n}; ++_c) {{",
                  "                double _sum = 0.0;",
                  f"                for (_d = 0; _d < {n}; ++_d) {{",
                  "                    _sum += _gi[_a][_d] * (_dg[_b][_d][_c] + _dg[_c][_d][_b] - _dg[_d][_b][_c]);",
                  "                }",
                  "                _chr[_a][_b][_c] = 0.5 * _sum;",
                  "                _chr[_a][_c][_b] = 0.5 * _sum;",
                  "            }",
                  "        }",
                  "    }",
                  "    return 0;", "}"]
        funcs += ["", f"/* margins of the domain inequalities, positive inside ({upper}_NUM_DOMAIN values) */",
                  f"GRAVICAT_API int {prefix}_domain_margins({sig_x}, double _m[])", "{"]
        funcs += margin_body + ["    return 0;", "}"]
        cond = " && ".join(f"_m[{i}] {'>' if s else '>='} 0.0" for i, s in enumerate(strict)) or "1"
        funcs += ["", "/* 1 if x lies in the chart's domain, else 0 */",
                  f"GRAVICAT_API int {prefix}_in_domain({sig_x})", "{",
                  f"    double _m[{max(len(margins), 1)}];",
                  f"    {prefix}_domain_margins(_x, _p, _m);",
                  f"    return {cond};", "}"]
        if printer.uses_lambertw:
            out += _LAMBERTW.format(p=prefix).splitlines()
        out += funcs
        out += ["", f"#endif /* {guard} */", ""]
        return "\n".join(out)


@hookimpl
def register_exporters():
    return [CExporter()]
