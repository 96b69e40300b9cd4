"""The release screen: it refuses while errors or blocking flags exist, and after confirmation writes a
bundle that ``tablekeeper verify`` accepts, with progress on the way."""

from __future__ import annotations

from pathlib import Path

from tablekeeper.store import Dataset
from tablekeeper.tui.app import create_app
from tablekeeper.tui.dialogs import ConfirmDialog
from tablekeeper.tui.release_screen import ReleaseProgress, ReleaseScreen

from .conftest import screen_text
from .part2_support import SIZE, copy_demo, fix_demo_faults, loaded, run_cli, type_text, until


async def _release_screen(pilot, app, out: Path) -> ReleaseScreen:
    screen = ReleaseScreen(out=out)
    app.push_screen(screen)
    await until(pilot, app, lambda: screen.ready and not screen.previewing and screen.preview is not None)
    return screen


def _bundles(out: Path) -> list[Path]:
    return sorted(out.glob("*")) if out.exists() else []


async def test_the_demo_is_refused_for_its_errors_and_its_blocking_flag(demo_copy, tmp_path) -> None:
    out = tmp_path / "out"
    app = create_app(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        # The key opens the screen; its output folder defaults to the command's, the current folder.
        app.action_show("release")
        await until(pilot, app,
                    lambda: isinstance(app.screen, ReleaseScreen) and app.screen.preview is not None)
        assert app.screen.query_one("#out").value == str(Path.cwd())
        app.pop_screen()
        screen = await _release_screen(pilot, app, out)
        gate = screen.preview.gate
        assert gate.errors and gate.blocking_flags and not gate.passed
        assert screen.version == "1.0.0"  # the suggested first version, filled in
        assert screen.check_action("release", ()) is False
        texts = [r.text for r in screen.rows]
        assert any("open blocking flag flag-20240311-142205-3fa9c1 on h2s-g" in t for t in texts)
        assert any(t.startswith("✗ error cp-continuity no-g") for t in texts)
        assert "release refused" in " ".join(screen_text(app).split())
        # The confirm key does nothing, even with warnings allowed.
        await pilot.press("ctrl+t", "ctrl+r")
        await pilot.pause()
        assert screen.allow_warnings and not isinstance(app.screen, ConfirmDialog)
    assert _bundles(out) == []
    assert not list((demo_copy / "releases").glob("*.json"))


async def test_a_clean_dataset_is_released_and_verify_accepts_the_bundle(keyset, tmp_path) -> None:
    out = tmp_path / "out"
    seen: list = []
    app = create_app(keyset)
    async with app.run_test(size=SIZE, message_hook=seen.append) as pilot:
        await loaded(pilot)
        screen = await _release_screen(pilot, app, out)
        assert screen.preview.gate.passed and screen.check_action("release", ()) is True
        await pilot.press("tab", "tab", "tab")  # version, out, note
        await type_text(pilot, "first cut")
        await pilot.press("enter", "ctrl+r")
        await until(pilot, app, lambda: isinstance(app.screen, ConfirmDialog))
        assert "keyset 1.0.0 into" in screen_text(app)
        await pilot.press("y")
        await until(pilot, app, lambda: screen.finished is not None and not screen.previewing)
        assert screen.finished.done is not None, screen.finished.error
        assert all(r.ok for r in screen.finished.reports)
        text = " ".join(screen_text(app).split())
        assert "released keyset-1.0.0 · verify: intact (folder and archive)" in text
        assert any(r.text == f"folder  {out / 'keyset-1.0.0'}" for r in screen.rows)
        # Progress came from release's callback, in order, to the end.
        fractions = [m.fraction for m in seen if isinstance(m, ReleaseProgress)]
        assert len(fractions) >= 3 and fractions == sorted(fractions) and fractions[-1] == 1.0
        # The new release is the last one now: the next suggestion would be a higher version.
        assert screen.preview.last_version == "1.0.0"
    folder = out / "keyset-1.0.0"
    p = run_cli("verify", str(folder))
    assert p.returncode == 0, p.stdout + p.stderr
    p = run_cli("verify", str(out / "keyset-1.0.0.tar.gz"))
    assert p.returncode == 0, p.stdout + p.stderr
    record = Dataset(keyset).load("releases", "1.0.0")
    assert record["note"] == "first cut" and record["user"] == "tester"


async def test_the_demo_released_from_the_app_after_its_faults_are_fixed(tmp_path) -> None:
    path = copy_demo(tmp_path / "demo")
    fix_demo_faults(path)
    out = tmp_path / "out"
    app = create_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await _release_screen(pilot, app, out)
        gate = screen.preview.gate
        assert gate.passed, gate.reasons()
        # The open non-blocking flag goes with the release as an accepted info.
        assert [f.check for f in gate.accepted] == ["flag"]
        await pilot.press("ctrl+r")
        await until(pilot, app, lambda: isinstance(app.screen, ConfirmDialog))
        await pilot.press("y")
        await until(pilot, app, lambda: screen.finished is not None and not screen.previewing)
        assert screen.finished.done is not None, screen.finished.error
    p = run_cli("verify", str(out / "kestrel-works-1.0.0"))
    assert p.returncode == 0, p.stdout + p.stderr


async def test_a_version_that_does_not_increase_is_refused_in_place(keyset, tmp_path) -> None:
    out = tmp_path / "out"
    app = create_app(keyset)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await _release_screen(pilot, app, out)
        await pilot.press("tab", "ctrl+u")
        await type_text(pilot, "1.0")
        await pilot.pause()
        assert screen.version_problem and screen.check_action("release", ()) is False
        assert "1.0" in screen.version_problem
        await pilot.press("ctrl+u")
        await type_text(pilot, "0.1.0")
        await pilot.pause()
        assert screen.version_problem is None and screen.check_action("release", ()) is True


async def test_a_user_without_the_release_role_may_not_release(builder, tmp_path) -> None:
    path = builder(tmp_path / "roles", roles={"steward": ["tester"], "release": ["rita"]})
    app = create_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await loaded(pilot)
        screen = await _release_screen(pilot, app, tmp_path / "out")
        assert screen.preview.gate.passed
        assert screen.check_action("release", ()) is False
        assert "may not release" in " ".join(screen_text(app).split())
        await pilot.press("ctrl+r")
        await pilot.pause()
        assert not isinstance(app.screen, ConfirmDialog)
    assert _bundles(tmp_path / "out") == []
