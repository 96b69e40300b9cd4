"""Shared fixtures: a fresh dataset folder, the demo dataset path, a fixed acting user."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "datasets" / "kestrel-works"


@pytest.fixture(autouse=True)
def _fixed_user(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("TABLEKEEPER_USER", "tester")
    monkeypatch.delenv("NO_COLOR", raising=False)


@pytest.fixture
def empty_dataset(tmp_path: Path):
    from tablekeeper.store import Dataset

    return Dataset.init(tmp_path / "ds", "testset", title="Test set")


@pytest.fixture
def demo_copy(tmp_path: Path) -> Path:
    """A private copy of the shipped demo dataset that a test may change."""
    dst = tmp_path / "demo"
    shutil.copytree(DEMO, dst)
    return dst
