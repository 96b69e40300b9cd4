"""One species record: every value with its unit, uncertainty, source and method, its findings and flags
beside it, and the editor (live validation, save with a reason, undo, conflicts).

The edit logic lives in ``tablekeeper.editing``; this screen shows ``RecordEdit.result()`` after every key
press and sends the save through ``editing.save_edit`` in a worker.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import ClassVar

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.css.query import NoMatches
from textual.widgets import Footer, Input, Label, Static

from ..editing import (
    EDIT_FIELDS,
    SCALAR_FIELDS,
    EditResult,
    FieldSpec,
    RecordEdit,
    conflict_rows,
    field_path,
    field_text,
    number_text,
    save_edit,
)
from ..errors import ConflictError
from ..model import FIELDS, LABELS, display_name
from ..text import printable
from ..units import canonical_unit
from .dialogs import ConfirmDialog, TextDialog, changes_text
from .literal import lit
from .widgets import InfoBar, TkScreen

_SEV = {"error": "E", "warning": "W", "info": "i"}
_ROW_LABEL = {"value": "value", "uncertainty": "uncertainty", "coverage": "coverage k", "source": "source",
              "method": "method", "reference_state": "reference state", "cas": "CAS number"}


def dom_id(path: str) -> str:
    return "f-" + path.replace(".", "-")


def flag_field(path: str | None) -> str | None:
    """The flag field (dfH298, formula, ...) an editor field belongs to."""
    if not path:
        return None
    parts = path.split(".")
    return parts[1] if parts[0] == "properties" else parts[0]


class FieldInput(Input):
    """An editor field: up and down move between fields, Enter goes to the next one."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("down", "screen.focus_next", "Next field", show=False, id="field.next"),
        Binding("up", "screen.focus_previous", "Previous field", show=False, id="field.previous"),
    ]


class FieldRow(Vertical):
    """Label, input, and the line under it (conversion, problem, findings, flags)."""

    def __init__(self, spec: FieldSpec, text: str, disabled: bool) -> None:
        super().__init__(classes="field-row", id=f"row-{dom_id(spec.path)}")
        self.spec = spec
        self.text = text
        self.read_only = disabled

    def compose(self) -> ComposeResult:
        spec = self.spec
        label = _ROW_LABEL.get(spec.part or spec.path, spec.label)
        if spec.unit:
            label = f"{label} {spec.unit.replace('*', '·')}"
        with Horizontal(classes="row"):
            yield Label(label, classes="label", markup=False)
            inp = FieldInput(value=printable(self.text), name=spec.path, id=dom_id(spec.path), compact=True,
                             disabled=self.read_only, select_on_focus=False)
            inp.cursor_blink = False
            yield inp
        yield Static("", classes="msg", markup=False)


class RecordScreen(TkScreen):
    """A species record and its editor.

    Type ``-68.3 kcal/mol`` into a value: the canonical value appears under it, and what you typed is
    kept as the entered value. ctrl+s saves (asking for a reason that goes into the journal).
    """

    TITLE_TEXT = "Record"
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape", "back", "Back", id="record.back"),
        Binding("ctrl+s", "save", "Save", id="record.save"),
        Binding("ctrl+z", "undo_field", "Undo field", id="record.undo_field"),
        Binding("ctrl+r", "undo_all", "Undo all", id="record.undo_all"),
        Binding("ctrl+l", "reload_record", "Reload", id="record.reload"),
        Binding("ctrl+f", "flag", "Flag", id="record.flag"),
        Binding("ctrl+g", "flags", "Flags", id="record.flags"),
    ]

    def __init__(self, ident: str, focus_field: str | None = None) -> None:
        super().__init__()
        self.species_id = ident
        self.focus_field = focus_field
        self.edit: RecordEdit | None = None
        self.changed_on_disk = False
        self.deleted_on_disk = False
        self.saving = False

    # -- building --------------------------------------------------------------------------------------

    @property
    def read_only(self) -> bool:
        return not self.tk.may("edit")

    def _record(self) -> dict | None:
        snap = self.tk.snapshot
        return None if snap is None else snap.species.get(self.species_id)

    def compose(self) -> ComposeResult:
        rec = self._record() or {"id": self.species_id}
        snap = self.tk.snapshot
        self.edit = RecordEdit(rec, sources=snap.sources if snap else None)
        ro = self.read_only
        yield InfoBar()
        yield Static("", id="banner", markup=False)
        with VerticalScroll(id="form"):
            yield Static(lit(f"{self.species_id}  {display_name(rec)}  revision {rec.get('revision', '?')}"),
                         classes="section", id="record-title", markup=False)
            for spec in EDIT_FIELDS:
                if spec.prop and spec.part == "value":
                    unit = canonical_unit(spec.prop).replace("*", "·")
                    yield Static(lit(f"{LABELS[spec.prop]}  ({spec.prop}, {unit})"), classes="section",
                                 markup=False)
                yield FieldRow(spec, field_text(rec, spec.path), ro)
            yield Static("Cp(T) model", classes="section", markup=False)
            yield Static("", id="cp-model", markup=False)
            yield Static("Findings and flags on the whole record", classes="section", markup=False)
            yield Static("", id="record-notes", classes="msg", markup=False)
        yield Footer()

    def on_mount(self) -> None:
        self.data_changed()
        self.refresh_messages()
        if self.focus_field:
            self.call_after_refresh(self.focus_path, self.focus_field)
        elif not self.read_only:
            self.call_after_refresh(self.focus_path, "properties.dfH298.value")

    def focus_path(self, path: str) -> None:
        try:
            inp = self.query_one(f"#{dom_id(path)}", FieldInput)
            row = self.query_one(f"#row-{dom_id(path)}", FieldRow)
        except NoMatches:
            return
        row.add_class("-target")
        if inp.disabled:
            row.scroll_visible(animate=False, top=True)
        else:
            inp.focus()
            row.scroll_visible(animate=False)

    def has_unsaved(self) -> bool:
        return bool(self.edit and self.edit.dirty)

    # -- showing ---------------------------------------------------------------------------------------

    def update_bar(self) -> None:
        n = len(self.edit.dirty) if self.edit else 0
        self.TITLE_TEXT = f"Record {self.species_id}" + (f" · {n} unsaved" if n else "")
        super().update_bar()

    def _banner(self) -> None:
        try:
            banner = self.query_one("#banner", Static)
        except NoMatches:
            return
        lines = []
        if self.deleted_on_disk:
            lines.append("This record was deleted by someone else. Your edits are still here; saving will "
                         "show the conflict.")
        elif self.changed_on_disk:
            lines.append("Changed by someone else — ctrl+l reloads (your edits are applied again) or keep "
                         "editing; saving will show the conflict.")
        if self.read_only:
            lines.append(f"Read-only: user {self.tk.user} may not edit (the steward role edits). "
                         "ctrl+f raises a flag.")
        banner.update(lit("\n".join(lines)))
        banner.set_class(bool(lines), "-shown")
        banner.set_class(self.changed_on_disk or self.deleted_on_disk, "-warning")

    def data_changed(self) -> None:
        if not self.is_mounted or self.edit is None:
            return
        disk = self._record()
        if disk is None:
            self.deleted_on_disk = True
        else:
            self.deleted_on_disk = False
            if int(disk.get("revision", 0)) != self.edit.revision and not self.saving:
                if self.edit.dirty:
                    self.changed_on_disk = True
                else:
                    # Nothing typed here: simply show the new version.
                    self._rebase(disk, quiet=True)
                    self.tk.notify(f"{printable(self.species_id)} was updated on disk; showing the new "
                                   "version", markup=False)
        self.update_bar()
        self._banner()
        self.refresh_messages()

    def refresh_messages(self) -> None:
        """The line under every field: problem, conversion, entered value, source, findings, flags."""
        if self.edit is None:
            return
        result = self.edit.result()
        snap = self.tk.snapshot
        by_path: dict[str, list[tuple[str, str]]] = {}
        record_level: list[tuple[str, str]] = []
        if snap is not None:
            for f in snap.findings_for(self.species_id):
                line = f"{_SEV.get(f.severity, '?')} {f.check}: {f.message}"
                if f.suggestion:
                    line += f" (suggestion: {f.suggestion})"
                kind = "-finding" if f.severity != "info" else "-note"
                path = field_path(f.field)
                (by_path.setdefault(path, []) if path else record_level).append((line, kind))
            for fl in snap.flags_for(self.species_id):
                state = fl.get("status", "?") + (", blocking" if fl.get("blocking") else "")
                line = (f"flag ({state}) by {fl.get('raised_by')} at {fl.get('raised_at')}: {fl.get('note')}"
                        f"  [{len(fl.get('comments') or [])} comments]")
                fld = fl.get("field")
                path = f"properties.{fld}.value" if fld in FIELDS else (fld if fld in SCALAR_FIELDS else None)
                (by_path.setdefault(path, []) if path else record_level).append((line, "-flag"))
        for spec in EDIT_FIELDS:
            self._row_message(spec, result, by_path.get(spec.path, []))
        try:
            self.query_one("#record-notes", Static).update(
                lit("\n".join(t for t, _ in record_level) or "none"))
            self.query_one("#cp-model", Static).update(lit(self._cp_text(result.record)))
            title = self.query_one("#record-title", Static)
        except NoMatches:
            return
        orig = self.edit.original
        title.update(lit(f"{self.species_id}  {display_name(orig)}  revision {orig.get('revision', '?')}"))
        self.update_bar()

    def _row_message(self, spec: FieldSpec, result: EditResult, extra: list[tuple[str, str]]) -> None:
        try:
            row = self.query_one(f"#row-{dom_id(spec.path)}", FieldRow)
        except NoMatches:
            return
        assert self.edit is not None
        lines: list[str] = []
        kind = ""
        if spec.path in result.problems:
            lines.append(f"✗ {result.problems[spec.path]}")
            kind = "-problem"
        elif spec.path in result.notes:
            lines.append(result.notes[spec.path])
            kind = "-note"
        elif spec.part == "value" and spec.path not in self.edit.texts:
            ent = ((self.edit.original.get("properties") or {}).get(spec.prop) or {}).get("entered")
            if isinstance(ent, Mapping):
                lines.append(f"entered as {number_text(ent.get('value'))} {ent.get('unit')}")
                kind = "-note"
        if spec.part == "source":
            src = ((result.record.get("properties") or {}).get(spec.prop) or {}).get("source")
            snap = self.tk.snapshot
            if src and snap is not None and src in snap.sources:
                s = snap.sources[src]
                authors = ", ".join(str(a) for a in s.get("authors") or [])
                lines.append(f"{s.get('title', '')} ({authors} {s.get('year', '')})")
                kind = kind or "-note"
        for text, k in extra:
            lines.append(text)
            kind = kind or k
        msg = row.query_one(".msg", Static)
        msg.update(lit("\n".join(lines)))
        msg.set_class(bool(lines), "-shown")
        for cls in ("-problem", "-note", "-finding", "-flag"):
            msg.set_class(cls == kind, cls)
        row.set_class(spec.path in self.edit.texts, "-dirty")

    @staticmethod
    def _cp_text(rec: Mapping) -> str:
        model = rec.get("cp_model")
        if not isinstance(model, Mapping):
            return "none (edit Cp models from the model screens)"
        kind = model.get("kind", "?")
        src = f", source {model.get('source')}" if model.get("source") else ""
        if kind == "tabulated":
            pts = model.get("points") or []
            span = f"{number_text(pts[0][0])}–{number_text(pts[-1][0])} K" if pts else "no points"
            return f"tabulated, {len(pts)} points, {span}{src}"
        ranges = model.get("ranges") or []
        span = (f"{number_text(ranges[0].get('tmin'))}–{number_text(ranges[-1].get('tmax'))} K"
                if ranges else "no ranges")
        return f"{kind}, {len(ranges)} range{'s' if len(ranges) != 1 else ''}, {span}{src}"

    def _set_inputs(self) -> None:
        """Put the editor's texts back into the inputs (after undo, rebase or save)."""
        assert self.edit is not None
        for spec in EDIT_FIELDS:
            try:
                inp = self.query_one(f"#{dom_id(spec.path)}", FieldInput)
            except NoMatches:
                continue
            want = printable(self.edit.text(spec.path))
            if inp.value != want:
                with inp.prevent(Input.Changed):
                    inp.value = want
        self.refresh_messages()

    # -- typing ----------------------------------------------------------------------------------------

    @on(Input.Changed)
    def on_field_changed(self, event: Input.Changed) -> None:
        path = event.input.name
        if not path or self.edit is None or not isinstance(event.input, FieldInput):
            return
        value = event.value
        original = field_text(self.edit.original, path)
        if value == printable(original):
            value = original  # an escaped control character shown, not typed
        self.edit.set_text(path, value)
        self.refresh_messages()

    @on(Input.Submitted)
    def on_field_submitted(self, event: Input.Submitted) -> None:
        if isinstance(event.input, FieldInput):
            self.focus_next()

    # -- actions ---------------------------------------------------------------------------------------

    def _focused_path(self) -> str | None:
        w = self.focused
        return w.name if isinstance(w, FieldInput) else None

    def action_undo_field(self) -> None:
        path = self._focused_path()
        if path and self.edit is not None:
            self.edit.undo_field(path)
            self._set_inputs()

    def action_undo_all(self) -> None:
        if self.edit is not None and self.edit.dirty:
            n = len(self.edit.dirty)
            self.edit.undo_all()
            self._set_inputs()
            self.tk.notify(f"{n} unsaved edit{'s' if n != 1 else ''} undone", markup=False)

    def _rebase(self, theirs: Mapping, quiet: bool = False) -> None:
        assert self.edit is not None
        self.edit.rebase(theirs)
        self.changed_on_disk = False
        self._set_inputs()
        self._banner()
        if not quiet:
            self.tk.notify("their version is loaded and your edits are applied over it: check and save",
                           markup=False)

    def action_reload_record(self) -> None:
        disk = self._record()
        if disk is None:
            self.tk.notify("the record is not on disk any more", severity="warning", markup=False)
            return
        self._rebase(disk)

    def action_flag(self) -> None:
        self.tk.raise_flag_dialog(self.species_id, flag_field(self._focused_path()))

    def action_flags(self) -> None:
        self.tk.open_flags(self.species_id)

    def action_back(self) -> None:
        if not self.has_unsaved():
            self.dismiss()
            return
        assert self.edit is not None

        def answer(yes: bool | None) -> None:
            if yes:
                self.dismiss()

        self.app.push_screen(ConfirmDialog(
            f"Leave {self.species_id} without saving?",
            f"{len(self.edit.dirty)} unsaved edit(s) will be lost:\n" + changes_text(self.edit.changes())),
            answer)

    def action_save(self) -> None:
        edit = self.edit
        if edit is None:
            return
        if self.read_only:
            self.tk.notify(f"user {self.tk.user} may not edit this dataset (the steward role edits); "
                           "raise a flag instead (ctrl+f)", severity="error", markup=False)
            return
        result = edit.result()
        if not result.ok:
            self.tk.notify(printable(result.sentences()[0]), severity="error", markup=False)
            self.focus_path(next(iter(result.problems)))
            return
        changes = edit.changes()
        if not changes:
            self.tk.notify("nothing to save", markup=False)
            return

        def with_reason(reason: str | None) -> None:
            if reason:
                self._save(reason)

        self.app.push_screen(TextDialog(f"Save {self.species_id}", "Reason for the journal:",
                                        body=changes_text(changes), placeholder="why this change"),
                             with_reason)

    def _save(self, reason: str) -> None:
        edit = self.edit
        assert edit is not None
        sent = dict(edit.texts)
        ds = self.tk.dataset
        self.saving = True

        def done(saved: dict) -> None:
            self.saving = False
            # Keep what was typed while the save ran.
            pending = {p: t for p, t in edit.texts.items() if sent.get(p) != t}
            edit.saved(saved)
            for p, t in pending.items():
                edit.set_text(p, t)
            self.changed_on_disk = False
            self._set_inputs()
            self._banner()
            self.tk.notify(f"saved {printable(self.species_id)} (revision {saved.get('revision')})",
                           markup=False)
            self.tk.reload()

        def failed(exc: Exception) -> None:
            self.saving = False
            if isinstance(exc, ConflictError):
                self._conflict(exc)
            else:
                self.tk.show_error(exc)

        self.tk.run_disk(lambda: save_edit(ds, edit, reason), done, failed)

    def _conflict(self, exc: ConflictError) -> None:
        from .conflict_screen import ConflictScreen

        edit = self.edit
        assert edit is not None
        mine = edit.result().record
        rows = conflict_rows(edit.original, mine, exc.theirs)

        def decided(choice: str | None) -> None:
            if choice == "rebase" and exc.theirs is not None:
                self._rebase(exc.theirs)
            else:
                self.changed_on_disk = exc.theirs is not None
                self.deleted_on_disk = exc.theirs is None
                self._banner()

        self.app.push_screen(ConflictScreen(self.species_id, rows, exc), decided)
