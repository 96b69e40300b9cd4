"""SVG snapshots of the plot, reaction, release, thermo and fit screens at 80×24 on a copy of the demo.

Deterministic: the demo's records are fixed, the user is fixed (TABLEKEEPER_USER), the release screen is
given a relative output folder (the default, the current folder, would put a machine's path on screen),
no cursor blinks. Regenerate after a deliberate change with
``python -m pytest tests/tui/test_part2_snapshots.py --snapshot-update`` and look at the SVGs first.
"""

from __future__ import annotations

import pytest

from tablekeeper.tui.app import create_app
from tablekeeper.tui.release_screen import ReleaseScreen

from .part2_support import SIZE, loaded, open_screen, type_text, until


def _on(name: str, species: str | None = None, keys: tuple[str, ...] = ()):
    async def run_before(pilot) -> None:
        await loaded(pilot)
        await open_screen(pilot, pilot.app, name, species)
        for key in keys:
            await pilot.press(key)
        await until(pilot, pilot.app, lambda: True)

    return run_before


def test_plot_screen(snap_compare, demo_copy) -> None:
    assert snap_compare(create_app(demo_copy), terminal_size=SIZE, run_before=_on("plot", "ch4-g"))


def test_plot_screen_without_colour(snap_compare, demo_copy, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("NO_COLOR", "1")
    app = create_app(demo_copy)
    assert app.no_color
    assert snap_compare(app, terminal_size=SIZE, run_before=_on("plot", "caco3-cr-calcite"))


def test_thermo_screen(snap_compare, demo_copy) -> None:
    assert snap_compare(create_app(demo_copy), terminal_size=SIZE, run_before=_on("thermo", "co2-g"))


def test_fit_screen(snap_compare, demo_copy) -> None:
    assert snap_compare(create_app(demo_copy), terminal_size=SIZE, run_before=_on("fit", "caco3-cr-calcite"))


def test_reaction_screen(snap_compare, demo_copy) -> None:
    async def run_before(pilot) -> None:
        await loaded(pilot)
        screen = await open_screen(pilot, pilot.app, "reaction")
        await type_text(pilot, "CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)")
        await until(pilot, pilot.app, lambda: screen.result is not None
                    and screen.result.equation == "CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)")

    assert snap_compare(create_app(demo_copy), terminal_size=SIZE, run_before=run_before)


def test_release_screen_refusing_the_demo(snap_compare, demo_copy) -> None:
    async def run_before(pilot) -> None:
        await loaded(pilot)
        screen = ReleaseScreen(out="bundles")
        pilot.app.push_screen(screen)
        await until(pilot, pilot.app, lambda: screen.preview is not None and not screen.previewing)

    assert snap_compare(create_app(demo_copy), terminal_size=SIZE, run_before=run_before)
