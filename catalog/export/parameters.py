"""Fixed parameter values of an export: read (``--set`` text or a mapping), checked against the
declared assumptions and ranges, made exact (see :mod:`gravicat.export.codegen`)."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from gravicat.errors import InputError
from gravicat.format.assign import parse_assignments, real_number


def _relations(doc, pname: str, symbols: Mapping[str, Any]):
    from gravicat.format.expr import Names, check_relation, relation_to_sympy

    text = doc.data["parameters"][pname].get("range")
    if not text:
        return text, []
    rels = check_relation(text, Names(symbols=frozenset(symbols)), source=doc.source,
                          field=f"parameters.{pname}.range")
    return text, [relation_to_sympy(r, symbols) for r in rels]


_ASSUME = {
    "positive": (lambda v: v > 0, "positive"),
    "nonnegative": (lambda v: v >= 0, "nonnegative"),
    "negative": (lambda v: v < 0, "negative"),
    "nonzero": (lambda v: v != 0, "nonzero"),
    "integer": (lambda v: v.is_integer, "an integer"),
}


def fixed_parameters(doc, spec, params, option: str = "--set") -> dict[Any, Any]:
    """The parameter values to substitute: symbol -> exact number (empty for symbolic export).

    ``params`` is None, ``"symbolic"``, option text ``"M=1,a=9/10"`` or a mapping name -> value.
    Each value must satisfy the parameter's assumptions and every range whose parameters are all
    given; otherwise an InputError names the option and the parameter.
    """
    import sympy

    symbols = {str(p): p for p in spec.params}
    if params is None or (isinstance(params, str) and params.strip().lower() in ("", "symbolic")):
        return {}
    if isinstance(params, str):
        values = parse_assignments(params, option, symbols, {}, kind="parameter", owner=doc.id)
    elif isinstance(params, Mapping):
        values = {}
        for name, value in params.items():
            if name not in symbols:
                raise InputError(option, name, f"not a parameter of {doc.id} "
                                               f"(parameters: {', '.join(symbols) or 'none'})")
            if isinstance(value, str):
                values.update(parse_assignments(f"{name}={value}", option, symbols, values, kind="parameter",
                                                owner=doc.id))
            else:
                num = sympy.Rational(str(value)) if isinstance(value, float) else sympy.sympify(value)
                values[name] = real_number(num, option, name, str(value))
    else:
        raise InputError(option, None, f"cannot read parameters from {type(params).__name__}")
    check_parameter_values(doc, spec, values, option)
    return {symbols[k]: v for k, v in values.items()}


def check_parameter_values(doc, spec, values: Mapping[str, Any], option: str) -> None:
    """Assumptions and ranges of the given values (a range with an unknown parameter is skipped)."""
    symbols = {str(p): p for p in spec.params}
    for name, value in values.items():
        for assume in doc.data["parameters"][name].get("assume", []):
            if assume in _ASSUME:
                test, words = _ASSUME[assume]
                if not bool(test(value)):
                    raise InputError(option, name, f"{name} = {value} but the parameter is declared {words}")
    subs = {symbols[k]: v for k, v in values.items()}
    for pname in symbols:
        text, rels = _relations(doc, pname, symbols)
        for rel in rels:
            if not rel.free_symbols <= set(subs):
                continue
            if not bool(rel.subs(subs)):
                shown = ", ".join(f"{k} = {v}" for k, v in values.items() if symbols[k] in rel.free_symbols)
                culprit = pname if pname in values else next(k for k in values if symbols[k] in rel.free_symbols)
                raise InputError(option, culprit, f"{shown} is outside the range {text} of {pname}")


def numeric_parameters(doc, spec, params, option: str = "--set") -> dict[Any, Any]:
    """Every parameter as a number: the given values, else the file's defaults (for the probe)."""
    fixed = fixed_parameters(doc, spec, params, option)
    out = {}
    for p in spec.params:
        if p in fixed:
            out[p] = fixed[p]
        elif p in spec.defaults:
            out[p] = spec.defaults[p]
        else:
            raise InputError(option, str(p), f"give a value for {p} (the file declares no default)")
    check_parameter_values(doc, spec, {str(k): v for k, v in out.items()}, option)
    return out
