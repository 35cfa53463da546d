"""Classification of one chart: Petrov type, symmetries, matter and energy conditions (one JSON object).

What ``gravicat classify`` prints for each chart (the shape is documented in docs/classify.md and
docs/json.md). It calls the library modules and never re-derives curvature:

* :mod:`gravicat.physics.petrov` - the Petrov type (4 dimensions), the Weyl scalars and the
  invariants I, J at a stated sample point in the automatic tetrad, the principal null directions
  (types D and N), and the type where a parameter is zero (the specialisations);
* :mod:`gravicat.physics.killing` - the obvious Killing vectors (coordinates the metric does not
  depend on), proved exactly;
* :mod:`gravicat.physics.energy_proof` - the energy conditions proved on the domain where the exact
  case applies, else :mod:`gravicat.physics.matter` (sampled frame analysis, 4 dimensions).

Conventions: ``8 pi T_ab = G_ab + Lambda g_ab`` with the chart's declared cosmological constant on
the geometric side. When one is declared and non-zero, the conditions are also reported with Lambda
counted as matter (vacuum energy, ``8 pi T_ab = G_ab``: ``rho = Lambda/(8 pi)``, ``p = -Lambda/(8 pi)``
for de Sitter) under ``lambda_as_matter``.

Room: physics (uses export's parameter checks, the engine and format).
"""

from __future__ import annotations

import dataclasses
from typing import Any

__all__ = ["classify_chart", "specialise", "fixed_values", "declared_statements", "wrong_declarations"]


def fixed_values(doc, spec, settings) -> dict:
    """``--set NAME=VALUE`` texts -> {symbol: exact value}, checked against the parameters'
    assumptions and ranges (one-line InputError naming ``--set``)."""
    from gravicat.export.parameters import fixed_parameters

    texts = [t for t in (settings or []) if t and t.strip()]
    if not texts:
        return {}
    return fixed_parameters(doc, spec, ",".join(texts), "--set")


def specialise(spec, fixed: dict, *, chart: str | None = None):
    """The chart with the parameters of ``fixed`` replaced by their values.

    A domain relation the values make true everywhere is dropped; one they make false (the chart is
    empty) is an InputError naming ``--set``."""
    import sympy as sp

    from gravicat.errors import InputError

    if not fixed:
        return spec

    def sub(e):
        return sp.sympify(e).xreplace(fixed) if e is not None else None

    def relations(rels):
        out = []
        for rel in rels:
            new = rel.xreplace(fixed)
            if new == sp.true:
                continue
            if new == sp.false:
                raise InputError("--set", None, f"with these values the relation {sp.sstr(rel)} of chart "
                                                f"{chart or spec.chart} holds nowhere: the chart is empty")
            if not isinstance(new, sp.core.relational.Relational):
                raise InputError("--set", None, f"with these values the relation {sp.sstr(rel)} of chart "
                                                f"{chart or spec.chart} is not an inequality ({sp.sstr(new)})")
            out.append(new)
        return tuple(out)

    fluid = spec.fluid and dataclasses.replace(spec.fluid, density=sub(spec.fluid.density),
                                               pressure=sub(spec.fluid.pressure),
                                               velocity=tuple(sub(v) for v in spec.fluid.velocity))
    dust = spec.null_dust and dataclasses.replace(spec.null_dust, density=sub(spec.null_dust.density),
                                                  vector=tuple(sub(v) for v in spec.null_dust.vector))
    extra = dict(spec.extra)
    decl = extra.get("declarations")
    if decl:
        decl = dict(decl)
        if "killing" in decl:
            decl["killing"] = {k: tuple(sub(x) for x in v) for k, v in decl["killing"].items()}
        if "killing-tensors" in decl:
            decl["killing-tensors"] = {k: {**t, "components": sp.ImmutableMatrix(t["components"].xreplace(fixed))}
                                       for k, t in decl["killing-tensors"].items()}
        extra["declarations"] = decl
    return dataclasses.replace(
        spec,
        extra=extra,
        params=tuple(p for p in spec.params if p not in fixed),
        metric=sp.ImmutableMatrix(spec.metric.xreplace(fixed)),
        domain=relations(spec.domain),
        param_ranges=relations(spec.param_ranges),
        defaults={k: v for k, v in spec.defaults.items() if k not in fixed},
        cosmological_constant=sub(spec.cosmological_constant),
        potential=None if spec.potential is None else tuple(sub(a) for a in spec.potential),
        fluid=fluid,
        null_dust=dust,
        observers={k: tuple(sub(x) for x in v) for k, v in spec.observers.items()},
        invariants={k: dataclasses.replace(v, value=sub(v.value)) for k, v in spec.invariants.items()},
        transforms={},
        limits=(),
        flat_when=(),
    )


# ---------------------------------------------------------------------------
# one chart


def _petrov(geo, spec, doc, budget, fixed) -> dict:
    import mpmath as mp

    from gravicat.physics import petrov as P

    res = P.petrov_type(geo, budget=budget)
    out = res.to_json()
    out.setdefault("principal_null_directions", "not stated")
    out["specialisations"] = []
    if geo.n != 4 or res.type is None and res.where.startswith("not defined"):
        return out
    pts = geo.sample_points()
    if pts:
        pd = pts[0]
        try:
            with mp.workdps(40), pd.precision():
                tet, text = P.tetrad_at(pd)
                if tet is not None:
                    psi = P.weyl_scalars_at(pd, tet)
                    out["weyl_scalars"] = {k: P.fmt_complex(v) for k, v in psi.items()}
                    out["tetrad"] = {"description": text, "point": dict(pd.sample.shown),
                                     **{k: [P.fmt_complex(x) for x in v] for k, v in tet.items()}}
                else:
                    out["tetrad"] = {"description": f"not built: {text}", "point": dict(pd.sample.shown)}
                I, J = P.invariants_at(pd)
                out["invariants"] = {"I": P.fmt_complex(I), "J": P.fmt_complex(J), "point": dict(pd.sample.shown)}
                if res.type in ("D", "N"):
                    pnd = P.principal_null_directions(pd, res.type)
                    if pnd is not None:
                        out["principal_null_directions"] = {"point": dict(pd.sample.shown), **pnd}
        except (ZeroDivisionError, ValueError):
            pass
    if res.type is not None and doc is not None:
        out["specialisations"] = _specialisations(spec, doc, budget, fixed)
    return out


def _specialisations(spec, doc, budget, fixed) -> list[dict]:
    """The Petrov type where one parameter is zero (each parameter whose assumptions and range allow 0)."""
    import time

    from gravicat.engine.geometry import Geometry
    from gravicat.errors import InputError
    from gravicat.export.parameters import check_parameter_values
    from gravicat.physics.petrov import petrov_type

    out = []
    end = time.process_time() + budget  # all the specialisations together get one budget
    for p in spec.params:
        values = {str(k): v for k, v in fixed.items()} | {str(p): 0}
        try:
            check_parameter_values(doc, spec, values, "--set")
            zero = specialise(spec, {p: 0})
        except InputError:
            continue
        left = end - time.process_time()
        if left <= 0.5:
            out.append({"where": f"{p} = 0", "type": None, "method": "none",
                        "detail": f"not computed: the specialisations' budget of {budget:g} s was spent"})
            continue
        try:
            res = petrov_type(Geometry(zero, budget=left), budget=left)
        except (ZeroDivisionError, ValueError):
            continue
        out.append({"where": f"{p} = 0", "type": res.type, "method": res.method, "detail": res.where})
    return out


_STATUS = {"pass": "holds", "fail": "violated", "inconclusive": "undecided", "skipped": "undecided"}


def _outcome(outcome) -> dict:
    """An engine outcome as a statement's status, method and counterexample."""
    method = {"symbolic": "proved"}.get(outcome.method, outcome.method)
    return {"status": _STATUS.get(outcome.status, outcome.status), "method": method,
            "detail": outcome.detail, "counterexample": outcome.counterexample}


def _killing_vectors(geo, spec, budget) -> list[dict]:
    """The obvious Killing vectors, then each declared one proved with Killing's equation."""
    import sympy as sp

    from gravicat.physics.killing import obvious_killing_vectors, prove_killing_vector

    names = [str(c) for c in geo.coords]
    out = []
    for x in obvious_killing_vectors(geo):
        out.append({"vector": f"d/d{x}", "components": ["1" if c == x else "0" for c in names],
                    "status": "holds", "method": "proved",
                    "source": f"obvious: the metric does not depend on {x} (every d_{x} g_ab = 0 exactly)"})
    declared = (spec.extra.get("declarations") or {}).get("killing") or {}
    for name, xi in declared.items():
        item = {"vector": name, "components": [sp.sstr(x) for x in xi], "source": "declared"}
        item.update(_outcome(prove_killing_vector(spec, list(xi), budget=budget)))
        out.append(item)
    return out


def _killing_tensors(geo, spec, budget) -> list[dict]:
    """Each declared Killing tensor proved with the Killing tensor equation (K^ab lowered with g)."""
    import sympy as sp

    from gravicat.physics.killing import prove_killing_tensor

    declared = (spec.extra.get("declarations") or {}).get("killing-tensors") or {}
    out = []
    n = geo.n
    for name, t in declared.items():
        K = t["components"]
        if t["indices"] == "upper":
            K = spec.metric * K * spec.metric
        K = [[K[a, b] for b in range(n)] for a in range(n)]
        item = {"tensor": name, "indices": t["indices"],
                "components": [[sp.sstr(x) for x in row] for row in t["components"].tolist()], "source": "declared"}
        if geo.degeneracy() is not None:
            item.update({"status": "undecided", "method": "none", "detail": "the metric is degenerate",
                         "counterexample": None})
        else:
            item.update(_outcome(prove_killing_tensor(spec, K, budget=budget)))
        out.append(item)
    return out


def _functions_note(spec, conditions: dict) -> None:
    """With arbitrary functions in the metric, a violation at a sample point is a violation for some
    choice of their values only: say so."""
    if not spec.functions:
        return
    names = ", ".join(str(f) for f in spec.functions)
    for item in conditions.values():
        if isinstance(item, dict) and item.get("status") == "violated":
            item["status"] = f"depends on {names}"
            item["method"] = "sampled"
            item["detail"] = (f"violated for the function values of the counterexample; holds or fails "
                              f"according to {names}")


def _sampled_conditions(geo, spec, include_lambda: bool) -> tuple[dict, dict]:
    from gravicat.physics.matter import CONDITIONS, energy_conditions

    if geo.n != 4:
        conds = {c: {"status": "undecided", "method": "none", "counterexample": None,
                     "detail": "T^a_b is not of the exact diagonal form, and the sampled frame analysis "
                               "is written for 4 dimensions"} for c in CONDITIONS}
        return conds, {"hawking_ellis_type": None, "eigenvalues": None}
    ec = energy_conditions(geo, spec, include_lambda)
    types = ec.pop("hawking_ellis_types")
    conds = {c: ec[c] for c in CONDITIONS}
    he = types[0] if len(types) == 1 else ("/".join(types) if types else None)
    where = f"at {len(geo.sample_points())} sample points" if types else ""
    matter = {"hawking_ellis_type": he, "hawking_ellis_where": where, "eigenvalues": None,
              "eigenvalues_note": "T^a_b is not diagonal in the chart: eigenvalues at sample points only"}
    return conds, matter


def _energy(geo, spec, include_lambda: bool, budget: float) -> tuple[dict, dict]:
    from gravicat.physics.energy_proof import CONDITIONS, proved_energy_conditions

    reason = geo.degeneracy()
    if reason is not None:
        conds = {c: {"status": "undecided", "method": "none", "counterexample": None,
                     "detail": f"the metric is degenerate ({reason})"} for c in CONDITIONS}
        return conds, {"hawking_ellis_type": None, "eigenvalues": None}
    got = proved_energy_conditions(geo, spec, include_lambda=include_lambda, budget=budget)
    if got is None:
        conds, matter = _sampled_conditions(geo, spec, include_lambda)
    else:
        conds = {c: got[c] for c in CONDITIONS}
        matter = {"hawking_ellis_type": got["hawking_ellis_type"],
                  "hawking_ellis_where": "on the domain (T^a_b diagonal, a timelike eigenvector)",
                  "eigenvalues": got["eigenvalues"]}
    _functions_note(spec, conds)
    return conds, matter


CONVENTION = "8 pi T_ab = G_ab + Lambda g_ab (the declared cosmological constant on the geometric side)"
LAMBDA_AS_MATTER = ("8 pi T_ab = G_ab (the cosmological constant counted as matter, vacuum energy: "
                    "rho = Lambda/(8 pi), p = -Lambda/(8 pi) for a vacuum)")


def classify_chart(spec, *, budget: float = 20.0, doc=None, fixed: dict | None = None) -> dict:
    """The classification of one chart (the ``charts[]`` object of ``classify --json``)."""
    import sympy as sp

    from gravicat.engine.geometry import Geometry

    geo = Geometry(spec, budget=budget)
    out: dict[str, Any] = {"chart": spec.chart, "dimension": geo.n}
    if fixed:
        out["parameters"] = {str(k): sp.sstr(v) for k, v in fixed.items()}
    out["petrov"] = _petrov(geo, spec, doc, budget, fixed or {})
    out["killing_vectors"] = _killing_vectors(geo, spec, budget)
    out["killing_tensors"] = _killing_tensors(geo, spec, budget)
    conds, matter = _energy(geo, spec, True, budget)
    matter["convention"] = CONVENTION
    out["matter"] = matter
    out["energy_conditions"] = conds
    lam = spec.cosmological_constant
    if lam is not None and sp.sympify(lam) != 0:
        conds2, matter2 = _energy(geo, spec, False, budget)
        matter2["convention"] = LAMBDA_AS_MATTER
        out["lambda_as_matter"] = {"matter": matter2, "energy_conditions": conds2}
    return out


# ---------------------------------------------------------------------------
# declared statements of a metric file


def declared_statements(doc, chart: str) -> dict:
    """What the file declares for ``chart`` about its type and energy conditions (the declared
    Killing vectors and tensors are proved in the report itself): ``petrov-type``,
    ``energy-conditions`` (see :mod:`gravicat.format.declarations`)."""
    raw = doc.data.get("charts", {}).get(chart, {})
    out = {}
    if "petrov-type" in raw:
        out["petrov-type"] = raw["petrov-type"]
    if isinstance(raw.get("energy-conditions"), dict):
        out["energy-conditions"] = dict(raw["energy-conditions"])
    return out


def wrong_declarations(declared: dict, result: dict, *, fixed: bool = False) -> list[str]:
    """The declared statements the classification contradicts (one line each). With parameters
    fixed (``fixed``), only what must hold for every value is compared: a Killing vector or tensor,
    an energy condition declared ``holds``."""
    wrong = []
    want = declared.get("petrov-type")
    got = result.get("petrov", {}).get("type")
    if want is not None and got is not None and want != got and not fixed:
        wrong.append(f"petrov-type is declared {want} but the type is {got} ({result['petrov']['method']})")
    for item in result.get("killing_vectors", []) + result.get("killing_tensors", []):
        if item.get("source") == "declared" and item["status"] == "violated":
            what = f"killing.{item['vector']}" if "vector" in item else f"killing-tensors.{item['tensor']}"
            wrong.append(f"{what} does not satisfy {'Killing' if 'vector' in item else 'the Killing tensor'}"
                         f"'s equation: {item['detail']}")
    for cond, status in declared.get("energy-conditions", {}).items():
        item = result.get("energy_conditions", {}).get(cond)
        if not item:
            continue
        found = item["status"]
        if status == "holds" and found == "violated":
            wrong.append(f"energy-conditions.{cond} is declared holds but it is violated")
        elif status == "violated" and found == "holds" and item["method"] == "proved" and not fixed:
            wrong.append(f"energy-conditions.{cond} is declared violated but it is proved to hold")
    return wrong
