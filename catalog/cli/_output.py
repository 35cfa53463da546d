"""Rendering: tables through tabulate, or JSON for --json."""

from __future__ import annotations

import json
import re
import shutil
import sys
from collections.abc import Sequence
from typing import Any

import typer


def emit_json(value: Any) -> None:
    typer.echo(json.dumps(value, ensure_ascii=False, indent=2))


# control characters (C0, DEL, C1), bidirectional overrides and isolates: stored text (an entry added
# before they were refused) never reaches the terminal as a command (issue 14 item 11)
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069\u2028\u2029]")


def safe_text(text: Any, *, keep_newlines: bool = False) -> str:
    """``text`` with every control character shown escaped (``\\x1b``, ``\\u202e``); newlines kept
    when ``keep_newlines``."""

    def escape(m: re.Match) -> str:
        c = m.group()
        if keep_newlines and c == "\n":
            return c
        return f"\\x{ord(c):02x}" if ord(c) < 0x100 else f"\\u{ord(c):04x}"

    return _CONTROL.sub(escape, str(text))


def emit_table(rows: Sequence[Sequence[Any]], headers: Sequence[str]) -> None:
    from tabulate import tabulate

    if not rows:
        typer.echo("(nothing)")
        return
    rows = [[safe_text(c) if isinstance(c, str) else c for c in r] for r in rows]
    typer.echo(tabulate(rows, headers=headers, tablefmt="simple", disable_numparse=True))


def short(text: str, width: int = 48) -> str:
    return text if len(text) <= width else text[: width - 1] + "…"


def terminal_width() -> int | None:
    """Columns of the terminal standard output is shown on, or None when it is piped or redirected
    (then nothing is cut: a program or a file gets the whole text)."""
    try:
        if not sys.stdout.isatty():
            return None
    except (AttributeError, ValueError):  # a replaced or closed stream
        return None
    return shutil.get_terminal_size().columns


def fit_last_column(rows: Sequence[Sequence[Any]], headers: Sequence[str], width: int | None,
                    *, minimum: int = 24) -> list[list[Any]]:
    """``rows`` with the last column shortened so that each table line fits in ``width`` columns.
    ``width=None``: unchanged (piped). The last column keeps at least ``minimum`` characters,
    however narrow the terminal.

    Column widths as tabulate's simple format draws them with headers: the longest cell, but at
    least the header plus two characters, and two spaces between columns.
    """
    out = [list(r) for r in rows]
    if width is None or not out:
        return out
    k = len(headers) - 1
    used = sum(max(len(str(headers[j])) + 2, *(len(str(r[j])) for r in out)) + 2 for j in range(k))
    room = max(minimum, width - used)
    for r in out:
        r[k] = short(str(r[k]), room)
    return out
