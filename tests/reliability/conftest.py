"""Fixtures of the reliability tests: the child-process script and small dataset builders.

Long variants carry ``@pytest.mark.slow``; they run only when ``TK_SLOW=1`` is set (or when selected
with ``-m slow``), so that the default run stays within a few minutes on two cores.
"""

from __future__ import annotations

import os
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path

import pytest

CHILD = Path(__file__).with_name("child.py")


def species(ident: str, **extra: object) -> dict:
    """A minimal schema-valid species record (no revision: the store adds it)."""
    rec = {"id": ident, "formula": "H2O", "phase": "l", "charge": 0, "status": "draft", "properties": {}}
    rec.update(extra)
    return rec


@pytest.fixture
def make_species() -> Callable[..., dict]:
    return species


@pytest.fixture
def child() -> Callable[..., subprocess.Popen]:
    """Start ``child.py MODE ARGS`` with the given SAFETY switches (e.g. ``"lock=0"``)."""

    def start(mode: str, *args: object, safety: str = "", **kw: object) -> subprocess.Popen:
        env = dict(os.environ, TK_SAFETY=safety, PYTHONUNBUFFERED="1")
        return subprocess.Popen(
            [sys.executable, str(CHILD), mode, *map(str, args)],
            env=env,
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            **kw,
        )

    return start


def temp_leftovers(root: Path) -> list[Path]:
    """Temporary files of interrupted saves anywhere in a dataset."""
    return [p for p in root.rglob("*") if ".tmp-" in p.name]


@pytest.fixture
def leftovers() -> Callable[[Path], list[Path]]:
    return temp_leftovers


sys.path.insert(0, str(Path(__file__).parent))
import clean_data  # noqa: E402  (a plain module beside this file, shared with tests/security)


@pytest.fixture
def clean_dataset(tmp_path: Path):
    """A dataset of CODATA key species that passes every check."""
    return clean_data.build(tmp_path / "clean")


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    if os.environ.get("TK_SLOW") == "1" or "slow" in (config.getoption("-m") or ""):
        return
    later = pytest.mark.skip(reason="long variant: set TK_SLOW=1 or select -m slow to run it")
    for item in items:
        if "slow" in item.keywords and str(item.fspath).startswith(str(Path(__file__).parent)):
            item.add_marker(later)
