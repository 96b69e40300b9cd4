"""The thermo table view shows exactly the numbers of ``tablekeeper table``, on an editable grid."""

from __future__ import annotations

from tablekeeper.store import Dataset
from tablekeeper.tui.app import create_app
from tablekeeper.tui.thermo_screen import ThermoScreen

from .conftest import HOSTILE, screen_text, species_record
from .part2_support import SIZE, loaded, open_screen, run_cli, type_text, until


def cli_rows(path, species: str, *extra: str) -> list[list[str]]:
    """The data rows the command prints (after the two description and the two header lines)."""
    p = run_cli("table", str(path), species, *extra)
    assert p.returncode == 0, p.stderr
    return [line.split() for line in p.stdout.splitlines()[4:]]


async def test_the_default_table_is_the_commands(demo_copy) -> None:
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_screen(pilot, app, "thermo", "ch4-g")
        assert isinstance(screen, ThermoScreen)
        assert screen.rows == cli_rows(demo_copy, "ch4-g")
        assert len(screen.rows) > 10
        # The first rows are on screen as the command prints them.
        assert "  298.15     35.648    186.250" in screen_text(app)


async def test_an_edited_grid_gives_the_commands_table_for_the_same_options(demo_copy) -> None:
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_screen(pilot, app, "thermo", "caco3-cr-calcite")
        await pilot.press("e")
        await type_text(pilot, "400")
        await pilot.press("tab")
        await type_text(pilot, "1150")
        await pilot.press("tab")
        await type_text(pilot, "250")
        await until(pilot, app, lambda: screen.rows and screen.rows[0][0] == "400.00"
                    and screen.rows[-1][0] == "1150.00" and len(screen.rows) == 5)
        assert screen.rows == cli_rows(demo_copy, "caco3-cr-calcite", "--tmin", "400", "--tmax", "1150",
                                       "--step", "250")
        good = list(screen.rows)
        # A bad step: the core's sentence, and the last good table stays.
        await type_text(pilot, "x")
        await pilot.pause()
        assert "'250x' is not a number of kelvin" in screen_text(app)
        assert screen.rows == good
        await pilot.press("backspace", "ctrl+u")
        await type_text(pilot, "-5")
        await pilot.pause()
        assert "the step must be a positive number of kelvin" in screen_text(app)
        # ctrl+r puts the command's default grid back.
        await pilot.press("escape", "ctrl+r")
        await pilot.pause()
        assert screen.rows == cli_rows(demo_copy, "caco3-cr-calcite")


async def test_n_and_p_walk_the_species_that_have_a_model(demo_copy) -> None:
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_screen(pilot, app, "thermo", "ch4-g")
        await pilot.press("n")
        assert screen.species_id == "co-g" and screen.rows == cli_rows(demo_copy, "co-g")
        await pilot.press("p", "p")
        assert screen.species_id == "cao-cr"  # sorted ids: caco3-cr-calcite, cao-cr, ch4-g, co-g
        # A species without a model: said in words, no table.
        screen.choose("hcl-g")
        await pilot.pause()
        assert "hcl-g has no Cp(T) model" in screen_text(app)
        assert screen.rows == []


async def test_go_to_takes_a_formula_and_phase(demo_copy) -> None:
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_screen(pilot, app, "thermo", "ch4-g")
        await pilot.press("g")
        await type_text(pilot, "H2O(g)")
        await pilot.press("enter")
        await pilot.pause()
        assert screen.species_id == "h2o-g"
        await pilot.press("g")
        await type_text(pilot, "Unobtainium(g)")
        await pilot.press("enter")
        await pilot.pause()
        assert screen.species_id == "h2o-g"  # unchanged; the reason was notified


async def test_text_from_data_is_shown_literally(builder, tmp_path) -> None:
    rec = species_record("h2o-g", "H2O", "g", None, False, -241.826, 0.04, 188.835, 0.01, -228.582, 33.59,
                         name=HOSTILE["click"] + HOSTILE["csi"])
    # Shomate coefficients of H2O(g) 500-1700 K, NIST Chemistry WebBook (from memory); the range is
    # widened to 298 K here, as the demo does, which is fine for a display test.
    rec["cp_model"] = {"kind": "shomate", "ranges": [{"tmin": 298.0, "tmax": 1700.0, "A": 30.092,
                                                      "B": 6.832514, "C": 6.793435, "D": -2.53448,
                                                      "E": 0.082139}]}
    path = builder(tmp_path / "hostile")
    ds = Dataset(path, user="builder")
    ds.save("species", dict(rec, revision=1), expected_revision=1)
    app = create_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        await open_screen(pilot, app, "thermo", "h2o-g")
        text = screen_text(app)
        assert "[@click=app.quit]x[/]" in text and "\\x1b[2J" in text
        assert app.is_running
