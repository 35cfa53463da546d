"""``NAME=VALUE`` option text: the one parser behind ``--set`` (and its older spellings).

Every command that takes values on the command line (parameter values, a starting point, a
velocity, an identification of parameters) reads them here, so ``--set M=1,a=0.9`` and
``--set M=1 --set a=0.9`` mean the same everywhere and a mistake reads the same everywhere.
Values are untrusted text: they go through the whitelist parser of :mod:`.expr`, never ``eval``.

Imports stay light: sympy is imported only when a value is built.
"""

from __future__ import annotations

import unicodedata
from collections.abc import Iterable, Mapping
from typing import Any

from gravicat.errors import InputError


def split_assignments(text: str, option: str) -> list[tuple[str, str]]:
    """``"a=1,b=pi/2"`` -> ``[("a", "1"), ("b", "pi/2")]``: split at commas outside parentheses.

    Names are NFKC-normalised as Python (and so the whitelist parser) reads identifiers: ``ℳ=1``
    assigns ``M``. Empty pieces (``"a=1,,b=2"``, a trailing comma) are ignored. A piece without ``=``, or with
    an empty name or value, is an :class:`InputError` naming ``option``. Repeats are *not* checked
    here (see :func:`parse_assignments`).
    """
    parts, depth, cur = [], 0, ""
    for ch in text:
        if ch == "(":
            depth += 1
        elif ch == ")":
            depth -= 1
        if ch == "," and depth == 0:
            parts.append(cur)
            cur = ""
        else:
            cur += ch
    parts.append(cur)
    out = []
    for part in parts:
        if not part.strip():
            continue
        name, eq, value = part.partition("=")
        # names are read as the expression parser reads them (Python identifiers, NFKC-normalised)
        name, value = unicodedata.normalize("NFKC", name.strip()), value.strip()
        if not eq or not name or not value:
            raise InputError(option, None, f"'{part.strip()}' is not NAME=VALUE (e.g. {option} M=1,a=0.9)")
        if not name.isidentifier():
            raise InputError(option, None, f"'{name}' is not a name (in '{part.strip()}')")
        out.append((name, value))
    return out


def real_number(value: Any, option: str, name: str | None, text: str) -> Any:
    """``value`` (a sympy object) if it is a finite real number, else an InputError.

    The messages: ``'x' is not a number`` (it still holds a free symbol), ``'1/0' is not a finite
    number``, ``'sqrt(-1)' is not a real number``. A value sympy cannot call real but that is real
    to 30 digits (e.g. ``(-8)**(1/3)`` is refused, ``cos(1)**2 + sin(1)**2`` accepted) is returned as
    given when sympy knows it is real, else as its real part evaluated to 30 digits.
    """
    import sympy

    if not getattr(value, "is_number", False):
        raise InputError(option, name, f"'{text}' is not a number")
    if value.has(sympy.zoo, sympy.oo, -sympy.oo, sympy.nan):
        raise InputError(option, name, f"'{text}' is not a finite number")
    re_part, im_part = value.evalf(30).as_real_imag()
    if im_part != 0 or not re_part.is_number or not re_part.is_finite:
        raise InputError(option, name, f"'{text}' is not a real number")
    return value if value.is_real else re_part


def parse_assignments(items: str | Iterable[str], option: str = "--set",
                      allowed: Mapping[str, Any] | Iterable[str] | None = None,
                      env: Mapping[str, Any] | None = None, *, kind: str = "parameter",
                      owner: str | None = None, numbers: bool = True, chained: bool = True) -> dict[str, Any]:
    """Parse ``NAME=VALUE`` option values into an ordered ``{name: sympy value}``.

    :param items: one option text or a list of them (one per repetition of the option); each may
        hold several comma-separated assignments, so ``["M=1,a=0.9"]``, ``["M=1", "a=0.9"]`` and
        ``"M=1,a=0.9"`` give the same result. Commas inside parentheses belong to the value
        (``r=atan2(1,2)`` is one assignment). Empty texts and empty pieces are ignored; no items
        give ``{}``.
    :param option: the option as the user typed it (``--set``); every error names it.
    :param allowed: the names that may be assigned (a mapping's keys, or any iterable of names);
        None allows any name. The result keeps the user's order.
    :param env: names a value may use, mapped to sympy objects (``pi`` is always known).
    :param kind, owner: words of the unknown-name error: ``--set: b: not a parameter of kerr
        (parameters: M, a)``; without ``owner``: ``... not a parameter (choose from: M, a)``.
    :param numbers: every value must be a finite real number (:func:`real_number`); with False a
        value may be any expression in the names of ``env``.
    :param chained: a value may use the names assigned before it (``M=2,a=M*45/100``).
    :return: ``{name: value}``, values exact sympy objects (decimals become fractions).
    :raises InputError: one line naming ``option`` (and the name when there is one) for a piece
        that is not ``NAME=VALUE``, a name that is not an identifier, a name outside ``allowed``, a
        name given more than once (also across repetitions), or a value that is not a number.
    :raises UnsafeExpression: a value the whitelist refuses (an unknown name or function).
    """
    from gravicat.format.expr import Names, check_expression, to_sympy

    texts = [items] if isinstance(items, str) else list(items)
    names = None if allowed is None else list(allowed)
    env = dict(env or {})
    out: dict[str, Any] = {}
    for text in texts:
        for name, value in split_assignments(text, option):
            if names is not None and name not in names:
                listed = ", ".join(names) or "none"
                where = f" of {owner} ({kind}s: {listed})" if owner else f" (choose from: {listed})"
                raise InputError(option, name, f"not a {kind}{where}")
            if name in out:
                raise InputError(option, name, "given more than once")
            scope = {**env, **out} if chained else env
            tree = check_expression(value, Names(symbols=frozenset(scope)), source=option, field=name)
            parsed = to_sympy(tree, scope)
            out[name] = real_number(parsed, option, name, value) if numbers else parsed
    return out
