"""Commands of this group are being built (see the issue that owns them)."""

from __future__ import annotations

import typer


def register(app: typer.Typer) -> None:
    return None
