"""SVG snapshots of the main screens at 80×24 (pytest-textual-snapshot).

Deterministic: the dataset is built here with fixed values, flags carry fixed times, the user is fixed
(TABLEKEEPER_USER, set for every test), nothing on screen shows a clock or a path, no cursor blinks.
Regenerate after a deliberate change of a screen with
``python -m pytest tests/tui/test_snapshots.py --snapshot-update`` and look at the SVGs before committing.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from tablekeeper.store import Dataset
from tablekeeper.tui.app import create_app

from .conftest import fixed_flag, settle, species_record

SIZE = (80, 24)


@pytest.fixture
def snapset(builder, tmp_path: Path) -> Path:
    flags = [fixed_flag("flag-1", "h2o-l", "dfH298", "check against the 1989 table", blocking=True),
             fixed_flag("flag-2", "co2-g", "S298", "source?", by="bob")]
    path = builder(tmp_path / "snap", flags=flags)
    # An element in its reference state with a non-zero ΔfH°: one error finding to show.
    bad = species_record("h2-g", "H2", "g", None, True, 0.5, 0.001, 130.68, 0.003, 0.0, 28.836)
    Dataset(path, user="builder").save("species", bad, expected_revision=1)
    return path


def _ready(app) -> bool:
    return app.snapshot is not None and app.snapshot.report is not None


async def _loaded(pilot) -> None:
    await settle(pilot, pilot.app, lambda: _ready(pilot.app))


def test_species_screen(snap_compare, snapset: Path) -> None:
    assert snap_compare(create_app(snapset), terminal_size=SIZE, run_before=_loaded)


def test_species_screen_without_colour(snap_compare, snapset: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("NO_COLOR", "1")
    app = create_app(snapset)
    assert app.no_color
    assert snap_compare(app, terminal_size=SIZE, run_before=_loaded)


def test_record_screen_while_typing_a_value_in_kcal(snap_compare, snapset: Path) -> None:
    async def run_before(pilot) -> None:
        await _loaded(pilot)
        pilot.app.open_record("h2o-l")
        await pilot.pause()
        await pilot.press("enter", "ctrl+u", *"-68.3", "space", *"kcal/mol")
        await settle(pilot, pilot.app)

    assert snap_compare(create_app(snapset), terminal_size=SIZE, run_before=run_before)


def test_record_screen_read_only_for_a_reviewer(snap_compare, builder, tmp_path: Path,
                                               monkeypatch: pytest.MonkeyPatch) -> None:
    path = builder(tmp_path / "roles", roles={"steward": ["sam"], "reviewer": ["tester"]})

    async def run_before(pilot) -> None:
        await _loaded(pilot)
        pilot.app.open_record("co2-g")
        await settle(pilot, pilot.app)

    assert snap_compare(create_app(path), terminal_size=SIZE, run_before=run_before)


def test_findings_screen(snap_compare, snapset: Path) -> None:
    async def run_before(pilot) -> None:
        await _loaded(pilot)
        await pilot.press("2")
        await settle(pilot, pilot.app)

    assert snap_compare(create_app(snapset), terminal_size=SIZE, run_before=run_before)


def test_flags_screen(snap_compare, snapset: Path) -> None:
    async def run_before(pilot) -> None:
        await _loaded(pilot)
        await pilot.press("3")
        await settle(pilot, pilot.app)

    assert snap_compare(create_app(snapset), terminal_size=SIZE, run_before=run_before)


def test_sources_screen(snap_compare, snapset: Path) -> None:
    async def run_before(pilot) -> None:
        await _loaded(pilot)
        await pilot.press("4")
        await settle(pilot, pilot.app)

    assert snap_compare(create_app(snapset), terminal_size=SIZE, run_before=run_before)


def test_help_screen(snap_compare, snapset: Path) -> None:
    async def run_before(pilot) -> None:
        await _loaded(pilot)
        await pilot.press("f1")
        await pilot.pause()

    assert snap_compare(create_app(snapset), terminal_size=SIZE, run_before=run_before)
