"""Catalogue text in generated code: one escaping function per target language.

Every piece of text that comes from a metric file (title, summary, notes, references, parameter
descriptions and ranges, domain text, names, ids, chart names, the source path) is data written by
whoever added the entry. Generated code must show it, never run it: each exporter emits such text
only through the function of its target below, wherever it goes (comment, docstring, string
literal, typeset text). The rule is general, not a list of bad strings:

* :func:`visible` is the first step of every comment form: every character that is not printable
  (``str.isprintable`` is False: control characters such as NUL, newline, carriage return, form
  feed and escape; the Unicode line and paragraph separators U+2028/U+2029; format characters
  such as bidirectional overrides; unassigned and surrogate code points) becomes a visible escape
  ``\\xHH``, ``\\uHHHH`` or ``\\UHHHHHHHH``. No line break can survive it, so a comment stays one
  comment line whatever the text.
* Python: :func:`python_comment` (``#`` lines), :func:`python_docstring` (inside ``\"\"\"``:
  backslashes doubled and every ``"`` escaped, so the docstring cannot be closed), and
  :func:`python_literal` (``repr``).
* C99: :func:`c_comment` (inside ``/* */``: ``*/`` and ``/*`` broken up; trigraphs ``??x`` broken
  up) and :func:`c_string` (a string literal: printable ASCII other than ``\\``, ``"`` and ``?``
  kept, every other byte of the UTF-8 text as a three-digit octal escape).
* LaTeX: :func:`latex_comment` (a ``%`` line, backslashes written as text) and :func:`latex_text` (typeset text: the ten
  special characters ``\\ { } $ & # ^ _ % ~`` become their text commands, so ``\\input{...}`` or
  ``\\write18`` can never be live and ``^^`` notation cannot build a backslash).
* JSON: ``json.dumps`` escapes by itself (:func:`json_text` says so and is used for symmetry).
"""

from __future__ import annotations

import json


def visible(text: object) -> str:
    """``text`` with every non-printable character replaced by a visible backslash escape."""
    out = []
    for ch in str(text):
        if ch.isprintable():
            out.append(ch)
            continue
        code = ord(ch)
        if code < 0x100:
            out.append(f"\\x{code:02x}")
        elif code < 0x10000:
            out.append(f"\\u{code:04x}")
        else:
            out.append(f"\\U{code:08x}")
    return "".join(out)


# --------------------------------------------------------------------------- Python


def python_comment(text: object) -> str:
    """Text for one ``#`` comment line (no line break can remain in it)."""
    return visible(text)


def python_docstring(text: object) -> str:
    """Text for inside a ``\"\"\"`` docstring: printable, backslashes doubled, every quote escaped."""
    return visible(text).replace("\\", "\\\\").replace('"', '\\"')


def python_literal(value: object) -> str:
    """A Python literal of ``value`` (``repr``: str escapes every non-printable character)."""
    return repr(value)


# --------------------------------------------------------------------------- C99


def c_comment(text: object) -> str:
    """Text for one line inside a ``/* ... */`` block comment: the comment cannot be closed or nested,
    no line break remains, and no trigraph (``??/`` and friends) can form."""
    out = visible(text)
    while "*/" in out or "/*" in out or "??" in out:
        out = out.replace("*/", "* /").replace("/*", "/ *").replace("??", "? ?")
    return out


def c_string(text: object) -> str:
    """A C99 string literal of ``text``: printable ASCII kept (but ``\\``, ``"`` and ``?`` escaped,
    the last against trigraphs); every other byte of its UTF-8 form as a three-digit octal escape."""
    out = ['"']
    for byte in str(text).encode("utf-8", "backslashreplace"):
        ch = chr(byte)
        if ch in '\\"?':
            out.append("\\" + ch)
        elif 0x20 <= byte < 0x7F:
            out.append(ch)
        else:
            out.append(f"\\{byte:03o}")
    out.append('"')
    return "".join(out)


# --------------------------------------------------------------------------- LaTeX

_LATEX = {
    "\\": r"\textbackslash{}",
    "{": r"\{",
    "}": r"\}",
    "$": r"\$",
    "&": r"\&",
    "#": r"\#",
    "^": r"\textasciicircum{}",
    "_": r"\_",
    "%": r"\%",
    "~": r"\textasciitilde{}",
}


def latex_comment(text: object) -> str:
    """Text for one ``%`` comment line: no line break (the only way out of a TeX comment) remains.
    Backslashes are written ``\\textbackslash{}`` as well, so nothing that looks like a command is
    left even to a reader who scans the file without TeX's comment rule (``^`` and ``_`` stay readable:
    TeX reads nothing after ``%``)."""
    return visible(text).replace("\\", r"\textbackslash{}")


def latex_text(text: object) -> str:
    """Typeset text: printable, and each of ``\\ { } $ & # ^ _ % ~`` replaced by its text form."""
    return "".join(_LATEX.get(ch, ch) for ch in visible(text))


# --------------------------------------------------------------------------- JSON


def json_text(value: object) -> str:
    """JSON needs no extra step: ``json.dumps`` escapes quotes, backslashes and control characters."""
    return json.dumps(value, ensure_ascii=False)
