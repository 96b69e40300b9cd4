"""The plot: its geometry (pure functions, no textual), the data behind it (core calls), the screen."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tablekeeper.thermo import T_REF, derived_table, record_model
from tablekeeper.tui.plotgeom import ANCHOR, BREAK, RULE, Curve, Mark, Rule, layout, nice_axis, nice_step

from .part2_support import DEMO, SIZE, loaded, open_screen

finite = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False)


def test_the_geometry_module_does_not_need_textual() -> None:
    code = "import sys, tablekeeper.tui.plotgeom; assert 'textual' not in sys.modules"
    subprocess.run([sys.executable, "-c", code], check=True)


@given(finite, finite, st.integers(min_value=1, max_value=10))
@settings(max_examples=300, deadline=None)
def test_an_axis_covers_its_range_with_1_2_5_ticks(a: float, b: float, n: int) -> None:
    axis = nice_axis(a, b, n)
    lo, hi = min(a, b), max(a, b)
    # Covered to within a billionth of a step (rounding noise must not add a tick).
    assert axis.lo <= lo + 1e-9 * axis.step and axis.hi >= hi - 1e-9 * axis.step
    mantissa = axis.step / 10 ** math.floor(math.log10(axis.step))
    assert any(math.isclose(mantissa, m) for m in (1, 2, 5, 10))
    assert axis.ticks[0] == axis.lo and math.isclose(axis.ticks[-1], axis.hi, rel_tol=1e-9, abs_tol=1e-9)
    # At most n intervals, unless the range had to be widened around a flat curve.
    if hi - lo > 1e-9 * max(1, abs(lo)):
        assert len(axis.ticks) - 1 <= n + 2


def test_nice_steps_are_the_usual_ones() -> None:
    # 1-2-5 steps: common practice for axis ticks, no source.
    assert nice_step(1000, 5) == 200
    assert nice_step(1000, 4) == 500
    assert nice_step(0.9, 3) == 0.5
    assert nice_axis(298.15, 1500, 4).ticks == (0.0, 500.0, 1000.0, 1500.0)


def _demo_record(ident: str) -> dict:
    return json.loads((DEMO / "species" / f"{ident}.json").read_text())


@pytest.mark.parametrize("ident", ["ch4-g", "caco3-cr-calcite", "no-g"])
def test_the_curve_lies_inside_the_validity_range_and_the_anchors_are_marked(ident: str) -> None:
    from tablekeeper.tui.plot_screen import plot_data, range_rules

    rec = _demo_record(ident)
    data = plot_data(rec)
    model = data.model
    # The plotted grid never leaves the model's range, and it holds 298.15 K and every break.
    assert data.T.min() == model.tmin and data.T.max() == model.tmax
    assert T_REF in data.T and all(b in data.T for b in model.breaks)
    # The numbers are the core's: the table command's call on the same grid.
    table = derived_table(rec, data.T)
    assert np.array_equal(table["Cp_J_per_molK"].to_numpy(), data.cp)
    assert np.array_equal(table["S_J_per_molK"].to_numpy(), data.S)
    assert data.cp298 == rec["properties"]["Cp298"]["value"]

    canvas = layout(78, 10, curves=[Curve(data.T, data.cp)], marks=[Mark(T_REF, data.cp298)],
                    rules=range_rules(model), title="Cp")
    assert canvas is not None
    lo_col, hi_col = canvas.col_of(model.tmin), canvas.col_of(model.tmax)
    curve = canvas.cells("curve")
    assert curve, "the curve was drawn"
    assert all(lo_col <= c <= hi_col for _, c in curve)
    assert all(canvas.top <= r < canvas.bottom for r, _ in curve)
    # The anchor sits at 298.15 K and the record's value, drawn over the curve.
    (anchor,) = canvas.cells("anchor")
    assert anchor == (canvas.row_of(data.cp298), canvas.col_of(T_REF))
    assert canvas.chars[anchor[0]][anchor[1]] == ANCHOR
    # Both ends of the range are rules where the curve does not cover them; breaks are marked too.
    rule_cols = {c for _, c in canvas.cells("rule")}
    assert lo_col in rule_cols or lo_col in {c for _, c in curve}
    assert hi_col in rule_cols or hi_col in {c for _, c in curve}
    if model.breaks:
        assert {c for _, c in canvas.cells("break")} == {canvas.col_of(b) for b in model.breaks}


def test_an_anchor_that_misses_the_model_is_drawn_off_the_curve() -> None:
    # A record's Cp° typed 10 J/(mol·K) too low (as hcl-g's was) must stand apart from the curve.
    T = np.linspace(300, 1000, 50)
    canvas = layout(60, 12, curves=[Curve(T, 30 + 0.01 * T)], marks=[Mark(300, 23.0)], rules=[Rule(300)])
    assert canvas is not None
    (anchor,) = canvas.cells("anchor")
    curve_rows = {r for r, c in canvas.cells("curve") if c == anchor[1]}
    assert curve_rows and anchor[0] > max(curve_rows)


def test_the_characters_alone_tell_the_kinds_apart() -> None:
    T = np.linspace(300, 3000, 80)
    canvas = layout(70, 12, curves=[Curve(T, np.log(T))], marks=[Mark(300, math.log(300))],
                    rules=[Rule(300), Rule(3000), Rule(1000, BREAK, "break")])
    assert canvas is not None
    text = "\n".join(canvas.rows())
    assert ANCHOR in text and RULE in text and BREAK in text
    assert any(0x2800 < ord(ch) <= 0x28FF for ch in text)


def test_the_model_reproduces_a_published_heat_capacity() -> None:
    """CO2(g) Cp°(1000 K) = 54.31 J/(mol·K): NIST-JANAF Thermochemical Tables (from memory); the demo's
    Shomate coefficients are those of the NIST Chemistry WebBook."""
    from tablekeeper.tui.plot_screen import plot_data

    data = plot_data(_demo_record("co2-g"))
    cp_1000 = float(record_model(_demo_record("co2-g")).cp(1000.0))
    assert cp_1000 == pytest.approx(54.31, rel=0.003)
    assert data.cp.min() <= cp_1000 <= data.cp.max()


async def test_the_plot_screen_draws_both_plots_and_cycles_them(demo_copy) -> None:
    from tablekeeper.tui.app import create_app
    from tablekeeper.tui.plot import PlotView
    from tablekeeper.tui.plot_screen import PlotScreen

    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_screen(pilot, app, "plot", "ch4-g")
        assert isinstance(screen, PlotScreen)
        cp_plot, s_plot = screen.query_one("#cp-plot", PlotView), screen.query_one("#s-plot", PlotView)
        assert cp_plot.canvas is not None and s_plot.canvas is not None
        assert cp_plot.canvas.cells("anchor") and s_plot.canvas.cells("anchor")
        await pilot.press("v")
        assert cp_plot.display and not s_plot.display
        await pilot.press("v")
        assert s_plot.display and not cp_plot.display
        # n moves on to the next species with a model; one without a model says so.
        await pilot.press("n")
        assert screen.species_id == "co-g"
        screen.choose("hcl-g")
        await pilot.pause()
        assert "hcl-g has no Cp(T) model" in str(screen.query_one("#view-head").render())
