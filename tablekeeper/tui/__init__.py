"""The terminal app (textual): a thin face over the core."""

from __future__ import annotations

from pathlib import Path


def run_app(path: Path) -> None:
    from .app import TablekeeperApp

    TablekeeperApp(path).run()
