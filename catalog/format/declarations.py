"""Declared statements of a chart: Petrov type, Killing vectors, Killing tensors, energy conditions.

A chart of a metric file may declare what its spacetime is known to satisfy; the verifier plugins
``petrov``, ``killing`` and ``energy-conditions`` prove each declaration or report a counterexample.
The keys (all optional, per chart)::

    petrov-type = "D"                        # one of I, II, D, III, N, O (4 dimensions only)

    [charts.X.killing]                       # Killing vector fields xi^a (upper index), by name:
    time = ["1", "0", "0", "0"]              #   a list of components in coordinate order, or
    axial = { phi = "1" }                    #   a table coordinate -> component (missing = 0)

    [charts.X.killing-tensors.carter]        # Killing tensors K, by name:
    indices = "lower"                        #   "lower" (K_ab) or "upper" (K^ab): stated, no default
    components = [["...", ...], ...]         #   the symmetric n x n matrix in coordinate order

    energy-conditions = { null = "holds", weak = "violated" }   # null | weak | strong | dominant

Components are expressions of the chart (its coordinates, parameters, declared functions and
definitions), parsed by the whitelist parser and re-printed canonically. Only keys the file
declares appear in the canonical form, so a file without declarations keeps its content hash.

:func:`check_declarations` validates (no sympy); :func:`build_declarations` turns the canonical
form into sympy objects for :func:`gravicat.format.charts.build_chart`, which hands them to the
verifiers as ``spec.extra["declarations"]``.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from typing import Any

PETROV_TYPES = ("I", "II", "D", "III", "N", "O")
CONDITIONS = ("null", "weak", "strong", "dominant")
CONDITION_STATES = ("holds", "violated")
INDEX_POSITIONS = ("lower", "upper")
DECLARATION_KEYS = ("petrov-type", "killing", "killing-tensors", "energy-conditions")
TENSOR_KEYS = ("indices", "components")

_SLUG = re.compile(r"^[a-z0-9][a-z0-9-]{0,79}$")
MAX_DECLARED = 20  # vectors or tensors per chart


def check_declarations(v, craw: dict, base: str, names, coords: list[str],
                       defines: dict[str, str] | None = None) -> dict[str, Any]:
    """The canonical form of the declarations ``craw`` holds (only the keys present).

    ``v`` is the validator of :mod:`gravicat.format.metricfile` (``fail``, ``table``, ``string``,
    ``expr``); ``names`` the chart's whitelist names (definitions included); ``defines`` the chart's
    canonical definitions (for the size limits of :mod:`gravicat.format.size`)."""
    out: dict[str, Any] = {}
    n = len(coords)
    if "petrov-type" in craw:
        field = f"{base}.petrov-type"
        ptype = v.string(craw["petrov-type"], field, max_len=10)
        if ptype not in PETROV_TYPES:
            v.fail(field, f"'{ptype}' is not a Petrov type (one of {', '.join(PETROV_TYPES)})")
        if n != 4:
            v.fail(field, f"the Petrov type is defined in 4 dimensions only (this chart has {n} coordinates)")
        out["petrov-type"] = ptype
    if "killing" in craw:
        vectors = {}
        table = v.table(craw["killing"], f"{base}.killing")
        _count(v, table, f"{base}.killing", "Killing vectors")
        for name, comps in table.items():
            field = f"{base}.killing.{name}"
            _name(v, name, field)
            vectors[name] = _vector(v, comps, field, names, coords)
        out["killing"] = vectors
    if "killing-tensors" in craw:
        tensors = {}
        table = v.table(craw["killing-tensors"], f"{base}.killing-tensors")
        _count(v, table, f"{base}.killing-tensors", "Killing tensors")
        for name, traw in table.items():
            field = f"{base}.killing-tensors.{name}"
            _name(v, name, field)
            v.table(traw, field, TENSOR_KEYS)
            for key in TENSOR_KEYS:
                if key not in traw:
                    hint = " ('lower' for K_ab, 'upper' for K^ab)" if key == "indices" else \
                        f" (a symmetric {n}x{n} matrix in coordinate order)"
                    v.fail(f"{field}.{key}", "missing (required)" + hint)
            pos = v.string(traw["indices"], f"{field}.indices", max_len=10)
            if pos not in INDEX_POSITIONS:
                v.fail(f"{field}.indices", f"'{pos}' is not 'lower' (K_ab) or 'upper' (K^ab)")
            rows = traw["components"]
            if not isinstance(rows, list) or len(rows) != n or any(not isinstance(r, list) or len(r) != n
                                                                  for r in rows):
                v.fail(f"{field}.components", f"must be a {n}x{n} matrix (a list of {n} rows of {n} entries)")
            matrix = [[v.expr(x, names, f"{field}.components[{i}][{j}]") for j, x in enumerate(row)]
                      for i, row in enumerate(rows)]
            if all(matrix[i][j] == "0" for i in range(n) for j in range(n)):
                v.fail(f"{field}.components", "every component is 0 (the zero tensor states nothing)")
            tensors[name] = {"indices": pos, "components": matrix}
        out["killing-tensors"] = tensors
    if "energy-conditions" in craw:
        field = f"{base}.energy-conditions"
        table = v.table(craw["energy-conditions"], field, CONDITIONS)
        if not table:
            v.fail(field, f"declares no condition (keys: {', '.join(CONDITIONS)})")
        conds = {}
        for cond in CONDITIONS:  # canonical order
            if cond in table:
                state = v.string(table[cond], f"{field}.{cond}", max_len=20)
                if state not in CONDITION_STATES:
                    v.fail(f"{field}.{cond}", f"'{state}' is not 'holds' or 'violated'")
                conds[cond] = state
        out["energy-conditions"] = conds
    _check_sizes(v, base, out, defines or {})
    return out


def _check_sizes(v, base: str, out: dict, defines: dict[str, str]) -> None:
    """The parse-time size limits of the metric (:mod:`gravicat.format.size`) for every component."""
    from gravicat.format.size import MAX_DEGREE, MAX_TERMS, chart_sizes, measure
    from gravicat.format.size import _parse as parse

    texts = [(f"killing.{name}[{i}]", x) for name, comps in out.get("killing", {}).items()
             for i, x in enumerate(comps)]
    texts += [(f"killing-tensors.{name}.components[{i}][{j}]", x)
              for name, t in out.get("killing-tensors", {}).items()
              for i, row in enumerate(t["components"]) for j, x in enumerate(row)]
    if not texts:
        return
    known = {k[len("define."):]: s for k, s in chart_sizes({"define": defines}).items()}
    for field, text in texts:
        size = measure(parse(text), known)
        if size.worst_degree > MAX_DEGREE or size.worst_terms > MAX_TERMS:
            v.fail(f"{base}.{field}", f"too large once definitions are substituted (degree limit {MAX_DEGREE}, "
                                      f"{MAX_TERMS} terms; see docs/limits.md)")


def _count(v, table: dict, field: str, what: str) -> None:
    if not table:
        v.fail(field, f"declares no {what} (remove the key or add one)")
    if len(table) > MAX_DECLARED:
        v.fail(field, f"{len(table)} {what} (limit {MAX_DECLARED} per chart)")


def _name(v, name, field: str) -> None:
    if not isinstance(name, str) or not _SLUG.match(name):
        v.fail(field, "names of declared vectors and tensors are slugs (lowercase letters, digits and '-')")


def _vector(v, comps, field: str, names, coords: list[str]) -> list[str]:
    n = len(coords)
    if isinstance(comps, list):
        if len(comps) != n:
            v.fail(field, f"has {len(comps)} components; the chart has {n} coordinates "
                          f"({', '.join(coords)})")
        out = [v.expr(x, names, f"{field}[{i}]") for i, x in enumerate(comps)]
    elif isinstance(comps, dict):
        for key in comps:
            if key not in coords:
                v.fail(f"{field}.{key}", f"'{key}' is not a coordinate of this chart ({', '.join(coords)})")
        out = [v.expr(comps[c], names, f"{field}.{c}") if c in comps else "0" for c in coords]
    else:
        v.fail(field, f"must be a list of {n} components in coordinate order or a table coordinate -> component")
    if all(x == "0" for x in out):
        v.fail(field, "every component is 0 (the zero vector is trivially Killing)")
    return out


def build_declarations(c: dict, build: Callable[[str, str], Any], source: str, base: str) -> dict[str, Any]:
    """The sympy form of a chart's declarations (``c``: the chart's canonical data; ``build(text,
    field)`` parses one expression of the chart). Keys: ``petrov-type`` (str), ``killing`` (name ->
    tuple of components xi^a), ``killing-tensors`` (name -> ``{"indices", "components"}`` with an
    immutable sympy matrix), ``energy-conditions`` (condition -> "holds" | "violated")."""
    import sympy

    from gravicat.errors import InputError

    out: dict[str, Any] = {}
    if "petrov-type" in c:
        out["petrov-type"] = c["petrov-type"]
    if "killing" in c:
        out["killing"] = {name: tuple(build(x, f"{base}.killing.{name}[{i}]") for i, x in enumerate(comps))
                          for name, comps in c["killing"].items()}
    if "killing-tensors" in c:
        tensors = {}
        for name, t in c["killing-tensors"].items():
            field = f"{base}.killing-tensors.{name}.components"
            rows = t["components"]
            m = sympy.Matrix([[build(x, f"{field}[{i}][{j}]") for j, x in enumerate(row)]
                              for i, row in enumerate(rows)])
            for i in range(m.rows):
                for j in range(i + 1, m.rows):
                    if m[i, j] != m[j, i] and sympy.cancel(m[i, j] - m[j, i]) != 0:
                        raise InputError(source, f"{field}[{i}][{j}]",
                                         f"the matrix is not symmetric: '{rows[i][j]}' differs from "
                                         f"components[{j}][{i}] = '{rows[j][i]}'")
            tensors[name] = {"indices": t["indices"], "components": sympy.ImmutableMatrix(m)}
        out["killing-tensors"] = tensors
    if "energy-conditions" in c:
        out["energy-conditions"] = dict(c["energy-conditions"])
    return out
