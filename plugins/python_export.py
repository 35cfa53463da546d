"""Built-in exporter: a self-contained Python module (numpy only) with the metric functions.

The generated module has, vectorised over leading axes (``x`` of shape ``(..., n)``):
``metric(x, params)`` -> ``(..., n, n)``, ``inverse_metric`` -> ``(..., n, n)``,
``metric_derivatives`` -> ``(..., n, n, n)`` with ``dg[..., c, a, b] = d_c g_ab``,
``christoffel`` -> ``(..., n, n, n)`` with ``Gamma[..., a, b, c] = Gamma^a_bc``, and
``domain_margins`` / ``in_domain``; plus the coordinate names, parameter names, defaults,
ranges and domain as data. The metric and its derivatives are printed from sympy with common
subexpressions eliminated; the inverse is closed-form for metrics made of 1x1 and 2x2 blocks,
otherwise numeric (LU); Christoffel symbols are contracted numerically from the inverse and
the derivatives.
"""

from __future__ import annotations

from gravicat import hookimpl

WIDTH = 88  # generated lines stay within the common default line length

_LAMBERTW = '''

def _lambertw(z):
    """Principal branch W0 of the Lambert W function (z >= -1/e), Halley's iteration."""
    z = np.asarray(z, dtype=float)
    with np.errstate(all="ignore"):
        p = np.sqrt(np.maximum(2.0 * (np.e * z + 1.0), 0.0))
        near = -1.0 + p - p * p / 3.0 + 11.0 / 72.0 * p**3
        big = np.log(np.maximum(z, 3.0))
        far = big - np.log(big) + np.log(big) / big
        mid = np.log1p(np.maximum(z, -0.25))
        w = np.where(z < -0.25, near, np.where(z < 3.0, mid, far))
        for _ in range(12):
            ew = np.exp(w)
            f = w * ew - z
            step = f / (ew * (w + 1.0) - (w + 2.0) * f / (2.0 * w + 2.0))
            w = np.where((f == 0) | ~np.isfinite(step), w, w - step)
        return np.where(z < -1.0 / np.e, np.nan, w)
'''


def _printer(names):
    from sympy.printing.numpy import NumPyPrinter

    class Printer(NumPyPrinter):
        uses_lambertw = False

        def _module_format(self, fqn, register=True):
            if fqn.startswith("numpy."):
                return "np." + fqn[len("numpy."):]
            return super()._module_format(fqn, register)

        def _print_Symbol(self, expr):
            return names.get(expr, str(expr))

        def _print_LambertW(self, expr):
            if len(expr.args) != 1:
                return self._print_not_supported(expr)
            self.uses_lambertw = True
            return f"_lambertw({self._print(expr.args[0])})"

    return Printer({"fully_qualified_modules": True})


def _statement(lhs: str, rhs: str, indent: str = "    ") -> list[str]:
    from gravicat.export.codegen import wrap

    line = f"{indent}{lhs} = {rhs}"
    if len(line) <= WIDTH:
        return [line]
    inner = indent + "    "
    body = wrap(rhs, WIDTH - len(inner), "")
    return [f"{indent}{lhs} = ("] + [inner + b for b in body] + [f"{indent})"]


class PythonExporter:
    name = "python"
    version = "1"
    suffix = ".py"

    def export(self, document, context) -> str:
        import keyword

        import sympy

        from gravicat.export.codegen import identifiers, numeric_parts, prepare, relation_margin, used_symbols, wrap

        prep = prepare(document, context, self, numeric=True)
        parts = numeric_parts(prep)
        n = prep.n
        internal = {"np", "x", "params", "l", "O", "I"}  # I, O, l: ambiguous names (E741)
        reserved = set(keyword.kwlist) | set(keyword.softkwlist) | internal
        defined = tuple(d for d, _ in prep.layered.defines)
        ids = identifiers([str(s) for s in prep.coords + prep.free + defined], reserved)
        names = {s: ids[str(s)] for s in prep.coords + prep.free + defined}
        printer = _printer(names)
        coords, free = prep.coords, prep.free

        def block(named, target_of, results: list[tuple[str, str]]) -> list[str]:
            temps, reduced = parts.program(named)
            lines = ["    _x = _coordinates(x)", "    _p = _parameters(params)"]
            for s in used_symbols(temps, reduced, coords):
                lines.append(f"    {names[s]} = _x[..., {coords.index(s)}]")
            for s in used_symbols(temps, reduced, free):
                lines.append(f"    {names[s]} = _p[{free.index(s)}]")
            for result, shape_suffix in results:
                lines.append(f"    {result} = np.zeros(_shape(_x, _p) + {shape_suffix})")
            for sym, expr in temps:
                lines += _statement(str(sym), printer.doprint(expr))
            for key, expr in reduced.items():
                lines += _statement(target_of(key), printer.doprint(expr))
            return lines

        def sym2(a, b):
            return f"_g[..., {a}, {b}]" if a == b else f"_g[..., {a}, {b}] = _g[..., {b}, {a}]"

        nn, nnn = f"({n}, {n})", f"({n}, {n}, {n})"
        metric_body = block(parts.metric, lambda k: sym2(*k), [("_g", nn)])
        joint = {("g",) + k: v for k, v in parts.metric.items()}
        joint.update({("d",) + k: v for k, v in parts.derivatives.items()})

        def joint_target(key):
            if key[0] == "g":
                return sym2(key[1], key[2])
            c, a, b = key[1:]
            return f"_dg[..., {c}, {a}, {b}]" if a == b else f"_dg[..., {c}, {a}, {b}] = _dg[..., {c}, {b}, {a}]"

        joint_body = block(joint, joint_target, [("_g", nn), ("_dg", nnn)])
        inverse_body = jet_body = None
        if parts.inverse is not None:
            inverse_body = block(parts.inverse, lambda k: sym2(*k).replace("_g[", "_gi["), [("_gi", nn)])
            jet = dict(joint)
            jet.update({("i",) + k: v for k, v in parts.inverse.items()})

            def jet_target(key):
                return sym2(*key[1:]).replace("_g[", "_gi[") if key[0] == "i" else joint_target(key)

            jet_body = block(jet, jet_target, [("_g", nn), ("_dg", nnn), ("_gi", nn)])
        margins, strict = [], []
        for rel in prep.domain:
            m, s = relation_margin(rel)
            margins.append(m)
            strict.append(s)
        margin_body = block({(i,): m for i, m in enumerate(margins)}, lambda k: f"_m[..., {k[0]}]",
                            [("_m", f"({len(margins)},)")])

        prov = prep.provenance
        defaults = {str(p): prep.spec.defaults[p] for p in free if p in prep.spec.defaults}
        header = prep.header_lines() + [
            f"inverse metric: {parts.inverse_method}; Christoffel symbols contracted numerically",
            "Generated file: regenerate it with 'gravicat export' rather than editing it."]
        out = _comments(header)
        out += [
            '"""Metric functions of one chart, for numerical work (numpy only).',
            "",
            *wrap(f"{document.title} ({document.id}), chart {prep.chart}.", WIDTH, ""),
            "",
            f"x has shape (..., {n}), coordinates in the order of COORDINATES; params is a mapping",
            "{name: value} or a sequence in the order of PARAMETERS (None: DEFAULTS); values",
            "broadcast against x[..., 0]. metric and inverse_metric return (..., n, n);",
            "metric_derivatives returns dg[..., c, a, b] = d_c g_ab and christoffel",
            "Gamma[..., a, b, c] = Gamma^a_bc, both of shape (..., n, n, n).",
            '"""',
            "",
            "import numpy as np",
            "",
            f"ENTRY = {document.id!r}",
            f"TITLE = {document.title!r}",
            f"CHART = {prep.chart!r}",
            f"REVISION = {prov.revision!r}",
            f"STATUS = {prov.status!r}",
            f"DATE = {prov.date!r}",
            f"DIMENSION = {n}",
            f"COORDINATES = {tuple(str(c) for c in coords)!r}",
            f"PARAMETERS = {tuple(str(p) for p in free)!r}",
            f"FIXED_PARAMETERS = {{{', '.join(f'{str(k)!r}: {float(v)!r}' for k, v in prep.fixed.items())}}}",
            f"DEFAULTS = {{{', '.join(f'{k!r}: {float(v)!r}' for k, v in defaults.items())}}}",
            f"PARAMETER_RANGES = {tuple(p['range'] for p in document.data['parameters'].values() if 'range' in p)!r}",
            f"DOMAIN = {tuple(str(sympy.sstr(r)) for r in prep.domain)!r}",
            f"INVERSE = {parts.inverse_method!r}",
            "",
            f"_STRICT = np.array({strict!r}, dtype=bool)",
        ]
        out = [_long_constant(ln) if len(ln) > WIDTH and ln[:1].isupper() and " = " in ln else ln for ln in out]
        out += _HELPERS.splitlines()
        out += ["", "", "def metric(x, params=None):", '    """The metric g_ab, shape (..., n, n)."""']
        out += metric_body + ["    return _g"]
        out += ["", "", "def _metric_and_derivatives(x, params):"] + joint_body + ["    return _g, _dg"]
        out += ["", "", "def metric_derivatives(x, params=None):",
                '    """First derivatives dg[..., c, a, b] = d_c g_ab, shape (..., n, n, n)."""',
                "    return _metric_and_derivatives(x, params)[1]"]
        out += ["", "", "def inverse_metric(x, params=None):", '    """The inverse metric g^ab, shape (..., n, n)."""']
        if inverse_body is not None:
            out += inverse_body + ["    return _gi"]
        else:
            out += ["    return np.linalg.inv(metric(x, params))"]
        if jet_body is not None:
            out += ["", "", "def _jet(x, params):"] + jet_body + ["    return _g, _dg, _gi"]
        out += ["", "", "def christoffel(x, params=None):",
                '    """Gamma[..., a, b, c] = Gamma^a_bc = g^ad (d_b g_dc + d_c g_db - d_d g_bc) / 2."""']
        out += (["    _g, _dg, _gi = _jet(x, params)"] if jet_body is not None
                else ["    _g, _dg = _metric_and_derivatives(x, params)", "    _gi = np.linalg.inv(_g)"])
        out += ['    _low = np.einsum("...bdc->...dbc", _dg) + np.einsum("...cdb->...dbc", _dg) - _dg',
                '    return 0.5 * np.einsum("...ad,...dbc->...abc", _gi, _low)']
        out += ["", "", "def domain_margins(x, params=None):",
                '    """Margins of the DOMAIN inequalities (positive inside), shape (..., k)."""']
        out += margin_body + ["    return _m"]
        out += ["", "", "def in_domain(x, params=None):",
                '    """True where x satisfies every DOMAIN inequality."""',
                "    _m = domain_margins(x, params)",
                "    return np.all(np.where(_STRICT, _m > 0, _m >= 0), axis=-1)"]
        text = "\n".join(out) + "\n"
        if printer.uses_lambertw:
            text += _LAMBERTW
        return text


def _comments(lines: list[str]) -> list[str]:
    """``# `` comment lines, wrapped to WIDTH."""
    from gravicat.export.codegen import wrap

    out = []
    for line in lines:
        for part in wrap(line, WIDTH - 2, "    "):
            out.append(f"# {part}".rstrip())
    return out


def _long_constant(line: str) -> str:
    """Split a long ``NAME = (...)`` data line over several lines (tuples/dicts of short items)."""
    name, _, value = line.partition(" = ")
    opener, closer = value[0], value[-1]
    if opener not in "({" or closer not in ")}":
        return line
    import ast

    items = ast.literal_eval(value)
    if isinstance(items, dict):
        body = [f"    {k!r}: {v!r}," for k, v in items.items()]
    else:
        body = [f"    {v!r}," for v in items]
    return "\n".join([f"{name} = {opener}", *body, closer])


_HELPERS = '''

def _coordinates(x):
    x = np.asarray(x, dtype=float)
    if x.shape[-1:] != (DIMENSION,):
        raise ValueError(f"x must have shape (..., {DIMENSION}), order {COORDINATES}")
    return x


def _parameters(params):
    if params is None:
        if len(DEFAULTS) != len(PARAMETERS):
            raise ValueError(f"give params: values for {PARAMETERS}")
        params = DEFAULTS
    if hasattr(params, "keys"):
        for name in params:
            fixed = FIXED_PARAMETERS.get(name)
            if fixed is not None and params[name] != fixed:
                raise ValueError(f"{name} was fixed to {fixed} at export")
            if name not in PARAMETERS and name not in FIXED_PARAMETERS:
                raise ValueError(f"unknown parameter {name!r} (use {PARAMETERS})")
        missing = [name for name in PARAMETERS if name not in params]
        if missing:
            raise ValueError(f"missing parameter(s) {missing}")
        params = [params[name] for name in PARAMETERS]
    values = tuple(np.asarray(v, dtype=float) for v in params)
    if len(values) != len(PARAMETERS):
        raise ValueError(f"expected {len(PARAMETERS)} parameter values {PARAMETERS}")
    return values


def _shape(x, p):
    return np.broadcast_shapes(x.shape[:-1], *(np.shape(v) for v in p))'''


@hookimpl
def register_exporters():
    return [PythonExporter()]
