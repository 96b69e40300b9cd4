"""The measured-reactions screen (key 0): each reaction with its measured values and its reaction-closure
findings, edited, added and deleted from the keyboard with live validation, saved with a reason into the
journal; roles respected; text from data shown literally; conflicts shown with both versions.

The demo's fault #15 (datasets/README.md) is the case: ``hydrogen-combustion-legacy`` records ΔrH° =
-285.83 kJ/mol, the value per mole of water, for ``2 H2(g) + O2(g) = 2 H2O(l)``. By Hess's law the
reaction as written has ΔrH° = 2 ΔfH°(H2O, l) = 2 × (−285.83) = −571.66 kJ/mol (ΔfH°(H2O, l) from
CODATA Key Values for Thermodynamics, Cox, Wagman & Medvedev 1989; H2 and O2 are reference states).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tablekeeper import jsonio
from tablekeeper.checks import Context, check_dataset
from tablekeeper.editing import apply_reaction_edit, reaction_closure_preview, reaction_findings, save_reaction
from tablekeeper.errors import ConflictError, InputError
from tablekeeper.store import Dataset
from tablekeeper.text import printable
from tablekeeper.tui import registry
from tablekeeper.tui.app import create_app
from tablekeeper.tui.conflict_screen import ConflictScreen
from tablekeeper.tui.dialogs import ConfirmDialog, TextDialog
from tablekeeper.tui.reactions_screen import ReactionDialog, ReactionsScreen

from .conftest import HOSTILE, screen_text, settle
from .part2_support import SIZE, journal, loaded, type_text, until

LEGACY = "hydrogen-combustion-legacy"
DFH_WATER_L = -285.83  # kJ/mol, CODATA 1989
CAL_TH = 4.184  # J per thermochemical calorie (NIST SP 811)


def reaction(ident: str, equation: str, drH: float | None = None, u: float | None = None, **extra) -> dict:
    rec: dict = {"id": ident, "revision": 1, "equation": equation, **extra}
    if drH is not None:
        rec["drH"] = {"value": drH} if u is None else {"value": drH, "uncertainty": u}
    return rec


@pytest.fixture
def rxset(builder, tmp_path: Path) -> Path:
    """The key species with two measured reactions: one that closes, one per mole of water."""
    path = builder(tmp_path / "rx")
    ds = Dataset(path, user="builder")
    ds.save("reactions", reaction("water-formation", "2 H2(g) + O2(g) = 2 H2O(l)", 2 * DFH_WATER_L, 0.1,
                                  notes="two moles of liquid water"), expected_revision=None)
    ds.save("reactions", reaction("water-per-mole", "2 H2(g) + O2(g) = 2 H2O(l)", DFH_WATER_L, 0.05),
            expected_revision=None)
    return path


def closure_errors(report, ident: str) -> list:
    return [f for f in reaction_findings(report.findings, ident) if f.severity == "error"]


# -- the core ------------------------------------------------------------------------------------------


def test_findings_are_attached_to_their_reaction_only(rxset: Path) -> None:
    report = check_dataset(Dataset(rxset))
    assert [f.check for f in reaction_findings(report.findings, "water-per-mole")] == ["reaction-closure"]
    assert reaction_findings(report.findings, "water-formation") == []
    assert reaction_findings(report.findings, "water") == []  # a prefix of an id is not the id


def test_the_edit_is_checked_against_schema_equation_and_species(rxset: Path) -> None:
    ctx = Context.load(Dataset(rxset))
    rec = ctx.reactions["water-per-mole"]
    fixed = apply_reaction_edit(rec, {"drH.value": "-571.66"}, ctx.species)
    assert fixed.ok and fixed.record["drH"] == {"value": -571.66, "uncertainty": 0.05}
    assert fixed.notes["equation"] == "read as 2 h2-g + o2-g = 2 h2o-l"
    assert reaction_closure_preview(ctx, fixed.record) == []
    assert [f.check for f in reaction_closure_preview(ctx, rec)] == ["reaction-closure"]
    unbalanced = apply_reaction_edit(rec, {"equation": "H2(g) + O2(g) = H2O(l)"}, ctx.species)
    assert unbalanced.problems["equation"].startswith("the equation does not balance: O has 2 on the left")
    unknown = apply_reaction_edit(rec, {"equation": "2 H2(g) + O2(g) = 2 H2O2(l)"}, ctx.species)
    assert "equation" in unknown.problems
    formula = apply_reaction_edit(rec, {"notes": "=1+1"}, ctx.species)
    assert formula.problems == {"notes": "the notes may not begin with '=' (a spreadsheet would read a formula)"}
    assert apply_reaction_edit(rec, {"drH.uncertainty": "-1"}, ctx.species).problems == \
        {"drH.uncertainty": "an uncertainty cannot be negative"}
    assert apply_reaction_edit(rec, {"id": "other"}, ctx.species).problems == \
        {"id": "the id of an existing reaction cannot change"}
    assert apply_reaction_edit(None, {"equation": "H2(g) = H2(g)"}, ctx.species).problems["id"] == \
        "a new reaction needs an id"


@settings(max_examples=100, deadline=None)
@given(st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False))
def test_a_value_typed_in_kcal_is_stored_in_kj(x: float) -> None:
    rec = reaction("r", "2 H2(g) + O2(g) = 2 H2O(l)", -571.66)
    kj = apply_reaction_edit(rec, {"drH.value": repr(x)})
    assert kj.ok and kj.record["drH"]["value"] == x
    kcal = apply_reaction_edit(rec, {"drH.value": f"{x!r} kcal/mol"})
    assert kcal.ok and kcal.record["drH"]["value"] == pytest.approx(x * CAL_TH, rel=1e-14, abs=1e-300)


def test_a_save_needs_a_reason_and_the_revision_loaded(rxset: Path) -> None:
    ds = Dataset(rxset)
    rec = ds.load("reactions", "water-per-mole")
    with pytest.raises(InputError) as err:
        save_reaction(ds, rec, {"drH.value": "-571.66"}, " ")
    assert str(err.value) == "record water-per-mole, field reason: a save needs a reason for the journal"
    Dataset(rxset, user="other").save("reactions", dict(rec, notes="someone else"), expected_revision=1)
    with pytest.raises(ConflictError) as conflict:
        save_reaction(ds, rec, {"drH.value": "-571.66"}, "per the equation")
    assert conflict.value.theirs["notes"] == "someone else"
    assert ds.load("reactions", "water-per-mole")["drH"]["value"] == DFH_WATER_L


# -- the app -------------------------------------------------------------------------------------------


def test_the_screen_has_a_key_no_other_screen_uses() -> None:
    entry = registry.SCREENS["reactions"]
    assert entry.keys == "0" and entry.screen_class is ReactionsScreen
    others = {k for e in registry.SCREENS.values() if e is not entry for k in e.keys.split(",")}
    assert "0" not in others


async def open_reactions(pilot, app) -> ReactionsScreen:
    await pilot.press("0")
    await until(pilot, app, lambda: isinstance(app.screen, ReactionsScreen) and app.screen.ready)
    return app.screen


async def cursor_to(pilot, screen: ReactionsScreen, ident: str) -> None:
    index = next(i for i, r in enumerate(screen.items) if r.get("id") == ident)
    for _ in range(2 * len(screen.items) + 2):
        if screen.table.cursor == index:
            return
        await pilot.press("down" if screen.table.cursor < index else "up")
    raise AssertionError(f"the cursor never reached {ident}")


async def test_fault_15_is_fixed_by_typing_the_measured_value(demo_copy: Path) -> None:
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        assert len(closure_errors(app.snapshot.report, LEGACY)) == 1
        screen = await open_reactions(pilot, app)
        await cursor_to(pilot, screen, LEGACY)
        text = " ".join(screen_text(app).split())
        assert "E hydrogen-combus…" in text
        assert (f"✗ reaction-closure: measured ΔrH° {DFH_WATER_L:g}, the species data give "
                f"{2 * DFH_WATER_L:g} kJ/mol") in text
        await pilot.press("enter")
        await until(pilot, app, lambda: isinstance(app.screen, ReactionDialog))
        dialog = app.screen
        await pilot.press("tab", "tab")  # equation, temperature, ΔrH°
        assert dialog.focused is dialog.input_for("drH.value")
        await pilot.press("ctrl+u")
        await type_text(pilot, "-571.66")
        assert "closes with the species data: the reaction-closure check passes" in screen_text(app)
        await pilot.press("ctrl+s")
        await until(pilot, app, lambda: isinstance(app.screen, TextDialog))
        assert "drH.value: -285.83 → -571.66" in screen_text(app)
        await type_text(pilot, "per the equation as written: two moles of water")
        await pilot.press("enter")
        await until(pilot, app, lambda: app.screen is screen and not app.loading and not app.checking
                    and app.snapshot.report is not None
                    and app.snapshot.context.reactions[LEGACY]["revision"] == 2)
        assert closure_errors(app.snapshot.report, LEGACY) == []
        assert "closes with the species data" in screen_text(app)
    stored = Dataset(demo_copy).load("reactions", LEGACY)
    assert stored["drH"] == {"value": 2 * DFH_WATER_L, "uncertainty": 0.05}
    last = journal(demo_copy)[-1]
    assert last["target"] == f"reactions/{LEGACY}" and last["user"] == "tester"
    assert last["reason"] == "per the equation as written: two moles of water"
    assert last["changes"] == [{"field": "drH.value", "old": DFH_WATER_L, "new": -571.66}]
    assert check_dataset(Dataset(demo_copy), only=["reaction-closure"]).findings == []


async def test_an_unbalanced_equation_is_refused_live(rxset: Path) -> None:
    app = create_app(rxset)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_reactions(pilot, app)
        await cursor_to(pilot, screen, "water-formation")
        await pilot.press("e")
        await until(pilot, app, lambda: isinstance(app.screen, ReactionDialog))
        await pilot.press("ctrl+u")
        await type_text(pilot, "H2(g) + O2(g) = H2O(l)")
        assert "✗ equation: the equation does not balance" in screen_text(app)
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert isinstance(app.screen, ReactionDialog)  # no reason asked
        await pilot.press("escape")
        await until(pilot, app, lambda: app.screen is screen)
    assert Dataset(rxset).load("reactions", "water-formation")["revision"] == 1


async def test_a_reaction_is_added_then_deleted_with_reasons(rxset: Path) -> None:
    app = create_app(rxset)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_reactions(pilot, app)
        await pilot.press("n")
        await until(pilot, app, lambda: isinstance(app.screen, ReactionDialog))
        await type_text(pilot, "co-combustion")
        await pilot.press("tab")
        await type_text(pilot, "CO(g) + 1/2 O2(g) = CO2(g)")
        await pilot.press("tab", "tab")
        # ΔrH° = ΔfH°(CO2) − ΔfH°(CO) = −393.51 + 110.53 = −282.98 kJ/mol (CODATA 1989).
        await type_text(pilot, "-282.98")
        await pilot.press("tab")
        await type_text(pilot, "0.2")
        text = screen_text(app)
        assert "read as co-g + 1/2 o2-g = co2-g" in text and "closes with the species data" in text
        await pilot.press("ctrl+s")
        await until(pilot, app, lambda: isinstance(app.screen, TextDialog))
        await type_text(pilot, "bomb calorimetry of CO")
        await pilot.press("enter")
        await until(pilot, app, lambda: app.screen is screen and any(r["id"] == "co-combustion"
                                                                        for r in screen.items))
        assert Dataset(rxset).load("reactions", "co-combustion")["drH"] == {"value": -282.98, "uncertainty": 0.2}
        await cursor_to(pilot, screen, "co-combustion")
        await pilot.press("d")
        await until(pilot, app, lambda: isinstance(app.screen, ConfirmDialog))
        assert "Delete reaction co-combustion?" in screen_text(app)
        await pilot.press("n")
        await until(pilot, app, lambda: app.screen is screen)
        assert "co-combustion" in Dataset(rxset).ids("reactions")
        await pilot.press("d")
        await until(pilot, app, lambda: isinstance(app.screen, ConfirmDialog))
        await pilot.press("y")
        await until(pilot, app, lambda: isinstance(app.screen, TextDialog))
        await type_text(pilot, "entered by mistake")
        await pilot.press("enter")
        await until(pilot, app, lambda: app.screen is screen and not any(r["id"] == "co-combustion"
                                                                            for r in screen.items))
    assert "co-combustion" not in Dataset(rxset).ids("reactions")
    added, deleted = journal(rxset)[-2:]
    assert (added["action"], added["target"], added["reason"]) == \
        ("create", "reactions/co-combustion", "bomb calorimetry of CO")
    assert (deleted["action"], deleted["target"], deleted["reason"]) == \
        ("delete", "reactions/co-combustion", "entered by mistake")
    assert {"field": "drH.value", "old": -282.98} in deleted["changes"]


async def test_a_reviewer_cannot_edit_add_or_delete(builder, tmp_path: Path) -> None:
    path = builder(tmp_path / "roles", roles={"steward": ["sam"], "reviewer": ["tester"]})
    Dataset(path, user="sam").save("reactions", reaction("water-formation", "2 H2(g) + O2(g) = 2 H2O(l)",
                                                         2 * DFH_WATER_L, 0.1), expected_revision=None)
    app = create_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_reactions(pilot, app)
        for key in ("enter", "e", "n", "d"):
            await pilot.press(key)
            await pilot.pause()
            assert app.screen is screen, key
        assert screen.items[0]["id"] == "water-formation"  # reading is allowed
    with pytest.raises(Exception, match="may not edit"):
        save_reaction(Dataset(path), Dataset(path).load("reactions", "water-formation"),
                      {"drH.value": "-1"}, "not allowed")
    assert Dataset(path).load("reactions", "water-formation")["revision"] == 1


async def test_hostile_text_in_a_reaction_is_shown_literally(builder, tmp_path: Path) -> None:
    path = builder(tmp_path / "hostile")
    click, osc52, csi, close = (HOSTILE[k] for k in ("click", "osc52", "csi", "close"))
    evil = reaction("evil", f"{click} {osc52}", -1.0, notes=f"{close} {csi}")
    # Written straight to disk: the app must show even what the checks refuse.
    (path / "reactions" / "evil.json").write_bytes(jsonio.dumps(evil))
    app = create_app(path)
    async with app.run_test(size=(160, 30)) as pilot:
        await loaded(pilot)
        await open_reactions(pilot, app)
        text = screen_text(app)
        assert printable(f"{click} {osc52}") in text and printable(f"notes: {close} {csi}") in text
        await pilot.press("enter")
        await until(pilot, app, lambda: isinstance(app.screen, ReactionDialog))
        await settle(pilot, app)
        text = screen_text(app)
        assert printable(f"{click} {osc52}") in text
        for raw in ("\x1b", "\x07"):
            assert raw not in text
        assert app.is_running and app.return_code is None


async def test_a_conflict_shows_both_versions_and_the_typed_edit_survives(rxset: Path) -> None:
    app = create_app(rxset)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await open_reactions(pilot, app)
        await cursor_to(pilot, screen, "water-per-mole")
        await pilot.press("enter")
        await until(pilot, app, lambda: isinstance(app.screen, ReactionDialog))
        dialog = app.screen
        await pilot.press("tab", "tab", "ctrl+u")
        await type_text(pilot, "-571.66")
        # Meanwhile another user edits the notes of the same reaction.
        other = Dataset(rxset, user="other")
        other.save("reactions", dict(other.load("reactions", "water-per-mole"), notes="checked"),
                   expected_revision=1, reason="a note")
        await pilot.press("ctrl+s")
        await until(pilot, app, lambda: isinstance(app.screen, TextDialog))
        await type_text(pilot, "per the equation")
        await pilot.press("enter")
        await until(pilot, app, lambda: isinstance(app.screen, ConflictScreen))
        fields = {r.field: r for r in app.screen.rows}
        assert fields["drH.value"].mine == -571.66 and fields["drH.value"].theirs == DFH_WATER_L
        assert fields["notes"].theirs == "checked" and fields["notes"].mine is None
        assert Dataset(rxset).load("reactions", "water-per-mole")["drH"]["value"] == DFH_WATER_L
        await pilot.press("t")  # take theirs and apply mine over it
        await until(pilot, app, lambda: app.screen is dialog)
        assert dialog.original["revision"] == 2 and dialog.texts == {"drH.value": "-571.66"}
        await pilot.press("ctrl+s")
        await until(pilot, app, lambda: isinstance(app.screen, TextDialog))
        await type_text(pilot, "per the equation")
        await pilot.press("enter")
        await until(pilot, app, lambda: app.screen is screen)
    stored = Dataset(rxset).load("reactions", "water-per-mole")
    assert stored["notes"] == "checked" and stored["drH"]["value"] == -571.66 and stored["revision"] == 3


def test_reactions_screen_snapshot(snap_compare, rxset: Path) -> None:
    async def run_before(pilot) -> None:
        await loaded(pilot)
        await pilot.press("0")
        await until(pilot, pilot.app, lambda: isinstance(pilot.app.screen, ReactionsScreen))
        await pilot.press("down")
        await settle(pilot, pilot.app)

    assert snap_compare(create_app(rxset), terminal_size=SIZE, run_before=run_before)
