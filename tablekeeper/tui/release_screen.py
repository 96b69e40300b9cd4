"""The release screen: what changed since the last release, the suggested version, the gate, and the
release itself with its progress, ending in the bundle's path and ``verify``'s verdict on it.

Everything comes from ``tablekeeper.bundle``: ``preview`` (last version, diff, suggested version, gate;
run in a worker, it runs the checks), ``release`` (in a worker, its progress callback feeding the bar)
and ``verify``. The release key (ctrl+r) is disabled while the gate refuses, while the version is not
valid, while a release runs, and for a user without the release role. The output folder defaults to the
command line's default, the current folder, and is editable.
"""

from __future__ import annotations

import dataclasses
import textwrap
from dataclasses import dataclass
from pathlib import Path
from typing import ClassVar

from textual import events, on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal
from textual.css.query import NoMatches
from textual.message import Message
from textual.widgets import Checkbox, Input, Label, ProgressBar, Static

from ..bundle import GateRefused, Preview, Released, VerifyReport, parse_version, preview, release, verify
from ..bundle.writer import check_version
from ..errors import TablekeeperError
from ..text import printable
from . import registry
from .dialogs import ConfirmDialog
from .literal import lit_lines
from .views import MarkCheckbox, ReadTable
from .vtable import Column
from .widgets import InfoBar, KeyLine, TkScreen

_SEV = {"error": "E", "warning": "W", "info": "i"}


@dataclass(frozen=True)
class _Row:
    text: str
    kind: str | None = None  # "group" | "error" | "warning" | None


class PreviewReady(Message):
    def __init__(self, result: Preview | None, error: str | None) -> None:
        self.result = result
        self.error = error
        super().__init__()


class ReleaseProgress(Message):
    def __init__(self, stage: str, fraction: float) -> None:
        self.stage = stage
        self.fraction = fraction
        super().__init__()


class ReleaseFinished(Message):
    """The end of a release: what was written and verify's reports, or why nothing was."""

    def __init__(self, done: Released | None, reports: list[VerifyReport], error: str | None,
                 reasons: list[str]) -> None:
        self.done = done
        self.reports = reports
        self.error = error
        self.reasons = reasons
        super().__init__()


def verify_line(path: Path, report: VerifyReport) -> str:
    """``verify``'s verdict in one line, as the command prints it."""
    if report.ok:
        return (f"verify {path.name}: intact ({len(report.files)} files, {sum(report.files.values())} bytes, "
                "every hash matches)")
    return f"verify {path.name}: DAMAGED, {len(report.damages)} problems: {report.damages[0]}"


class ReleaseScreen(TkScreen):
    """Publish a release. ctrl+r asks to confirm and writes the bundle; ctrl+t accepts warnings; ctrl+l
    checks again."""

    ENTRY = "release"
    IS_LIST = True
    CSS_PATH = "views.tcss"
    TITLE_TEXT = "Release"
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape", "back", "Back", id="release.back"),
        Binding("ctrl+r", "release", "Release…", id="release.release"),
        Binding("ctrl+t", "toggle_warnings", "Allow warnings", id="release.allow_warnings"),
        Binding("ctrl+l", "check", "Check again", id="release.check"),
    ]

    def __init__(self, out: str | Path | None = None) -> None:
        super().__init__()
        # The command line's default (cli_bundle: ``--out`` defaults to the current folder).
        self.initial_out = str(out) if out is not None else str(Path.cwd())
        self.preview: Preview | None = None
        self.preview_error: str | None = None
        self.previewing = False
        self.releasing = False
        self.finished: ReleaseFinished | None = None
        self.version_problem: str | None = None
        self._version_typed = False
        self._stamp: object = None
        self.rows: list[_Row] = []

    def compose(self) -> ComposeResult:
        yield InfoBar()
        with Horizontal(classes="inputs"):
            yield Label("version", markup=False)
            yield Input(placeholder="X.Y.Z", id="version", compact=True, classes="short")
            yield Label(" out", markup=False)
            yield Input(value=self.initial_out, id="out", compact=True)
        with Horizontal(classes="inputs"):
            yield Label("note   ", markup=False)
            yield Input(placeholder="a note for the release record and the change log", id="note",
                        compact=True)
            yield MarkCheckbox("allow warnings (^t)", id="allow", compact=True)
        table = ReadTable(id="release-table")
        table.empty_text = "checking the dataset…"
        yield table
        yield ProgressBar(total=100, show_eta=False, id="release-progress")
        yield Static("", id="release-status", markup=False)
        yield KeyLine()

    def on_mount(self) -> None:
        self.ready = True
        for inp in self.query(Input):
            inp.cursor_blink = False
        self.query_one("#release-table", ReadTable).focus()
        self.run_preview()
        self.update_bar()

    # -- state -----------------------------------------------------------------------------------------

    @property
    def may_release(self) -> bool:
        return self.tk.may("release")

    @property
    def allow_warnings(self) -> bool:
        return bool(self.query_one("#allow", Checkbox).value)

    @property
    def version(self) -> str:
        return self.query_one("#version", Input).value.strip()

    @property
    def gate_passes(self) -> bool:
        return self.preview is not None and self.preview.gate.passed

    def can_release(self) -> bool:
        return (self.may_release and self.gate_passes and not self.version_problem and bool(self.version)
                and not self.releasing and not self.previewing)

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action == "release":
            return self.can_release()
        return True

    # -- preview ---------------------------------------------------------------------------------------

    def data_changed(self) -> None:
        self.update_bar()
        snap = self.tk.snapshot
        if not self.ready or snap is None or self.releasing:
            return
        if self._stamp is not None and snap.stamp != self._stamp and not self.previewing:
            self.run_preview()  # someone saved or flagged: the gate and the diff may have changed

    def run_preview(self) -> None:
        snap = self.tk.snapshot
        self._stamp = snap.stamp if snap is not None else None
        self.previewing = True
        self.refresh_bindings()
        self._status()
        ds = self.tk.dataset
        out = self.query_one("#out", Input).value.strip()
        allow = self.allow_warnings

        def work() -> None:
            try:
                result = preview(ds, allow_warnings=allow, out=Path(out) if out else None)
            except (TablekeeperError, OSError) as exc:
                self.post_message(PreviewReady(None, str(exc)))
                return
            self.post_message(PreviewReady(result, None))

        self.run_worker(work, thread=True, exclusive=True, group="preview", name="preview")

    def on_preview_ready(self, message: PreviewReady) -> None:
        self.previewing = False
        self.preview, self.preview_error = message.result, message.error
        if self.preview is not None:
            # The toggle may have moved while the checks ran.
            self.preview.gate = dataclasses.replace(self.preview.gate, allow_warnings=self.allow_warnings)
            if not self._version_typed and self.preview.suggested_version:
                inp = self.query_one("#version", Input)
                with inp.prevent(Input.Changed):
                    inp.value = self.preview.suggested_version
        self._check_version()
        self._rebuild()

    def _check_version(self) -> None:
        text = self.version
        self.version_problem = None
        if not text:
            self.version_problem = "type the version to release (X.Y.Z)"
        else:
            try:
                parse_version(text)
                check_version(self.tk.dataset, text)  # the core's rule: new, and above the last release
            except TablekeeperError as exc:
                self.version_problem = str(exc)
        self.refresh_bindings()

    # -- showing ---------------------------------------------------------------------------------------

    def _rebuild(self) -> None:
        rows: list[_Row] = self._finished_rows()
        p = self.preview
        if p is None:
            if self.preview_error:
                rows.append(_Row(f"✗ {self.preview_error}", "error"))
        else:
            g = p.gate
            if g.passed:
                rows.append(_Row("── Gate: passes", "group"))
            else:
                rows.append(_Row(f"── Gate: refused — {self._refusal(g)}", "group"))
                for reason in g.reasons():
                    kind = "warning" if reason.startswith("warning") else "error"
                    rows.append(_Row(f"✗ {reason}", kind))
            accepted = g.accepted if g.allow_warnings else [f for f in g.accepted if f.severity == "info"]
            if accepted and not g.errors and not g.blocking_flags:
                rows.append(_Row(f"── Accepted with the release ({len(accepted)}, listed in findings.csv)",
                                 "group"))
                for f in accepted:
                    where = " ".join(x for x in (f.species, f.field) if x)
                    rows.append(_Row(f"{_SEV.get(f.severity, '?')} {f.check} {where}: {f.message}",
                                     "warning" if f.severity == "warning" else None))
            if p.last_version is None:
                snap = self.tk.snapshot
                n = len(snap.species) if snap else 0
                rows.append(_Row(f"── First release: every species is new ({n} species)", "group"))
            elif p.diff is None:
                rows.append(_Row(f"── Changes since {p.last_version}: not listed (its bundle is neither in "
                                 "releases/ nor in the output folder)", "group"))
            else:
                d = p.diff
                rows.append(_Row(f"── Changes since {p.last_version}: {d.bump} ({d.bump_reason})", "group"))
                rows += [_Row(line) for line in d.text().split("\n")[1:]]
        self.rows = rows
        self._fill()
        self._status()

    def _fill(self) -> None:
        """Show the rows wrapped to the table's width (continuations indented), so nothing is cut off."""
        table = self.query_one("#release-table", ReadTable)
        width = max(30, (table.size.width or 80) - 2)
        shown: list[_Row] = []
        for row in self.rows:
            parts = textwrap.wrap(printable(row.text), width, subsequent_indent="    ") or [""]
            shown += [_Row(part, row.kind) for part in parts]
        table.set_data([Column("text", (), width)], len(shown), lambda i: [shown[i].text],
                       lambda i: shown[i].kind)

    def on_resize(self, event: events.Resize) -> None:
        if self.ready:
            self.call_after_refresh(self._fill)

    @staticmethod
    def _refusal(g) -> str:
        """What blocks, counted from the gate's own lists (the core's summary names the command's flag)."""
        parts = []
        for n, what in ((len(g.errors), "error"), (len(g.blocking_flags), "open blocking flag")):
            if n:
                parts.append(f"{n} {what}{'s' if n != 1 else ''}")
        if g.warnings and not g.allow_warnings:
            n = len(g.warnings)
            parts.append(f"{n} warning{'s' if n != 1 else ''} (ctrl+t accepts them)")
        return ", ".join(parts) or "nothing blocks"

    def _status(self) -> None:
        try:
            status = self.query_one("#release-status", Static)
        except NoMatches:
            return
        lines: list[str] = []
        refused = False
        if self.finished is not None and not self.releasing:
            lines += self._finished_lines(self.finished)
            refused = self.finished.done is None
        if self.releasing:
            pass  # the progress bar and its stage line say it
        elif self.previewing:
            lines.append("checking the dataset and comparing with the last release…")
        elif self.preview is not None:
            p = self.preview
            last = p.last_version or "none"
            sugg = p.suggested_version or "—"
            lines.append(f"last release {last} · suggested version {sugg}"
                         + (f" ({p.diff.bump})" if p.diff is not None else ""))
            if not self.may_release:
                lines.append(f"read-only: user {self.tk.user} may not release (the release role publishes)")
                refused = True
            elif not p.gate.passed:
                lines.append(f"✗ release refused: {self._refusal(p.gate)}; ctrl+r releases once it passes")
                refused = True
            elif self.version_problem:
                lines.append(f"✗ {self.version_problem}")
                refused = True
            else:
                lines.append(f"ready: ctrl+r releases {self.version} into the output folder")
        if self.finished is not None and not self.releasing and self.preview is not None:
            lines = lines[:3]
        status.update(lit_lines(lines))
        status.set_class(refused, "-refused")

    @staticmethod
    def _finished_lines(msg: ReleaseFinished) -> list[str]:
        """The status lines after a release: short; the paths and verdicts are rows of the table."""
        if msg.done is None:
            return [f"✗ not released: {msg.error}"]
        intact = msg.reports and all(r.ok for r in msg.reports)
        return [f"released {msg.done.folder.name} · verify: "
                + ("intact (folder and archive)" if intact else "DAMAGED, see above")]

    def _finished_rows(self) -> list[_Row]:
        msg = self.finished
        if msg is None or self.releasing:
            return []
        if msg.done is None:
            return [_Row(f"── Not released: {msg.error}", "group"),
                    *(_Row(f"✗ {r}", "error") for r in msg.reasons)]
        d = msg.done
        rows = [_Row(f"── Released {d.folder.name}", "group"), _Row(f"folder  {d.folder}"),
                _Row(f"archive {d.archive}"), _Row(f"datapackage.json {d.record.get('digest')}")]
        rows += [_Row(verify_line(Path(r.path), r), None if r.ok else "error") for r in msg.reports]
        if msg.error:
            rows.append(_Row(f"✗ {msg.error}", "error"))
        if d.bump_hint:
            rows.append(_Row(f"note: {d.bump_hint}", "warning"))
        return rows

    # -- events ----------------------------------------------------------------------------------------

    @on(Input.Changed, "#version")
    def on_version_changed(self, event: Input.Changed) -> None:
        self._version_typed = True
        self._check_version()
        self._status()

    @on(Input.Submitted)
    def on_input_submitted(self, event: Input.Submitted) -> None:
        self.query_one("#release-table", ReadTable).focus()

    @on(Checkbox.Changed, "#allow")
    def on_allow_changed(self, event: Checkbox.Changed) -> None:
        if self.preview is not None:
            # The gate's verdict with or without warnings is the core's (Gate.passed); no new check run.
            self.preview.gate = dataclasses.replace(self.preview.gate, allow_warnings=event.value)
        self.refresh_bindings()
        self._rebuild()

    # -- actions ---------------------------------------------------------------------------------------

    def action_back(self) -> None:
        if self.releasing:
            self.tk.notify("a release is being written; wait for it to finish", severity="warning",
                           markup=False)
            return
        if any(inp.has_focus for inp in self.query(Input)):
            self.query_one("#release-table", ReadTable).focus()
            return
        self.dismiss()

    def action_toggle_warnings(self) -> None:
        box = self.query_one("#allow", Checkbox)
        box.value = not box.value

    def action_check(self) -> None:
        if not self.releasing:
            self.finished = None
            self.run_preview()

    def action_release(self) -> None:
        if not self.can_release():
            return
        p = self.preview
        assert p is not None
        version = self.version
        out = self.query_one("#out", Input).value.strip() or str(Path.cwd())
        note = self.query_one("#note", Input).value.strip() or None
        allow = self.allow_warnings
        name = self.tk.dataset.name
        snap = self.tk.snapshot
        body = [f"{name} {version} into {out}",
                f"{len(snap.species) if snap else 0} species; previous release {p.last_version or 'none'}"]
        if p.diff is not None:
            d = p.diff
            body.append(f"since {p.last_version}: {len(d.added)} added, {len(d.removed)} removed, "
                        f"{len(d.changed)} changed ({d.bump})")
        if allow and p.gate.warnings:
            body.append(f"{len(p.gate.warnings)} warnings accepted (listed in findings.csv)")
        if note:
            body.append(f"note: {note}")
        body.append("A bundle is written once and never overwritten.")

        def answer(yes: bool | None) -> None:
            if yes:
                self._start(version, out, note, allow)

        self.app.push_screen(ConfirmDialog(f"Release {name} {version}?", body), answer)

    def _start(self, version: str, out: str, note: str | None, allow: bool) -> None:
        self.releasing = True
        self.finished = None
        self.refresh_bindings()
        bar = self.query_one("#release-progress", ProgressBar)
        bar.update(progress=0)
        bar.set_class(True, "-shown")
        self._status()
        ds = self.tk.dataset

        def progress(stage: str, fraction: float) -> None:
            self.post_message(ReleaseProgress(stage, fraction))

        def work() -> None:
            try:
                done = release(ds, version, out=out, note=note, allow_warnings=allow, progress=progress)
            except GateRefused as exc:
                self.post_message(ReleaseFinished(None, [], str(exc), exc.gate.reasons()))
                return
            except (TablekeeperError, OSError) as exc:
                self.post_message(ReleaseFinished(None, [], str(exc), []))
                return
            # Said by the app too: the user may have left this screen while the bundle was written.
            self.app.call_from_thread(self.app.notify, f"released {printable(done.folder.name)}",
                                      markup=False)
            try:
                reports = [verify(done.folder), verify(done.archive)]
            except (TablekeeperError, OSError) as exc:
                self.post_message(ReleaseFinished(done, [], f"verify failed: {exc}", []))
                return
            self.post_message(ReleaseFinished(done, reports, None, []))

        self.run_worker(work, thread=True, exclusive=True, group="release", name="release")

    def on_release_progress(self, message: ReleaseProgress) -> None:
        self.query_one("#release-progress", ProgressBar).update(progress=100 * message.fraction)
        self.query_one("#release-status", Static).update(lit_lines([f"{message.stage}…"]))

    def on_release_finished(self, message: ReleaseFinished) -> None:
        self.releasing = False
        self.finished = message
        self.query_one("#release-progress", ProgressBar).set_class(message.done is not None, "-shown")
        self._rebuild()
        if message.done is not None:
            self._version_typed = False
            inp = self.query_one("#version", Input)
            with inp.prevent(Input.Changed):
                inp.value = ""  # that version is taken now; the next preview suggests the one after
            self.tk.reload()
            self.run_preview()  # the new release is now the last one
        else:
            self.tk.notify(printable(f"not released: {message.error}"), severity="error", markup=False)
            self.refresh_bindings()


registry.register(registry.ScreenEntry(
    "release", "Release", "7,f8", lambda app, species: ReleaseScreen(),
    "diff against the last release, suggested version, gate, and the release itself", ReleaseScreen))
