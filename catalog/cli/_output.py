"""Rendering: tables through tabulate, or JSON for --json."""

from __future__ import annotations

import json
from collections.abc import Sequence
from typing import Any

import typer


def emit_json(value: Any) -> None:
    typer.echo(json.dumps(value, ensure_ascii=False, indent=2))


def emit_table(rows: Sequence[Sequence[Any]], headers: Sequence[str]) -> None:
    from tabulate import tabulate

    if not rows:
        typer.echo("(nothing)")
        return
    typer.echo(tabulate(rows, headers=headers, tablefmt="simple", disable_numparse=True))


def short(text: str, width: int = 48) -> str:
    return text if len(text) <= width else text[: width - 1] + "…"
