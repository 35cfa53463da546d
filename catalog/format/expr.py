"""Whitelist parser for expressions in metric files.

Metric files are exchanged between groups, so their text is data. An
expression is parsed with :func:`ast.parse` (which only builds a tree and runs
nothing), every node is checked against a whitelist, and only then is a sympy
object built from the tree by :func:`to_sympy`. ``eval``, ``sympify`` and
``parse_expr`` never see file text.

Allowed: integer and decimal literals (decimals become exact fractions),
declared names (coordinates, parameters, definitions, differentials in a line
element, functions), ``pi``, ``+ - * / **``, unary minus, parentheses, calls
of :data:`MATH_FUNCTIONS`, declared functions called with exactly their
declared coordinates (or named bare), and ``diff(f, x[, n])`` of a declared
function. Everything else is refused with the offending token named.

The validation half imports nothing heavy; only :func:`to_sympy` needs sympy.
"""

from __future__ import annotations

import ast
import math
import re
import sys
from collections.abc import Mapping
from contextlib import contextmanager
from dataclasses import dataclass, field
from fractions import Fraction

from gravicat.errors import UnsafeExpression

MAX_CHARS = 20_000
MAX_NODES = 5_000
MAX_DEPTH = 80
MAX_EXPONENT = 1_000
MAX_CONSTANT_BITS = 4_096  # largest exact constant a file may build (about 1 200 digits)
MAX_LITERAL_DIGITS = 60
MAX_DIFF_ORDER = 4

MATH_FUNCTIONS: dict[str, int] = {
    name: 1
    for name in (
        "sin cos tan cot sec csc asin acos atan sinh cosh tanh coth asinh acosh atanh "
        "exp log sqrt Abs LambertW sign"
    ).split()
}
CONSTANTS = frozenset({"pi"})
RESERVED = frozenset(MATH_FUNCTIONS) | CONSTANTS | {"diff"}

_BINOPS = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**"}
_UNARY = {ast.USub: "-", ast.UAdd: "+"}
_COMPARE = {ast.Lt: "<", ast.LtE: "<=", ast.Gt: ">", ast.GtE: ">="}


@dataclass(frozen=True)
class Names:
    """What an expression may refer to.

    ``symbols``: plain names (coordinates, parameters, definitions, differentials).
    ``functions``: declared function name -> its argument coordinates, in order.
    ``coordinates``: the chart's coordinates (the only valid ``diff`` variables).
    """

    symbols: frozenset[str] = frozenset()
    functions: Mapping[str, tuple[str, ...]] = field(default_factory=dict)
    coordinates: frozenset[str] = frozenset()
    constant_bits: Mapping[str, int] = field(default_factory=dict)  # definitions that are plain numbers

    def with_symbols(self, extra, constant_bits: Mapping[str, int] | None = None) -> Names:
        bits = dict(self.constant_bits)
        bits.update(constant_bits or {})
        return Names(self.symbols | frozenset(extra), self.functions, self.coordinates, bits)


class _Refuse(Exception):
    def __init__(self, problem: str):
        self.problem = problem


def _token(node: ast.AST) -> str:
    try:
        text = ast.unparse(node)
    except Exception:  # pragma: no cover - unparse handles every node ast.parse makes
        text = type(node).__name__
    return text if len(text) <= 40 else text[:37] + "..."


def _parse(text: object, mode_hint: str) -> tuple[ast.expr, str]:
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise _Refuse(f"expected an expression string, got {type(text).__name__}")
    if isinstance(text, (int, float)):
        text = repr(text)
    if len(text) > MAX_CHARS:
        raise _Refuse(f"expression is {len(text)} characters long (limit {MAX_CHARS})")
    if not text.strip():
        raise _Refuse(f"empty {mode_hint}")
    if "\x00" in text:
        raise _Refuse("contains a NUL character")
    text = text.strip()
    try:
        tree = ast.parse(text, mode="eval")
    except SyntaxError as exc:
        raise _Refuse(f"not a valid {mode_hint}: {exc.msg} at column {exc.offset}") from None
    except (RecursionError, MemoryError, ValueError):
        raise _Refuse(f"{mode_hint} is nested too deeply") from None
    return _exact_decimals(tree.body, text), text


_DECIMAL = re.compile(r"^(\d*)(?:\.(\d*))?(?:[eE]([+-]?\d+))?$")
MAX_DECIMAL_EXPONENT = 300


def _exact_decimals(tree: ast.expr, text: str) -> ast.expr:
    """Replace every decimal literal by the exact fraction its digits denote (``0.1`` -> ``1 / 10``).

    The float value Python parsed is never used: the digits come from the source text, so
    ``0.1000000000000000000001`` stays distinct from ``0.1``.
    """

    class Exact(ast.NodeTransformer):
        def visit_Constant(self, node):
            if not isinstance(node.value, float):
                return node
            literal = (ast.get_source_segment(text, node) or repr(node.value)).replace("_", "")
            m = _DECIMAL.match(literal)
            if not m or len(literal) > MAX_LITERAL_DIGITS:
                raise _Refuse(f"number literal '{literal[:40]}' is not allowed")
            whole, frac, exp = m.group(1) or "0", m.group(2) or "", int(m.group(3) or 0)
            if abs(exp) > MAX_DECIMAL_EXPONENT:
                raise _Refuse(f"number literal '{literal}' has an exponent beyond {MAX_DECIMAL_EXPONENT}")
            value = Fraction(int(whole + frac), 10 ** len(frac)) * Fraction(10) ** exp
            num = ast.Constant(value.numerator)
            num.from_decimal = True  # a decimal literal is never a diff() order
            if value.denominator == 1:
                return ast.copy_location(num, node)
            return ast.copy_location(ast.BinOp(num, ast.Div(), ast.Constant(value.denominator)), node)

    # without recursion (issue 14 item 12: a flat sum of 500 terms is a left-deep tree 500 levels
    # deep, which counts as terms, not as nesting): replace each float constant in its parent
    exact = Exact()
    if isinstance(tree, ast.Constant):
        return exact.visit_Constant(tree)
    for parent in ast.walk(tree):
        for name, value in ast.iter_fields(parent):
            if isinstance(value, ast.Constant):
                setattr(parent, name, exact.visit_Constant(value))
            elif isinstance(value, list):
                value[:] = [exact.visit_Constant(v) if isinstance(v, ast.Constant) else v for v in value]
    return tree


@dataclass(frozen=True)
class _Const:
    """What the checker knows of a constant subtree: its size in bits and, when small, its value."""

    bits: int
    value: Fraction | None = None


_SMALL_BITS = 128


def _chain(node: ast.expr, family: tuple[type, ...]) -> tuple[list[ast.expr], list[ast.operator]]:
    """Flatten a left-deep chain ``a + b - c + ...`` without recursion: operands and operators."""
    ops: list[ast.operator] = []
    rights: list[ast.expr] = []
    while isinstance(node, ast.BinOp) and isinstance(node.op, family):
        ops.append(node.op)
        rights.append(node.right)
        node = node.left
    return [node, *reversed(rights)], list(reversed(ops))


_ADDITIVE = (ast.Add, ast.Sub)
_MULTIPLICATIVE = (ast.Mult, ast.Div)


class _Checker:
    def __init__(self, names: Names):
        self.names = names
        self.count = 0

    def tick(self, n: int = 1) -> None:
        self.count += n
        if self.count > MAX_NODES:
            raise _Refuse(f"expression has more than {MAX_NODES} parts")

    def expr(self, node: ast.AST, depth: int = 0) -> _Const | None:
        """Check ``node``; describe it when it is a constant (no names, no functions)."""
        self.tick()
        if depth > MAX_DEPTH:
            raise _Refuse(f"expression is nested more than {MAX_DEPTH} levels deep")
        if isinstance(node, ast.Constant):
            return self.constant(node)
        if isinstance(node, ast.Name):
            return self.name(node)
        if isinstance(node, ast.UnaryOp) and type(node.op) in _UNARY:
            inner = self.expr(node.operand, depth + 1)
            if inner is not None and inner.value is not None and isinstance(node.op, ast.USub):
                return _Const(inner.bits, -inner.value)
            return inner
        if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Pow):
            return self.power(node, depth)
        if isinstance(node, ast.BinOp) and type(node.op) in _BINOPS:
            family = _ADDITIVE if isinstance(node.op, _ADDITIVE) else _MULTIPLICATIVE
            operands, ops = _chain(node, family)
            self.tick(len(operands) - 1)
            parts = [self.expr(o, depth + 1) for o in operands]
            if any(p is None for p in parts):
                return None
            if family is _ADDITIVE:
                bits = max(p.bits for p in parts) + len(parts).bit_length()
            else:
                bits = sum(p.bits for p in parts)
            self._limit_bits(bits, node)
            value = None
            if bits <= _SMALL_BITS and all(p.value is not None for p in parts):
                value = parts[0].value
                for op, p in zip(ops, parts[1:], strict=True):
                    if isinstance(op, ast.Add):
                        value += p.value
                    elif isinstance(op, ast.Sub):
                        value -= p.value
                    elif isinstance(op, ast.Mult):
                        value *= p.value
                    elif p.value == 0:
                        raise _Refuse(f"division by zero in '{_token(node)}'")
                    else:
                        value /= p.value
            return _Const(bits, value)
        if isinstance(node, ast.Call):
            self.call(node, depth)
            return None
        raise _Refuse(f"'{_token(node)}' is not allowed ({_describe(node)})")

    def _limit_bits(self, bits: int, node: ast.AST) -> None:
        if bits > MAX_CONSTANT_BITS:
            raise _Refuse(f"constant '{_token(node)}' is too large")

    def power(self, node: ast.BinOp, depth: int) -> _Const | None:
        base = self.expr(node.left, depth + 1)
        exponent = self.expr(node.right, depth + 1)
        if exponent is not None:
            if exponent.value is None:
                raise _Refuse(f"exponent '{_token(node.right)}' is larger than {MAX_EXPONENT} in size")
            if abs(exponent.value) > MAX_EXPONENT:
                raise _Refuse(f"exponent '{_token(node.right)}' is larger than {MAX_EXPONENT} in size")
        if base is None or exponent is None:
            return None
        e = exponent.value
        bits = base.bits * max(1, abs(e.numerator))
        self._limit_bits(bits, node)
        value = None
        if bits <= _SMALL_BITS and base.value is not None and e.denominator == 1:
            if base.value == 0 and e < 0:
                raise _Refuse(f"division by zero in '{_token(node)}'")
            value = base.value ** int(e)
        return _Const(bits, value)

    def constant(self, node: ast.Constant) -> _Const:
        value = node.value
        if isinstance(value, bool) or not isinstance(value, int):
            raise _Refuse(f"'{_token(node)}' is not allowed (only numbers, names and arithmetic)")
        digits = len(str(abs(value))) if value.bit_length() < 20_000 else MAX_LITERAL_DIGITS + 1
        if digits > MAX_LITERAL_DIGITS:
            raise _Refuse(f"number literal with {digits} digits (limit {MAX_LITERAL_DIGITS})")
        return _Const(max(1, value.bit_length()), Fraction(value))

    def name(self, node: ast.Name) -> _Const | None:
        ident = node.id
        if ident.startswith("_"):
            raise _Refuse(f"name '{ident}' is not allowed (names may not start with '_')")
        if ident in self.names.constant_bits:
            return _Const(self.names.constant_bits[ident])
        if ident in CONSTANTS or ident in self.names.symbols or ident in self.names.functions:
            return None
        if ident in MATH_FUNCTIONS or ident == "diff":
            raise _Refuse(f"function '{ident}' used without arguments")
        raise _Refuse(f"unknown name '{ident}' (declare it as a parameter, coordinate, definition or function)")

    def call(self, node: ast.Call, depth: int) -> None:
        if not isinstance(node.func, ast.Name):
            raise _Refuse(f"'{_token(node.func)}' is not a function name")
        fname = node.func.id
        if node.keywords or any(isinstance(a, ast.Starred) for a in node.args):
            raise _Refuse(f"call '{_token(node)}' may only have plain positional arguments")
        if fname in MATH_FUNCTIONS:
            if len(node.args) != MATH_FUNCTIONS[fname]:
                raise _Refuse(f"{fname}() takes {MATH_FUNCTIONS[fname]} argument, got {len(node.args)}")
            self.expr(node.args[0], depth + 1)
            return
        if fname in self.names.functions:
            wanted = self.names.functions[fname]
            got = tuple(a.id if isinstance(a, ast.Name) else None for a in node.args)
            if got != wanted:
                raise _Refuse(f"function '{fname}' is declared as {fname}({', '.join(wanted)}); "
                              f"call it exactly so, or write '{fname}' alone")
            self.tick(len(node.args))
            return
        if fname == "diff":
            self.diff(node)
            return
        if fname in self.names.symbols:
            raise _Refuse(f"'{fname}' is not a function (it is declared as a symbol)")
        raise _Refuse(f"unknown function '{fname}'")

    def diff(self, node: ast.Call) -> int:
        """Check ``diff(f, x[, n])`` (nested allowed); return the total order."""
        args = node.args
        if not 2 <= len(args) <= 3:
            raise _Refuse("diff() takes a function, a coordinate and an optional order")
        target = args[0]
        if isinstance(target, ast.Call) and isinstance(target.func, ast.Name) and target.func.id == "diff":
            inner_order = self.diff(target)
            inner = _diff_base(target)
        else:
            inner_order = 0
            if isinstance(target, ast.Call):
                self.call(target, 0)
                inner = target.func.id if isinstance(target.func, ast.Name) else None
            elif isinstance(target, ast.Name):
                inner = target.id
            else:
                inner = None
            if inner not in self.names.functions:
                raise _Refuse(f"diff() applies to a declared function, not '{_token(target)}'")
        var = args[1]
        if not isinstance(var, ast.Name) or var.id not in self.names.functions[inner]:
            raise _Refuse(f"diff(): '{_token(var)}' is not an argument of function '{inner}'")
        order = 1
        if len(args) == 3:
            arg = args[2]
            if not (isinstance(arg, ast.Constant) and type(arg.value) is int and 1 <= arg.value <= MAX_DIFF_ORDER
                    and not getattr(arg, "from_decimal", False)):
                raise _Refuse(f"diff(): order must be an integer from 1 to {MAX_DIFF_ORDER}")
            order = arg.value
        total = inner_order + order
        if total > MAX_DIFF_ORDER:
            raise _Refuse(f"diff(): total derivative order {total} is above {MAX_DIFF_ORDER}")
        self.tick(len(args))
        return total


def _diff_base(node: ast.Call) -> str:
    target = node.args[0]
    while isinstance(target, ast.Call) and isinstance(target.func, ast.Name) and target.func.id == "diff":
        target = target.args[0]
    if isinstance(target, ast.Call):
        return target.func.id  # type: ignore[union-attr]
    return target.id  # type: ignore[union-attr]


def _describe(node: ast.AST) -> str:
    kinds = {
        ast.Attribute: "attribute access",
        ast.Lambda: "lambda",
        ast.ListComp: "comprehension",
        ast.GeneratorExp: "comprehension",
        ast.SetComp: "comprehension",
        ast.DictComp: "comprehension",
        ast.Subscript: "subscript",
        ast.Compare: "comparison",
        ast.BoolOp: "boolean operator",
        ast.IfExp: "conditional expression",
        ast.NamedExpr: "assignment",
        ast.JoinedStr: "string",
        ast.List: "list",
        ast.Tuple: "tuple",
        ast.Dict: "dict",
        ast.Set: "set",
        ast.Await: "await",
        ast.Yield: "yield",
        ast.Starred: "star expression",
    }
    for cls, word in kinds.items():
        if isinstance(node, cls):
            return word
    if isinstance(node, ast.BinOp):
        return f"operator {type(node.op).__name__}"
    if isinstance(node, ast.UnaryOp):
        return f"operator {type(node.op).__name__}"
    return type(node).__name__


def check_expression(text: object, names: Names, *, source: str, field: str) -> ast.expr:
    """Parse and check one expression; return its tree. Raises UnsafeExpression."""
    return check_expression_size(text, names, source=source, field=field)[0]


def check_expression_size(text: object, names: Names, *, source: str, field: str) -> tuple[ast.expr, int | None]:
    """As :func:`check_expression`, also returning the size in bits when the expression is a plain number."""
    try:
        tree, _ = _parse(text, "expression")
        info = _Checker(names).expr(tree)
    except _Refuse as exc:
        raise UnsafeExpression(source, field, exc.problem) from None
    return tree, (info.bits if info is not None else None)


@dataclass(frozen=True)
class Relation:
    """One inequality ``left OP right`` (a chain ``a < b < c`` gives two)."""

    left: ast.expr
    op: str
    right: ast.expr

    def text(self) -> str:
        return f"{ast.unparse(self.left)} {self.op} {ast.unparse(self.right)}"


def check_relation(text: object, names: Names, *, source: str, field: str) -> list[Relation]:
    """Parse an inequality, chained allowed (``0 <= a <= M``)."""
    try:
        tree, _ = _parse(text, "inequality")
        if not isinstance(tree, ast.Compare):
            raise _Refuse(f"'{_token(tree)}' is not an inequality (use <, <=, >, >=)")
        checker = _Checker(names)
        operands = [tree.left, *tree.comparators]
        for operand in operands:
            checker.expr(operand, 1)
        relations = []
        for op, left, right in zip(tree.ops, operands, operands[1:], strict=False):
            if type(op) not in _COMPARE:
                raise _Refuse(f"comparison '{type(op).__name__}' is not allowed (use <, <=, >, >=)")
            relations.append(Relation(left, _COMPARE[type(op)], right))
    except _Refuse as exc:
        raise UnsafeExpression(source, field, exc.problem) from None
    return relations


@contextmanager
def _deep_recursion():
    """ast.unparse recurses once per operand of a long sum; checked trees are bounded by MAX_NODES."""
    old = sys.getrecursionlimit()
    sys.setrecursionlimit(max(old, 8 * MAX_NODES + 1000))
    try:
        yield
    finally:
        sys.setrecursionlimit(old)


def canonical(tree: ast.AST) -> str:
    """The canonical text of a checked tree (whitespace and redundant parentheses normalised)."""
    with _deep_recursion():
        return ast.unparse(tree)


def names_in(tree: ast.AST) -> set[str]:
    """Every identifier a checked tree refers to (functions included)."""
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Name):
            out.add(node.id)
    return out


# --------------------------------------------------------------------------- plain numbers, no sympy


class Undecided(Exception):
    """:func:`number` cannot settle the value (a name without a value, a function of the chart,
    a division by zero...)."""


class NotReal(Undecided):
    """The value is certainly not a finite real number (``sqrt(-1)``, ``log(0)``)."""


_NUMBER_DIGITS = 60  # working precision when a value is not rational
_UNDECIDED_BELOW = 40  # a difference below 10**-40 (relative) is not trusted to decide a comparison
_MAX_EXACT_BITS = 100_000
_MAX_ARGUMENT = 100_000  # exponential and periodic functions of a larger argument are not evaluated
_GROWING = frozenset("sin cos tan cot sec csc sinh cosh tanh coth exp".split())


def _root(value: Fraction, q: int) -> Fraction | None:
    """The exact non-negative ``q``-th root of a non-negative rational, or None when it is irrational."""

    def iroot(n: int) -> int | None:
        if q == 2:
            r = math.isqrt(n)
        else:
            r = int(round(float(n) ** (1.0 / q))) if n.bit_length() < 1000 else None
            if r is None:
                return None
            r = next((c for c in (r - 1, r, r + 1) if c >= 0 and c**q == n), -1)
        return r if r >= 0 and r**q == n else None

    top, bottom = iroot(value.numerator), iroot(value.denominator)
    return None if top is None or bottom is None else Fraction(top, bottom)


def number(tree: ast.AST, values: Mapping[str, object]):
    """The value of a checked expression whose names all have values in ``values``.

    Exact (a :class:`~fractions.Fraction`) while the arithmetic stays rational (integer
    powers, roots of perfect powers, ``Abs``, ``sign``); otherwise an mpmath number with
    :data:`_NUMBER_DIGITS` digits. Imports no sympy (mpmath only when a value is irrational).
    Raises :class:`Undecided` when the value cannot be settled and :class:`NotReal` when it
    is certainly not a finite real number.
    """
    numeric = False  # first pass: exact rationals only; mpmath is imported when a value is irrational

    def mp():
        if not numeric:
            raise _Irrational
        import mpmath

        return mpmath

    def inexact(x):
        if isinstance(x, Fraction):
            return mp().mpf(x.numerator) / x.denominator
        return x

    def settle(x):
        mpmath = mp()
        if isinstance(x, mpmath.mpc):
            if abs(x.imag) > mpmath.mpf(10) ** (-_UNDECIDED_BELOW) * (1 + abs(x.real)):
                raise NotReal("not a real number")
            x = x.real
        if not mpmath.isfinite(x):
            raise NotReal("not finite")
        if x and abs(mpmath.mag(x)) > _MAX_EXACT_BITS:
            raise Undecided("too large or too small to settle")
        return x

    def big(x) -> bool:
        return isinstance(x, Fraction) and max(x.numerator.bit_length(), x.denominator.bit_length()) > _MAX_EXACT_BITS

    def power(base, exponent):
        if isinstance(base, Fraction) and isinstance(exponent, Fraction):
            if exponent.denominator == 1:
                if base == 0 and exponent < 0:
                    raise NotReal("division by zero")
                if max(base.numerator.bit_length(), base.denominator.bit_length()) * abs(exponent.numerator) \
                        <= _MAX_EXACT_BITS:
                    return base ** int(exponent)
            elif base >= 0:
                root = _root(base, exponent.denominator)
                if root is not None:
                    return power(root, Fraction(exponent.numerator))
        if isinstance(base, Fraction) and base < 0 and not (isinstance(exponent, Fraction)
                                                           and exponent.denominator == 1):
            raise NotReal("a negative number to a fractional power")
        mpmath = mp()
        if base and abs(mpmath.mag(inexact(base)) * inexact(exponent)) > _MAX_EXACT_BITS:
            raise Undecided("too large or too small to settle")
        if isinstance(exponent, Fraction) and exponent.denominator == 1:
            if base == 0 and exponent < 0:
                raise NotReal("division by zero")
            return settle(inexact(base) ** int(exponent))
        return settle(mpmath.power(inexact(base), inexact(exponent)))

    def call(fname, x):
        if fname == "Abs":
            return abs(x)
        if fname == "sign":
            return Fraction((x > 0) - (x < 0)) if isinstance(x, Fraction) else mp().sign(x)
        if fname == "sqrt":
            return power(x, Fraction(1, 2))
        if fname == "exp" and x == 0:
            return Fraction(1)
        if fname == "log" and x == 1:
            return Fraction(0)
        if fname in ("sin", "tan", "asin", "atan", "sinh", "tanh", "asinh", "atanh") and x == 0:
            return Fraction(0)
        if fname in ("cos", "sec", "cosh") and x == 0:
            return Fraction(1)
        mpmath = mp()
        if fname in _GROWING and abs(x) > _MAX_ARGUMENT:
            raise Undecided(f"{fname}() of a number this large is not settled")
        fn = mpmath.lambertw if fname == "LambertW" else getattr(mpmath, fname)
        return settle(fn(inexact(x)))

    def build(node):
        if isinstance(node, ast.Constant):
            if isinstance(node.value, bool) or not isinstance(node.value, (int, float)):
                raise Undecided(f"'{_token(node)}' is not a number")
            return Fraction(repr(node.value)) if isinstance(node.value, float) else Fraction(node.value)
        if isinstance(node, ast.Name):
            if node.id == "pi":
                return +mp().pi
            if node.id in values:
                return values[node.id]
            raise Undecided(f"'{node.id}' has no value")
        if isinstance(node, ast.UnaryOp) and type(node.op) in _UNARY:
            inner = build(node.operand)
            return -inner if isinstance(node.op, ast.USub) else inner
        if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Pow):
            return power(build(node.left), build(node.right))
        if isinstance(node, ast.BinOp) and type(node.op) in _BINOPS:
            family = _ADDITIVE if isinstance(node.op, _ADDITIVE) else _MULTIPLICATIVE
            operands, ops = _chain(node, family)
            value = build(operands[0])
            for op, operand in zip(ops, operands[1:], strict=True):
                other = build(operand)
                if big(value) or big(other) or not (isinstance(value, Fraction) and isinstance(other, Fraction)):
                    value, other = inexact(value), inexact(other)
                if isinstance(op, ast.Add):
                    value = value + other
                elif isinstance(op, ast.Sub):
                    value = value - other
                elif isinstance(op, ast.Mult):
                    value = value * other
                elif other == 0:
                    raise NotReal("division by zero")
                else:
                    value = value / other
            return value
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id in MATH_FUNCTIONS \
                and len(node.args) == 1:
            return call(node.func.id, build(node.args[0]))
        raise Undecided(f"'{_token(node)}' has no plain value")

    try:
        if all(isinstance(v, Fraction) for v in values.values()):
            try:
                return build(tree)
            except _Irrational:
                pass
        numeric = True
        import mpmath

        with mpmath.workdps(_NUMBER_DIGITS):
            return build(tree)
    except Undecided:
        raise
    except (ArithmeticError, ValueError, TypeError, RecursionError) as exc:  # mpmath domain errors, overflow
        raise Undecided(type(exc).__name__) from None


class _Irrational(Exception):
    """Internal: the exact pass met a value that is not rational."""


def holds(left, op: str, right) -> bool | None:
    """Whether ``left OP right`` holds for two values from :func:`number`; None when an
    irrational value lies too close to the bound to be trusted either way."""
    if isinstance(left, Fraction) and isinstance(right, Fraction):
        difference = left - right
    else:
        import mpmath

        with mpmath.workdps(_NUMBER_DIGITS):
            l_, r_ = (mpmath.mpf(x.numerator) / x.denominator if isinstance(x, Fraction) else x
                      for x in (left, right))
            difference = l_ - r_
            if abs(difference) <= mpmath.mpf(10) ** (-_UNDECIDED_BELOW) * (1 + abs(l_) + abs(r_)):
                return None
    return {"<": difference < 0, "<=": difference <= 0, ">": difference > 0, ">=": difference >= 0}[op]


# --------------------------------------------------------------------------- sympy side


def to_sympy(tree: ast.AST, env: Mapping[str, object], functions: Mapping[str, object] | None = None):
    """Build a sympy expression from a tree accepted by :func:`check_expression`.

    ``env`` maps symbol names to sympy objects; ``functions`` maps a declared
    function name to its applied sympy form (``a(t)``).
    """
    import sympy

    functions = functions or {}
    math = {
        "sin": sympy.sin, "cos": sympy.cos, "tan": sympy.tan, "cot": sympy.cot, "sec": sympy.sec,
        "csc": sympy.csc, "asin": sympy.asin, "acos": sympy.acos, "atan": sympy.atan,
        "sinh": sympy.sinh, "cosh": sympy.cosh, "tanh": sympy.tanh, "coth": sympy.coth,
        "asinh": sympy.asinh, "acosh": sympy.acosh, "atanh": sympy.atanh, "exp": sympy.exp,
        "log": sympy.log, "sqrt": sympy.sqrt, "Abs": sympy.Abs, "LambertW": sympy.LambertW,
        "sign": sympy.sign,
    }

    def build(node):
        if isinstance(node, ast.Constant):
            if isinstance(node.value, float):
                return sympy.Rational(repr(node.value))
            return sympy.Integer(node.value)
        if isinstance(node, ast.Name):
            if node.id == "pi":
                return sympy.pi
            if node.id in functions:
                return functions[node.id]
            return env[node.id]
        if isinstance(node, ast.UnaryOp):
            inner = build(node.operand)
            return -inner if isinstance(node.op, ast.USub) else inner
        if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Pow):
            return sympy.Pow(build(node.left), build(node.right))
        if isinstance(node, ast.BinOp):
            family = _ADDITIVE if isinstance(node.op, _ADDITIVE) else _MULTIPLICATIVE
            operands, ops = _chain(node, family)
            values = [build(o) for o in operands]
            if family is _ADDITIVE:
                return sympy.Add(values[0], *(v if isinstance(op, ast.Add) else -v
                                              for op, v in zip(ops, values[1:], strict=True)))
            return sympy.Mul(values[0], *(v if isinstance(op, ast.Mult) else sympy.Pow(v, -1)
                                          for op, v in zip(ops, values[1:], strict=True)))
        if isinstance(node, ast.Call):
            fname = node.func.id
            if fname in math:
                return math[fname](build(node.args[0]))
            if fname in functions:
                return functions[fname]
            if fname == "diff":
                target = build(node.args[0])
                var = env[node.args[1].id]
                order = node.args[2].value if len(node.args) == 3 else 1
                return sympy.diff(target, var, order)
        raise UnsafeExpression("<tree>", None, f"unexpected node {type(node).__name__}")  # pragma: no cover

    with _deep_recursion():
        return build(tree)


def relation_to_sympy(rel: Relation, env: Mapping[str, object], functions: Mapping[str, object] | None = None):
    import sympy

    left = to_sympy(rel.left, env, functions)
    right = to_sympy(rel.right, env, functions)
    return {"<": sympy.Lt, "<=": sympy.Le, ">": sympy.Gt, ">=": sympy.Ge}[rel.op](left, right, evaluate=False)
