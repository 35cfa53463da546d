"""Built-in exporters ``initial-data-c`` (C99) and ``initial-data-numpy`` (Python/NumPy): 3+1 data as code.

For a chart of an initial-data entry (its data as given) or of a spacetime (split by its first
coordinate, :func:`gravicat.physics.split.split_chart`), the generated code evaluates on the slice:
the lapse alpha, the shift beta^i, the spatial metric gamma_ij and the extrinsic curvature K_ij
(sign convention of :data:`gravicat.physics.split.CONVENTION`, stated in the header), and in separate
functions their first spatial derivatives (``d_k alpha``, ``d_k beta^i``, ``d_k gamma_ij``, ``d_k K_ij``:
call them when needed, the other functions never compute them). The fields of a spacetime slice may
depend on its time coordinate; it is then the last runtime parameter (default 0).

Both targets are vectorised over points: NumPy functions take ``x`` of shape ``(..., 3)``; the C
header has per-point functions and ``*_points`` loops over ``n`` points stored contiguously.
The same gate as every code exporter: only a verified revision unless ``--allow-unverified``
(:meth:`gravicat.export.codegen.Provenance.require_verified`), with the same provenance header.
Catalogue text reaches the files only through :mod:`gravicat.export.escape`; the expressions are
printed from sympy (common subexpressions shared).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import ExportContext
    from gravicat.format.metricfile import MetricDocument

PAIRS = ((0, 0), (0, 1), (0, 2), (1, 1), (1, 2), (2, 2))
_SLICES: dict = {}  # (content hash, chart, budget) -> the last Slice made


@dataclass
class _Data:
    """One chart's slice, ready for printing: sympy expressions with fixed parameters substituted."""

    coords: tuple  # the three spatial coordinates
    runtime: tuple  # runtime parameters in order (the time coordinate last, when the data depend on it)
    defaults: list  # a float or None per runtime parameter
    time: Any  # the time coordinate symbol of a spacetime slice, or None
    fields: dict  # key -> expr: ("alpha",), ("beta", i), ("gamma", i, j), ("K", i, j) for i <= j
    header: list  # provenance and data lines
    prefix: str
    chart: str


def _prepare(document, context, exporter) -> _Data:
    import sympy

    from gravicat.checks import ExportContext
    from gravicat.errors import InputError
    from gravicat.export.codegen import chart_name, fixed_parameters, provenance
    from gravicat.format.metricfile import build_chart
    from gravicat.physics.initial_data import is_initial_data_spec, slice_of_chart
    from gravicat.physics.split import CONVENTION

    context = ExportContext.coerce(context)
    chart = chart_name(document, context.chart)
    prov = provenance(document, context, exporter, chart)
    prov.require_verified()
    spec = build_chart(document, chart)
    if spec.functions:
        raise InputError(document.source, f"charts.{chart}.functions",
                         f"the metric depends on the arbitrary function(s) {', '.join(map(str, spec.functions))}, "
                         "whose values numeric code cannot know")
    initial = is_initial_data_spec(spec)
    if not initial and len(spec.coords) != 4:
        raise InputError(document.source, f"charts.{chart}.coordinates",
                         f"the initial-data targets write 3+1 data: this chart has {len(spec.coords)} coordinates, "
                         "not 4")
    key = (document.hash, chart, context.budget)
    sl = _SLICES.get(key)
    if sl is None:  # the C and NumPy targets of one chart (as the site makes them) share one split
        sl = slice_of_chart(spec, budget=context.budget, source=f"--to {exporter.name}")
        _SLICES.clear()
        _SLICES[key] = sl
    fixed = fixed_parameters(document, spec, context.params)

    def fix(e):
        return sympy.sympify(e).xreplace(fixed) if fixed else sympy.sympify(e)

    fields = {("alpha",): fix(sl.lapse)}
    for i in range(3):
        fields[("beta", i)] = fix(sl.shift[i])
    for i, j in PAIRS:
        fields[("gamma", i, j)] = fix(sl.spatial_metric[i][j])
    for i, j in PAIRS:
        fields[("K", i, j)] = fix(sl.extrinsic[i][j])
    coords = tuple(sl.coords)
    free = [p for p in spec.params if p not in fixed]
    used = set().union(*(e.free_symbols for e in fields.values()))
    time = None if initial else sl.time_symbol
    runtime = tuple(free) + ((time,) if time is not None and time in used else ())
    defaults = []
    for p in runtime:
        d = spec.defaults.get(p, sympy.Integer(0) if p == time else None)
        defaults.append(None if d is None else float(d))
    lines = prov.lines()
    lines.append("data: " + ("initial data as given by the entry" if initial
                             else f"the 3+1 split of the chart by its coordinate {time}"))
    lines.append(f"coordinates: {', '.join(map(str, coords))}")
    lines.append("runtime parameters: " + (", ".join(str(p) + ("" if d is None else f" (default {d!r})")
                                                    for p, d in zip(runtime, defaults, strict=True)) or "none"))
    for p, v in fixed.items():
        lines.append(f"  {p} = {v} (fixed at export)")
    lines.append(f"domain: {'; '.join(document.data['charts'][chart]['domain']) or 'the whole chart'}")
    lines.append(f"conventions: {CONVENTION}")
    prefix = f"{document.id}_{chart}".replace("-", "_")
    return _Data(coords, runtime, defaults, time, fields, lines, prefix if prefix[0].isalpha() else "m" + prefix,
                 chart)


def _derivatives(data: _Data) -> dict:
    """key + (k,) -> d_k of the field, for the three spatial coordinates."""
    import sympy

    out = {}
    for key, e in data.fields.items():
        for k, c in enumerate(data.coords):
            out[key + (k,)] = sympy.diff(e, c)
    return out


def _nonzero(named: dict) -> dict:
    return {k: v for k, v in named.items() if v != 0}


# --------------------------------------------------------------------------- NumPy


_NP_HELPERS = '''

def _parameters(params):
    """Runtime parameter values in the order of PARAMETERS: a mapping, a sequence, or None (DEFAULTS)."""
    if params is None:
        params = {}
    if isinstance(params, dict):
        unknown = sorted(set(params) - set(PARAMETERS))
        if unknown:
            raise ValueError("unknown parameter(s): " + ", ".join(unknown))
        values = []
        for name in PARAMETERS:
            if name in params:
                values.append(params[name])
            elif DEFAULTS.get(name) is not None:
                values.append(DEFAULTS[name])
            else:
                raise ValueError("no value for the parameter " + name)
        return values
    values = list(params)
    if len(values) != len(PARAMETERS):
        raise ValueError("expected %d parameter values" % len(PARAMETERS))
    return values


def _points(x):
    x = np.asarray(x, dtype=float)
    if x.shape[-1:] != (3,):
        raise ValueError("x must have shape (..., 3)")
    return x
'''


def _np_function(name: str, doc: str, named: dict, data: _Data, names: dict, outputs: list) -> list[str]:
    """A NumPy function ``name(x, params=None)`` returning a dict of arrays; ``outputs`` is a list of
    (result name, key prefix, trailing shape, symmetric pairs?)."""
    from gravicat.export.codegen import cse
    from gravicat.export.python_code import _printer, _statement

    nz = _nonzero(named)
    temps, reduced = cse(nz, prefix="_c") if nz else ([], {})
    free = set()
    for _, e in temps:
        free |= e.free_symbols
    for e in reduced.values():
        free |= e.free_symbols
    tnames = {t: str(t) for t, _ in temps}
    printer = _printer({**names, **tnames})
    lines = ["", "", f"def {name}(x, params=None):", f'    """{doc}"""', "    x = _points(x)",
             "    shape = x.shape[:-1]", "    _p = _parameters(params)"]
    for k, c in enumerate(data.coords):
        if c in free:
            lines.append(f"    {names[c]} = x[..., {k}]")
    for k, p in enumerate(data.runtime):
        if p in free:
            lines.append(f"    {names[p]} = np.asarray(_p[{k}], dtype=float)")
    for sym, e in temps:
        lines += _statement(str(sym), printer.doprint(e))
    result = []
    for out, tag, tail, symmetric in outputs:
        lines.append(f"    {out} = np.zeros(shape + {tail!r})")
        for key, e in reduced.items():
            if key[0] != tag:
                continue
            idx = key[1:]
            slots = [idx]
            if symmetric and idx[0] != idx[1]:
                slots.append((idx[1], idx[0]) + idx[2:])
            value = printer.doprint(e)
            for s in slots:
                where = ", ".join(["..."] + [str(i) for i in s])
                lines += _statement(f"{out}[{where}]", f"np.broadcast_to({value}, shape)")
        result.append(f'"{out}": {out}')
    lines.append("    return {")
    lines += [f"        {r}," for r in result]
    lines.append("    }")
    return lines


class NumPyInitialDataExporter:
    name = "initial-data-numpy"
    version = "1"
    suffix = ".py"

    def export(self, document: MetricDocument, context: ExportContext) -> str:
        from gravicat.export.codegen import identifiers, wrap
        from gravicat.export.escape import python_comment, python_docstring, python_literal

        data = _prepare(document, context, self)
        syms = list(data.coords) + list(data.runtime)
        ids = identifiers([str(s) for s in syms], _PY_RESERVED)
        names = {s: ids[str(s)] for s in syms}
        out = []
        for line in data.header + ["Generated file: regenerate it with 'gravicat export' rather than editing it."]:
            for part in wrap(python_comment(line), 86, "    "):
                out.append(f"# {part}".rstrip())
        out += ['"""3+1 initial data of one chart, for numerical relativity (numpy only).', "",
                *wrap(python_docstring(f"{document.title} ({document.id}), chart {data.chart}."),
                      88, ""), "",
                "x has shape (..., 3), spatial coordinates in the order of COORDINATES; params is a mapping",
                "{name: value} or a sequence in the order of PARAMETERS (None: DEFAULTS).",
                "initial_data(x, params) returns lapse (...), shift beta^i (..., 3), spatial_metric",
                "gamma_ij (..., 3, 3) and extrinsic_curvature K_ij (..., 3, 3); initial_data_derivatives",
                "returns d_lapse[..., k] = d_k alpha, d_shift[..., i, k] = d_k beta^i, d_spatial_metric",
                "[..., i, j, k] = d_k gamma_ij and d_extrinsic_curvature[..., i, j, k] = d_k K_ij.",
                '"""', "", "import numpy as np", "",
                f"ENTRY = {python_literal(document.id)}",
                f"TITLE = {python_literal(document.title)}",
                f"COORDINATES = {python_literal(tuple(str(c) for c in data.coords))}",
                f"PARAMETERS = {python_literal(tuple(str(p) for p in data.runtime))}",
                f"DEFAULTS = {python_literal({str(p): d for p, d in zip(data.runtime, data.defaults, strict=True)})}",
                f"TIME = {python_literal(None if data.time is None else str(data.time))}"]
        out += _NP_HELPERS.splitlines()
        fields = {("lapse",): data.fields[("alpha",)]}
        fields.update({("shift", k[1]): v for k, v in data.fields.items() if k[0] == "beta"})
        fields.update({("spatial_metric",) + k[1:]: v for k, v in data.fields.items() if k[0] == "gamma"})
        fields.update({("extrinsic_curvature",) + k[1:]: v for k, v in data.fields.items() if k[0] == "K"})
        out += _np_function("initial_data", "Lapse, shift, spatial metric and extrinsic curvature at the points x.",
                            fields, data, names,
                            [("lapse", "lapse", (), False), ("shift", "shift", (3,), False),
                             ("spatial_metric", "spatial_metric", (3, 3), True),
                             ("extrinsic_curvature", "extrinsic_curvature", (3, 3), True)])
        derived = {("d_" + k[0],) + k[1:]: v for k, v in _derivatives(_Data(
            data.coords, data.runtime, data.defaults, data.time, fields, [], data.prefix, data.chart)).items()}
        out += _np_function("initial_data_derivatives", "First spatial derivatives of the fields (last index k: d_k).",
                            derived, data, names,
                            [("d_lapse", "d_lapse", (3,), False), ("d_shift", "d_shift", (3, 3), False),
                             ("d_spatial_metric", "d_spatial_metric", (3, 3, 3), True),
                             ("d_extrinsic_curvature", "d_extrinsic_curvature", (3, 3, 3), True)])
        return "\n".join(out) + "\n"


_PY_RESERVED = frozenset({"np", "x", "shape", "params", "ENTRY", "TITLE", "COORDINATES", "PARAMETERS", "DEFAULTS",
                          "TIME", "lapse", "shift", "spatial_metric", "extrinsic_curvature", "d_lapse", "d_shift",
                          "d_spatial_metric", "d_extrinsic_curvature", "initial_data", "initial_data_derivatives",
                          "_parameters", "_points", "_p", "_"}) | frozenset(__import__("keyword").kwlist)


# --------------------------------------------------------------------------- C99


class CInitialDataExporter:
    name = "initial-data-c"
    version = "1"
    suffix = ".h"

    def export(self, document: MetricDocument, context: ExportContext) -> str:
        from gravicat.export.codegen import cse, identifiers, wrap
        from gravicat.export.escape import c_comment, c_string
        from gravicat.plugins.c_export import C_RESERVED, _printer, _statement

        data = _prepare(document, context, self)
        p, upper = data.prefix, data.prefix.upper()
        syms = list(data.coords) + list(data.runtime)
        ids = identifiers([str(s) for s in syms], C_RESERVED | {p + s for s in ("_initial_data", "_finite")})
        names = {s: ids[str(s)] for s in syms}

        def body(named, slot_of):
            nz = _nonzero(named)
            temps, reduced = cse(nz, prefix="_c") if nz else ([], {})
            printer = _printer({**names, **{t: str(t) for t, _ in temps}}, p)
            free = set()
            for _, e in temps:
                free |= e.free_symbols
            for e in reduced.values():
                free |= e.free_symbols
            lines = []
            for k, c in enumerate(data.coords):
                if c in free:
                    lines.append(f"    const double {names[c]} = _x[{k}];")
            for k, q in enumerate(data.runtime):
                if q in free:
                    lines.append(f"    const double {names[q]} = _p[{k}];")
            lines += ["    (void)_x;", "    (void)_p;"]
            for sym, e in temps:
                lines += _statement(f"const double {sym}", printer.doprint(e))
            for key, e in reduced.items():
                for slot in slot_of(key):
                    lines += _statement(slot, printer.doprint(e))
            return lines, printer.uses_lambertw

        def field_slots(key, d=""):
            tag, idx = key[0], key[1:]
            if tag == "alpha":
                return [f"_dalpha[{idx[0]}]" if d else "*_alpha"]
            if tag == "beta":
                return [f"_{d}beta[" + "][".join(map(str, idx)) + "]"]
            i, j, rest = idx[0], idx[1], idx[2:]
            tail = "".join(f"[{r}]" for r in rest)
            name = "_" + d + tag
            return [f"{name}[{i}][{j}]{tail}"] + ([f"{name}[{j}][{i}]{tail}"] if i != j else [])

        values, lw1 = body(data.fields, field_slots)
        derivs, lw2 = body(_derivatives(data), lambda key: field_slots(key, "d"))
        out = ["/*"]
        for line in data.header + ["Generated file: regenerate it with 'gravicat export' rather than editing it."]:
            for part in wrap(c_comment(line), 97, "    "):
                out.append(f" * {part}".rstrip())
        out += [" *", " * int P_initial_data(x[3], p, *alpha, beta[3], gamma[3][3], K[3][3]);",
                " * int P_initial_data_derivatives(x[3], p, dalpha[3], dbeta[3][3], dgamma[3][3][3], dK[3][3][3]);",
                " *   (d...[...][k] = d_k of the field, k over the spatial coordinates)",
                " * int P_initial_data_points(n, x[n*3], p, alpha[n], beta[n*3], gamma[n*9], K[n*9]);",
                " * P is the prefix below; p holds the runtime parameters in the order of P_PARAMETERS (NULL when",
                " * there are none). Return 0 on success, 1 when a value is not finite (a point off the slice).",
                " */"]
        guard = f"GRAVICAT_ID_{upper}_H"
        out += [f"#ifndef {guard}", f"#define {guard}", "", "#include <math.h>", "#include <stddef.h>", "",
                "#ifndef GRAVICAT_API", "#define GRAVICAT_API static inline", "#endif", "",
                f"#define {upper}_ID_ENTRY {c_string(document.id)}",
                f"#define {upper}_ID_COORDINATES {{{', '.join(c_string(str(c)) for c in data.coords)}}}",
                f"#define {upper}_ID_NUM_PARAMETERS {len(data.runtime)}"]
        if data.runtime:
            out.append(f"#define {upper}_ID_PARAMETERS {{{', '.join(c_string(str(q)) for q in data.runtime)}}}")
            if all(d is not None for d in data.defaults):
                out.append(f"#define {upper}_ID_DEFAULTS {{{', '.join(repr(d) for d in data.defaults)}}}")
        if lw1 or lw2:
            from gravicat.plugins.c_export import _LAMBERTW

            out += _LAMBERTW.format(p=p).splitlines()
        sig = "const double _x[3], const double *_p"
        out += ["", f"static inline int {p}_finite(const double *_v, int _n)", "{", "    int _i;",
                "    for (_i = 0; _i < _n; ++_i) {", "        if (!isfinite(_v[_i])) {", "            return 1;",
                "        }", "    }", "    return 0;", "}",
                "", "/* lapse alpha, shift beta^i, spatial metric gamma_ij, extrinsic curvature K_ij */",
                f"GRAVICAT_API int {p}_initial_data({sig}, double *_alpha, double _beta[3], double _gamma[3][3], "
                "double _K[3][3])", "{", "    int _i;", "    *_alpha = 0.0;",
                "    for (_i = 0; _i < 9; ++_i) {", "        if (_i < 3) {", "            _beta[_i] = 0.0;",
                "        }", "        (&_gamma[0][0])[_i] = 0.0;", "        (&_K[0][0])[_i] = 0.0;", "    }"]
        out += values
        out += ["    return isfinite(*_alpha) ? (" f"{p}_finite(_beta, 3) || {p}_finite(&_gamma[0][0], 9) || "
                f"{p}_finite(&_K[0][0], 9)) : 1;", "}",
                "", "/* first spatial derivatives: last index k = d_k */",
                f"GRAVICAT_API int {p}_initial_data_derivatives({sig}, double _dalpha[3], double _dbeta[3][3], "
                "double _dgamma[3][3][3], double _dK[3][3][3])", "{", "    int _i;",
                "    for (_i = 0; _i < 27; ++_i) {", "        if (_i < 3) {", "            _dalpha[_i] = 0.0;",
                "        }", "        if (_i < 9) {", "            (&_dbeta[0][0])[_i] = 0.0;", "        }",
                "        (&_dgamma[0][0][0])[_i] = 0.0;", "        (&_dK[0][0][0])[_i] = 0.0;", "    }"]
        out += derivs
        out += [f"    return {p}_finite(_dalpha, 3) || {p}_finite(&_dbeta[0][0], 9) || "
                f"{p}_finite(&_dgamma[0][0][0], 27) || {p}_finite(&_dK[0][0][0], 27);", "}",
                "", "/* n points x[3*m + i]; outputs alpha[m], beta[3*m + i], gamma[9*m + 3*i + j], K[9*m + 3*i + j];",
                "   returns the number of points whose values are not finite */",
                f"GRAVICAT_API size_t {p}_initial_data_points(size_t _n, const double *_x, const double *_p, "
                "double *_alpha, double *_beta, double *_gamma, double *_K)", "{", "    size_t _m, _bad = 0;",
                "    for (_m = 0; _m < _n; ++_m) {",
                f"        _bad += (size_t){p}_initial_data(_x + 3 * _m, _p, _alpha + _m, _beta + 3 * _m,",
                "                                (double (*)[3])(_gamma + 9 * _m), (double (*)[3])(_K + 9 * _m)) != 0;",
                "    }", "    return _bad;", "}", "", f"#endif /* {guard} */", ""]
        return "\n".join(out)


@hookimpl
def register_exporters():
    return [NumPyInitialDataExporter(), CInitialDataExporter()]
