"""Initial-data entries: a 3-geometry with its extrinsic curvature instead of a spacetime.

A metric file with the top-level key ``kind = "initial-data"`` holds, per chart, the data a
numerical-relativity code starts from on one slice (docs/initial-data.md):

* ``coordinates`` (three), ``domain``, ``define``: as in a spacetime chart (no declared functions);
* the spatial metric, either ``spatial-metric`` (a 3x3 matrix, lower indices) or ``conformal-factor``
  psi with ``flat-metric`` (``"cartesian"``, the default: delta_ij in (x, y, z); or ``"spherical"``:
  diag(1, r^2, r^2 sin^2 theta) in (r, theta, phi)), meaning gamma_ij = psi^4 (flat metric)_ij;
* ``extrinsic-curvature`` (a 3x3 matrix, lower indices, the sign convention of
  :mod:`gravicat.physics.split`), or ``time-symmetric = true`` for K_ij = 0 (exactly one of the two);
* optional ``lapse`` (default 1) and ``shift`` (contravariant beta^i by coordinate, default 0);
* the matter claim, the top-level ``field-equations``: ``vacuum``, ``lambda-vacuum`` (with the chart's
  ``cosmological-constant``) or ``matter`` (with the chart's ``matter`` table: ``density`` rho =
  n^a n^b T_ab and ``momentum``, the covariant S_i = -gamma_i^a n^b T_ab by coordinate).

Every expression goes through the whitelist parser (:mod:`gravicat.format.expr`) and is never
evaluated. :func:`validate_chart` gives a chart's canonical form (called by
:func:`gravicat.format.metricfile.validate`); :func:`build_initial_chart` gives the sympy form, a
three-dimensional :class:`~gravicat.format.chartspec.ChartSpec` of the spatial metric whose
``extra["initial_data"]`` holds the rest (:class:`InitialDataParts`); the one chart builder
(:func:`gravicat.format.charts.build_chart`) hands initial-data documents to it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from gravicat.errors import InputError

__all__ = ["KIND", "KINDS", "CLAIMS", "FLAT_METRICS", "CHART_KEYS", "InitialDataParts", "is_initial_data",
           "check_kind", "validate_chart", "build_initial_chart"]

KIND = "initial-data"
KINDS = ("spacetime", KIND)
CLAIMS = ("vacuum", "lambda-vacuum", "matter")
FLAT_METRICS = ("cartesian", "spherical")
CHART_KEYS = ("coordinates", "domain", "define", "spatial-metric", "conformal-factor", "flat-metric",
              "extrinsic-curvature", "time-symmetric", "lapse", "shift", "matter", "cosmological-constant")
_SPACETIME_ONLY = ("limits", "flat-when")


@dataclass(frozen=True)
class InitialDataParts:
    """What an initial-data chart holds besides its spatial metric (sympy, the chart's symbols)."""

    lapse: Any
    shift: tuple  # beta^i by coordinate
    extrinsic: Any  # K_ij, a 3x3 ImmutableMatrix
    density: Any  # rho (0 for vacuum and lambda-vacuum)
    momentum: tuple  # S_i by coordinate (covariant)
    conformal_factor: Any | None  # psi, when the metric is given conformally flat
    flat_metric: str | None  # "cartesian" / "spherical" with a conformal factor
    time_symmetric: bool


def is_initial_data(data: dict) -> bool:
    """Whether a (raw or canonical) document is an initial-data entry."""
    return isinstance(data, dict) and data.get("kind") == KIND


def check_kind(v, raw: dict) -> str:
    """The document's kind (``spacetime`` unless given); a one-line error for an unknown kind and for
    keys only a spacetime may have."""
    kind = raw.get("kind", "spacetime")
    if kind not in KINDS:
        v.fail("kind", f"'{kind}' is not one of {', '.join(KINDS)}")
    if kind == KIND:
        for key in _SPACETIME_ONLY:
            if key in raw:
                v.fail(key, "only a spacetime entry has this key (this file is kind = \"initial-data\")")
    return kind


def _matrix(v, rows, names, field: str) -> list[list[str]]:
    if not isinstance(rows, list) or len(rows) != 3 or any(not isinstance(r, list) or len(r) != 3 for r in rows):
        v.fail(field, "must be a 3x3 matrix (a list of 3 rows of 3 entries)")
    return [[v.expr(x, names, f"{field}[{i}][{j}]") for j, x in enumerate(row)] for i, row in enumerate(rows)]


def _check_size(v, base: str, coords: list[str], defines: dict, fields: dict[str, str]) -> None:
    """The size limits of :mod:`gravicat.format.size` for definitions and every other expression."""
    from gravicat.format.size import MAX_DEGREE, MAX_TERMS, _shown, chart_sizes, check_chart_size

    check_chart_size(v.source, base, {"coordinates": coords, "define": defines})
    for field, text in fields.items():
        size = chart_sizes({"define": defines, "line-element": text})["line-element"]
        if size.worst_degree > MAX_DEGREE:
            v.fail(f"{base}.{field}", f"degree {_shown(size.worst_degree)} after definitions exceeds the limit "
                                      f"{MAX_DEGREE} (see docs/limits.md)")
        if size.worst_terms > MAX_TERMS:
            v.fail(f"{base}.{field}", f"{_shown(size.worst_terms)} terms once expanded exceed the limit "
                                      f"{MAX_TERMS} (see docs/limits.md)")


def validate_chart(v, cname: str, craw: dict, taken: dict[str, str], param_names, coords: list[str],
                   claim: str) -> dict[str, Any]:
    """The canonical form of one initial-data chart (``v`` is the validator of metricfile)."""
    from gravicat.format.expr import Names, canonical, check_expression_size
    from gravicat.format.metricfile import _kind, _substitutions

    base = f"charts.{cname}"
    v.table(craw, base, CHART_KEYS)
    if len(coords) != 3:
        v.fail(f"{base}.coordinates", f"initial data lives on a three-dimensional slice: give 3 coordinates, "
                                      f"not {len(coords)}")
    for i, c in enumerate(coords):
        v.ident(c, f"{base}.coordinates[{i}]", taken)
        taken[c] = "coordinate"
    names = Names(symbols=param_names.symbols | frozenset(coords), coordinates=frozenset(coords))
    defines = {}
    for dname, text in v.table(craw.get("define", {}), f"{base}.define").items():
        v.ident(dname, f"{base}.define.{dname}", taken)
        if isinstance(text, bool) or not isinstance(text, (str, int, float)):
            v.fail(f"{base}.define.{dname}", f"must be an expression string, got {_kind(text)}")
        tree, bits = check_expression_size(text, names, source=v.source, field=f"{base}.define.{dname}")
        defines[dname] = canonical(tree)
        taken[dname] = "definition"
        names = names.with_symbols([dname], {dname: bits} if bits is not None else None)
    domain = []
    for i, t in enumerate(v.str_list(craw.get("domain", []), f"{base}.domain")):
        domain.append(v.relation(t, names, f"{base}.domain[{i}]"))
    chart: dict[str, Any] = {"coordinates": coords, "domain": domain, "functions": [], "define": defines}
    sized: dict[str, str] = {}
    has_m, has_psi = "spatial-metric" in craw, "conformal-factor" in craw
    if has_m == has_psi:
        v.fail(base, "give exactly one of 'spatial-metric' and 'conformal-factor'")
    if has_m:
        if "flat-metric" in craw:
            v.fail(f"{base}.flat-metric", "only with 'conformal-factor'")
        chart["spatial-metric"] = _matrix(v, craw["spatial-metric"], names, f"{base}.spatial-metric")
        sized.update({f"spatial-metric[{i}][{j}]": t for i, row in enumerate(chart["spatial-metric"])
                      for j, t in enumerate(row)})
    else:
        chart["conformal-factor"] = v.expr(craw["conformal-factor"], names, f"{base}.conformal-factor")
        flat = v.string(craw.get("flat-metric", "cartesian"), f"{base}.flat-metric")
        if flat not in FLAT_METRICS:
            v.fail(f"{base}.flat-metric", f"'{flat}' is not one of {', '.join(FLAT_METRICS)}")
        chart["flat-metric"] = flat
        sized["conformal-factor"] = chart["conformal-factor"]
    symmetric = craw.get("time-symmetric", False)
    if not isinstance(symmetric, bool):
        v.fail(f"{base}.time-symmetric", f"must be true or false, got {_kind(symmetric)}")
    if symmetric == ("extrinsic-curvature" in craw):
        v.fail(base, "give exactly one of 'extrinsic-curvature' and 'time-symmetric = true'")
    chart["time-symmetric"] = symmetric
    if not symmetric:
        chart["extrinsic-curvature"] = _matrix(v, craw["extrinsic-curvature"], names, f"{base}.extrinsic-curvature")
        sized.update({f"extrinsic-curvature[{i}][{j}]": t for i, row in enumerate(chart["extrinsic-curvature"])
                      for j, t in enumerate(row)})
    if "lapse" in craw:
        chart["lapse"] = v.expr(craw["lapse"], names, f"{base}.lapse")
        sized["lapse"] = chart["lapse"]
    if "shift" in craw:
        chart["shift"] = _substitutions(v, craw["shift"], f"{base}.shift", names, tuple(coords))
        sized.update({f"shift.{k}": t for k, t in chart["shift"].items()})
    if claim == "matter":
        if "matter" not in craw:
            v.fail(f"{base}.matter", "missing (required with field-equations = \"matter\"): "
                                     "{density = \"...\", momentum = {...}}")
        mraw = v.table(craw["matter"], f"{base}.matter", ("density", "momentum"))
        if "density" not in mraw:
            v.fail(f"{base}.matter.density", "missing (required)")
        chart["matter"] = {"density": v.expr(mraw["density"], names, f"{base}.matter.density"),
                           "momentum": _substitutions(v, mraw.get("momentum", {}), f"{base}.matter.momentum",
                                                      names, tuple(coords))}
        sized["matter.density"] = chart["matter"]["density"]
        sized.update({f"matter.momentum.{k}": t for k, t in chart["matter"]["momentum"].items()})
    elif "matter" in craw:
        v.fail(f"{base}.matter", f"only with field-equations = \"matter\" (this file claims {claim})")
    if claim == "lambda-vacuum":
        if "cosmological-constant" not in craw:
            v.fail(f"{base}.cosmological-constant", "missing (required with field-equations = \"lambda-vacuum\")")
        chart["cosmological-constant"] = v.expr(craw["cosmological-constant"], param_names,
                                                f"{base}.cosmological-constant")
    elif "cosmological-constant" in craw:
        v.fail(f"{base}.cosmological-constant", f"only with field-equations = \"lambda-vacuum\" (this file "
                                                f"claims {claim})")
    chart.update({"observers": {}, "transforms": {}, "invariants": {}})  # the keys every chart has
    _check_size(v, base, coords, defines, sized)
    return chart


# --------------------------------------------------------------------------- sympy form


def build_initial_chart(doc, chart: str | None = None, resolve=None):
    """The sympy form of one initial-data chart: a three-dimensional ChartSpec of the spatial metric
    (``extra["kind"] == "initial-data"``, ``extra["initial_data"]`` an :class:`InitialDataParts`)."""
    import sympy

    from gravicat.errors import NotFound
    from gravicat.format.charts import parameter_symbols
    from gravicat.format.chartspec import ChartSpec
    from gravicat.format.expr import Names, check_expression, check_relation, relation_to_sympy, to_sympy

    data = doc.data
    chart = chart or next(iter(data["charts"]))
    if chart not in data["charts"]:
        raise NotFound(f"{doc.id}: no chart '{chart}' (charts: {', '.join(data['charts'])})")
    c, source, base = data["charts"][chart], doc.source, f"charts.{chart}"
    params = parameter_symbols(doc)
    coords = {name: sympy.Symbol(name, real=True) for name in c["coordinates"]}
    env: dict[str, Any] = {**params, **coords}
    names = Names(symbols=frozenset(env), coordinates=frozenset(coords))

    def build(text, field, nm=None):
        value = to_sympy(check_expression(text, nm or names, source=source, field=field), env, {})
        if value.has(sympy.zoo, sympy.nan, sympy.oo, -sympy.oo):
            raise InputError(source, field, f"'{text}' is not finite ({value})")
        return value

    for dname, text in c["define"].items():
        env[dname] = build(text, f"{base}.define.{dname}")
        names = names.with_symbols([dname])

    def matrix(rows, field):
        m = sympy.Matrix(3, 3, lambda i, j: build(rows[i][j], f"{field}[{i}][{j}]"))
        for i in range(3):
            for j in range(i + 1, 3):
                if m[i, j] != m[j, i] and sympy.cancel(m[i, j] - m[j, i]) != 0:
                    raise InputError(source, f"{field}[{i}][{j}]",
                                     f"the matrix is not symmetric: '{rows[i][j]}' differs from "
                                     f"[{j}][{i}] = '{rows[j][i]}'")
        return sympy.ImmutableMatrix(m)

    psi = flat = None
    if "spatial-metric" in c:
        gamma = matrix(c["spatial-metric"], f"{base}.spatial-metric")
    else:
        psi, flat = build(c["conformal-factor"], f"{base}.conformal-factor"), c["flat-metric"]
        q = list(coords.values())
        diag = [1, 1, 1] if flat == "cartesian" else [1, q[0] ** 2, q[0] ** 2 * sympy.sin(q[1]) ** 2]
        gamma = sympy.ImmutableMatrix(sympy.diag(*[psi**4 * d for d in diag]))
    extrinsic = (sympy.ImmutableMatrix.zeros(3, 3) if c["time-symmetric"]
                 else matrix(c["extrinsic-curvature"], f"{base}.extrinsic-curvature"))
    lapse = build(c["lapse"], f"{base}.lapse") if "lapse" in c else sympy.Integer(1)

    def by_coord(table, field):
        return tuple(build(table[k], f"{field}.{k}") if k in table else sympy.Integer(0) for k in coords)

    shift = by_coord(c.get("shift", {}), f"{base}.shift")
    density, momentum = sympy.Integer(0), (sympy.Integer(0),) * 3
    if "matter" in c:
        density = build(c["matter"]["density"], f"{base}.matter.density")
        momentum = by_coord(c["matter"]["momentum"], f"{base}.matter.momentum")
    pnames = Names(symbols=frozenset(params))
    lam = (build(c["cosmological-constant"], f"{base}.cosmological-constant", pnames)
           if "cosmological-constant" in c else None)
    domain = []
    for i, text in enumerate(c["domain"]):
        domain += [relation_to_sympy(r, env, {}) for r in
                   check_relation(text, names, source=source, field=f"{base}.domain[{i}]")]
    ranges = []
    for k, p in data["parameters"].items():
        if "range" in p:
            ranges += [relation_to_sympy(r, env, {}) for r in
                       check_relation(p["range"], pnames, source=source, field=f"parameters.{k}.range")]
    defaults = {params[k]: build(p["default"], f"parameters.{k}.default", pnames)
                for k, p in data["parameters"].items() if "default" in p}
    parts = InitialDataParts(lapse=lapse, shift=shift, extrinsic=extrinsic, density=density, momentum=momentum,
                             conformal_factor=psi, flat_metric=flat, time_symmetric=c["time-symmetric"])
    exprs = [*extrinsic, lapse, *shift, density, *momentum] + ([lam] if lam is not None else [])
    extra: dict[str, Any] = {"source": source, "kind": KIND, "initial_data": parts, "_exprs": exprs}
    if resolve is not None:
        extra["resolve"] = resolve
    return ChartSpec(entry=doc.id, chart=chart, field_equations=data["field-equations"],
                     coords=tuple(coords.values()), params=tuple(params.values()), metric=gamma,
                     domain=tuple(domain), param_ranges=tuple(ranges), defaults=defaults,
                     cosmological_constant=lam, tags=tuple(data["tags"]), extra=extra)
