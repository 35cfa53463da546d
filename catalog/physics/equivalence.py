"""Comparing two charts: the facts side by side, and a verdict on equivalence that is proved or withheld.

:func:`compare` takes two :class:`Subject` (a validated document and one of its
charts) and returns a :class:`Comparison`: per side the coordinates, signature,
field-equation claim and stored status, parameters and ranges, the obvious
symmetries (coordinates no metric component depends on) and the curvature
invariants (Ricci scalar, Kretschmann scalar R_abcd R^abcd, Weyl square
C_abcd C^abcd) in closed form; then a verdict with its evidence.

Verdicts (``Comparison.verdict``):

``identical``
    B's metric is A's after renaming coordinates (and unmatched parameters):
    every component agrees exactly.
``equivalent``
    proved locally isometric: the pull-back of one metric through a coordinate
    map (``--map``, a transform declared in the entry, or a map found by
    matching a curvature scalar) equals the other metric exactly; or both
    charts have constant curvature with the same value, dimension and
    signature (S. Weinberg, Gravitation and Cosmology (1972), chapter 13:
    a maximally symmetric metric is fixed locally by these; recalled from
    memory).
``not-equivalent``
    proved different: a scalar invariant is constant on one side and not on
    the other, or both constant with different values; two invariants are
    functionally dependent on one side and independent on the other (the
    rank of their Jacobian is invariant); a relation between two invariants
    that holds on one side fails on the other (checked exactly at a point, or
    symbolically); or the signatures or dimensions differ.
``undecided``
    none of the above: "not shown equivalent", with what was tested.

Parameters are identified by ``match`` (``"Q=e"``: B's Q equals A's e, or
A's Q equals B's e when only A has a Q), then by equal names; the others stay
free. A parameter-dependent proof of non-equivalence is used only when at most
one side has free parameters, and then holds for generic values of them.
A coordinate map (``--map``) may name the parameters of either chart by their own names; a
parameter identified by ``match`` stands for what it was identified with.
Every "identically zero" claim goes through :func:`gravicat.engine.geometry.prove_zero`
(exact sampled stage, then exact proof), so "proved" means proved.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from gravicat.errors import InputError
from gravicat.physics.equivalence_invariants import _constant, _constant_curvature, _obstructions
from gravicat.physics.equivalence_maps import _declared_map, _renaming, _search_map, _user_map
from gravicat.physics.equivalence_sides import (
    CONSTANT_CURVATURE_SOURCE,
    GRADIENT,
    INVARIANTS,
    VERDICTS,
    Comparison,
    Evidence,
    Subject,
    _invariants,
    _Side,
    _sig_text,
    _signature,
    _sstr,
    _symmetries,
    _unify,
)

__all__ = ["CONSTANT_CURVATURE_SOURCE", "GRADIENT", "INVARIANTS", "VERDICTS", "Comparison", "Evidence", "Subject",
           "compare"]


# --------------------------------------------------------------------------- the comparison


def _side_json(side: _Side, shown_match: dict[str, str]) -> dict[str, Any]:
    s = side.subject
    doc = s.doc.data
    params = []
    for name, p in doc["parameters"].items():
        params.append({"name": name, "range": p.get("range"), "matched": shown_match.get(f"{side.key}.{name}")})
    syms = _symmetries(side.spec)
    return {
        "subject": s.label,
        "entry": s.doc.id,
        "chart": s.chart,
        "title": doc["title"],
        "revision": s.revision,
        "number": s.number,
        "source": s.doc.source,
        "coordinates": [str(c) for c in side.coords],
        "signature": _sig_text(side.signature) if side.signature else None,
        "signature_note": side.signature_note,
        "field_equations": doc["field-equations"],
        "status": s.status,
        "parameters": params,
        "symmetries": {"dimension": len(syms), "coordinates": syms},
        "invariants": {k: (_sstr(side.inv[k]) if side.inv.get(k) is not None else None) for k in INVARIANTS},
        "invariants_note": side.inv_note,
    }


def compare(a: Subject, b: Subject, *, match: Sequence[str] = (), coordinate_map: Sequence[str] = (),
            budget: float = 20.0, search_map: bool = True) -> Comparison:
    """Compare chart ``a.chart`` of ``a.doc`` with chart ``b.chart`` of ``b.doc``. See the module docstring."""
    from gravicat.format.metricfile import build_chart

    sa = _Side("A", a, build_chart(a.doc, a.chart))
    sb = _Side("B", b, build_chart(b.doc, b.chart))
    shown, free_a, free_b, apart = _unify(sa, sb, match)
    evidence: list[Evidence] = [
        Evidence("parameters", "skipped", f"A's {name} and B's {name} are not identified (incompatible ranges or "
                                          f"signs); B's is called {name}_B here") for name in apart]
    verdict, summary = None, ""
    mapping = None
    if coordinate_map and sa.n != sb.n:
        raise InputError("--map", None, f"A has {sa.n} coordinates and B {sb.n}: no coordinate map between them")

    ren = _renaming(sa, sb, free_a, free_b, budget)
    if ren is not None:
        evidence.append(ren)
        verdict, summary = "identical", "the same chart up to renaming of symbols"
    if verdict is None and coordinate_map:
        ev, mapping = _user_map(sa, sb, coordinate_map, budget)
        evidence.append(ev)
        if ev.result == "proved":
            verdict, summary = "equivalent", "proved equal by pull-back through the given map"
    if verdict is None and not coordinate_map:
        ev = _declared_map(sa, sb, budget)
        if ev is not None:
            evidence.append(ev)
            if ev.result == "proved":
                verdict, summary = "equivalent", "proved equal by pull-back through the declared transform"

    for side in (sa, sb):
        _invariants(side, budget)
        _signature(side, budget)

    if verdict is None:
        verdict, summary = _decide(sa, sb, free_a, free_b, evidence, budget, search_map)
    if shown:
        summary += " (with " + ", ".join(f"{k} = {v}" for k, v in shown.items()) + ")"
    sides = [_side_json(sa, shown), _side_json(sb, shown)]
    for side, js in ((sa, sides[0]), (sb, sides[1])):
        extra = {k: _sstr(v) for k, v in side.inv.items() if k not in INVARIANTS and v is not None}
        if extra:
            js["invariants"].update(extra)
    return Comparison(verdict, summary, evidence, sides, shown, mapping)


def _decide(sa: _Side, sb: _Side, free_a, free_b, evidence: list[Evidence], budget: float,
            search_map: bool) -> tuple[str, str]:
    both_free = bool(free_a) and bool(free_b)
    if both_free:
        original = {str(p) for p in sb.spec0.params}
        hint = (f" (give --set, e.g. --set {free_b[0]}={free_a[0]})" if str(free_b[0]) in original else "")
        evidence.append(Evidence("parameters", "skipped",
                                 f"parameters not identified: {', '.join(map(str, free_a))} (A) and "
                                 f"{', '.join(map(str, free_b))} (B); evidence that depends on how they are "
                                 f"identified is not used{hint}"))
    consistent: list[Evidence] = []
    found = _obstructions(sa, sb, budget, consistent)
    usable = [o for o in found if not (both_free and o.needs_identification)]
    if usable:
        ob = usable[0]
        evidence.append(ob.evidence)
        free = [str(p) for p in free_a + free_b]
        qual = f" for generic values of {', '.join(free)}" if free and not ob.for_all else ""
        return "not-equivalent", f"not equivalent{qual}: {ob.summary}"
    for o in found:
        evidence.append(Evidence(o.evidence.kind, "skipped", "not used (parameters not identified): "
                                 + o.evidence.detail, o.evidence.data))
    evidence.extend(consistent)

    # both of constant curvature with the same value: locally isometric
    if sa.n == sb.n and sa.signature is not None and sa.signature == sb.signature:
        ra, rb = sa.inv.get("ricci-scalar"), sb.inv.get("ricci-scalar")
        if ra is not None and rb is not None and _constant(ra, sa.coords) and _constant(rb, sb.coords):
            import sympy as sp

            if sp.cancel(ra - rb) == 0:
                oa = _constant_curvature(sa, budget)
                ob_ = _constant_curvature(sb, budget) if oa is not None and oa.status == "pass" else None
                if oa is not None and ob_ is not None and oa.status == "pass" and ob_.status == "pass":
                    k = sp.factor(ra / (sa.n * (sa.n - 1)))
                    evidence.append(Evidence(
                        "constant-curvature", "proved",
                        f"both charts have constant curvature: R_abcd = K (g_ac g_bd - g_ad g_bc) with "
                        f"K = R/{sa.n * (sa.n - 1)} = {_sstr(k)} (proved in each chart; A: {oa.method}, B: "
                        f"{ob_.method}), the same signature {_sig_text(sa.signature)} and dimension {sa.n}; such "
                        f"metrics are locally isometric ({CONSTANT_CURVATURE_SOURCE})",
                        {"curvature": _sstr(k), "ricci_scalar": _sstr(ra), "source": CONSTANT_CURVATURE_SOURCE}))
                    return "equivalent", (f"locally: both have constant curvature with "
                                          f"R = {_sstr(ra)}")
    if search_map:
        pivot = next((k for k in ("kretschmann", "weyl-square", "ricci-scalar")
                      if sa.inv.get(k) is not None and sb.inv.get(k) is not None
                      and not _constant(sa.inv[k], sa.coords) and not _constant(sb.inv[k], sb.coords)), None)
        if pivot is not None:
            ev = _search_map(sa, sb, pivot, budget)
            if ev is not None:
                evidence.append(ev)
                return "equivalent", "proved equal by pull-back through a map found from the curvature scalars"
    missing = [s.name for s in (sa, sb) if s.inv_note]
    note = f"; curvature not computed for {', '.join(missing)}" if missing else ""
    evidence.append(Evidence("verdict", "inconclusive",
                             "no coordinate map proved and no invariant separates the charts" + note))
    return "undecided", "not shown equivalent: no isometry was proved and no invariant separates the charts" + note
