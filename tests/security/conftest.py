"""Fixtures of the hostile-input tests: a clean dataset (shared builder with tests/reliability)."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "reliability"))
import clean_data


@pytest.fixture
def clean_dataset(tmp_path: Path):
    """A dataset of CODATA key species that passes every check."""
    return clean_data.build(tmp_path / "clean")
