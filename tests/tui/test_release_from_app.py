"""The release manager's path through the app alone: starting from a copy of the demo dataset, every
seeded fault (datasets/README.md, the table of faults) is corrected with key presses only (the record
editor, the findings list's unit fix, the flags list's resolve, the status of the duplicate, the Cp(T)
model and the measured reactions), then the release screen publishes, and ``tablekeeper verify`` (a
separate process) accepts the bundle.

The corrected values are the ones the README names, with their references there: CODATA Key Values for
Thermodynamics (Cox, Wagman & Medvedev 1989) for SO2, quartz and water; the thermochemical calorie of
4.184 J (NIST SP 811) for the SO2 unit slip; the GRI-Mech 3.0 NASA polynomial of NO (from memory);
NIST-JANAF magnitudes for propane and ethanol (from memory, as in part2_support.fix_demo_faults).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from tablekeeper.checks import check_dataset
from tablekeeper.store import Dataset
from tablekeeper.tui.app import create_app
from tablekeeper.tui.dialogs import ConfirmDialog, TextDialog
from tablekeeper.tui.findings_screen import FindingsScreen
from tablekeeper.tui.flags_screen import FlagsScreen
from tablekeeper.tui.reactions_screen import ReactionDialog, ReactionsScreen
from tablekeeper.tui.record_screen import RecordScreen
from tablekeeper.tui.release_screen import ReleaseScreen
from tablekeeper.tui.species_screen import SpeciesScreen

from .part2_support import SIZE, journal, loaded, run_cli, type_text, until

BLOCKING_FLAG = "flag-20240311-142205-3fa9c1"
LEGACY = "hydrogen-combustion-legacy"

#: (species, {editor field: text}, reason): the record-editor corrections, faults 3-8 and 11-14.
RECORD_FIXES: list[tuple[str, dict[str, str], str]] = [
    ("fe2o3-cr-hematite", {"properties.S298.value": "87.4"}, "sign lost"),
    ("hcl-g", {"properties.Cp298.value": "29.14"}, "digit slip"),
    ("no2-g", {"properties.dfG298.value": "51.31"}, "digit slip"),
    ("no-g", {"cp_model.ranges.1.a.0": "3.2606056"}, "a1 slip"),
    ("quicklime", {"status": "deprecated"}, "duplicate of cao-cr"),
    ("c2h6-g", {"properties.dfH298.source": "krw-em-003"}, "filed source"),
    ("c3h8-g", {"properties.S298.value": "270.3", "properties.dfG298.value": "-23.46"}, "estimate replaced"),
    ("c2h5oh-l", {"properties.S298.value": "160.7", "properties.dfG298.value": "-174.71"}, "dfS was S"),
    ("sio2-cr-quartz", {"properties.S298.uncertainty": "0.2"}, "CODATA u"),
    ("si-cr", {"properties.dfH298.value": "0"}, "reference state"),
]


def settled(app) -> bool:
    return not app.loading and not app.checking and app.snapshot is not None and app.snapshot.report is not None


async def move_cursor(pilot, table, index: int) -> None:
    for _ in range(2 * table.count + 2):
        if table.cursor == index:
            return
        await pilot.press("down" if table.cursor < index else "up")
    raise AssertionError(f"the cursor never reached row {index}")


async def fix_record(pilot, app, ident: str, texts: dict[str, str], reason: str) -> None:
    await pilot.press("1")  # back to the species table
    await until(pilot, app, lambda: isinstance(app.screen, SpeciesScreen))
    await pilot.press("slash", "ctrl+u")
    await type_text(pilot, ident)
    await pilot.press("enter")
    await until(pilot, app, lambda: app.screen.species_id == ident)
    await pilot.press("enter")
    await until(pilot, app, lambda: isinstance(app.screen, RecordScreen) and app.screen.ready)
    screen = app.screen
    for path, text in texts.items():
        await move_cursor(pilot, screen.table,
                          next(i for i, r in enumerate(screen.rows) if r.kind == "field" and r.path == path))
        await pilot.press("enter", "ctrl+u")
        await type_text(pilot, text)
        await pilot.press("enter")
    assert screen.edit.result().ok, screen.edit.result().problems
    revision = screen.edit.revision
    await pilot.press("ctrl+s")
    await until(pilot, app, lambda: isinstance(app.screen, TextDialog))
    await type_text(pilot, reason)
    await pilot.press("enter")
    await until(pilot, app, lambda: screen.edit.revision > revision and settled(app))


@pytest.mark.slow
async def test_every_seeded_fault_is_fixed_in_the_app_then_released_and_verified(demo_copy: Path,
                                                                                 tmp_path: Path) -> None:
    out = tmp_path / "out"
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        assert app.snapshot.report.summary["error"] > 0

        # 1, 2: SO2's ΔfH° in kcal/mol: the findings list applies the unit-suspect correction.
        await pilot.press("2")
        await until(pilot, app, lambda: isinstance(app.screen, FindingsScreen) and app.screen.ready)
        findings = app.screen
        await move_cursor(pilot, findings.table, next(i for i, r in enumerate(findings.rows) if r.finding
                                                      and r.finding.check == "unit-suspect"
                                                      and r.finding.species == "so2-g"))
        await pilot.press("u")
        await until(pilot, app, lambda: isinstance(app.screen, ConfirmDialog))
        await pilot.press("y")
        await until(pilot, app, lambda: settled(app) and app.snapshot.species["so2-g"]["revision"] == 2)

        # 3-8, 11-14: the record editor (the duplicate deprecated through its status; the Cp model).
        for ident, texts, reason in RECORD_FIXES:
            await fix_record(pilot, app, ident, texts, reason)

        # 9: the blocking flag is resolved on the flags list (10 stays open: it does not block).
        await pilot.press("3")
        await until(pilot, app, lambda: isinstance(app.screen, FlagsScreen) and app.screen.ready)
        flags = app.screen
        await move_cursor(pilot, flags.table, next(i for i, f in enumerate(flags.items)
                                                   if f["id"] == BLOCKING_FLAG))
        await pilot.press("v")
        await until(pilot, app, lambda: isinstance(app.screen, TextDialog))
        await type_text(pilot, "datasheet value confirmed")
        await pilot.press("enter")
        await until(pilot, app, lambda: settled(app)
                    and app.snapshot.flags[BLOCKING_FLAG]["status"] == "resolved")

        # 15: the legacy reaction's ΔrH°, per the equation as written.
        await pilot.press("0")
        await until(pilot, app, lambda: isinstance(app.screen, ReactionsScreen) and app.screen.ready)
        reactions = app.screen
        await move_cursor(pilot, reactions.table, next(i for i, r in enumerate(reactions.items)
                                                       if r["id"] == LEGACY))
        await pilot.press("enter")
        await until(pilot, app, lambda: isinstance(app.screen, ReactionDialog))
        await pilot.press("tab", "tab", "ctrl+u")
        await type_text(pilot, "-571.66")
        await pilot.press("ctrl+s")
        await until(pilot, app, lambda: isinstance(app.screen, TextDialog))
        await type_text(pilot, "two moles of water")
        await pilot.press("enter")
        await until(pilot, app, lambda: settled(app) and app.snapshot.context.reactions[LEGACY]["revision"] == 2)

        # Nothing is left but the open non-blocking flag (an info).
        assert app.snapshot.report.rows() == [("flag", "info", "caso4-cr-anhydrite", "dfH298")]

        # The release screen: output folder typed in, the suggested version, confirm.
        await pilot.press("7")
        await until(pilot, app, lambda: isinstance(app.screen, ReleaseScreen) and app.screen.preview is not None
                    and not app.screen.previewing)
        release = app.screen
        assert release.preview.gate.passed, release.preview.gate.reasons()
        await pilot.press("tab", "tab", "ctrl+a", "ctrl+k")
        await type_text(pilot, str(out))
        await pilot.press("enter")
        assert release.query_one("#out").value == str(out)
        assert release.version == "1.0.0"
        await pilot.press("ctrl+r")
        await until(pilot, app, lambda: isinstance(app.screen, ConfirmDialog))
        await pilot.press("y")
        await until(pilot, app, lambda: release.finished is not None and not release.previewing, tries=3000)
        assert release.finished.done is not None, release.finished.error
        assert all(r.ok for r in release.finished.reports)

    folder = out / "kestrel-works-1.0.0"
    p = run_cli("verify", str(folder))
    assert p.returncode == 0, p.stdout + p.stderr
    p = run_cli("verify", str(out / "kestrel-works-1.0.0.tar.gz"))
    assert p.returncode == 0, p.stdout + p.stderr
    # The dataset as saved passes the checks, and the journal holds every correction with its reason.
    assert check_dataset(Dataset(demo_copy)).summary["error"] == 0
    entries = journal(demo_copy)
    reasons = {(e["target"], e.get("reason")) for e in entries}
    for ident, _texts, reason in RECORD_FIXES:
        assert (f"species/{ident}", reason) in reasons
    assert (f"reactions/{LEGACY}", "two moles of water") in reasons
    assert any(e["target"] == "species/so2-g" and "unit-suspect fix" in (e.get("reason") or "") for e in entries)
    assert Dataset(demo_copy).load("releases", "1.0.0")["user"] == "tester"
