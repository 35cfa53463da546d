"""Parameter values of a chart for the observer physics: ``NAME=VALUE`` settings, defaults, units, ranges.

The settings are read by the one ``NAME=VALUE`` parser (:mod:`gravicat.format.assign`), so
``--set M=1,a=0.9`` and ``--set M=1 --set a=0.9`` mean the same here as in every other command.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

from gravicat.errors import InputError
from gravicat.physics import units as U


@dataclass(frozen=True)
class Parameters:
    """Numeric parameter values in the chart's geometrized units.

    ``exact``: name -> exact sympy number; ``given``: name -> the text given on the
    command line; ``defaults_used``: names filled from the file's ``default``;
    ``notes``: what was assumed or converted, one sentence each.
    """

    exact: dict[str, Any]
    given: dict[str, str] = field(default_factory=dict)
    defaults_used: tuple[str, ...] = ()
    units: str = "geometrized"
    notes: tuple[str, ...] = ()

    @property
    def values(self) -> dict[str, float]:
        return {k: float(v) for k, v in self.exact.items()}


def parse_number(text: str, *, source: str, field: str, env: Mapping[str, Any] | None = None):
    """A real, finite number from untrusted text (whitelist parser; ``env`` names allowed).

    The checks and their messages are those of every ``NAME=VALUE`` option
    (:func:`gravicat.format.assign.real_number`).
    """
    from gravicat.format.assign import real_number
    from gravicat.format.expr import Names, check_expression, to_sympy

    env = dict(env or {})
    tree = check_expression(text, Names(symbols=frozenset(env)), source=source, field=field)
    return real_number(to_sympy(tree, env), source, field, text)


def is_mass_parameter(doc, name: str) -> bool:
    """A parameter read as GM (m^3/s^2) with --units si: its description names a mass, or it is
    an undescribed ``M``."""
    description = doc.data["parameters"].get(name, {}).get("description", "")
    return bool(re.search(r"\bmass\b", description, re.I)) or (name == "M" and not description)


def _show(value) -> str:
    import sympy

    if isinstance(value, sympy.Rational) and len(str(value)) <= 16:
        return str(value)
    return f"{float(value):.10g}"


def resolve_parameters(doc, spec, settings: str | Iterable[str] | Mapping[str, Any] = (), *,
                       units: str = "geometrized", source: str = "--set") -> Parameters:
    """Parameter values from ``NAME=VALUE`` texts, defaults, unit conversion and range checks.

    ``settings``: the texts of a repeatable ``--set`` (each may hold several comma-separated
    assignments: ``["M=1,a=0.9"]`` and ``["M=1", "a=0.9"]`` are the same), one such text, or a
    mapping name -> value. They are read by the one ``NAME=VALUE`` parser
    (:func:`gravicat.format.assign.parse_assignments`); in geometrized units a value may use the
    parameters assigned before it (``M=2,a=M/2``; not with ``units="si"``, where they differ in kind).

    Raises :class:`InputError` (one line, naming the parameter) for a malformed or
    unknown setting, a missing value without default, or a value outside the
    parameter's ``range`` or assumptions. With ``units="si"`` mass parameters are
    GM in m^3/s^2 (converted to GM/c^2 in metres), every other parameter a length
    in metres, and every parameter must be given (defaults are geometrized).
    """
    import sympy

    from gravicat.format.assign import parse_assignments, split_assignments
    from gravicat.format.expr import Names, check_relation, relation_to_sympy

    if units not in U.SYSTEMS:
        raise InputError("--units", None, f"'{units}' is not one of {', '.join(U.SYSTEMS)}")
    symbols = {str(p): p for p in spec.params}
    if isinstance(settings, Mapping):
        items = [f"{name}={value}" for name, value in settings.items()]
    else:
        items = [settings] if isinstance(settings, str) else list(settings)
    exact: dict[str, Any] = parse_assignments(items, source, allowed=symbols, kind="parameter", owner=spec.entry,
                                                chained=units != "si")
    given: dict[str, str] = {name: text for item in items for name, text in split_assignments(item, source)}
    notes: list[str] = []
    if units == "si":
        c2 = sympy.Integer(int(U.C)) ** 2
        for name in list(exact):
            if is_mass_parameter(doc, name):
                exact[name] = exact[name] / c2
                notes.append(f"{name}: GM = {given[name]} m^3/s^2 is the length GM/c^2 = "
                             f"{float(exact[name]):.10g} m")
        others = [n for n in exact if not is_mass_parameter(doc, n)]
        if others:
            notes.append(f"{', '.join(others)} read as length{'s' if len(others) > 1 else ''} in metres")
    defaults_used = [n for n in symbols if n not in exact]
    for name in defaults_used:
        if units == "si":
            raise InputError(source, name, "no value given; with --units si give every parameter "
                                           "(the file's defaults are in geometrized units)")
        if symbols[name] not in spec.defaults:
            raise InputError(source, name, f"no value given and the parameter has no default; add --set {name}=VALUE")
    pending = list(defaults_used)
    while pending:
        progress = False
        for name in list(pending):
            value = spec.defaults[symbols[name]].subs({symbols[k]: v for k, v in exact.items()})
            if not value.free_symbols:
                exact[name] = value
                pending.remove(name)
                progress = True
                notes.append(f"{name} not given: using its default {name} = {_show(value)}")
        if not progress:
            raise InputError(source, pending[0], "no value given and its default depends on parameters "
                                                 "without values; add --set " + f"{pending[0]}=VALUE")
    subs = {symbols[k]: v for k, v in exact.items()}
    pnames = Names(symbols=frozenset(symbols))
    for name, p in doc.data["parameters"].items():
        value = exact[name]
        shown = given.get(name, _show(value))
        if "range" in p:
            for rel in check_relation(p["range"], pnames, source=doc.source, field=f"parameters.{name}.range"):
                truth = relation_to_sympy(rel, symbols).subs(subs)
                if truth is sympy.false:
                    others = sorted(str(s) for s in relation_to_sympy(rel, symbols).free_symbols if str(s) != name)
                    with_ = f" (with {', '.join(f'{o} = {given.get(o, _show(exact[o]))}' for o in others)})" \
                        if others else ""
                    unit = " (as a length GM/c^2 in metres)" if units == "si" and is_mass_parameter(doc, name) else ""
                    raise InputError(source, name, f"{name} = {shown}{unit} is outside its range "
                                                   f"{p['range']}{with_}")
        for flag in p.get("assume", []):
            ok = {"positive": value > 0, "nonnegative": value >= 0, "negative": value < 0,
                  "nonzero": value != 0, "integer": getattr(value, "is_integer", False), "real": True}[flag]
            if not ok:
                raise InputError(source, name, f"{name} = {shown} is not {flag}")
    return Parameters(exact=exact, given=given, defaults_used=tuple(defaults_used), units=units,
                      notes=tuple(notes))
