"""The reaction calculator: the numbers on screen are the core's, they follow T, errors are sentences."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tablekeeper.store import Dataset
from tablekeeper.thermo import CAUTION, T_REF, parse_equation, reaction_properties, reaction_rows
from tablekeeper.tui.app import create_app
from tablekeeper.tui.reaction_screen import ReactionComputed, ReactionScreen, result_lines, step_temperature

from .conftest import screen_text
from .part2_support import SIZE, loaded, open_screen, type_text, until

METHANE = "CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)"
METHANE_GAS = "CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(g)"


def core(path, equation: str, T: float = T_REF):
    species = Dataset(path).load_all("species").records
    return reaction_properties(parse_equation(equation, species), species, T)


async def _type_equation(pilot, app, screen: ReactionScreen, equation: str) -> None:
    await type_text(pilot, equation)
    await until(pilot, app, lambda: screen._key[0] == equation and (screen.result or screen.error) is not None
                and (screen.result is None or screen.result.equation == equation))


async def test_methane_combustion_shows_the_cores_numbers_and_the_caution(demo_copy) -> None:
    seen: list = []
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE, message_hook=seen.append) as pilot:
        await loaded(pilot)
        screen = await open_screen(pilot, app, "reaction")
        assert isinstance(screen, ReactionScreen)
        await _type_equation(pilot, app, screen, METHANE)
        want = core(demo_copy, METHANE)
        assert screen.result is not None and screen.result.to_json() == want.to_json()
        text = screen_text(app)
        for label, value in reaction_rows(want)[:12]:
            assert f"{label:<16} {value}"[:60].rstrip() in text
        assert CAUTION in " ".join(text.split())  # the whole sentence, wrapped on screen
        # The computation ran in a worker that ended in one message.
        assert any(isinstance(m, ReactionComputed) and m.result is not None for m in seen)
    # The engineer's reading: combustion releases heat into the surroundings and the universe gains
    # entropy. ΔrH° = -890.3 kJ/mol for CH4 + 2 O2 -> CO2 + 2 H2O(l) at 298.15 K (from CODATA Key Values,
    # Cox, Wagman & Medvedev 1989, and ΔfH°(CH4) -74.87 kJ/mol of NIST-JANAF; from memory).
    assert want.drH.nominal_value == pytest.approx(-890.3, abs=0.5)
    assert want.verdict == "spontaneous" and want.dS_universe.nominal_value > 0


async def test_changing_t_recomputes_with_the_core(demo_copy) -> None:
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_screen(pilot, app, "reaction")
        await _type_equation(pilot, app, screen, METHANE_GAS)
        at_ref = screen.result
        assert at_ref is not None and at_ref.T == T_REF
        await pilot.press("up")
        await until(pilot, app, lambda: screen.result is not None and screen.result.T == 400)
        assert screen.result.to_json() == core(demo_copy, METHANE_GAS, 400).to_json()
        assert screen.result.drG.nominal_value != at_ref.drG.nominal_value
        assert "400 K (Cp models used)" in screen_text(app)
        # Typed temperatures work too; a bad one is a sentence, not a crash.
        await pilot.press("tab", "ctrl+u")
        await type_text(pilot, "1000")
        await until(pilot, app, lambda: screen.result is not None and screen.result.T == 1000)
        assert screen.result.to_json() == core(demo_copy, METHANE_GAS, 1000).to_json()
        await pilot.press("ctrl+u")
        await type_text(pilot, "hot")
        await until(pilot, app, lambda: screen.error is not None)
        assert "'hot' is not a number of kelvin" in screen_text(app)
        await pilot.press("ctrl+t")
        await until(pilot, app, lambda: screen.result is not None and screen.result.T == T_REF)
        assert screen.result.to_json() == at_ref.to_json()


async def test_every_measured_reaction_of_the_demo_matches_the_core(demo_copy) -> None:
    reactions = Dataset(demo_copy).load_all("reactions").records
    equations = [r["equation"] for _, r in sorted(reactions.items())]
    assert len(equations) == 5
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_screen(pilot, app, "reaction")
        for eq in equations:
            await pilot.press("ctrl+o")
            await until(pilot, app, lambda eq=eq: screen._key[0] == eq and (screen.result or screen.error)
                        is not None and (screen.result is None or screen.result.equation == eq))
            assert screen.error is None, screen.error
            assert screen.result.to_json() == core(demo_copy, eq).to_json()


@pytest.mark.parametrize(("equation", "sentence"), [
    ("CH4(g) + O2(g) = CO2(g) + 2 H2O(l)", "O has 2 on the left and 4 on the right"),
    ("XeF9(g) = Xe(g)", "XeF9(g)"),
    ("CH4(g) + 2 O2(g) =", "equation"),
])
async def test_a_bad_equation_shows_the_sentence_and_never_crashes(demo_copy, equation: str,
                                                                   sentence: str) -> None:
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_screen(pilot, app, "reaction")
        await _type_equation(pilot, app, screen, equation)
        assert screen.result is None and screen.error is not None
        with pytest.raises(Exception) as raised:
            species = Dataset(demo_copy).load_all("species").records
            reaction_properties(parse_equation(equation, species), species)
        assert str(raised.value) == screen.error
        assert sentence in screen.error
        assert "✗ " + screen.error[:40] in screen_text(app).replace("\n", " ")


async def test_a_reaction_at_a_temperature_without_models_says_which_species(demo_copy) -> None:
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_screen(pilot, app, "reaction")
        await _type_equation(pilot, app, screen, "SO2(g) = S(cr, rhombic) + O2(g)")
        assert screen.result is not None
        await pilot.press("up")
        await until(pilot, app, lambda: screen.error is not None)
        assert "has no Cp(T) model" in screen.error and "so2-g" in screen.error


def test_the_step_keys_walk_the_table_grid() -> None:
    assert step_temperature(T_REF, 1) == 400
    assert step_temperature(400, -1) == T_REF
    assert step_temperature(T_REF, -1) == 200
    assert step_temperature(1000, 1) == 1100
    assert step_temperature(1050, -1) == 1000
    assert step_temperature(100, -1) == 100  # never to zero kelvin


@given(st.floats(min_value=100, max_value=1e5))
@settings(max_examples=200, deadline=None)
def test_a_step_moves_about_one_step_and_a_step_back_does_not_overshoot(T: float) -> None:
    up = step_temperature(T, 1)
    # At most a step and a half: 298.15 K goes to 400 K, since 300 K is left out of the grid.
    assert T < up <= T + 150 + 1e-9
    assert step_temperature(up, -1) <= T + 1e-9


def test_result_lines_fit_the_width_and_keep_every_row(demo_copy) -> None:
    res = core(demo_copy, METHANE)
    lines = result_lines(res, 78)
    assert all(len(line) <= 78 for line in lines)
    joined = " ".join(" ".join(line.split()) for line in lines)
    for _, value in reaction_rows(res):
        assert " ".join(value.split()) in joined
