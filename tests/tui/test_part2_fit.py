"""The fit view: the fit is the core's, and the saved model's residuals are reproduced by the core."""

from __future__ import annotations

import re

import numpy as np
import pytest

from tablekeeper.store import Dataset
from tablekeeper.thermo import fit, model_from_json
from tablekeeper.tui.app import create_app
from tablekeeper.tui.dialogs import TextDialog
from tablekeeper.tui.fit_screen import FitScreen, fit_record

from .conftest import screen_text
from .part2_support import SIZE, journal, loaded, open_screen, type_text, until

CALCITE = "caco3-cr-calcite"


def anchors_of(rec: dict) -> dict:
    return {k: rec["properties"][k]["value"] for k in ("Cp298", "dfH298", "S298")}


@pytest.mark.parametrize("kind", ["shomate", "nasa7"])
async def test_the_saved_model_reproduces_the_fit_and_its_residuals(demo_copy, kind: str) -> None:
    before = Dataset(demo_copy).load("species", CALCITE)
    points = np.asarray(before["cp_model"]["points"], dtype=float)
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_screen(pilot, app, "fit", CALCITE)
        assert isinstance(screen, FitScreen)
        if kind == "nasa7":
            await pilot.press("k")
        assert screen.view is not None and screen.view.kind == kind
        assert screen.view.anchors == ("Cp298", "dfH298", "S298")
        shown_rms = screen.view.result.rms
        assert f"rms = {shown_rms:.4g}" in " ".join(screen_text(app).split())
        await pilot.press("ctrl+s")
        await until(pilot, app, lambda: isinstance(app.screen, TextDialog))
        await type_text(pilot, "smooth model for the kiln")
        await pilot.press("enter")
        await until(pilot, app, lambda: Dataset(demo_copy).load("species", CALCITE)["revision"]
                    == before["revision"] + 1)
    after = Dataset(demo_copy).load("species", CALCITE)
    assert after["cp_model"]["kind"] == kind
    assert after["cp_model"]["source"] == before["cp_model"]["source"]
    # Journaled, with the statistics in the reason and the old points kept as the old value.
    last = journal(demo_copy)[-1]
    assert last["target"] == f"species/{CALCITE}" and last["user"] == "tester"
    assert last["reason"].startswith("smooth model for the kiln; ")
    stats = re.search(r"n = (\d+), rms = ([0-9.e+-]+), max = ([0-9.e+-]+)", last["reason"])
    assert stats and int(stats.group(1)) == len(points)
    olds = {c["field"]: c.get("old") for c in last["changes"]}
    assert olds["cp_model.points"] == before["cp_model"]["points"]
    # The core reproduces the residuals: the saved model over the original points...
    saved = model_from_json(after["cp_model"])
    residuals = saved.cp(points[:, 0]) - points[:, 1]
    rms = float(np.sqrt(np.mean(residuals**2)))
    assert f"{rms:.4g}" == stats.group(2)
    assert f"{float(np.max(np.abs(residuals))):.4g}" == stats.group(3)
    # ...and a fit made again from the saved record's anchors gives the same model and rms.
    again = fit(points, kind, anchors=anchors_of(after))
    assert again.rms == pytest.approx(rms, rel=1e-9, abs=1e-12)
    assert np.allclose(again.model.cp(points[:, 0]), saved.cp(points[:, 0]), rtol=1e-12, atol=1e-12)
    # Pinned: the model holds the record's own values at 298.15 K.
    assert float(saved.cp(298.15)) == pytest.approx(after["properties"]["Cp298"]["value"], abs=1e-9)
    assert saved.implied_S298() == pytest.approx(after["properties"]["S298"]["value"], abs=1e-9)
    assert saved.implied_dfH298() == pytest.approx(after["properties"]["dfH298"]["value"], abs=1e-9)


def test_the_calcite_points_are_fitted_closely(demo_copy) -> None:
    """A Shomate fit of calcite's Cp from 298 to 1200 K stays within about 0.5 % of the tabulated values
    (Kelley 1960 represents such data with a three-term equation to about that; common practice)."""
    view = fit_record(Dataset(demo_copy).load("species", CALCITE), "shomate")
    assert view.result.n == 10
    assert np.all(np.abs(view.result.residuals) < 0.005 * view.points[:, 1])
    assert np.allclose(view.fitted - view.points[:, 1], view.result.residuals, atol=1e-9)


async def test_a_reviewer_may_not_save_a_model(builder, tmp_path, monkeypatch) -> None:
    from tablekeeper.thermo import T_REF

    path = builder(tmp_path / "roles", roles={"steward": ["sam"], "reviewer": ["tester"]})
    ds = Dataset(path, user="sam")
    rec = ds.load("species", "h2o-l")
    # Tabulated Cp of liquid water (IAPWS-95 at 0.1 MPa, rounded; from memory).
    rec["cp_model"] = {"kind": "tabulated", "points": [[T_REF, 75.35], [310, 75.29], [320, 75.30],
                                                       [330, 75.37], [340, 75.47], [350, 75.64],
                                                       [360, 75.86]]}
    ds.save("species", rec, expected_revision=rec["revision"])
    app = create_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_screen(pilot, app, "fit", "h2o-l")
        assert screen.view is not None
        assert screen.check_action("save", ()) is False
        assert "may not save a model" in " ".join(screen_text(app).split())
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert not isinstance(app.screen, TextDialog)
    assert Dataset(path).load("species", "h2o-l")["revision"] == rec["revision"] + 1


async def test_a_species_without_points_says_so(demo_copy) -> None:
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_screen(pilot, app, "fit", "ch4-g")
        assert screen.view is None
        assert "ch4-g has no tabulated Cp points" in screen_text(app)
        await pilot.press("n")
        assert screen.species_id == "nacl-cr" and screen.view is not None
