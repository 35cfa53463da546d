"""The computed parts of an entry page: MathML of each chart, the orbit landmarks with their
effective-potential figure, and the downloads made by the exporters.

Each function returns HTML fragments (strings, already escaped) or file bytes; none of them
raises for a property of the metric: a part that cannot be computed becomes a visible
"not available: reason" paragraph. They run in a forked child per entry
(:func:`gravicat.engine.fork.run_many`, see :mod:`.build`), so a runaway computation meets a
CPU-time cap instead of stopping the build.
"""

from __future__ import annotations

import io
import math
from html import escape
from typing import Any

from gravicat.errors import CatalogError

#: relation operators as MathML
_OPS = {"<": "&lt;", "<=": "&le;", ">": "&gt;", ">=": "&ge;"}


def unavailable(reason: str) -> str:
    return f'<p class="unavailable">not available: {escape(reason)}</p>'


def _mathml(expr) -> str:
    import sympy

    return sympy.mathml(expr, printer="presentation")


def _math(inner: str, label: str) -> str:
    return f'<math display="block" aria-label="{escape(label)}">{inner}</math>'


def chart_mathml(doc, chart: str) -> dict[str, Any]:
    """Line element, definitions, domain and invariants of one chart as MathML (definitions kept as
    symbols, as the file writes them). Returns ``{"line": html, "define": [(name, html)],
    "domain": [html], "invariants": [(name, html, source)]}`` or ``{"error": reason}``."""
    import sympy

    from gravicat.format.charts import layered_chart
    from gravicat.format.expr import check_expression, to_sympy

    try:
        lay = layered_chart(doc, chart)
        raw = doc.data["charts"][chart]
        n = len(lay.coords)
        ds = [sympy.Symbol(f"d{c}") for c in raw["coordinates"]]
        g = lay.metric
        line = sympy.Add(*[(1 if a == b else 2) * g[a, b] * ds[a] * ds[b]
                           for a in range(n) for b in range(a, n) if g[a, b] != 0])
        out: dict[str, Any] = {
            "line": _math(f"<msup><mi>ds</mi><mn>2</mn></msup><mo>=</mo>{_mathml(line)}", f"line element of {chart}"),
            "define": [], "domain": [], "invariants": []}
        for sym, value in lay.defines:
            out["define"].append((str(sym), _math(f"{_mathml(sym)}<mo>=</mo>{_mathml(value)}",
                                                  f"definition of {sym}")))
        for i, text in enumerate(raw["domain"]):
            rels = lay.relations(text, doc.source, f"charts.{chart}.domain[{i}]")
            parts = [_mathml(rels[0][0])]
            for left, op, right in rels:
                del left
                parts.append(f"<mo>{_OPS[op]}</mo>{_mathml(right)}")
            out["domain"].append(_math("".join(parts), f"domain: {text}"))
        for name, inv in sorted(raw["invariants"].items()):
            tree = check_expression(inv["value"], lay.names, source=doc.source,
                                    field=f"charts.{chart}.invariants.{name}")
            value = to_sympy(tree, lay.env, lay.functions)
            out["invariants"].append((name, _math(f"<mi>{escape(name)}</mi><mo>=</mo>{_mathml(value)}",
                                                  f"invariant {name}"), inv.get("source", "")))
        return out
    except CatalogError as exc:
        return {"error": str(exc)}


# --------------------------------------------------------------------------- orbits


def _fmt(value) -> str:
    if value is None:
        return "none"
    if isinstance(value, float):
        return "none" if math.isnan(value) else f"{value:.10g}"
    return escape(str(value))


def orbit_section(doc) -> dict[str, Any]:
    """Landmarks of circular equatorial orbits (:func:`gravicat.physics.orbits.survey` at the parameter
    defaults) on the first chart the orbit model accepts, and an SVG of the effective potential.
    Returns ``{"chart", "html", "svg"}`` or ``{"error": reason}``."""
    from gravicat.format.metricfile import build_chart
    from gravicat.physics import orbits as lib

    first_reason = None
    for chart in doc.chart_names:
        try:
            spec = build_chart(doc, chart)
            params = lib.resolve_parameters(doc, spec, (), units="geometrized")
            model = lib.EquatorialChart(spec, doc.chart_names).bind(params)
            report = lib.survey(model, (), units="geometrized")
        except CatalogError as exc:
            first_reason = first_reason or f"chart {chart}: {exc}"
            continue
        except (ArithmeticError, ValueError) as exc:  # numerical trouble in a library: shown, never a result
            first_reason = first_reason or f"chart {chart}: the numerical survey failed ({type(exc).__name__})"
            continue
        note = None
        try:
            svg, note = potential_svg(model, report)
        except ImportError:
            svg, note = None, "matplotlib is not installed (pip install 'gravicat[plot]')"
        except (CatalogError, ArithmeticError, ValueError) as exc:
            svg, note = None, f"the figure could not be drawn ({exc})"
        return {"chart": chart, "html": _landmarks_html(report, chart), "svg": svg, "figure_note": note}
    return {"error": first_reason or "the entry has no chart"}


def _landmarks_html(rep: dict[str, Any], chart: str) -> str:
    r = escape(rep["coordinates"]["radial"])
    params = ", ".join(f"{escape(k)} = {_fmt(v)}" for k, v in rep["parameters"].items()) or "no parameters"
    rows = []
    hz = rep["horizons"]
    rows.append(("horizons", ", ".join(_fmt(q["radius"]) + (f" (multiplicity {q['multiplicity']})"
                                                             if q["multiplicity"] > 1 else "")
                                       for q in hz["details"]) or "none", ""))
    rows.append(("ergosurface on the equator (g_tt = 0)", ", ".join(_fmt(x) for x in rep["ergosurface"]["radii"])
                 or "none", ""))
    if rep.get("cosmological_horizon") is not None:
        rows.append(("cosmological horizon", _fmt(rep["cosmological_horizon"]), ""))
    if rep.get("static_radius") is not None:
        rows.append(("static radius", _fmt(rep["static_radius"]), ""))
    body = "".join(f"<tr><th scope=\"row\">{escape(a)}</th><td colspan=\"2\">{b}</td></tr>" for a, b, _ in rows)
    keys = [("photon orbit", "photon_orbits"), ("marginally bound orbit", "marginally_bound"), ("ISCO", "isco")]
    if any(v is not None for v in rep["osco"].values()):
        keys.append(("outermost stable orbit", "osco"))
    body += "".join(f"<tr><th scope=\"row\">{label}</th><td>{_fmt(rep[key]['prograde'])}</td>"
                    f"<td>{_fmt(rep[key]['retrograde'])}</td></tr>" for label, key in keys)
    notes = "".join(f"<li>{escape(n)}</li>" for n in rep.get("notes", []))
    return (f"<p>Chart <code>{escape(chart)}</code>, equator, parameters at their defaults ({params}); "
            f"geometrized units, G = c = 1; radii are values of {r}.</p>"
            f"<table class=\"landmarks\"><thead><tr><th scope=\"col\">landmark</th><th scope=\"col\">prograde</th>"
            f"<th scope=\"col\">retrograde</th></tr></thead><tbody>{body}</tbody></table>"
            + (f"<ul class=\"notes\">{notes}</ul>" if notes else ""))


def _orbit_radii(model, report: dict[str, Any], start: float, edge: float) -> tuple[list[float], float, str | None]:
    """Radii of prograde circular orbits to take angular momenta from, the outer end of the plot, and
    why there are none (when the list is empty). With an ISCO: the ISCO and 1.5 and 3 times its radius.
    Else the radii where the orbit library finds a circular geodesic (a star's interior, a rotating
    dust cylinder, a cosmology with static observers...), three spread over that range."""
    import numpy as np

    isco = report["isco"]["prograde"]
    if isco:
        return [isco * f for f in (1.0, 1.5, 3.0)], min(edge, isco * 6), None
    found = [float(r) for r in np.geomspace(start, edge * 0.9995, 48)
             if model.circular(float(r), "prograde").get("exists")]
    if not found:
        r = report["coordinates"]["radial"]
        return [], edge, (f"no prograde circular equatorial geodesic for {r} in ({start:.6g}, {edge:.6g}) at the "
                          "parameter defaults, so no angular momentum to draw the potential for")
    picks = sorted({found[(len(found) - 1) * k // 4] for k in (1, 2, 3)})
    return picks, min(edge, max(found[-1] * 1.5, picks[-1] * 3)), None


def potential_svg(model, report: dict[str, Any]) -> tuple[bytes | None, str | None]:
    """The effective potential E(r) = V(r; L) of equatorial timelike geodesics for the angular momenta of
    circular orbits at a few radii (landmarks marked), as deterministic SVG bytes, and None; or None and
    the reason there is no figure (no circular orbit to take L from, or none gives a finite curve)."""
    import matplotlib
    import numpy as np
    from matplotlib.backends.backend_svg import FigureCanvasSVG
    from matplotlib.figure import Figure

    lo = model.inner_edge
    start = lo * 1.0005 if lo > 0 else model.scale * 1e-3
    edge = model.outer_edge
    radii, top, reason = _orbit_radii(model, report, start, edge)
    if reason:
        return None, reason
    if not top > start:
        return None, f"the radial range ({start:.6g}, {top:.6g}) is empty"
    r = np.geomspace(start, top, 600)
    curves = []
    for radius in radii:
        if not start < radius < top:
            continue
        orbit = model.circular(radius, "prograde")
        if not orbit.get("exists"):
            continue
        L = float(orbit["angular_momentum"])
        v = np.asarray(model.potential_np(r, L), dtype=float)
        if np.isfinite(v).sum() < 10:
            continue
        curves.append((radius, L, v))
    if not curves:
        return None, (f"the effective potential is not finite on ({start:.6g}, {top:.6g}) for the angular momenta of "
                      f"the circular orbits at r = {', '.join(f'{x:.6g}' for x in radii)}")
    with matplotlib.rc_context({"svg.hashsalt": "gravicat-site", "svg.fonttype": "path",
                                "path.simplify": False}):
        fig = Figure(figsize=(7, 4.2))
        FigureCanvasSVG(fig)
        ax = fig.add_subplot(1, 1, 1)
        for radius, L, v in curves:
            ax.plot(r, v, lw=1.2, label=f"L = {L:.4g} (circular at r = {radius:.4g})")
        marks = [(report["isco"]["prograde"], "ISCO", "-"), (report["photon_orbits"]["prograde"], "photon orbit", ":")]
        marks += [(q, "horizon", "--") for q in report["horizons"]["radii"]]
        for x, label, ls in marks:
            if x is not None and r[0] <= x <= r[-1]:
                ax.axvline(x, color="0.35", ls=ls, lw=0.8)
                ax.annotate(label, (x, 0.97), xycoords=("data", "axes fraction"), rotation=90, fontsize=7,
                            va="top", ha="right", color="0.25")
        finite = np.concatenate([v[np.isfinite(v)] for _, _, v in curves])
        low, high = float(np.percentile(finite, 2)), float(np.percentile(finite, 98))
        pad = 0.1 * (high - low or 1.0)
        ax.set_ylim(low - pad, high + pad)
        ax.set_xscale("log")
        ax.set_xlabel(f"{report['coordinates']['radial']} (geometrized units)")
        ax.set_ylabel("effective potential E")
        ax.legend(fontsize=7, loc="lower right")
        ax.set_title(f"chart {report['chart']}: prograde equatorial geodesics", fontsize=9)
        buf = io.BytesIO()
        fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": "gravicat"})
    return buf.getvalue(), None


# --------------------------------------------------------------------------- downloads


def downloads(doc, *, exporters: dict[str, Any], revision: str, checks: list[dict], date: str,
              source: str) -> dict[str, Any]:
    """Files made by every registered exporter for every chart of a verified revision (one file per
    exporter when every chart gives the same bytes). Returns ``{"files": {name: bytes},
    "links": [(exporter, chart or None, name)], "problems": [(exporter, reason)]}``."""
    from gravicat.checks import ExportContext

    files: dict[str, bytes] = {}
    links: list[tuple[str, str | None, str]] = []
    problems: list[tuple[str, str]] = []
    slug = doc.id
    for name in sorted(exporters):
        exp = exporters[name]
        made: dict[str, bytes] = {}
        failed = None
        for chart in doc.chart_names:
            context = ExportContext(revision=revision, checks=tuple(checks), chart=chart, params=None,
                                    allow_unverified=False, date=date, source=source)
            try:
                made[chart] = exp.export(doc, context).encode("utf-8")
            except CatalogError as exc:
                failed = f"chart {chart}: {exc}"
        if failed:
            problems.append((name, failed))
        suffix = getattr(exp, "suffix", "") or f".{name}"
        if made and len(set(made.values())) == 1 and len(made) == len(doc.chart_names):
            fname = f"{slug}.{name}{suffix}" if suffix != f".{name}" else f"{slug}{suffix}"
            files[fname] = next(iter(made.values()))
            links.append((name, None, fname))
            continue
        for chart, data in made.items():  # the target's name too: several targets share a suffix (.h, .py)
            fname = f"{slug}.{chart}.{name}{suffix}" if suffix != f".{name}" else f"{slug}.{chart}{suffix}"
            files[fname] = data
            links.append((name, chart, fname))
    return {"files": files, "links": links, "problems": problems}
