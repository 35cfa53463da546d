"""What every code exporter shares: options, provenance, and the prepared expressions.

The exporter plugins (``latex``, ``python``, ``c``) only print; this module
does the rest, so every target says the same thing about where a file came
from and refuses the same things:

* :func:`~gravicat.format.assign.parse_assignments` (re-exported here) reads ``NAME=EXPR,NAME=EXPR``
  option text (``--set M=1,a=0.9``, ``--from r=10,theta=pi/2``) through the whitelist parser;
* :func:`fixed_parameters` turns the ``params`` of an export context into exact
  values, checked against the declared assumptions and ranges;
* :class:`Provenance` is the header of every generated file (entry, chart,
  revision, verification status, date) and :meth:`Provenance.require_verified`
  refuses an unverified or failed revision unless the context allows it;
* :func:`prepare` builds the chart with the fixed parameters substituted, and
  :func:`numeric_parts` gives what numeric code needs: the metric, its first
  derivatives (symbolic, by differentiation only), and a closed-form inverse
  when the metric splits into blocks of size one or two (else the generated
  code inverts numerically), with :func:`cse` to share subexpressions.

The export context every exporter receives is a :class:`gravicat.checks.ExportContext` (frozen;
fields: revision, checks, status, chart, params, allow_unverified, date, source, christoffel,
budget; documented there). A mapping with those keys is still accepted (:meth:`ExportContext.coerce`).
Catalogue text reaches generated code only through :mod:`gravicat.export.escape`.

Imports stay light at module level: sympy is imported inside the functions.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from gravicat.checks import ExportContext
from gravicat.errors import CatalogError, CheckFailed, InputError
from gravicat.export.numeric import (  # noqa: F401  (re-exported: the exporters import them from here)
    NumericParts,
    cse,
    identifiers,
    numeric_parts,
    regularise,
    relation_margin,
    used_symbols,
    wrap,
)
from gravicat.export.parameters import (  # noqa: F401  (re-exported)
    check_parameter_values,
    fixed_parameters,
    numeric_parameters,
)

# The NAME=VALUE parser lives in the format room (one parser for every command); these names stay
# importable from here for older callers.
from gravicat.format.assign import parse_assignments, real_number, split_assignments  # noqa: F401
from gravicat.format.charts import Layered, layered_chart  # noqa: F401  (the one chart builder)

#: statuses under which a revision may be exported without ``allow_unverified``
ACCEPTED = ("pass", "skipped", "inconclusive")
DEFAULT_BUDGET = 60.0


def conventions(n: int) -> str:
    """The conventions line of a header for an ``n``-dimensional chart: Lorentzian, mostly plus
    (one minus sign and n - 1 plus signs, what the ``signature`` verifier checks), G = c = 1."""
    return f"signature ({','.join(['-'] + ['+'] * (n - 1))}), G = c = 1"


# --------------------------------------------------------------------------- provenance


def _worst(statuses) -> str:
    from gravicat.checks import worst

    statuses = list(statuses)
    return worst(statuses).value if statuses else "unverified"


@dataclass
class Provenance:
    """Where a generated file comes from; :meth:`lines` is its header (comment syntax added by the target)."""

    entry: str
    title: str
    chart: str
    revision: str
    status: str  # pass | skipped | inconclusive | fail | error | unverified (whole revision)
    chart_status: str  # the same, over this chart's checks only
    counts: dict[str, int]
    problems: list[str]  # "chart/check: status" for every check that did not pass or skip
    date: str
    generator: str
    allowed_unverified: bool = False
    source: str | None = None
    extra: list[str] = field(default_factory=list)

    @property
    def verified(self) -> bool:
        return self.status in ACCEPTED

    @property
    def status_text(self) -> str:
        if self.status == "unverified":
            return "unverified (no checks stored for this revision)"
        n = sum(self.counts.values())
        counts = ", ".join(f"{v} {k}" for k, v in sorted(self.counts.items()))
        return f"{self.status} ({n} stored checks: {counts}; this chart: {self.chart_status})"

    def require_verified(self) -> None:
        """Refuse a failed or unverified revision unless the context allowed it."""
        if self.verified or self.allowed_unverified:
            return
        where = f"{self.entry}@{self.revision[:12]}"
        if self.status == "unverified":
            raise InputError(where, None, "no checks have been run on this revision; run 'gravicat verify "
                                          f"{self.entry}' first, or pass --allow-unverified to export anyway")
        shown = ", ".join(self.problems[:3]) + (", ..." if len(self.problems) > 3 else "")
        raise CheckFailed(f"{where}: this revision {'failed' if self.status == 'fail' else 'has errors in'} its "
                          f"checks ({shown}); pass --allow-unverified to export anyway")

    def lines(self) -> list[str]:
        out = [
            f"gravicat export of {self.title} ({self.entry}), chart {self.chart}",
            f"revision:  {self.revision}",
            f"status:    {self.status_text}",
            f"date:      {self.date}",
            f"generator: {self.generator}",
        ]
        if self.source:
            out.append(f"source:    {self.source}")
        out.extend(self.extra)
        if not self.verified:
            what = ("was never verified" if self.status == "unverified"
                    else f"did not pass its checks ({', '.join(self.problems[:5])})")
            out.append(f"WARNING: exported with --allow-unverified: this revision {what}; do not rely on it.")
        return out


def provenance(document, context: ExportContext | Mapping[str, Any], exporter, chart: str) -> Provenance:
    """The header data of an export (raises nothing; call :meth:`Provenance.require_verified`)."""
    from gravicat import __version__

    context = ExportContext.coerce(context)
    checks = list(context.checks)
    status = context.status or _worst(c["status"] for c in checks)
    chart_checks = [c["status"] for c in checks if c.get("chart") in (None, chart)]
    counts: dict[str, int] = {}
    for c in checks:
        counts[c["status"]] = counts.get(c["status"], 0) + 1
    problems = [f"{c.get('chart', '?')}/{c['check']}: {c['status']}" for c in checks
                if c["status"] not in ("pass", "skipped")]
    date = context.date or _dt.datetime.now(_dt.UTC).date().isoformat()
    return Provenance(
        entry=document.id, title=document.title, chart=chart, revision=context.revision,
        status=status, chart_status=_worst(chart_checks) if checks else "unverified", counts=counts,
        problems=problems, date=str(date), generator=f"gravicat {__version__}, exporter {exporter.name} "
                                                      f"{exporter.version}",
        allowed_unverified=bool(context.allow_unverified), source=context.source,
    )


# --------------------------------------------------------------------------- prepared chart


@dataclass
class Prepared:
    """One chart ready for printing: fixed parameters substituted."""

    doc: Any
    spec: Any  # the ChartSpec as built (nothing substituted)
    layered: Layered  # definitions kept as symbols, fixed parameters substituted
    chart: str
    coords: tuple  # sympy Symbols
    free: tuple  # parameters left symbolic, in file order
    fixed: dict  # parameter symbol -> exact value
    metric: Any  # ImmutableMatrix, definitions expanded, fixed values substituted
    domain: tuple  # relations with the fixed values substituted (trivially true ones dropped)
    domain_text: tuple[str, ...]  # the domain strings of the file (for display)
    provenance: Provenance

    @property
    def n(self) -> int:
        return len(self.coords)

    def parameter_lines(self) -> list[str]:
        """One header line per parameter: symbolic with its range and default, or its fixed value."""
        out = []
        for name, p in self.doc.data["parameters"].items():
            sym = next(s for s in self.spec.params if str(s) == name)
            if sym in self.fixed:
                out.append(f"  {name} = {self.fixed[sym]} (fixed at export)")
            else:
                bits = [p["range"]] if p.get("range") else []
                if "default" in p:
                    bits.append(f"default {p['default']}")
                out.append(f"  {name}: runtime parameter" + (f" ({'; '.join(bits)})" if bits else ""))
        return out

    def header_lines(self) -> list[str]:
        lines = self.provenance.lines()
        lines.append(f"coordinates: {', '.join(str(c) for c in self.coords)}")
        lines.append("parameters:" + ("" if self.doc.data["parameters"] else " none"))
        lines.extend(self.parameter_lines())
        lines.append(f"domain:    {'; '.join(self.domain_text) or 'the whole chart'}")
        lines.append(f"conventions: {conventions(self.n)}")
        return lines


def chart_name(document, chart: str | ExportContext | Mapping[str, Any] | None) -> str:
    """The chart to use: ``chart`` (a name, or the ``chart`` of a context), else the first chart."""
    from gravicat.errors import NotFound

    if isinstance(chart, ExportContext):
        chart = chart.chart
    elif isinstance(chart, Mapping):
        chart = chart.get("chart")
    chart = chart or document.chart_names[0]
    if chart not in document.chart_names:
        raise NotFound(f"{document.id}: no chart '{chart}' (charts: {', '.join(document.chart_names)})")
    return chart


def prepare(document, context: ExportContext | Mapping[str, Any], exporter, *, numeric: bool) -> Prepared:
    """Build the chart, check the status, substitute the fixed parameters.

    ``numeric`` targets refuse charts with arbitrary functions (their values are not known).
    A domain relation that the fixed values make true is dropped; one they make false is refused.
    """
    import sympy

    from gravicat.format.metricfile import build_chart

    context = ExportContext.coerce(context)
    chart = chart_name(document, context.chart)
    prov = provenance(document, context, exporter, chart)
    prov.require_verified()
    spec = build_chart(document, chart)
    if numeric and spec.functions:
        names = ", ".join(str(f) for f in spec.functions)
        raise InputError(document.source, f"charts.{chart}.functions",
                         f"the metric depends on the arbitrary function(s) {names}, whose values numeric code "
                         f"cannot know; export to latex or json instead")
    fixed = fixed_parameters(document, spec, context.params)
    free = tuple(p for p in spec.params if p not in fixed)
    metric = spec.metric.xreplace(fixed) if fixed else spec.metric
    domain = []
    for spec_rel in spec.domain:
        rel = spec_rel.xreplace(fixed) if fixed else spec_rel
        if rel == sympy.true:  # e.g. Lambda*r**2 < 3 at Lambda = -1/100: holds everywhere
            continue
        if rel == sympy.false:
            raise InputError("--set", None, f"with these values the domain relation {sympy.sstr(spec_rel)} of "
                                            f"chart {chart} holds nowhere: the chart is empty")
        if not isinstance(rel, sympy.core.relational.Relational):
            raise InputError("--set", None, f"with these values the domain relation {sympy.sstr(spec_rel)} of "
                                            f"chart {chart} is not an inequality ({sympy.sstr(rel)})")
        domain.append(rel)
    return Prepared(doc=document, spec=spec, layered=layered_chart(document, chart).substituted(fixed), chart=chart,
                    coords=tuple(spec.coords), free=free, fixed=fixed, metric=sympy.ImmutableMatrix(metric),
                    domain=tuple(domain), domain_text=tuple(document.data["charts"][chart]["domain"]),
                    provenance=prov)


# --------------------------------------------------------------------------- Christoffel symbols (symbolic)


def christoffel_symbols(spec, budget: float = DEFAULT_BUDGET) -> dict:
    """Nonzero Gamma^a_bc (b <= c) as factored sympy expressions, computed in a child process.

    Uses the shared exact engine (:class:`gravicat.engine.geometry.Geometry`) in a child of
    :mod:`gravicat.engine.fork` with ``budget`` CPU seconds (and a wall-clock backstop). A chart
    whose symbols do not reduce within the budget gives a one-line CatalogError (nothing is printed
    half).
    """
    from gravicat.engine.fork import describe_limit, run_forked

    def work(emit):
        from gravicat.engine.geometry import Geometry

        geo = Geometry(spec)
        gam = geo.christoffel
        out = {}
        for a in range(geo.n):
            for b in range(geo.n):
                for c in range(b, geo.n):
                    v = gam[a][b][c]
                    if not geo.is_zero(v):
                        out[(a, b, c)] = geo.to_sympy(v)
        return out

    where = f"{spec.entry}:{spec.chart}"
    outcome = run_forked(work, cpu_seconds=budget, wall_seconds=2 * budget + 10)
    if outcome.finished:
        return outcome.value
    if outcome.limit == "memory":
        raise CatalogError(f"{where}: the Christoffel symbols did not reduce: {describe_limit(outcome)} "
                           "(setting memory-cap); export without the Christoffel symbols")
    if outcome.limit is not None:
        raise CatalogError(f"{where}: the Christoffel symbols did not reduce within {budget:g} s "
                           f"({describe_limit(outcome, budget, 2 * budget + 10)}); "
                           f"export without the Christoffel symbols (or give a larger budget)")
    if outcome.died:
        raise CatalogError(f"{where}: the Christoffel computation stopped unexpectedly (exit code {outcome.exitcode})")
    raise CatalogError(f"{where}: cannot compute the Christoffel symbols ({outcome.error})")
