"""Edits of expression trees: the kinds of copying slip, candidates, corruptions for tests."""

from __future__ import annotations

import ast
import copy
import re
from collections.abc import Iterable, Mapping
from fractions import Fraction

from gravicat.errors import CatalogError, InputError
from gravicat.format.expr import (
    _ADDITIVE,
    _MULTIPLICATIVE,
    canonical,
    check_expression,
    names_in,
)
from gravicat.format.metricfile import MetricDocument, validate
from gravicat.repair.jets import _MATH, _const_value, _flatten
from gravicat.repair.model import _Model, _Target
from gravicat.repair.reports import _IMPLICIT, _TRIG, KINDS, SMALL_FACTORS
from gravicat.repair.screening import _Cand, _Edit

# =========================================================================== edits


def _name(ident: str) -> ast.Name:
    return ast.Name(id=ident, ctx=ast.Load())


def _num(q: Fraction) -> ast.expr:
    if q < 0:
        return ast.UnaryOp(op=ast.USub(), operand=_num(-q))
    if q.denominator == 1:
        return ast.Constant(value=int(q))
    return ast.BinOp(left=ast.Constant(value=q.numerator), op=ast.Div(), right=ast.Constant(value=q.denominator))


def _rebuild(operands: list, ops: list) -> ast.expr:
    node = operands[0]
    for op, x in zip(ops, operands[1:], strict=True):
        node = ast.BinOp(left=node, op=op(), right=x)
    return node


def _negate(node: ast.expr) -> ast.expr:
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub):
        return node.operand
    if isinstance(node, ast.BinOp) and isinstance(node.op, _MULTIPLICATIVE):
        operands, ops = _flatten(node, _MULTIPLICATIVE)
        first = operands[0]
        if isinstance(first, ast.UnaryOp) and isinstance(first.op, ast.USub):
            operands[0] = first.operand
        else:
            operands[0] = ast.UnaryOp(op=ast.USub(), operand=first)
        return _rebuild(operands, ops)
    return ast.UnaryOp(op=ast.USub(), operand=node)


def _times(node: ast.expr, factor: Fraction) -> ast.expr:
    """``node`` multiplied by ``factor`` (an integer k or 1/k), folded into a trailing integer divisor or a
    leading integer coefficient when the result stays an integer (``x/3`` times 3 is ``x``, ``2*x`` times 3
    is ``6*x``), else written as ``k*node`` or ``node/k``."""
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub):
        return ast.UnaryOp(op=ast.USub(), operand=_times(node.operand, factor))
    c = _const_value(node)
    if c is not None:
        return _num(c * factor)
    if isinstance(node, ast.BinOp) and isinstance(node.op, _MULTIPLICATIVE):
        operands, ops = _flatten(node, _MULTIPLICATIVE)
        first, last = operands[0], operands[-1]
        lead = Fraction(first.value) * factor if isinstance(first, ast.Constant) and type(first.value) is int else None
        if lead is not None and lead.denominator == 1:
            if lead == 1 and ops[0] is ast.Mult:
                return _rebuild(operands[1:], ops[1:])
            operands[0] = _num(lead)
            return _rebuild(operands, ops)
        if ops[-1] is ast.Div and isinstance(last, ast.Constant) and type(last.value) is int and last.value:
            new = Fraction(last.value) / factor
            if new.denominator == 1:
                if new == 1:
                    return _rebuild(operands[:-1], ops[:-1])
                operands[-1] = ast.Constant(value=int(new))
                return _rebuild(operands, ops)
        if lead is not None:
            operands[0] = _num(lead)
            return _rebuild(operands, ops)
    if factor.denominator == 1:
        return ast.BinOp(left=ast.Constant(value=int(factor)), op=ast.Mult(), right=node)
    return ast.BinOp(left=node, op=ast.Div(), right=ast.Constant(value=factor.denominator))


def _rename(node: ast.expr, mapping: dict[str, str]) -> ast.expr:
    """A copy of ``node`` with the symbols of ``mapping`` renamed (function names are never in it)."""
    node = copy.deepcopy(node)
    for sub in ast.walk(node):
        if isinstance(sub, ast.Name) and sub.id in mapping:
            sub.id = mapping[sub.id]
    return node


def _short(text: str, width: int = 60) -> str:
    return text if len(text) <= width else text[: width - 3] + "..."


def _replace_at(node, path: tuple, fn):
    """A copy of ``node`` with the subtree at ``path`` replaced by ``fn(subtree)``; only the nodes
    along the path are copied (edits never mutate a node, so the rest is shared)."""
    if not path:
        return fn(node)
    step = path[0]
    new = copy.copy(node)
    if isinstance(step, str):
        setattr(new, step, _replace_at(getattr(node, step), path[1:], fn))
    else:
        items = list(getattr(node, step[0]))
        items[step[1]] = _replace_at(items[step[1]], path[1:], fn)
        setattr(new, step[0], items)
    return new


def _apply(tree: ast.expr, edits: Iterable[_Edit]) -> ast.expr:
    """Apply edits, deepest first, so that an edit of an enclosing node keeps the edits inside it."""
    root = tree
    for e in sorted(edits, key=lambda e: -len(e.path)):
        root = _replace_at(root, e.path, e.fn)
    return root


def _numeric_exponent_candidates(q: Fraction) -> list[Fraction]:
    out = []
    for v in (q + 1, q - 1, -q, q / 2, q * 2):
        if v != q and v != 0 and v not in out:
            out.append(v)
    return out


def _function_names(target: _Target) -> set[str]:
    return set(target.names.functions)


def enumerate_edits(target: _Target, kinds: Iterable[str] = KINDS) -> list[_Edit]:
    """Every single edit of ``target``'s tree of the given kinds (not yet de-duplicated)."""
    kinds = set(kinds)
    key = target.key
    classes = target.symbol_classes
    funcs = _function_names(target)
    by_class: dict[str, list[str]] = {}
    for s, c in classes.items():
        by_class.setdefault(c, []).append(s)
    out: list[_Edit] = []

    def add(path, kind, detail, fn):
        if kind in kinds:
            out.append(_Edit(key, tuple(path), kind, detail, fn))

    def factor_edits(node, path, text, where=""):
        add(path, "factor-2", f"multiply '{text}' by 2{where}", lambda n: _times(n, Fraction(2)))
        add(path, "factor-2", f"divide '{text}' by 2{where}", lambda n: _times(n, Fraction(1, 2)))
        # a dropped or stray 3, 4 or 6 goes with a parameter (Lambda/3, Q**2/4) or a function of the chart, so
        # terms of coordinates and numbers only are left alone: fewer candidates, fewer look-alike metrics
        if "small-factor" in kinds and _with_parameters(node):
            for k in SMALL_FACTORS:
                add(path, "small-factor", f"multiply '{text}' by {k}{where}", lambda n, k=k: _times(n, Fraction(k)))
                add(path, "small-factor", f"divide '{text}' by {k}{where}",
                    lambda n, k=k: _times(n, Fraction(1, k)))

    def term_edits(node, path):
        text = _short(canonical(node))
        add(path, "sign", f"flip the sign of '{text}'", _negate)
        factor_edits(node, path, text)
        exchange_edits(node, path)

    def exchange_edits(node, path):
        if "swap" not in kinds:
            return
        present = sorted(s for s in names_in(node) if classes.get(s) in ("coordinate", "parameter", "definition"))
        text = _short(canonical(node))
        for i, x in enumerate(present):
            for y in present[i + 1:]:
                add(path, "swap", f"exchange {x} and {y} in '{text}'",
                    lambda n, x=x, y=y: _rename(n, {x: y, y: x}))

    diffs = {s for s, c in classes.items() if c == "differential"}

    def _with_parameters(node) -> bool:
        return any(classes.get(x) in ("parameter", "definition") or x in funcs for x in names_in(node))

    def visit(node, path, term: bool, base: bool = False):
        if isinstance(node, ast.BinOp) and isinstance(node.op, _ADDITIVE):
            operands, ops = _flatten(node, _ADDITIVE)
            m = len(operands)
            exchange_edits(node, path)
            where = f" in '{_short(canonical(node), 40)}'" if node is not target.tree else ""
            for k, t in enumerate(operands):
                tpath = list(path) + ["left"] * (m - 1 - k) + (["right"] if k else [])
                bpath = list(path) + ["left"] * (m - 1 - k)  # the BinOp whose right operand is term k
                text = _short(canonical(t))
                if k == 0:
                    add(tpath, "sign", f"flip the sign of '{text}'{where}", _negate)
                    b1 = list(path) + ["left"] * (m - 2)
                    add(b1, "drop-term", f"drop the term '{text}'{where}",
                        lambda n: n.right if isinstance(n.op, ast.Add) else _negate(n.right))
                else:
                    add(bpath, "sign", f"flip the sign of '{text}'{where}",
                        lambda n: ast.BinOp(left=n.left, op=ast.Sub() if isinstance(n.op, ast.Add) else ast.Add(),
                                            right=n.right))
                    add(bpath, "drop-term", f"drop the term '{text}'{where}", lambda n: n.left)
                factor_edits(t, tpath, text, where)
                if isinstance(t, ast.BinOp) and isinstance(t.op, _ADDITIVE) and not names_in(t) & diffs:
                    implicit_power(t, tpath)  # a parenthesised sum inside a sum: a lost power
                exchange_edits(t, tpath)
                visit(t, tpath, False)
            return
        if term:
            term_edits(node, path)
        if isinstance(node, ast.BinOp) and isinstance(node.op, _MULTIPLICATIVE):
            operands, ops = _flatten(node, _MULTIPLICATIVE)
            m = len(operands)
            for k, t in enumerate(operands):
                tpath = list(path) + ["left"] * (m - 1 - k) + (["right"] if k else [])
                if isinstance(t, ast.BinOp) and not isinstance(t.op, ast.Pow) and not names_in(t) & diffs:
                    implicit_power(t, tpath)  # a parenthesised sum or product as a factor: a lost power
                visit(t, tpath, False)
            return
        if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Pow):
            base, expo = node.left, node.right
            q = _const_value(expo)
            is_diff = isinstance(base, ast.Name) and classes.get(base.id) == "differential"
            if q is not None and not is_diff:
                text = canonical(node)
                for v in _numeric_exponent_candidates(q):
                    new = ast.BinOp(left=base, op=ast.Pow(), right=_num(v)) if v != 1 else base
                    add(path, "exponent", f"'{_short(text)}' -> '{_short(canonical(new))}'",
                        lambda n, v=v: ast.BinOp(left=n.left, op=ast.Pow(), right=_num(v)) if v != 1 else n.left)
            if not is_diff:
                if isinstance(base, ast.Name) and classes.get(base.id) == "parameter" and q == 2:
                    add(path, "parameter-power", f"'{base.id}**2' -> '{base.id}' (one occurrence)", lambda n: n.left)
                if isinstance(base, ast.Name):
                    name_edits(base, list(path) + ["left"], in_power=True)
                else:
                    visit(base, list(path) + ["left"], False, base=True)
                if q is None:
                    visit(expo, list(path) + ["right"], True)
            return
        if isinstance(node, ast.UnaryOp):
            visit(node.operand, list(path) + ["operand"], False)
            return
        if isinstance(node, ast.Call):
            fname = node.func.id
            arg = node.args[0] if node.args else None
            if fname == "sqrt" and isinstance(arg, ast.Name) and classes.get(arg.id) == "parameter":
                add(path, "parameter-power", f"'sqrt({arg.id})' -> '{arg.id}' (one occurrence)", lambda n: n.args[0])
            if fname in _MATH and not base:
                implicit_power(node, path)
            if fname in _TRIG:
                new = _TRIG[fname]
                add(path, "trig", f"{fname} -> {new} in '{_short(canonical(node))}'",
                    lambda n, new=new: ast.Call(func=_name(new), args=n.args, keywords=[]))
            if fname in _MATH:
                apath = list(path) + [("args", 0)]
                if _with_parameters(arg) and _const_value(arg) is None:  # exp(2*H*t), sqrt(Lambda/3): a lost factor
                    factor_edits(arg, apath, _short(canonical(arg)), f" in '{_short(canonical(node), 40)}'")
                visit(node.args[0], apath, False)
            return
        if isinstance(node, ast.Name):
            name_edits(node, path, in_power=False)

    def name_edits(node, path, in_power: bool):
        ident = node.id
        if ident in funcs or ident == "pi":
            return
        cls = classes.get(ident)
        if cls is None:
            return
        for other in by_class.get(cls, ()):
            if other != ident:
                add(path, "swap", f"'{ident}' -> '{other}' (one occurrence)", lambda n, o=other: _name(o))
        if cls == "parameter" and not in_power:
            add(path, "parameter-power", f"'{ident}' -> '{ident}**2' (one occurrence)",
                lambda n: ast.BinOp(left=n, op=ast.Pow(), right=ast.Constant(value=2)))
            add(path, "parameter-power", f"'{ident}' -> 'sqrt({ident})' (one occurrence)",
                lambda n: ast.Call(func=_name("sqrt"), args=[n], keywords=[]))
        if not in_power and cls in ("coordinate", "definition", "parameter"):
            implicit_power(node, path, (Fraction(-1),) if cls == "parameter" else _IMPLICIT)

    def implicit_power(node, path, exponents=None):
        """Raise a factor written without an exponent (exponent 1) to 2, -1 or 1/2."""
        text = _short(canonical(node))
        for v in exponents or _IMPLICIT:
            new = canonical(ast.BinOp(left=node, op=ast.Pow(), right=_num(v)))
            add(path, "exponent", f"'{text}' -> '{_short(new)}'",
                lambda n, v=v: ast.BinOp(left=n, op=ast.Pow(), right=_num(v)))

    visit(target.tree, [], True)
    return out


def _make_candidate(model: _Model, edits: tuple[_Edit, ...]) -> _Cand | None:
    """Apply the edits and print the result; None when unchanged or when two edits hit the same node.

    The edited tree is built only from node types of the whitelist; it is screened as built,
    and a survivor's text is parsed and checked again by :func:`check_candidate` (and the whole
    document by :func:`gravicat.format.metricfile.validate`) before anything else uses it.
    """
    by_key: dict[tuple, list[_Edit]] = {}
    for e in edits:
        by_key.setdefault(e.key, []).append(e)
    trees, texts = {}, {}
    for key, group in by_key.items():
        paths = [e.path for e in group]
        if len(set(paths)) != len(paths):
            return None
        target = model.targets[key]
        try:
            edited = _apply(target.tree, group)
            text = canonical(edited)
        except (RecursionError, ValueError, TypeError, AttributeError):
            return None
        if text == target.text:
            return None
        trees[key], texts[key] = edited, text
    return _Cand(edits, trees, texts)


def _check_candidate(model: _Model, cand: _Cand) -> _Cand | None:
    """The candidate re-parsed through the whitelist parser (canonical texts), or None if refused."""
    trees, texts = {}, {}
    for key, text in cand.texts.items():
        target = model.targets[key]
        try:
            tree = check_expression(text, target.names, source=model.doc.source, field=target.field)
        except CatalogError:
            return None
        trees[key], texts[key] = tree, canonical(tree)
        if texts[key] == target.text:
            return None
    return _Cand(cand.edits, trees, texts)


def _chains(tree: ast.expr, path=()) -> Iterable[tuple[tuple, ast.expr]]:
    """(path, node) of every additive chain top in ``tree``."""
    if isinstance(tree, ast.BinOp) and isinstance(tree.op, _ADDITIVE):
        yield path, tree
        operands, _ = _flatten(tree, _ADDITIVE)
        m = len(operands)
        for k, t in enumerate(operands):
            yield from _chains(t, path + ("left",) * (m - 1 - k) + (("right",) if k else ()))
        return
    for name in ("left", "right", "operand"):
        child = getattr(tree, name, None)
        if isinstance(child, ast.AST):
            yield from _chains(child, path + (name,))
    if isinstance(tree, ast.Call) and tree.func.id in _MATH:
        yield from _chains(tree.args[0], path + (("args", 0),))


def corruptions(doc: MetricDocument, chart: str, kind: str) -> list[tuple[str, str]]:
    """Every distinct slip of ``kind`` in one expression of ``chart``: ``[(field, corrupted text)]``.

    For testing the repair on purpose-made slips (tests and benchmarks). Each slip is undone by an
    edit of the same kind: a sign, a factor of 2, an exponent, sin/cos, a symbol and a parameter
    power are edited as the repair would edit them (the inverse is of the same kind); for
    ``drop-term``, which repairs a stray term, the slip inserts a stray term: an additive term of
    one of the chart's expressions (with its sign) appended to a sum. The texts are checked by
    the whitelist parser; the document may still refuse them (a line element that is not
    quadratic), which :func:`edited_document` reports.
    """
    if kind not in KINDS:
        raise InputError("kind", None, f"unknown edit kind '{kind}' (kinds: {', '.join(KINDS)})")
    model = _Model(doc, chart)
    out: list[tuple[str, str]] = []
    seen: set = set()

    def keep(target, cand):
        cand = _check_candidate(model, cand) if cand is not None else None
        if cand is not None and (target.field, cand.texts[target.key]) not in seen:
            seen.add((target.field, cand.texts[target.key]))
            out.append((target.field, cand.texts[target.key]))

    if kind != "drop-term":
        for target in model.editable:
            for e in enumerate_edits(target, (kind,)):
                keep(target, _make_candidate(model, (e,)))
        return out
    terms, known = [], set()
    for target in model.editable:
        for _path, node in _chains(target.tree):
            operands, ops = _flatten(node, _ADDITIVE)
            for k, t in enumerate(operands):
                neg = k > 0 and ops[k - 1] is ast.Sub
                if (neg, canonical(t)) not in known:
                    known.add((neg, canonical(t)))
                    terms.append((neg, t))
    for target in model.editable:
        for path, _node in _chains(target.tree):
            for neg, t in terms:
                edit = _Edit(target.key, path, kind, "stray term",
                             lambda n, t=t, neg=neg: ast.BinOp(left=n, op=ast.Sub() if neg else ast.Add(), right=t))
                keep(target, _make_candidate(model, (edit,)))
    return out


def edited_document(doc: MetricDocument, chart: str, texts: Mapping[str, str]) -> MetricDocument:
    """A copy of ``doc`` with the given fields (dotted paths of one chart) replaced, validated again."""
    data = copy.deepcopy(doc.data)
    c = data["charts"][chart]
    base = f"charts.{chart}."
    for fld, text in texts.items():
        rest = fld[len(base):]
        m = re.match(r"^metric\[(\d+)\]\[(\d+)\]$", rest)
        if m:
            i, j = int(m.group(1)), int(m.group(2))
            if c["metric"][j][i] == c["metric"][i][j]:
                c["metric"][j][i] = text
            c["metric"][i][j] = text
            continue
        parts = rest.split(".")
        node = c
        for p in parts[:-1]:
            node = node[p]
        node[parts[-1]] = text
    return validate(data, doc.source)
