"""Editing a record's Cp(T) model: one coefficient or range bound through the record editor's edit line,
checked as it is typed, saved with a reason into the journal; removing the whole model after a
confirmation. The demo's fault #6 (datasets/README.md) is the case: nitric oxide's NASA polynomial with
a1 of the high range typed as 3.5606056 for 3.2606056, a jump in Cp, H and S at 1000 K.

References named beside their checks:
- NASA 7-coefficient polynomial, Cp/R = a1 + a2 T + a3 T² + a4 T³ + a5 T⁴ (McBride, Gordon & Reno,
  NASA TM-4513, 1993), evaluated here independently of tablekeeper.thermo;
- R = 8.314462618 J/(mol·K), the 2018 CODATA value;
- NO's high-range a1 = 3.26060560 of the GRI-Mech 3.0 thermodynamic file (from memory; the demo's
  README says the same digits were meant).
"""

from __future__ import annotations

import copy
import json
import math
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tablekeeper.editing import (
    CP_MODEL,
    RecordEdit,
    apply_cp_edit,
    cp_breaks,
    cp_field_text,
    cp_fields,
    detailed_changes,
    editor_path,
    remove_cp_model,
)
from tablekeeper.errors import InputError
from tablekeeper.store import Dataset
from tablekeeper.tui.app import create_app
from tablekeeper.tui.dialogs import ConfirmDialog, TextDialog
from tablekeeper.tui.record_screen import RecordScreen

from .conftest import screen_text
from .part2_support import DEMO, SIZE, journal, loaded, type_text, until

R = 8.314462618  # J/(mol·K), CODATA 2018
A1_PATH = "cp_model.ranges.1.a.0"
A1_TYPED = 3.5606056  # the demo's slip
A1_MEANT = 3.2606056  # GRI-Mech 3.0 (from memory)


def nasa_cp(a: list[float], T: float) -> float:
    """Cp in J/(mol·K) from NASA 7 coefficients (NASA TM-4513), written out here on purpose."""
    return R * (a[0] + a[1] * T + a[2] * T**2 + a[3] * T**3 + a[4] * T**4)


def no_record() -> dict:
    return json.loads((DEMO / "species" / "no-g.json").read_text())


# -- the core ------------------------------------------------------------------------------------------


def test_the_model_parts_are_listed_in_order_with_their_labels() -> None:
    fields = cp_fields(no_record())
    paths = [f.path for f in fields]
    assert paths[:4] == [CP_MODEL, "cp_model.source", "cp_model.ranges.0.tmin", "cp_model.ranges.0.tmax"]
    assert paths.index(A1_PATH) == 2 + 9 + 2  # model, source, range 1 (2 bounds, 7 coefficients), bounds
    labels = {f.path: f.label for f in fields}
    assert labels[A1_PATH] == "range 2 a1" and labels["cp_model.ranges.0.a.6"] == "range 1 a7"
    assert cp_field_text(no_record(), A1_PATH) == "3.5606056"
    assert cp_field_text(no_record(), CP_MODEL) == "nasa7, 2 ranges"
    assert cp_fields({"id": "x"}) == []


def test_a_coefficient_edit_changes_that_number_only() -> None:
    rec = no_record()
    new = apply_cp_edit(rec, A1_PATH, str(A1_MEANT))
    assert new["cp_model"]["ranges"][1]["a"][0] == A1_MEANT
    # Everything else is as stored, and the input was not changed.
    rest = copy.deepcopy(new)
    rest["cp_model"]["ranges"][1]["a"][0] = A1_TYPED
    assert rest == rec and rec["cp_model"]["ranges"][1]["a"][0] == A1_TYPED
    changes = detailed_changes(rec, new)
    assert [(c.field, c.old, c.new) for c in changes] == [("cp_model range 2 a1", A1_TYPED, A1_MEANT)]


def test_the_break_values_agree_with_the_polynomial_written_out() -> None:
    rec = no_record()
    low, high = (r["a"] for r in rec["cp_model"]["ranges"])
    (b,) = cp_breaks(rec["cp_model"])
    assert b.T == 1000
    assert b.cp_below == pytest.approx(nasa_cp(low, 1000.0), rel=1e-12)
    assert b.cp_above == pytest.approx(nasa_cp(high, 1000.0), rel=1e-12)
    # The slip adds 0.3 R to Cp above the break; with the meant digit both sides agree to 1e-5 J/(mol·K).
    assert b.cp_above - b.cp_below == pytest.approx(0.3 * R, abs=1e-3)
    (fixed,) = cp_breaks(apply_cp_edit(rec, A1_PATH, str(A1_MEANT))["cp_model"])
    assert abs(fixed.cp_above - fixed.cp_below) < 1e-5
    assert abs(fixed.h_above - fixed.h_below) < 1e-4 and abs(fixed.s_above - fixed.s_below) < 1e-4


def test_bad_texts_are_refused_with_a_sentence_naming_record_and_field() -> None:
    rec = no_record()
    with pytest.raises(InputError) as err:
        apply_cp_edit(rec, A1_PATH, "3,26")
    assert str(err.value) == "record no-g, field cp_model.ranges.1.a.0: '3,26' is not a number"
    with pytest.raises(InputError) as err:
        apply_cp_edit(rec, "cp_model.ranges.1.tmin", "100")  # before the first range: out of order
    assert "field cp_model" in str(err.value) and "increasing temperature" in str(err.value)
    with pytest.raises(InputError):
        apply_cp_edit(rec, "cp_model.ranges.0.tmin", "-5")  # the schema: above 0 K
    with pytest.raises(InputError):
        apply_cp_edit(rec, "cp_model.ranges.7.a.0", "1")  # no such range
    with pytest.raises(InputError):
        apply_cp_edit(rec, "cp_model.kind", "shomate")  # not an editable part
    with pytest.raises(InputError):
        apply_cp_edit(rec, A1_PATH, "")  # a NASA coefficient cannot be left out


def test_removing_the_model_leaves_the_rest_of_the_record() -> None:
    rec = no_record()
    new = remove_cp_model(rec)
    assert CP_MODEL not in new and {k: v for k, v in rec.items() if k != CP_MODEL} == new
    assert [(c.field, c.old_present, c.new_present) for c in detailed_changes(rec, new)] == \
        [(CP_MODEL, True, False)]
    with pytest.raises(InputError):
        remove_cp_model(new)


def test_removing_in_the_editor_drops_typed_coefficients() -> None:
    edit = RecordEdit(no_record())
    edit.set_text(A1_PATH, "3.26")
    edit.set_text(CP_MODEL, "")
    assert edit.dirty == [CP_MODEL]
    assert CP_MODEL not in edit.result().record and edit.result().ok
    edit.undo_field(CP_MODEL)
    assert edit.result().record == no_record()


def test_finding_fields_inside_the_model_lead_to_the_model() -> None:
    assert editor_path("cp_model") == CP_MODEL
    assert editor_path("/cp_model/ranges/1/a/0") == CP_MODEL
    assert editor_path("dfH298") == "properties.dfH298.value"
    assert editor_path(None) is None


@settings(max_examples=200, deadline=None)
@given(st.floats(allow_nan=False, allow_infinity=False, min_value=-1e11, max_value=1e11))
def test_any_finite_number_typed_is_stored_exactly_and_shown_back_the_same(x: float) -> None:
    rec = no_record()
    path = "cp_model.ranges.0.a.5"  # a6, free of range rules
    new = apply_cp_edit(rec, path, repr(x))
    stored = new["cp_model"]["ranges"][0]["a"][5]
    assert stored == x and math.copysign(1, stored) == math.copysign(1, x)
    assert float(cp_field_text(new, path)) == x


# -- the app -------------------------------------------------------------------------------------------


async def open_by_keys(pilot, app, ident: str) -> RecordScreen:
    """Filter the species table by id and open the record with Enter, as a person would."""
    await pilot.press("slash", "ctrl+u")
    await type_text(pilot, ident)
    await pilot.press("enter")
    await until(pilot, app, lambda: getattr(app.screen, "species_id", None) == ident)
    await pilot.press("enter")
    await until(pilot, app, lambda: isinstance(app.screen, RecordScreen) and app.screen.ready)
    return app.screen


async def cursor_to(pilot, screen, path: str) -> None:
    """Move the field cursor with the arrow keys to a field's row."""
    index = next(i for i, r in enumerate(screen.rows) if r.kind == "field" and r.path == path)
    for _ in range(len(screen.rows) * 2):
        cur = screen.table.cursor
        if cur == index:
            return
        await pilot.press("down" if cur < index else "up")
    raise AssertionError(f"the cursor never reached {path}")


async def save_with_reason(pilot, app, screen: RecordScreen, reason: str) -> None:
    revision = screen.edit.revision
    await pilot.press("ctrl+s")
    await until(pilot, app, lambda: isinstance(app.screen, TextDialog))
    await type_text(pilot, reason)
    await pilot.press("enter")
    await until(pilot, app, lambda: screen.edit.revision > revision and not app.loading and not app.checking
                and app.snapshot.report is not None)


def cp_errors(app, ident: str) -> list[str]:
    return [f.message for f in app.snapshot.report.for_species(ident)
            if f.check in ("cp-continuity", "cp-model") and f.severity == "error"]


async def test_fault_6_is_fixed_by_typing_the_coefficient(demo_copy: Path) -> None:
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        assert len(cp_errors(app, "no-g")) == 3  # Cp, H and S jump at 1000 K
        screen = await open_by_keys(pilot, app, "no-g")
        await cursor_to(pilot, screen, A1_PATH)
        text = screen_text(app)
        assert "range 2 a1" in text and "3.5606056" in text
        low, high = (r["a"] for r in no_record()["cp_model"]["ranges"])
        # The break from both sides, as the polynomial written out gives it.
        assert f"{nasa_cp(low, 1000.0):.3f} | {nasa_cp(high, 1000.0):.3f}" in text
        await pilot.press("enter", "ctrl+u")
        await type_text(pilot, "3.2606056")
        text = screen_text(app)
        assert "the edited model passes the cp-model and cp-continuity checks" in text
        fixed = [A1_MEANT, *high[1:]]
        assert f"Cp {nasa_cp(low, 1000.0):.3f} below, {nasa_cp(fixed, 1000.0):.3f} above" in text
        await pilot.press("enter")
        assert screen.edit.dirty == [A1_PATH]
        await pilot.press("ctrl+s")
        await until(pilot, app, lambda: isinstance(app.screen, TextDialog))
        assert "cp_model range 2 a1: 3.5606056 → 3.2606056" in screen_text(app)
        await pilot.press("escape")  # no reason: nothing is saved
        await pilot.pause()
        assert Dataset(demo_copy).load("species", "no-g")["revision"] == 1
        await save_with_reason(pilot, app, screen, "a1 of the high range: 3.5606056 typed for 3.2606056")
        assert cp_errors(app, "no-g") == []
        assert screen.edit.dirty == []
    stored = Dataset(demo_copy).load("species", "no-g")
    assert stored["cp_model"]["ranges"][1]["a"] == fixed and stored["revision"] == 2
    last = journal(demo_copy)[-1]
    assert last["target"] == "species/no-g" and last["user"] == "tester"
    assert last["reason"] == "a1 of the high range: 3.5606056 typed for 3.2606056"
    (change,) = last["changes"]
    assert change["field"] == "cp_model.ranges"
    assert change["old"][1]["a"][0] == A1_TYPED and change["new"][1]["a"][0] == A1_MEANT


async def test_a_wrong_text_is_refused_live_and_blocks_the_save(demo_copy: Path) -> None:
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        app.open_record("no-g")
        await until(pilot, app, lambda: isinstance(app.screen, RecordScreen) and app.screen.ready)
        screen = app.screen
        await cursor_to(pilot, screen, "cp_model.ranges.1.tmin")
        await pilot.press("enter", "ctrl+u")
        await type_text(pilot, "3000")
        assert "✗ tmin 3000 K must be positive and below tmax 2500 K" in screen_text(app)
        await pilot.press("ctrl+u")
        await type_text(pilot, "1200")
        # Savable, but the checks of the would-be model say what it would cost: a gap and a jump.
        text = " ".join(screen_text(app).split())
        assert "✗ cp-continuity: Cp jumps at the break 1200 K" in text
        await pilot.press("ctrl+u")
        await type_text(pilot, "12OO")
        assert "✗ '12OO' is not a number" in screen_text(app)
        await pilot.press("enter", "ctrl+s")
        await pilot.pause()
        assert isinstance(app.screen, RecordScreen)  # no reason asked: nothing can be saved
    assert Dataset(demo_copy).load("species", "no-g")["revision"] == 1


async def test_removing_the_model_asks_first_then_saves_with_a_reason(demo_copy: Path) -> None:
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_by_keys(pilot, app, "no-g")
        await pilot.press("ctrl+d")
        await until(pilot, app, lambda: isinstance(app.screen, ConfirmDialog))
        assert "Remove the Cp(T) model of no-g?" in screen_text(app)
        await pilot.press("n")
        await until(pilot, app, lambda: app.screen is screen)
        assert screen.edit.dirty == []
        await cursor_to(pilot, screen, CP_MODEL)
        await pilot.press("enter")  # Enter on the model line asks the same question
        await until(pilot, app, lambda: isinstance(app.screen, ConfirmDialog))
        await pilot.press("y")
        await until(pilot, app, lambda: app.screen is screen)
        assert screen.edit.dirty == [CP_MODEL]
        assert "will be removed when you save" in " ".join(screen_text(app).split())
        await pilot.press("ctrl+s")
        await until(pilot, app, lambda: isinstance(app.screen, TextDialog))
        assert "cp_model: nasa7, 2 ranges → (none)" in screen_text(app)
        await pilot.press("escape")
        await until(pilot, app, lambda: app.screen is screen)
        await save_with_reason(pilot, app, screen, "model withdrawn until refitted")
        assert cp_errors(app, "no-g") == []
    stored = Dataset(demo_copy).load("species", "no-g")
    assert CP_MODEL not in stored and stored["properties"] == no_record()["properties"]
    last = journal(demo_copy)[-1]
    assert last["reason"] == "model withdrawn until refitted"
    assert {c["field"] for c in last["changes"]} == {"cp_model.kind", "cp_model.ranges", "cp_model.source"}


async def test_a_reviewer_sees_the_model_but_cannot_change_it(demo_copy: Path) -> None:
    ds = Dataset(demo_copy, user="mhale")
    meta = dict(ds.meta, roles={"steward": ["mhale"], "reviewer": ["tester"]})
    ds.save_meta(meta, reason="roles for the test")
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        app.open_record("no-g")
        await until(pilot, app, lambda: isinstance(app.screen, RecordScreen) and app.screen.ready)
        screen = app.screen
        await cursor_to(pilot, screen, A1_PATH)
        assert "3.5606056" in screen_text(app)
        await pilot.press("enter")
        await pilot.pause()
        assert screen.editing is None
        await pilot.press("ctrl+d")
        await pilot.pause()
        assert app.screen is screen and screen.edit.dirty == []
    assert Dataset(demo_copy).load("species", "no-g")["revision"] == 1


async def test_a_flag_on_the_model_marks_blocking_with_a_character_not_a_colour(
        demo_copy: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from tablekeeper.tui.dialogs import FlagDialog

    monkeypatch.setenv("NO_COLOR", "1")
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_by_keys(pilot, app, "no-g")
        await cursor_to(pilot, screen, A1_PATH)
        await pilot.press("ctrl+f")
        await until(pilot, app, lambda: isinstance(app.screen, FlagDialog))
        assert app.screen.field == "cp_model"
        assert "[ ] blocking" in screen_text(app) and "[x]" not in screen_text(app)
        await type_text(pilot, "jump at 1000 K")
        await pilot.press("tab", "space")
        assert "[x] blocking" in screen_text(app)
        await pilot.press("ctrl+s")
        await until(pilot, app, lambda: app.screen is screen and any(
            f.get("field") == "cp_model" for f in app.snapshot.flags.values()))
    (flag,) = [f for f in Dataset(demo_copy).load_all("flags").records.values() if f["species"] == "no-g"]
    assert flag["field"] == "cp_model" and flag["blocking"] is True and flag["note"] == "jump at 1000 K"
