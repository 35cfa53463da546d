"""Entries and charts as Python objects: the notebook side of the catalogue.

An :class:`Entry` is one validated metric document (from a file, the bundled catalogue or a
stored revision of a :class:`gravicat.Catalogue`); :meth:`Entry.chart` gives a :class:`Chart`,
whose metric, coordinates and parameters are sympy objects and whose curvature comes from the
one engine (:class:`gravicat.engine.geometry.Geometry`, prepared once per chart and cached).
:meth:`Chart.check` / :meth:`Entry.check` run the same runner as ``gravicat check`` and return
:class:`CheckResults`; :meth:`Chart.numeric` gives vectorised numpy callables
(:class:`gravicat.api.numeric.NumericChart`).

Conventions (those of the whole project): signature (-,+,+,+) (one minus sign in any dimension),
G = c = 1, index order as written: ``christoffel()[a, b, c]`` is Gamma^a_bc,
``riemann()[a, b, c, d]`` is R^a_bcd with R^a_bcd = d_c Gamma^a_db - d_d Gamma^a_cb + ...,
``ricci()[b, d]`` = R^a_bad, ``einstein()`` = R_ab - R g_ab / 2.

Every failure a user can cause is a one-line :class:`gravicat.CatalogError` naming the subject.
"""

from __future__ import annotations

import html
from functools import cached_property
from pathlib import Path
from typing import TYPE_CHECKING, Any

from gravicat.api.results import CheckResults
from gravicat.errors import InputError, NotFound

if TYPE_CHECKING:
    import sympy

    from gravicat.api.catalogue import Catalogue
    from gravicat.api.numeric import NumericChart
    from gravicat.engine.geometry import Geometry
    from gravicat.format.chartspec import ChartSpec
    from gravicat.format.metricfile import MetricDocument

__all__ = ["Entry", "Chart", "CheckResults", "load_file"]

_PLUGINS: dict[tuple[str, ...], Any] = {}


def default_plugins(blocked: tuple[str, ...] | None = None):
    """The plugin manager of library calls without a catalogue (settings' ``disable_plugins``), shared."""
    from gravicat.registry import make_plugin_manager

    if blocked is None:
        from gravicat.api.catalogue import configured

        blocked = configured().disable_plugins
    key = tuple(blocked)
    if key not in _PLUGINS:
        _PLUGINS[key] = make_plugin_manager(blocked=key)
    return _PLUGINS[key]


def load_file(path: str | Path, *, plugins=None) -> Entry:
    """Read and validate a metric file (.toml or .json) into an :class:`Entry` without a catalogue.

    The file is read by the ``read_metric_source`` hook (the same readers as ``gravicat check``)
    and validated by the whitelist parser; nothing is evaluated. A bad file raises a one-line
    :class:`gravicat.InputError` naming the file and the field. ``plugins`` is a plugin manager
    (default: every installed plugin except those the settings disable).
    """
    from gravicat.format.metricfile import load_file as _load

    pm = plugins if plugins is not None else default_plugins()
    doc = _load(Path(path), pm)
    for name in doc.chart_names:  # a line element that is not a quadratic form is refused now, as by `add`
        from gravicat.format.metricfile import build_chart

        build_chart(doc, name)
    return Entry(doc, plugins=pm)


class Entry:
    """One metric document: metadata, parameters with ranges, and its charts.

    Made by :func:`gravicat.load_file`, :meth:`gravicat.Catalogue.get` or
    :meth:`gravicat.Catalogue.find`; not constructed by hand. Attributes:

    * ``id``, ``title``, ``summary``, ``field_equations``, ``tags``, ``references``, ``notes``;
    * ``parameters``: name -> ``{"description", "assume", "range", "default"}`` as in the file;
    * ``chart_names``: the charts, in file order; ``chart(name)`` gives a :class:`Chart`;
    * ``revision``: the content hash (SHA-256 of the canonical document); ``number``: the
      revision number in the catalogue (None for a file); ``source``: where it was read;
    * ``document``: the validated :class:`gravicat.format.metricfile.MetricDocument`.
    """

    def __init__(self, document: MetricDocument, *, catalogue: Catalogue | None = None,
                 number: int | None = None, plugins=None):
        self.document = document
        self.catalogue = catalogue
        self.number = number
        self._plugins = plugins
        self._charts: dict[str, Chart] = {}

    # -- metadata ------------------------------------------------------------
    @property
    def id(self) -> str:
        """The entry id (slug)."""
        return self.document.id

    @property
    def title(self) -> str:
        return self.document.title

    @property
    def summary(self) -> str:
        return self.document.data["summary"]

    @property
    def field_equations(self) -> str:
        """The field-equation claim: vacuum, lambda-vacuum, electrovacuum, perfect-fluid, dust, null-dust or none."""
        return self.document.data["field-equations"]

    @property
    def tags(self) -> list[str]:
        return list(self.document.data["tags"])

    @property
    def references(self) -> list[dict[str, str]]:
        return [dict(r) for r in self.document.data["references"]]

    @property
    def notes(self) -> str:
        return self.document.data["notes"]

    @property
    def parameters(self) -> dict[str, dict[str, Any]]:
        """Parameter name -> its declaration (description, assume, range, default), in file order."""
        return {k: dict(v) for k, v in self.document.data["parameters"].items()}

    @property
    def chart_names(self) -> list[str]:
        return self.document.chart_names

    @property
    def revision(self) -> str:
        """The content hash of the document (what check results are stored against)."""
        return self.document.hash

    @property
    def source(self) -> str:
        return self.document.source

    @property
    def subject(self) -> str:
        """How this entry is named in messages: ``ID@HASH12`` for a stored revision, else the source."""
        return f"{self.id}@{self.revision[:12]}" if self.catalogue is not None else self.source

    @property
    def plugins(self):
        """The plugin manager used for checks (the catalogue's, else the default one)."""
        if self._plugins is None:
            self._plugins = self.catalogue.plugins if self.catalogue is not None else default_plugins()
        return self._plugins

    # -- charts --------------------------------------------------------------
    def chart(self, name: str | None = None) -> Chart:
        """The chart ``name`` (default: the first); :class:`gravicat.NotFound` lists the charts otherwise."""
        name = name or self.chart_names[0]
        if name not in self.chart_names:
            raise NotFound(f"{self.subject}: no chart '{name}' (charts: {', '.join(self.chart_names)})")
        if name not in self._charts:
            self._charts[name] = Chart(self, name)
        return self._charts[name]

    @property
    def charts(self) -> list[Chart]:
        """Every chart, in file order."""
        return [self.chart(n) for n in self.chart_names]

    # -- checks --------------------------------------------------------------
    def _resolver(self, catalogue: Catalogue | None = None):
        """``reduces-to`` targets in the project's one order: this document, the catalogue (the
        entry's own, else ``catalogue``), the bundled files."""
        from gravicat.engine.runner import bundled_documents, make_resolver

        docs = bundled_documents()
        catalogue = self.catalogue or catalogue
        if catalogue is not None:
            docs = docs.with_catalogue(catalogue._limit_targets(self.document))
        return make_resolver(docs.with_document(self.document))

    def check(self, *, charts: list[str] | None = None, only: list[str] | None = None,
              budget: float = 20.0, jobs: int | None = None, catalogue: Catalogue | None = None) -> CheckResults:
        """Verify every chart (or ``charts``) exactly as ``gravicat check`` does; nothing is stored.

        ``only`` restricts to these verifiers; ``budget`` is CPU seconds per symbolic proof; with
        more than one chart each chart runs in its own process under a CPU-time cap (``jobs`` at a
        time, default: the number of cores). A limit naming another entry is looked up in this
        document, then the entry's catalogue (for an entry read from a file: ``catalogue`` if
        given, as ``gravicat check FILE`` uses the user's), then the bundled catalogue. Use
        :meth:`gravicat.Catalogue.verify` to store results.
        """
        from gravicat.engine.fork import default_jobs
        from gravicat.engine.runner import check_document, select_verifiers
        from gravicat.registry import verifiers

        for name in charts or ():
            self.chart(name)  # NotFound for an unknown chart
        chosen = select_verifiers(verifiers(self.plugins), only)
        resolve = self._resolver(catalogue)
        if (self.catalogue or catalogue) is not None:
            (self.catalogue or catalogue)._release()  # no pooled connection is inherited by forked children
        reports = check_document(self.document, chosen, charts=charts, resolve=resolve, budget=budget,
                                 jobs=jobs or default_jobs())
        return CheckResults(self.id, reports)

    def stored_results(self) -> list[dict[str, Any]]:
        """Check results stored in the catalogue for this revision's content (``[]`` for a file)."""
        if self.catalogue is None:
            return []
        return self.catalogue.results(self)

    # -- display -------------------------------------------------------------
    def __repr__(self) -> str:
        where = f"revision {self.number}, {self.revision[:12]}" if self.number is not None else self.source
        return f"<Entry {self.id}: {self.title} ({where}); charts: {', '.join(self.chart_names)}>"

    def _parameter_lines(self) -> list[tuple[str, str]]:
        rows = []
        for name, p in self.document.data["parameters"].items():
            bits = [p["range"]] if p.get("range") else []
            if "default" in p:
                bits.append(f"default {p['default']}")
            desc = p.get("description", "")
            rows.append((name, "; ".join(bits) + (f" ({desc})" if desc else "")))
        return rows

    def _repr_latex_(self) -> str:
        lines = [rf"\textbf{{{tex_text(self.title)}}}\ \text{{({tex_text(self.id)}, "
                 rf"{tex_text(self.field_equations)})}}"]
        for name, text in self._parameter_lines():
            lines.append(rf"\text{{{tex_text(name)}: {tex_text(text)}}}")
        for ch in self.charts:
            lines.append(rf"\text{{chart {tex_text(ch.name)}:}}\quad {ch.line_element_latex()}")
        return "$\\displaystyle \\begin{array}{l}" + r"\\ ".join(lines) + r"\end{array}$"

    def _repr_html_(self) -> str:
        esc = html.escape
        parts = [f"<h4>{esc(self.title)} <small>({esc(self.id)}, {esc(self.field_equations)})</small></h4>"]
        if self.summary:
            parts.append(f"<p>{esc(self.summary)}</p>")
        if self.number is not None:
            parts.append(f"<p>revision {self.number}, <code>{esc(self.revision[:12])}</code></p>")
        if self.document.data["parameters"]:
            rows = "".join(f"<tr><td>{esc(n)}</td><td>{esc(t)}</td></tr>" for n, t in self._parameter_lines())
            parts.append(f"<table><tr><th>parameter</th><th>range, default</th></tr>{rows}</table>")
        for ch in self.charts:
            parts.append(f"<p>chart <b>{esc(ch.name)}</b> ({esc(', '.join(ch.coordinate_names))}): "
                         f"$${esc(ch.line_element_latex())}$$</p>")
        return "\n".join(parts)


class Chart:
    """One chart of an entry: sympy objects, exact curvature from the engine, checks, numbers.

    * ``metric``: g_ab as a sympy ``ImmutableMatrix`` (definitions substituted);
    * ``coordinates`` and ``parameters``: tuples of sympy Symbols (file order; parameters carry
      their declared assumptions); ``domain`` and ``parameter_ranges``: sympy relations;
      ``defaults``: parameter Symbol -> exact default value;
    * ``line_element``: ds^2 as a sympy expression in the symbols ``d<coordinate>``;
    * ``christoffel()``, ``riemann()``, ``ricci()``, ``einstein()``, ``invariants()``: exact,
      computed once by :class:`gravicat.engine.geometry.Geometry` (``geometry``) and cached;
    * ``check()``: the checks of this chart (:class:`CheckResults`);
    * ``numeric(M=1, a=0.9)``: vectorised numpy callables (:class:`gravicat.api.numeric.NumericChart`).
    """

    def __init__(self, entry: Entry, name: str):
        self.entry = entry
        self.name = name

    @property
    def subject(self) -> str:
        """``ENTRY...:CHART`` as messages name it."""
        return f"{self.entry.subject}:{self.name}"

    @cached_property
    def spec(self) -> ChartSpec:
        """The built chart (:class:`gravicat.format.chartspec.ChartSpec`), the input every verifier sees."""
        from gravicat.format.metricfile import build_chart

        return build_chart(self.entry.document, self.name)

    @property
    def metric(self) -> sympy.ImmutableMatrix:
        return self.spec.metric

    @property
    def coordinates(self) -> tuple[sympy.Symbol, ...]:
        return tuple(self.spec.coords)

    @property
    def coordinate_names(self) -> list[str]:
        return list(self.entry.document.data["charts"][self.name]["coordinates"])

    @property
    def parameters(self) -> tuple[sympy.Symbol, ...]:
        return tuple(self.spec.params)

    @property
    def domain(self) -> tuple:
        return tuple(self.spec.domain)

    @property
    def parameter_ranges(self) -> tuple:
        return tuple(self.spec.param_ranges)

    @property
    def defaults(self) -> dict:
        return dict(self.spec.defaults)

    @property
    def dimension(self) -> int:
        return len(self.spec.coords)

    @cached_property
    def line_element(self) -> sympy.Expr:
        """ds^2 = g_ab dx^a dx^b, in the symbols ``dt``, ``dr``, ... (one per coordinate)."""
        import sympy

        d = self._differentials
        g, n = self.metric, self.dimension
        return sympy.Add(*[(1 if a == b else 2) * g[a, b] * d[a] * d[b]
                           for a in range(n) for b in range(a, n) if g[a, b] != 0])

    @cached_property
    def _differentials(self) -> list:
        import sympy

        return [sympy.Symbol(f"d{c}") for c in self.coordinate_names]

    def line_element_latex(self) -> str:
        """``ds^2 = ...`` in LaTeX (sympy's printer), differentials typeset as upright d."""
        import sympy

        names = {d: rf"\mathrm{{d}}{sympy.latex(c)}" for d, c in zip(self._differentials, self.coordinates,
                                                                     strict=True)}
        return r"\mathrm{d}s^2 = " + sympy.latex(self.line_element, symbol_names=names)

    # -- exact curvature (the engine's) --------------------------------------
    @cached_property
    def geometry(self) -> Geometry:
        """The prepared chart of the engine, shared by every curvature method of this chart."""
        from gravicat.engine.geometry import Geometry

        return Geometry(self.spec)

    def _nondegenerate(self) -> Geometry:
        geo = self.geometry
        reason = geo.degeneracy()
        if reason is not None:
            raise InputError(self.subject, None, f"the metric is degenerate ({reason}): no inverse, no curvature")
        return geo

    def _array(self, rows, rank: int):
        import sympy

        geo = self._nondegenerate()
        n = self.dimension

        def conv(x, depth):
            return [conv(y, depth - 1) for y in x] if depth else geo.to_sympy(x)

        return sympy.ImmutableDenseNDimArray(conv(rows, rank), (n,) * rank)

    def christoffel(self) -> sympy.ImmutableDenseNDimArray:
        """Gamma^a_bc (symmetric in b, c) as a sympy Array indexed ``[a, b, c]``."""
        return self._array(self._nondegenerate().christoffel, 3)

    def riemann(self) -> sympy.ImmutableDenseNDimArray:
        """R^a_bcd as a sympy Array indexed ``[a, b, c, d]`` (R^a_bcd = d_c Gamma^a_db - d_d Gamma^a_cb + ...)."""
        return self._array(self._nondegenerate().riemann, 4)

    def ricci(self) -> sympy.ImmutableDenseNDimArray:
        """R_bd = R^a_bad as a sympy Array indexed ``[b, d]`` (``.tomatrix()`` for a Matrix)."""
        return self._array(self._nondegenerate().ricci, 2)

    def einstein(self) -> sympy.ImmutableDenseNDimArray:
        """G_ab = R_ab - R g_ab / 2 as a sympy Array indexed ``[a, b]``."""
        return self._array(self._nondegenerate().einstein, 2)

    def inverse_metric(self) -> sympy.ImmutableMatrix:
        """g^ab as a sympy Matrix (exact, from the engine)."""
        return self._array(self._nondegenerate().ginv, 2).tomatrix().as_immutable()

    def invariants(self) -> dict[str, sympy.Expr]:
        """The curvature scalars: ``ricci-scalar`` R, ``kretschmann`` R_abcd R^abcd and ``weyl-square``
        C_abcd C^abcd (names as in metric files), exact and factored."""
        geo = self._nondegenerate()
        return {"ricci-scalar": geo.to_sympy(geo.ricci_scalar), "kretschmann": geo.to_sympy(geo.kretschmann),
                "weyl-square": geo.to_sympy(geo.weyl_square)}

    # -- checks and numbers --------------------------------------------------
    def check(self, *, only: list[str] | None = None, budget: float = 20.0) -> CheckResults:
        """The checks of this chart, as ``gravicat check FILE --chart NAME`` runs them; nothing is stored."""
        return self.entry.check(charts=[self.name], only=only, budget=budget)

    def numeric(self, *assignments: str, **values) -> NumericChart:
        """Vectorised numpy callables of this chart at fixed parameter values.

        Values are numbers or expression text (``a="9/10"``), or ``"NAME=VALUE[,NAME=VALUE]"``
        strings (the one ``--set`` parser); a parameter not given takes its file default. Each
        value is checked against the parameter's assumptions and range (a one-line
        :class:`gravicat.InputError` naming it). See :class:`gravicat.api.numeric.NumericChart`.
        """
        from gravicat.api.numeric import NumericChart

        return NumericChart.build(self, assignments, values)

    # -- display -------------------------------------------------------------
    def __repr__(self) -> str:
        return f"<Chart {self.name} of {self.entry.id} ({', '.join(self.coordinate_names)})>"

    def _repr_latex_(self) -> str:
        params = "; ".join(f"{n}: {t}" for n, t in self.entry._parameter_lines())
        domain = "; ".join(self.entry.document.data["charts"][self.name]["domain"])
        lines = [rf"\textbf{{{tex_text(self.entry.title)}}}\ \text{{chart {tex_text(self.name)}}}",
                 self.line_element_latex()]
        if params:
            lines.append(rf"\text{{parameters: {tex_text(params)}}}")
        if domain:
            lines.append(rf"\text{{domain: {tex_text(domain)}}}")
        return "$\\displaystyle \\begin{array}{l}" + r"\\ ".join(lines) + r"\end{array}$"


_TEX = {"\\": r"\textbackslash{}", "{": r"\{", "}": r"\}", "$": r"\$", "&": r"\&", "#": r"\#", "%": r"\%",
        "_": r"\_", "^": r"\^{}", "~": r"\~{}"}


def tex_text(text: str) -> str:
    """``text`` safe inside LaTeX ``\\text{...}`` (special characters escaped, one line)."""
    from gravicat.errors import one_line

    return "".join(_TEX.get(ch, ch) for ch in one_line(str(text)))
