"""Built-in exporter: the line element and parameter ranges as a LaTeX fragment (amsmath ``align``).

The fragment holds one numbered equation (the line element, written with the chart's own
definitions such as Sigma and Delta), the definitions it uses, the chart's domain and the
parameter ranges (or the values fixed with ``params``). With ``christoffel`` in the context a
second ``align`` lists the nonzero Christoffel symbols Gamma^a_bc (b <= c; they are symmetric
in b and c), computed exactly and factored, with the definitions put back where a factor is
literally one of them. Every line of the header is a ``%`` comment; catalogue text in it goes
through :func:`gravicat.export.escape.latex_comment` (no line break survives, backslashes written as
text), and the labels are built from the entry and chart slugs (``[a-z0-9-]`` only).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import ExportContext
    from gravicat.format.metricfile import MetricDocument

LINE_BUDGET = 110  # characters of LaTeX source per displayed line of the line element
_OPS = {"<": "<", "<=": r"\leq", ">": ">", ">=": r"\geq"}


def _latex(expr) -> str:
    import sympy

    return sympy.latex(expr)


def _coefficient_term(coef, differential: str) -> tuple[bool, str]:
    """(negative?, body) of one term ``coef * differential``."""
    import sympy

    negative = coef.could_extract_minus_sign()
    c = -coef if negative else coef
    if c == 1:
        return negative, differential
    tex = _latex(c)
    if isinstance(c, sympy.Add):
        tex = rf"\left({tex}\right)"
    return negative, rf"{tex} \, {differential}"


def _pack(terms: list[tuple[bool, str]]) -> list[str]:
    """Join signed terms into display lines of about LINE_BUDGET characters."""
    lines, cur = [], ""
    for i, (neg, body) in enumerate(terms):
        if i == 0:
            piece = f"-{body}" if neg else body
        else:
            piece = f" {'-' if neg else '+'} {body}"
        if cur and len(cur) + len(piece) > LINE_BUDGET:  # continuation lines start with their sign
            lines.append(cur)
            cur = piece.strip()
        else:
            cur += piece
    lines.append(cur)
    return lines


class LatexExporter:
    name = "latex"
    version = "2"
    suffix = ".tex"

    def export(self, document: MetricDocument, context: ExportContext) -> str:
        from gravicat.checks import ExportContext
        from gravicat.export.codegen import DEFAULT_BUDGET, christoffel_symbols, prepare

        context = ExportContext.coerce(context)
        prep = prepare(document, context, self, numeric=False)
        lay = prep.layered
        n = prep.n
        coords = [_latex(c) for c in prep.coords]
        g = lay.metric
        terms = []
        for a in range(n):
            for b in range(a, n):
                if g[a, b] == 0:
                    continue
                if a == b:
                    diff = rf"\mathrm{{d}}{coords[a]}^{{2}}"
                    terms.append(_coefficient_term(g[a, a], diff))
                else:
                    diff = rf"\mathrm{{d}}{coords[a]} \, \mathrm{{d}}{coords[b]}"
                    terms.append(_coefficient_term(2 * g[a, b], diff))
        if not terms:
            terms = [(False, "0")]
        label = f"eq:{document.id}:{prep.chart}"
        rows = []  # align rows without the trailing \\
        lines = _pack(terms)
        for i, line in enumerate(lines):
            lhs = r"\mathrm{d}s^{2} &= " if i == 0 else r"&\quad "
            tag = rf" \label{{{label}}}" if i == len(lines) - 1 else r" \nonumber"
            rows.append(f"{lhs}{line}{tag}")
        used = set()
        for expr in g:
            used |= expr.free_symbols
        definitions = []
        for sym, value in reversed(lay.defines):
            if sym in used:
                definitions.append((sym, value))
                used |= value.free_symbols
        for sym, value in reversed(definitions):
            rows.append(f"{_latex(sym)} &= {_latex(value)}, \\nonumber")
        base = f"charts.{prep.chart}"
        domain = [self._chain(lay.relations(text, document.source, f"{base}.domain[{i}]"), prep.fixed)
                  for i, text in enumerate(prep.domain_text)]
        params = []
        for name, p in document.data["parameters"].items():
            sym = lay.env[name]
            if sym in prep.fixed:
                params.append(f"{_latex(sym)} = {_latex(prep.fixed[sym])}")
            elif p.get("range"):
                params.append(self._chain(lay.relations(p["range"], document.source, f"parameters.{name}.range"),
                                          {}))
            else:
                params.append(rf"{_latex(sym)} \text{{ {', '.join(p['assume'])}}}")
        tail = []
        if domain:
            tail.append(r"&\text{domain: } " + r", \quad ".join(domain))
        if params:
            tail.append(r"&\text{parameters: } " + r", \quad ".join(params))
        for i, line in enumerate(tail):
            rows.append(f"{line}{'.' if i == len(tail) - 1 else ','} \\nonumber")
        from gravicat.export.escape import latex_comment

        out = [f"% {latex_comment(line)}".rstrip() for line in prep.header_lines()]
        out.append("% Requires \\usepackage{amsmath}.")
        newline = " \\\\"
        out += [r"\begin{align}", *(f"  {row}{newline if i < len(rows) - 1 else ''}" for i, row in enumerate(rows)),
                r"\end{align}"]
        if context.christoffel:
            out += self._christoffel(prep, float(context.budget or DEFAULT_BUDGET), christoffel_symbols)
        return "\n".join(out) + "\n"

    @staticmethod
    def _chain(parts, fixed) -> str:
        pieces = [_latex(parts[0][0].xreplace(fixed))]
        for _left, op, right in parts:
            pieces.append(_OPS[op])
            pieces.append(_latex(right.xreplace(fixed)))
        return " ".join(pieces)

    @staticmethod
    def _christoffel(prep, budget, compute) -> list[str]:
        import dataclasses

        import sympy

        spec = dataclasses.replace(prep.spec, metric=prep.metric, params=prep.free, domain=prep.domain,
                                   param_ranges=(), defaults={}, potential=None, fluid=None, null_dust=None,
                                   observers={}, transforms={}, invariants={}, limits=(), flat_when=(),
                                   cosmological_constant=None)
        symbols = compute(spec, budget)
        lay = prep.layered
        back = []  # (expanded value, symbol), latest definition first
        for sym, _value in reversed(lay.defines):
            back.append((lay.expand(sym), sym))
        coords = [_latex(c) for c in prep.coords]
        lines = [f"% nonzero Christoffel symbols Gamma^a_bc (b <= c), chart {prep.chart}", r"\begin{align}"]
        items = sorted(symbols.items())
        if not items:
            lines.append(r"  &\text{all Christoffel symbols vanish in this chart.} \nonumber")
        for i, ((a, b, c), expr) in enumerate(items):
            for value, sym in back:
                expr = expr.xreplace({value: sym})
            expr = sympy.sympify(expr)
            sep = r", \nonumber \\" if i < len(items) - 1 else r". \nonumber"
            lines.append(rf"  \Gamma^{{{coords[a]}}}{{}}_{{{coords[b]} {coords[c]}}} &= {_latex(expr)}{sep}")
        lines.append(r"\end{align}")
        return lines


@hookimpl
def register_exporters():
    return [LatexExporter()]
