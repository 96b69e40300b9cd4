"""The terminal app (textual): a thin face over the core.

``create_app`` (in ``tablekeeper.tui.app``) builds the app for the command line and the tests alike;
``registry`` is where further screens plug in.
"""

from __future__ import annotations

from pathlib import Path


def run_app(path: Path, user: str | None = None) -> None:
    from .app import create_app

    create_app(path, user=user).run()
