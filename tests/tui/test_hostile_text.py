"""Text from data reaches the screen literally in every widget: no markup is read, no action runs, no
terminal control sequence is passed on, and the app keeps running.

The records are written straight to disk (not through the store's save) so that even values the schema
refuses (a formula or a status that is markup) are shown: the app must survive a damaged dataset.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from tablekeeper import jsonio
from tablekeeper.editing import conflict_rows
from tablekeeper.errors import ConflictError
from tablekeeper.text import printable
from tablekeeper.tui.app import create_app
from tablekeeper.tui.conflict_screen import ConflictScreen
from tablekeeper.tui.record_screen import RecordScreen

from .conftest import HOSTILE, screen_text, settle, species_record, wait_text

SIZE = (80, 24)
CLICK, CLOSE, OPEN, OSC52, CSI = (HOSTILE[k] for k in ("click", "close", "open", "osc52", "csi"))


@pytest.fixture
def hostile(builder, tmp_path: Path) -> Path:
    path = builder(tmp_path / "hostile")
    evil = species_record("evil", "NaCl", "cr", None, False, -411.12, 0.1, 72.11, 0.2, -384.0, 50.5)
    evil.update(formula=CLICK, status=OPEN, name=OSC52 + " " + CSI, notes=CLOSE)
    evil["properties"]["dfH298"]["source"] = "evil-src"
    (path / "species" / "evil.json").write_bytes(jsonio.dumps(evil))
    src = {"id": "evil-src", "revision": 1, "title": CLICK, "authors": [CLOSE, OSC52], "notes": CSI,
           "identifier": OPEN}
    (path / "sources" / "evil-src.json").write_bytes(jsonio.dumps(src))
    flag = {"id": "flag-evil", "revision": 1, "species": "evil", "field": "dfH298",
            "note": CLICK + " " + OSC52, "blocking": True, "status": "open", "raised_by": "mallory",
            "raised_at": "2024-05-01T10:00:00Z",
            "comments": [{"by": "mallory", "at": "2024-05-01T11:00:00Z", "text": CLOSE + " " + CSI}]}
    (path / "flags" / "flag-evil.json").write_bytes(jsonio.dumps(flag))
    return path


def assert_literal(app, *expected: str) -> None:
    """Each expected text is on screen exactly as escaped; no raw control character is drawn."""
    text = screen_text(app)
    for s in expected:
        assert printable(s) in text, (s, text)
    assert "\x1b" not in text and "\x07" not in text and "\x9b" not in text
    assert app.is_running and app.return_code is None


async def click_on(pilot, app, needle: str) -> None:
    """Click where ``needle`` is drawn (a [@click=...] there would run its action if read as markup)."""
    for y, line in enumerate(screen_text(app).splitlines()):
        x = line.find(needle)
        if x >= 0:
            await pilot.click(offset=(x + 2, y))
            await pilot.pause()
            return
    raise AssertionError(f"{needle!r} is not on screen")


async def test_species_table_and_detail_line(hostile: Path) -> None:
    app = create_app(hostile)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        await pilot.press("/")
        await pilot.press(*"evil")
        await pilot.press("escape")
        await pilot.pause()
        # The formula column is cut to its width; the cut text is still literal.
        assert_literal(app, CLICK[:10], OPEN, OSC52, CSI)
        await click_on(pilot, app, "[@click")
        assert_literal(app, CLICK[:10])


async def test_record_view_and_edit_line(hostile: Path) -> None:
    app = create_app(hostile)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        app.open_record("evil")
        await pilot.pause()
        screen = app.screen
        assert isinstance(screen, RecordScreen)
        screen.focus_path("formula")
        await pilot.pause()
        assert_literal(app, CLICK, OPEN)  # formula row, and the edit line showing its text
        await click_on(pilot, app, "[@click")
        screen.focus_path("name")
        await pilot.pause()
        assert_literal(app, OSC52 + " " + CSI)
        screen.focus_path("notes")
        await pilot.pause()
        assert_literal(app, CLOSE)
        # Opening the escaped text in the edit line and leaving it changes nothing.
        await pilot.press("enter", "enter")
        assert screen.edit.dirty == []
        screen.focus_path("properties.dfH298.source")
        await pilot.pause()
        assert_literal(app, CLICK)  # the source's title beside the field
        screen.table.cursor = screen.table.count - 1  # the record's flags and findings
        await pilot.pause()
        assert_literal(app, CLICK)


async def test_findings(hostile: Path) -> None:
    app = create_app(hostile)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app, lambda: app.snapshot is not None and app.snapshot.report is not None)
        await pilot.press("2")
        await settle(pilot, app)
        screen = app.screen
        index = next(i for i, r in enumerate(screen.rows)
                     if r.finding and r.finding.check == "formula" and r.finding.species == "evil")
        screen.table.cursor = index
        await pilot.pause()
        assert "[@click=app.quit]x[/]" in screen_text(app)
        assert_literal(app)
        await click_on(pilot, app, "[@click")
        assert_literal(app)


async def test_flags_and_comment_dialog(hostile: Path) -> None:
    app = create_app(hostile)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        await pilot.press("3")
        await settle(pilot, app)
        assert_literal(app, CLICK + " " + OSC52, "mallory", CLOSE + " " + CSI)
        await click_on(pilot, app, "[@click")
        await pilot.press("c")
        await pilot.pause()
        assert_literal(app, CLICK + " " + OSC52)  # the note, shown in the comment dialog
        await pilot.press("escape")


async def test_sources(hostile: Path) -> None:
    app = create_app(hostile)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        await pilot.press("4")
        await settle(pilot, app)
        screen = app.screen
        screen.table.cursor = next(i for i, s in enumerate(screen.items) if s["id"] == "evil-src")
        await pilot.pause()
        assert_literal(app, CLICK, CSI, OPEN, "[/nope]; " + printable(OSC52))
        await pilot.press("e")
        await wait_text(pilot, app, "Edit source evil-src")
        await wait_text(pilot, app, "notes")
        assert_literal(app, CLICK)  # in the source editor's title input
        await pilot.press("escape")
        await pilot.pause()
        await click_on(pilot, app, "[@click")  # a click on the current row opens the editor, nothing else
        assert_literal(app)


async def test_conflict_screen(hostile: Path) -> None:
    app = create_app(hostile)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        base = app.snapshot.species["h2o-l"]
        mine = dict(base, name=CLICK)
        theirs = dict(base, name=OSC52 + CSI, revision=2)
        err = ConflictError("species/h2o-l", 1, 2, theirs, mine)
        app.push_screen(ConflictScreen("h2o-l", conflict_rows(base, mine, theirs), err))
        await pilot.pause()
        assert_literal(app, CLICK, OSC52 + CSI)
        await click_on(pilot, app, "[@click")
        assert_literal(app)


async def test_palette_hits(hostile: Path) -> None:
    app = create_app(hostile)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        await pilot.press("ctrl+p")
        await pilot.press(*"evil")
        for _ in range(100):
            await pilot.pause(0.05)
            if "Species: Go to evil" in screen_text(app):
                break
        assert_literal(app, "Species: Go to evil", CLICK[:12])
        await pilot.press("escape")
