"""The terminal app: the app object, its factory, loading and polling the dataset.

The app holds one ``Snapshot`` of the dataset (loaded in a worker thread, then checked in another) and
hands it down to the screens (``data_changed``); screens send requests up by calling the app's
``open_*`` methods. Every ``poll_interval`` seconds the app compares the dataset's cheap fingerprint
(``Dataset.stamp``) with the snapshot's, and reloads when another user saved or flagged something.
Disk work runs in workers (``run_disk``) that end in one callback carrying the result or the error.
"""

from __future__ import annotations

import time
import traceback
from collections.abc import Callable, Iterable
from pathlib import Path
from typing import Any, ClassVar

from textual.app import App, SystemCommand
from textual.binding import Binding, BindingType
from textual.message import Message
from textual.screen import Screen

from ..checks import Report
from ..errors import TablekeeperError
from ..store import Dataset
from ..text import printable
from . import registry
from .commands import SpeciesCommands
from .data import Snapshot, check_snapshot, load_snapshot
from .species_model import marks_from


class SnapshotLoaded(Message):
    def __init__(self, snapshot: Snapshot) -> None:
        self.snapshot = snapshot
        super().__init__()


class ChecksDone(Message):
    def __init__(self, snapshot: Snapshot, report: Report) -> None:
        self.snapshot = snapshot
        self.report = report
        super().__init__()


class ChecksFailed(Message):
    def __init__(self, reason: str, details: str) -> None:
        self.reason = reason
        self.details = details
        super().__init__()


class LoadFailed(Message):
    def __init__(self, reason: str) -> None:
        self.reason = reason
        super().__init__()


def _register_builtin_screens() -> None:
    from .findings_screen import FindingsScreen
    from .flags_screen import FlagsScreen
    from .sources_screen import SourcesScreen
    from .species_screen import SpeciesScreen

    entry = registry.ScreenEntry
    registry.register(entry("species", "Species", "1", lambda app, sp: None, "the species table",
                            SpeciesScreen))
    registry.register(entry("findings", "Findings", "2,f2", lambda app, sp: FindingsScreen(),
                            "every finding of the checks, by severity and check", FindingsScreen))
    registry.register(entry("flags", "Flags", "3,f3", lambda app, sp: FlagsScreen(),
                            "flags raised on values: raise, comment, resolve", FlagsScreen))
    registry.register(entry("sources", "Sources", "4,f4", lambda app, sp: SourcesScreen(),
                            "bibliographic sources and the values citing them", SourcesScreen))


_register_builtin_screens()
registry.load_extensions()


def _screen_bindings() -> list[Binding]:
    return [Binding(e.keys, f"show('{e.name}')", e.title, id=f"screen.{e.name}")
            for e in registry.SCREENS.values()]


class TablekeeperApp(App[None]):
    """tablekeeper: curate a thermochemical table from the keyboard."""

    TITLE = "tablekeeper"
    CSS_PATH = "app.tcss"
    COMMANDS = App.COMMANDS | {SpeciesCommands}
    ENABLE_COMMAND_PALETTE = True
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("q", "quit", "Quit", id="app.quit"),
        Binding("ctrl+q", "quit", "Quit", show=False, priority=True, id="app.quit_ctrl"),
        Binding("f1,question_mark", "help", "Help", id="app.help"),
        Binding("f5", "reload", "Reload", show=False, id="app.reload"),
        *_screen_bindings(),
    ]

    def __init__(self, path: str | Path, user: str | None = None, *, poll_interval: float = 2.0) -> None:
        self.started = time.perf_counter()
        self.dataset = Dataset(path, user=user)
        super().__init__()
        self.poll_interval = poll_interval
        self.snapshot: Snapshot | None = None
        self.loading = False
        self.checking = False
        self.load_error: str | None = None
        self.first_screen_seconds: float | None = None
        # The terminal may be a slow SSH link: no animation, no blinking cursor.
        self.animation_level = "none"

    # -- screens ---------------------------------------------------------------------------------------

    def get_default_screen(self) -> Screen:
        from .species_screen import SpeciesScreen

        return SpeciesScreen()

    @property
    def user(self) -> str:
        return self.dataset.user

    def may(self, action: str) -> bool:
        return self.dataset.may(action)

    def role_text(self) -> str:
        roles = sorted(self.dataset.roles_of())
        if not any((self.dataset.meta.get("roles") or {}).values()):
            return "single-user"
        return ", ".join(roles) if roles else "no role"

    @property
    def current_species(self) -> str | None:
        """The species the user is on: the open record, or the table's highlighted row."""
        for screen in reversed(self.screen_stack):
            ident = getattr(screen, "species_id", None)
            if ident:
                return ident
        return None

    def action_show(self, name: str) -> None:
        entry = registry.SCREENS.get(name)
        if entry is None:
            return
        if name == "species":
            self._pop_to_base()
            return
        if getattr(self.screen, "ENTRY", None) == name:
            return
        screen = entry.factory(self, self.current_species)
        if getattr(self.screen, "IS_LIST", False):
            self.switch_screen(screen)
        else:
            self.push_screen(screen)

    def _pop_to_base(self) -> None:
        while len(self.screen_stack) > 1:
            top = self.screen
            if getattr(top, "has_unsaved", lambda: False)():
                self.notify("the record has unsaved edits: save (ctrl+s) or undo them (ctrl+r) first",
                            severity="warning", markup=False)
                return
            self.pop_screen()

    async def action_quit(self) -> None:
        """Quit, but not over unsaved edits without asking."""
        from .dialogs import ConfirmDialog

        dirty = [s for s in self.screen_stack if getattr(s, "has_unsaved", lambda: False)()]
        if not dirty:
            self.exit()
            return
        names = ", ".join(str(getattr(s, "species_id", "?")) for s in dirty)

        def answer(yes: bool | None) -> None:
            if yes:
                self.exit()

        self.push_screen(ConfirmDialog("Quit with unsaved edits?",
                                       [f"Unsaved edits in {names} will be lost."]), answer)

    def action_help(self) -> None:
        from .help_screen import HelpScreen

        if not isinstance(self.screen, HelpScreen):
            self.push_screen(HelpScreen())

    def action_reload(self) -> None:
        self.reload()

    def open_record(self, ident: str, field: str | None = None) -> None:
        from .record_screen import RecordScreen

        if self.snapshot is None or ident not in self.snapshot.species:
            self.notify(f"no species {printable(ident)} in the dataset", severity="warning", markup=False)
            return
        self.push_screen(RecordScreen(ident, focus_field=field))

    def open_flags(self, species: str | None = None) -> None:
        from .flags_screen import FlagsScreen

        self.push_screen(FlagsScreen(species=species))

    def raise_flag_dialog(self, species: str, field: str | None = None) -> None:
        from .dialogs import FlagDialog

        if not self.may("flag"):
            self.notify(f"user {self.user} may not raise flags (steward or reviewer role)",
                        severity="error", markup=False)
            return
        self.push_screen(FlagDialog(species, field))

    def get_system_commands(self, screen: Screen) -> Iterable[SystemCommand]:
        yield from super().get_system_commands(screen)
        for entry in registry.SCREENS.values():
            yield SystemCommand(f"Go: {entry.title}", entry.description or entry.title,
                                lambda name=entry.name: self.action_show(name))
        yield SystemCommand("Checks: Run again", "run the check catalogue over the dataset",
                            self.run_checks)
        yield SystemCommand("Dataset: Reload", "read the dataset from disk again", self.reload)

    # -- loading and polling ---------------------------------------------------------------------------

    def on_mount(self) -> None:
        self.reload()
        self.set_interval(self.poll_interval, self._poll, name="poll")

    def reload(self) -> None:
        """Read the dataset again in a worker; screens are told when it is in."""
        self.loading = True
        self._announce()
        self.run_worker(self._load_worker, thread=True, exclusive=True, group="load", name="load")

    def _load_worker(self) -> None:
        try:
            snap = load_snapshot(self.dataset)
        except (TablekeeperError, OSError) as exc:
            self.post_message(LoadFailed(str(exc)))
            return
        self.post_message(SnapshotLoaded(snap))

    def on_snapshot_loaded(self, message: SnapshotLoaded) -> None:
        old = self.snapshot
        snap = message.snapshot
        if old is not None and old.report is not None:
            # Keep the previous marks until the checks of the new snapshot are in (no flicker).
            snap.model.set_marks(marks_from(old.report.findings, snap.flags))
            snap.report = old.report
        self.snapshot = snap
        self.loading = False
        self.load_error = None
        self._announce()
        if self.first_screen_seconds is None:
            self.first_screen_seconds = time.perf_counter() - self.started
        for problem in snap.problems:
            self.notify(printable(problem), severity="error", markup=False)
        self.run_checks()

    def on_load_failed(self, message: LoadFailed) -> None:
        self.loading = False
        self.load_error = message.reason
        self.notify(printable(message.reason), severity="error", markup=False, timeout=10)
        self._announce()

    def run_checks(self) -> None:
        snap = self.snapshot
        if snap is None:
            return
        self.checking = True
        self._announce()

        def work() -> None:
            try:
                report = check_snapshot(snap)
            except Exception as exc:  # a fault in one check must not take the app down
                self.post_message(ChecksFailed(f"the checks failed: {type(exc).__name__}: {exc}",
                                               traceback.format_exc()))
                return
            self.post_message(ChecksDone(snap, report))

        self.run_worker(work, thread=True, exclusive=True, group="check", name="check")

    def on_checks_done(self, message: ChecksDone) -> None:
        snap = message.snapshot
        if snap is not self.snapshot:
            return  # a newer snapshot is being checked
        snap.report = message.report
        snap.model.set_marks(marks_from(message.report.findings, snap.flags))
        self.checking = False
        self._announce()

    def on_checks_failed(self, message: ChecksFailed) -> None:
        self.checking = False
        self.log.error(message.details)
        self.notify(printable(message.reason), severity="error", markup=False, timeout=10)
        self._announce()

    def _poll(self) -> None:
        if self.loading or self.snapshot is None:
            return
        try:
            stamp = self.dataset.stamp()
        except OSError:
            return
        if stamp != self.snapshot.stamp:
            self.reload()

    def _announce(self) -> None:
        """Tell every screen on the stack that the data or its state changed."""
        for screen in self.screen_stack:
            hook = getattr(screen, "data_changed", None)
            if hook is not None:
                hook()

    # -- disk work -------------------------------------------------------------------------------------

    def run_disk(self, fn: Callable[[], Any], done: Callable[[Any], None],
                 failed: Callable[[Exception], None] | None = None) -> None:
        """Run ``fn`` in a worker thread; call ``done(result)`` or ``failed(error)`` back on the app."""

        def work() -> None:
            try:
                result = fn()
            except (TablekeeperError, OSError) as exc:
                self.call_from_thread(failed or self.show_error, exc)
                return
            self.call_from_thread(done, result)

        self.run_worker(work, thread=True, group="disk", name="disk")

    def show_error(self, exc: Exception) -> None:
        self.notify(printable(exc), severity="error", markup=False, timeout=8)


def create_app(path: str | Path, user: str | None = None, *, poll_interval: float = 2.0) -> TablekeeperApp:
    """Build the app on a dataset folder, for the command line and the tests alike."""
    return TablekeeperApp(path, user=user, poll_interval=poll_interval)
