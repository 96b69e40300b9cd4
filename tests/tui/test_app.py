"""The terminal app driven headless at 80×24, as a person would use it: keys in, state and files out."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest
from textual.command import CommandList, CommandPalette

from tablekeeper.checks import CHECKS, CheckSpec, Finding, _load_families
from tablekeeper.store import Dataset
from tablekeeper.tui.app import ChecksDone, SnapshotLoaded, create_app
from tablekeeper.tui.conflict_screen import ConflictScreen
from tablekeeper.tui.dialogs import ConfirmDialog, FlagDialog, TextDialog
from tablekeeper.tui.findings_screen import FindingsScreen
from tablekeeper.tui.flags_screen import FlagsScreen
from tablekeeper.tui.record_screen import RecordScreen
from tablekeeper.tui.species_screen import SpeciesScreen
from tablekeeper.tui.vtable import VirtualTable

from .conftest import KEY_SPECIES, fixed_flag, screen_text, settle, species_record

SIZE = (80, 24)
CAL_TH = 4.184  # J per thermochemical calorie (NIST SP 811)


def journal(path: Path) -> list[dict]:
    return [json.loads(line) for line in (path / "journal.jsonl").read_text().splitlines() if line]


async def type_text(pilot, text: str) -> None:
    await pilot.press(*["space" if c == " " else c for c in text])


async def test_the_app_loads_then_checks_in_workers_and_shows_the_table(keyset: Path) -> None:
    seen: list[type] = []
    app = create_app(keyset)
    async with app.run_test(size=SIZE, message_hook=lambda m: seen.append(type(m))) as pilot:
        await settle(pilot, app, lambda: app.snapshot is not None and app.snapshot.report is not None)
        assert SnapshotLoaded in seen and ChecksDone in seen
        assert seen.index(SnapshotLoaded) < seen.index(ChecksDone)
        table = app.screen.query_one("#species-table", VirtualTable)
        assert table.count == len(KEY_SPECIES)
        text = screen_text(app)
        assert "-285.83" in text and "69.95" in text and "checking…" not in text
        assert app.first_screen_seconds is not None


async def test_edit_then_save_and_the_journal_holds_the_change(keyset: Path) -> None:
    app = create_app(keyset)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        app.open_record("h2o-l")
        await pilot.pause()
        screen = app.screen
        assert isinstance(screen, RecordScreen)
        assert screen.current_path == "properties.dfH298.value"
        await pilot.press("enter", "ctrl+u")
        await type_text(pilot, "-68.3 kcal/mol")
        # Live validation: the canonical value appears while typing.
        assert "= -285.7672 kJ/mol (entered -68.3 kcal/mol, kept)" in screen_text(app)
        await pilot.press("enter")
        assert screen.edit.dirty == ["properties.dfH298.value"]
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert isinstance(app.screen, TextDialog)
        assert "properties.dfH298.value: -285.83 → -285.7672" in screen_text(app)
        await type_text(pilot, "value was typed in kcal")
        await pilot.press("enter")
        await settle(pilot, app, lambda: screen.edit.revision == 2)
        assert screen.edit.dirty == []
    last = journal(keyset)[-1]
    assert last["target"] == "species/h2o-l" and last["user"] == "tester"
    assert last["reason"] == "value was typed in kcal"
    changes = {c["field"]: c for c in last["changes"]}
    assert changes["properties.dfH298.value"]["old"] == -285.83
    assert changes["properties.dfH298.value"]["new"] == -285.7672
    stored = Dataset(keyset).load("species", "h2o-l")["properties"]["dfH298"]
    assert stored["entered"] == {"value": -68.3, "unit": "kcal/mol"}
    assert stored["value"] == -285.7672


async def test_a_typing_error_shows_its_sentence_and_blocks_the_save(keyset: Path) -> None:
    app = create_app(keyset)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        app.open_record("h2o-l")
        await pilot.pause()
        await pilot.press("enter", "ctrl+u")
        await type_text(pilot, "-68.3 kcal/mo")
        assert "✗ 'kcal/mo' is not a unit tablekeeper understands" in screen_text(app)
        await pilot.press("enter", "ctrl+s")
        await pilot.pause()
        assert isinstance(app.screen, RecordScreen)  # no reason asked: nothing can be saved
        await pilot.press("ctrl+z")
        assert app.screen.edit.dirty == []
    assert Dataset(keyset).load("species", "h2o-l")["revision"] == 1


async def test_escape_in_the_edit_line_puts_the_text_back(keyset: Path) -> None:
    app = create_app(keyset)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        app.open_record("h2o-l")
        await pilot.pause()
        await pilot.press("enter", "ctrl+u", "1", "escape")
        screen = app.screen
        assert isinstance(screen, RecordScreen) and screen.editing is None
        assert screen.edit.dirty == []


async def test_a_conflict_with_another_process_shows_both_versions_and_loses_nothing(keyset: Path) -> None:
    app = create_app(keyset, poll_interval=0.3)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        app.open_record("h2o-l")
        await pilot.pause()
        screen = app.screen
        await pilot.press("enter", "ctrl+u")
        await type_text(pilot, "-285.8")
        await pilot.press("enter")
        # Another user saves the same record from another process, through the store.
        code = (
            "from tablekeeper.store import Dataset\n"
            f"ds = Dataset({str(keyset)!r}, user='bob')\n"
            "rec = ds.load('species', 'h2o-l')\n"
            "rec['properties']['S298']['value'] = 69.91\n"
            "ds.save('species', rec, expected_revision=rec['revision'], reason='bob corrects S')\n"
        )
        subprocess.run([sys.executable, "-c", code], check=True, timeout=120)
        # The poll notices; the open editor says so and keeps my typing.
        await settle(pilot, app, lambda: screen.changed_on_disk)
        assert "Changed by someone else" in screen_text(app)
        assert screen.edit.dirty == ["properties.dfH298.value"]
        await pilot.press("ctrl+s")
        await pilot.pause()
        await type_text(pilot, "mine")
        await pilot.press("enter")
        await settle(pilot, app, lambda: isinstance(app.screen, ConflictScreen))
        conflict = app.screen
        fields = {r.field: r for r in conflict.rows}
        assert fields["properties.dfH298.value"].mine == -285.8
        assert fields["properties.S298.value"].theirs == 69.91
        text = screen_text(app)
        assert "-285.8" in text and "69.91" in text and "revision 2" in text
        await pilot.press("t")  # take theirs, apply mine again
        await pilot.pause()
        assert app.screen is screen and screen.edit.revision == 2
        assert screen.edit.dirty == ["properties.dfH298.value"]
        await pilot.press("ctrl+s")
        await pilot.pause()
        await type_text(pilot, "mine again")
        await pilot.press("enter")
        await settle(pilot, app, lambda: screen.edit.revision == 3)
    rec = Dataset(keyset).load("species", "h2o-l")
    assert rec["properties"]["dfH298"]["value"] == -285.8
    assert rec["properties"]["S298"]["value"] == 69.91
    reasons = [e.get("reason") for e in journal(keyset) if e.get("target") == "species/h2o-l"]
    assert reasons[-2:] == ["bob corrects S", "mine again"]


async def test_a_record_changed_on_disk_without_local_edits_simply_updates(keyset: Path) -> None:
    app = create_app(keyset, poll_interval=0.3)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        app.open_record("co-g")
        await pilot.pause()
        screen = app.screen
        ds = Dataset(keyset, user="bob")
        rec = ds.load("species", "co-g")
        rec["name"] = "carbon monoxide (bob)"
        ds.save("species", rec, expected_revision=1, reason="name")
        await settle(pilot, app, lambda: screen.edit.revision == 2)
        assert not screen.changed_on_disk
        assert screen.edit.text("name") == "carbon monoxide (bob)"
        screen.focus_path("name")
        await pilot.pause()
        assert "carbon monoxide (bob)" in screen_text(app)


async def test_a_reviewer_may_flag_while_editing_is_refused(builder, tmp_path: Path,
                                                            monkeypatch: pytest.MonkeyPatch) -> None:
    path = builder(tmp_path / "roles", roles={"steward": ["sam"], "reviewer": ["rita"]})
    monkeypatch.setenv("TABLEKEEPER_USER", "rita")
    before = (path / "species" / "h2o-l.json").read_bytes()
    app = create_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        assert app.user == "rita"
        app.open_record("h2o-l")
        await pilot.pause()
        screen = app.screen
        assert "Read-only: user rita may not edit" in screen_text(app)
        await pilot.press("enter")
        assert screen.editing is None
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert isinstance(app.screen, RecordScreen)
        # The field under the cursor is the one flagged.
        await pilot.press("ctrl+f")
        await pilot.pause()
        dialog = app.screen
        assert isinstance(dialog, FlagDialog) and dialog.field == "dfH298"
        await type_text(pilot, "looks like kcal")
        await pilot.press("enter")
        await settle(pilot, app, lambda: not isinstance(app.screen, FlagDialog))
    assert (path / "species" / "h2o-l.json").read_bytes() == before
    flags = Dataset(path).load_all("flags").records
    assert len(flags) == 1
    flag = next(iter(flags.values()))
    assert (flag["raised_by"], flag["species"], flag["field"], flag["note"]) == \
        ("rita", "h2o-l", "dfH298", "looks like kcal")
    assert journal(path)[-1]["action"] == "flag"


async def test_enter_on_a_finding_opens_the_record_at_that_field(builder, tmp_path: Path) -> None:
    # H2(g) is an element in its reference state: ΔfH° is zero by definition, so 0.5 is an error.
    bad = species_record("h2-g", "H2", "g", None, True, 0.5, 0.001, 130.68, 0.003, 0.0, 28.836)
    path = builder(tmp_path / "bad")
    ds = Dataset(path, user="builder")
    ds.save("species", dict(bad), expected_revision=1)
    app = create_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app, lambda: app.snapshot is not None and app.snapshot.report is not None)
        await pilot.press("2")
        await settle(pilot, app)
        screen = app.screen
        assert isinstance(screen, FindingsScreen)
        index = next(i for i, r in enumerate(screen.rows)
                     if r.finding and r.finding.check == "element-reference" and r.finding.species == "h2-g")
        screen.table.cursor = index
        await pilot.press("enter")
        await pilot.pause()
        record = app.screen
        assert isinstance(record, RecordScreen) and record.species_id == "h2-g"
        assert record.current_path == "properties.dfH298.value"
        assert "E element-reference" in screen_text(app)


async def test_a_unit_suspect_fix_is_confirmed_saved_and_journaled(builder, tmp_path: Path,
                                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    # ΔfH°(H2O, l) = -285.830 kJ/mol (CODATA 1989) typed as -68.315, its value in kcal/mol.
    path = builder(tmp_path / "slip")
    ds = Dataset(path, user="builder")
    rec = ds.load("species", "h2o-l")
    rec["properties"]["dfH298"]["value"] = -68.315
    ds.save("species", rec, expected_revision=1)
    corrected = -68.315 * CAL_TH

    # A stand-in for the unit-suspect check, so that this test depends only on the app: it reports what
    # the real check reports for such a slip (the field, the value seen, the corrected canonical value).
    def stand_in(ctx):
        value = ctx.species["h2o-l"]["properties"]["dfH298"]["value"]
        if value == -68.315:
            yield Finding("unit-suspect", "warning", "dfH298 looks like kcal/mol typed into a kJ/mol field",
                          species="h2o-l", field="dfH298", observed=value, expected=corrected,
                          suggestion="multiply by 4.184")

    _load_families()
    monkeypatch.setitem(CHECKS, "unit-suspect", CheckSpec("unit-suspect", "stand-in", stand_in))
    app = create_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app, lambda: app.snapshot is not None and app.snapshot.report is not None)
        await pilot.press("2")
        await settle(pilot, app)
        screen = app.screen
        index = next(i for i, r in enumerate(screen.rows) if r.finding and r.finding.check == "unit-suspect")
        screen.table.cursor = index
        await pilot.press("u")
        await pilot.pause()
        assert isinstance(app.screen, ConfirmDialog)
        assert "kept as entered in kcal/mol" in screen_text(app)
        await pilot.press("y")
        await settle(pilot, app, lambda: Dataset(path).load("species", "h2o-l")["revision"] == 3)
        # The fix is in and the stand-in no longer fires after the reload.
        await settle(pilot, app, lambda: not any(
            f.check == "unit-suspect" for f in (app.snapshot.report.findings if app.snapshot.report else [])))
    stored = Dataset(path).load("species", "h2o-l")["properties"]["dfH298"]
    assert stored["value"] == corrected
    assert stored["entered"] == {"value": -68.315, "unit": "kcal/mol"}
    last = journal(path)[-1]
    assert last["target"] == "species/h2o-l" and last["reason"].startswith("unit-suspect fix of dfH298")


async def test_filter_as_you_type_and_sort_by_columns(keyset: Path) -> None:
    app = create_app(keyset)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        screen = app.screen
        assert isinstance(screen, SpeciesScreen)
        await pilot.press("/")
        await type_text(pilot, "h2o")
        model = screen.model
        assert [model.ident_at(i) for i in range(screen.table.count)] == ["h2o-g", "h2o-l"]
        await pilot.press("escape", "escape")  # back to the table, then clear the filter
        assert screen.table.count == len(KEY_SPECIES)
        # id → formula → phase → ΔfH°
        await pilot.press("s", "s", "s")
        assert model.sort_key == "dfH298"
        by_value = [r[0] for r in sorted(KEY_SPECIES, key=lambda r: (r[5], r[0]))]
        shown = [model.ident_at(i) for i in range(screen.table.count)]
        assert [dict((r[0], r[5]) for r in KEY_SPECIES)[i] for i in shown] == \
            [dict((r[0], r[5]) for r in KEY_SPECIES)[i] for i in by_value]
        await pilot.press("r")
        shown = [model.ident_at(i) for i in range(screen.table.count)]
        values = [dict((r[0], r[5]) for r in KEY_SPECIES)[i] for i in shown]
        assert values == sorted(values, reverse=True)
        assert "↓" in screen_text(app)


async def test_the_palette_goes_to_a_species_by_formula(keyset: Path) -> None:
    app = create_app(keyset)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        await pilot.press("ctrl+p")
        await type_text(pilot, "co2")

        def ready() -> bool:
            return isinstance(app.screen, CommandPalette) and \
                app.screen.query_one(CommandList).option_count > 0

        await settle(pilot, app, ready)
        assert "Species: Go to co2-g" in screen_text(app)
        await pilot.press("down", "enter")
        await settle(pilot, app, lambda: isinstance(app.screen, RecordScreen))
        assert app.screen.species_id == "co2-g"


async def test_flags_raised_by_others_appear_without_a_restart(keyset: Path) -> None:
    app = create_app(keyset, poll_interval=0.2)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        Dataset(keyset, user="bob").save("flags", fixed_flag("flag-bob", "co2-g", "S298", "too high?"),
                                         expected_revision=None)
        await settle(pilot, app, lambda: "flag-bob" in app.snapshot.flags)
        model = app.screen.model
        assert model.mark_text(model.row_of("co2-g"))[1] == "F"
        await pilot.press("3")
        await settle(pilot, app)
        assert isinstance(app.screen, FlagsScreen)
        text = screen_text(app)
        assert "co2-g" in text and "bob" in text and "too high?" in text


async def test_comment_and_resolve_a_flag(builder, tmp_path: Path) -> None:
    path = builder(tmp_path / "fl", flags=[fixed_flag("flag-1", "h2o-l", "dfH298", "check the sign")])
    app = create_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        await pilot.press("3")
        await settle(pilot, app)
        await pilot.press("c")
        await pilot.pause()
        await type_text(pilot, "sign is right")
        await pilot.press("enter")
        await settle(pilot, app, lambda: len(app.snapshot.flags["flag-1"].get("comments", [])) == 1)
        await pilot.press("v")
        await pilot.pause()
        await type_text(pilot, "no change needed")
        await pilot.press("enter")
        await settle(pilot, app, lambda: app.snapshot.flags["flag-1"]["status"] == "resolved")
        text = screen_text(app)
        assert "tester at" in text and "sign is right" in text and "resolved by tester" in text
    flag = Dataset(path).load("flags", "flag-1")
    assert flag["resolution"] == "no change needed" and flag["comments"][0]["by"] == "tester"


async def test_add_and_edit_a_source_and_see_what_cites_it(keyset: Path) -> None:
    app = create_app(keyset)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        await pilot.press("4")
        await settle(pilot, app)
        assert "cited by 28 values" in screen_text(app)  # 7 species × 4 properties cite CODATA 1989
        await pilot.press("n")
        await pilot.pause()
        await type_text(pilot, "nbs-1982")
        await pilot.press("enter")
        await type_text(pilot, "The NBS tables of chemical thermodynamic properties")
        await pilot.press("enter")
        await type_text(pilot, "Wagman, D. D.; Evans, W. H.")
        await pilot.press("enter")
        await type_text(pilot, "198")
        assert "is less than the minimum of 1600" in screen_text(app)  # live schema validation
        await type_text(pilot, "2")
        await pilot.press("ctrl+s")
        await settle(pilot, app, lambda: app.snapshot is not None and "nbs-1982" in app.snapshot.sources)
    src = Dataset(keyset).load("sources", "nbs-1982")
    assert src["year"] == 1982 and src["authors"] == ["Wagman, D. D.", "Evans, W. H."]
    assert journal(keyset)[-1]["target"] == "sources/nbs-1982"


async def test_help_lists_every_binding_and_quit_works(keyset: Path) -> None:
    from tablekeeper.tui.help_screen import HelpScreen, help_text

    app = create_app(keyset)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        await pilot.press("f1")
        assert isinstance(app.screen, HelpScreen)
        await pilot.press("escape")
        await pilot.press("question_mark")
        assert isinstance(app.screen, HelpScreen)
        await pilot.press("escape", "q")
        await pilot.pause()
    assert app.return_code == 0
    text = help_text()
    for screen in (SpeciesScreen, RecordScreen, FindingsScreen, FlagsScreen, ConflictScreen, FlagDialog):
        for b in screen.BINDINGS:
            assert b.description in text, (screen.__name__, b.description)


def test_every_binding_has_a_stable_id_and_a_key_every_terminal_delivers() -> None:
    from textual.binding import Binding

    from tablekeeper.tui import dialogs, help_screen, sources_screen
    from tablekeeper.tui.app import TablekeeperApp

    classes = [TablekeeperApp, SpeciesScreen, RecordScreen, FindingsScreen, FlagsScreen, ConflictScreen,
               VirtualTable, dialogs.ConfirmDialog, dialogs.TextDialog, dialogs.FlagDialog,
               sources_screen.SourcesScreen, sources_screen.SourceDialog, help_screen.HelpScreen]
    ids = []
    for cls in classes:
        for b in cls.BINDINGS:
            assert isinstance(b, Binding) and b.id, (cls.__name__, b)
            ids.append(b.id)
            for key in b.key.split(","):
                key = key.strip()
                assert "ctrl+enter" not in key and "ctrl+shift" not in key and not key.startswith("alt+")
    assert len(ids) == len(set(ids))
