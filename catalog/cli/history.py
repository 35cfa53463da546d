"""Commands of this group are being written; the module is wired into the CLI already."""

from __future__ import annotations

import typer

app = typer.Typer()
