"""One species record: every value with its unit, uncertainty, source and method, its findings and flags
beside it, and the editor (live validation, save with a reason, undo, conflicts).

The fields are rows of a virtual table (one widget, so the screen opens at once); Enter on a field puts
its text in the edit line at the bottom, where every key press is applied to the would-be record and
validated (``tablekeeper.editing.RecordEdit``): the converted canonical value or the error sentence
appears in the panel above the edit line. The save goes through ``editing.save_edit`` in a worker.

The Cp(T) model is edited the same way, one number at a time: each range's bounds and coefficients (or
each tabulated point) is a row. While a model part is edited, the panel shows Cp, H and S on both sides
of the range break (``editing.cp_breaks``) and what the cp-model and cp-continuity checks say of the
would-be record (``editing.cp_findings``). ctrl+d removes the whole model after a confirmation; like
every edit it is saved with ctrl+s and a reason.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import ClassVar

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.css.query import NoMatches
from textual.widgets import Input, Static

from ..editing import (
    CP_MODEL,
    EDIT_FIELDS,
    SCALAR_FIELDS,
    SPEC_BY_PATH,
    CpField,
    EditResult,
    FieldSpec,
    RecordEdit,
    conflict_rows,
    cp_breaks,
    cp_fields,
    cp_findings,
    cp_span,
    detailed_changes,
    editor_path,
    field_text,
    is_cp_path,
    number_text,
    save_edit,
)
from ..errors import ConflictError, InputError
from ..model import FIELDS, LABELS, display_name
from ..text import printable
from ..units import canonical_unit
from .dialogs import ConfirmDialog, TextDialog, changes_lines
from .literal import lit_lines
from .vtable import Column, VirtualTable
from .widgets import InfoBar, KeyLine, TkScreen

_SEV = {"error": "E", "warning": "W", "info": "i"}
_SEV_RANK = {"E": 0, "W": 1, "i": 2}
_ROW_LABEL = {"value": "value", "uncertainty": "uncertainty", "coverage": "coverage k", "source": "source",
              "method": "method", "reference_state": "reference state", "cas": "CAS number"}


def flag_field(path: str | None) -> str | None:
    """The flag field (dfH298, formula, ...) an editor field belongs to."""
    if not path:
        return None
    parts = path.split(".")
    return parts[1] if parts[0] == "properties" else parts[0]


def row_label(spec: FieldSpec | CpField) -> str:
    if isinstance(spec, CpField):
        return f"{spec.label} {spec.unit.replace('*', '·')}" if spec.unit else spec.label
    label = _ROW_LABEL.get(spec.part or spec.path, spec.label)
    if spec.unit:
        label = f"{label} {spec.unit.replace('*', '·')}"
    return label


def break_cells(b) -> tuple[str, str, str]:
    """Cp at a range break from both sides, as the label, value and note cells of a row (the numbers are
    ``editing.cp_breaks``')."""
    return (f"break at {b.T:g} K", f"{b.cp_below:.3f} | {b.cp_above:.3f}",
            "Cp J/(mol·K) below | above")


def break_text(b) -> str:
    """Cp at a range break from both sides, in one line."""
    return f"break at {b.T:g} K: Cp {b.cp_below:.3f} below, {b.cp_above:.3f} above J/(mol·K)"


def break_detail(b) -> str:
    """H and S at a range break from both sides (where the ranges carry their constants)."""
    parts = []
    if b.h_below is not None and b.h_above is not None:
        parts.append(f"H {b.h_below:.3f} | {b.h_above:.3f} kJ/mol")
    if b.s_below is not None and b.s_above is not None:
        parts.append(f"S {b.s_below:.3f} | {b.s_above:.3f} J/(mol·K)")
    return ("  " + ", ".join(parts) + " (below | above)") if parts else ""


@dataclass(frozen=True)
class _Row:
    """A row of the record table: a section title, an editable field, or a finding/flag line."""

    kind: str  # "section" | "field" | "info"
    text: str = ""
    path: str | None = None  # the field (for "info": the field it concerns)
    severity: str = ""
    cells: tuple[str, ...] = ()  # an "info" row's own label, value and note cells


class FieldTable(VirtualTable):
    """The record's fields; Enter edits the field under the cursor."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("enter", "select", "Edit", id="record.edit"),
    ]


class EditLine(Input):
    """The edit line: Enter keeps the text and goes back to the fields; Escape puts the text back."""


class RecordScreen(TkScreen):
    """A species record and its editor.

    Enter on a field edits it in the line at the bottom. Type ``-68.3 kcal/mol`` into a value: the
    canonical value appears above, and what you typed is kept as the entered value. ctrl+s saves
    (asking for a reason that goes into the journal). Marks: * unsaved, ✗ problem, E/W/i worst finding,
    F open flag.
    """

    TITLE_TEXT = "Record"
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape", "back", "Back", id="record.back"),
        Binding("ctrl+s", "save", "Save", id="record.save"),
        Binding("ctrl+z", "undo_field", "Undo field", id="record.undo_field"),
        Binding("ctrl+r", "undo_all", "Undo all", id="record.undo_all"),
        Binding("ctrl+l", "reload_record", "Reload", id="record.reload"),
        Binding("ctrl+f", "flag", "Flag", id="record.flag"),
        Binding("ctrl+g", "flags", "Flags", show=False, id="record.flags"),
        Binding("ctrl+d", "remove_model", "Remove Cp model", show=False, id="record.remove_model"),
    ]

    def __init__(self, ident: str, focus_field: str | None = None) -> None:
        super().__init__()
        self.species_id = ident
        self.focus_field = focus_field
        self.edit: RecordEdit | None = None
        self.changed_on_disk = False
        self.deleted_on_disk = False
        self.saving = False
        self.editing: str | None = None  # path in the edit line
        self._before_edit = ""
        self.rows: list[_Row] = []
        self._result: EditResult | None = None
        self._extra: dict[str, list[str]] = {}
        self._marks: dict[str, str] = {}
        self._info_rows: list[_Row] = []
        self._cp_specs: dict[str, CpField] = {}
        self._breaks: list = []  # editing.BreakValues of the would-be model
        self._cp_checks: list | None = None  # would-be cp findings while the model is edited

    @property
    def read_only(self) -> bool:
        return not self.tk.may("edit")

    def _record(self) -> dict | None:
        snap = self.tk.snapshot
        return None if snap is None else snap.species.get(self.species_id)

    # -- building --------------------------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        rec = self._record() or {"id": self.species_id}
        snap = self.tk.snapshot
        self.edit = RecordEdit(rec, sources=snap.sources if snap else None)
        yield InfoBar()
        yield Static("", id="banner", markup=False)
        yield FieldTable(id="record-table")
        yield Static("", id="field-info", markup=False)
        line = EditLine(placeholder="Enter on a field edits it here", id="editor", compact=True,
                        select_on_focus=False, disabled=self.read_only)
        line.cursor_blink = False
        yield line
        yield KeyLine()

    def on_mount(self) -> None:
        self.ready = True
        self.data_changed()
        table = self.table
        table.focus()
        want = self.focus_field or "properties.dfH298.value"
        self.focus_path(want)

    @property
    def table(self) -> VirtualTable:
        return self.query_one("#record-table", VirtualTable)

    @property
    def current_path(self) -> str | None:
        """The field under the cursor (or being edited)."""
        if self.editing:
            return self.editing
        i = self.table.cursor
        return self.rows[i].path if 0 <= i < len(self.rows) and self.rows[i].kind == "field" else None

    def focus_path(self, path: str) -> None:
        """Put the cursor on a field's row."""
        for i, row in enumerate(self.rows):
            if row.kind == "field" and row.path == path:
                self.table.cursor = i
                return

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
            lines.append("Deleted by someone else. Your edits are still here; saving will show the "
                         "conflict.")
        elif self.changed_on_disk:
            lines.append("Changed by someone else — ctrl+l reloads (your edits are applied again) or keep "
                         "editing; saving will show the conflict.")
        if self.read_only:
            lines.append(f"Read-only: user {self.tk.user} may not edit (the steward role edits). "
                         "ctrl+f flags the field under the cursor.")
        banner.update(lit_lines(lines))
        banner.set_class(bool(lines), "-shown")
        banner.set_class(self.changed_on_disk or self.deleted_on_disk, "-warning")

    def data_changed(self) -> None:
        if not self.ready or self.edit is None:
            return
        disk = self._record()
        if disk is None:
            self.deleted_on_disk = True
        else:
            self.deleted_on_disk = False
            # Revisions only grow: a lower one is a snapshot read before our own save landed.
            if int(disk.get("revision", 0)) > self.edit.revision and not self.saving:
                if self.edit.dirty:
                    self.changed_on_disk = True
                else:
                    # Nothing typed here: simply show the new version.
                    self.edit.rebase(disk)
                    self.changed_on_disk = False
                    self.tk.notify(f"{printable(self.species_id)} was updated on disk; showing the new "
                                   "version", markup=False)
        self._banner()
        self.refresh_view()

    def _collect(self) -> list[str]:
        """Findings and flags of the record, by field (``_extra``, ``_marks``); returns all their lines."""
        snap = self.tk.snapshot
        extra: dict[str, list[str]] = {}
        marks: dict[str, str] = {}
        everything: list[tuple[str, str | None, str]] = []
        if snap is not None:
            for f in snap.findings_for(self.species_id):
                if f.check == "flag":
                    continue  # the flag itself is listed below, with who and when
                sev = _SEV.get(f.severity, "?")
                line = f"{sev} {f.check}: {f.message}"
                if f.suggestion:
                    line += f" (suggestion: {f.suggestion})"
                path = editor_path(f.field)
                if path:
                    extra.setdefault(path, []).append(line)
                    if _SEV_RANK.get(sev, 9) < _SEV_RANK.get(marks.get(path, ""), 9):
                        marks[path] = sev
                everything.append((line, path, f.severity))
            for fl in snap.flags_for(self.species_id):
                state = fl.get("status", "?") + (", blocking" if fl.get("blocking") else "")
                n = len(fl.get("comments") or [])
                line = (f"flag ({state}) on {fl.get('field')} by {fl.get('raised_by')} at "
                        f"{fl.get('raised_at')}: {fl.get('note')} ({n} comment{'s' if n != 1 else ''})")
                fld = fl.get("field")
                path = f"properties.{fld}.value" if fld in FIELDS else (
                    fld if fld in SCALAR_FIELDS or fld == CP_MODEL else None)
                if path:
                    extra.setdefault(path, []).append(line)
                    if fl.get("status") == "open":
                        marks[path + "#flag"] = "F"
                everything.append((line, path, "flag"))
        self._extra = extra
        self._marks = marks
        self._info_rows = [_Row("info", line, path, sev) for line, path, sev in everything]
        return [line for line, _, _ in everything]

    def refresh_view(self) -> None:
        """Rebuild the rows from the editor's would-be record and redraw."""
        if self.edit is None or not self.ready:
            return
        self._result = self.edit.result()
        self._collect()
        orig = self.edit.original
        title = f"{self.species_id}  {display_name(orig)}  revision {orig.get('revision', '?')}"
        rows = [_Row("section", title)]
        for spec in EDIT_FIELDS:
            if spec.prop and spec.part == "value":
                unit = canonical_unit(spec.prop).replace("*", "·")
                rows.append(_Row("section", f"{LABELS[spec.prop]}  ({spec.prop}, {unit})"))
            rows.append(_Row("field", path=spec.path))
        rows += self._cp_rows()
        rows.append(_Row("section", "Findings and flags of the record"))
        rows += self._info_rows or [_Row("info", "none")]
        self.rows = rows
        table = self.table
        cols = [Column("marks", (), 3), Column("field", (), 22), Column("value", (), 20),
                Column("note", (), 30)]
        table.set_data(cols, len(rows), self._cells, self._style)
        self._field_info()
        self.update_bar()

    def _cp_rows(self) -> list[_Row]:
        """The model's rows: the model line, its source, each range's bounds and coefficients with the
        break to the next range after them (Cp from both sides, of the would-be model)."""
        assert self.edit is not None and self._result is not None
        fields = cp_fields(self.edit.original)
        self._cp_specs = {f.path: f for f in fields}
        rows = [_Row("section", "Cp(T) model" + ("  (Enter edits a number; ctrl+d removes the model)"
                                                 if fields and not self.read_only else ""))]
        if not fields:
            return [*rows, _Row("info", "no Cp(T) model (the fit screen makes one from Cp points)")]
        model = self._result.record.get(CP_MODEL)
        self._breaks, self._cp_checks = [], None
        if isinstance(model, Mapping) and CP_MODEL not in self._result.problems:
            try:
                self._breaks = cp_breaks(model)
            except InputError as exc:
                self._result.problems.setdefault(CP_MODEL, exc.reason)
            except (ValueError, TypeError, ArithmeticError) as exc:  # a damaged file must not close the view
                self._result.problems.setdefault(CP_MODEL, f"the model cannot be evaluated: {exc}")
        if any(is_cp_path(p) for p in self.edit.texts) and self._result.ok and isinstance(model, Mapping):
            snap = self.tk.snapshot
            self._cp_checks = cp_findings(self._result.record, snap.meta if snap else None)
        if CP_MODEL in self.edit.texts and not self.edit.texts[CP_MODEL].strip():
            return [*rows, _Row("field", path=CP_MODEL)]  # being removed: its parts are not shown
        # A break row is marked when the cp-continuity check fails: of the edited model while it is being
        # edited, else of the record as the last check run saw it.
        if self._cp_checks is not None:
            jumps = any(f.check == "cp-continuity" for f in self._cp_checks)
        else:
            snap = self.tk.snapshot
            jumps = snap is not None and any(f.check == "cp-continuity" for f in snap.findings_for(self.species_id))
        after: dict[str, list[_Row]] = {}
        for b in self._breaks:
            last = [f.path for f in fields if f.path.startswith(f"{CP_MODEL}.ranges.{b.below}.")]
            if last:
                after[last[-1]] = [_Row("info", break_text(b), CP_MODEL, "error" if jumps else "",
                                        break_cells(b))]
        for f in fields:
            rows.append(_Row("field", path=f.path))
            rows += after.get(f.path, [])
        return rows

    def _spec(self, path: str) -> FieldSpec | CpField:
        return self._cp_specs[path] if is_cp_path(path) and path in self._cp_specs else SPEC_BY_PATH[path]

    def _row_marks(self, path: str) -> str:
        assert self.edit is not None and self._result is not None
        dirty = "*" if path in self.edit.texts else " "
        sev = "✗" if path in self._result.problems else self._marks.get(path, " ")
        return dirty + sev + self._marks.get(path + "#flag", " ")

    def _note(self, spec: FieldSpec | CpField) -> str:
        """The short note beside a field: its problem, the conversion made, what was entered, or the
        source's title."""
        assert self.edit is not None and self._result is not None
        res = self._result
        if spec.path in res.problems:
            return f"✗ {res.problems[spec.path]}"
        if spec.path in res.notes:
            return res.notes[spec.path]
        if isinstance(spec, CpField):
            if spec.path == CP_MODEL:
                model = self.edit.original.get(CP_MODEL)
                src = model.get("source") if isinstance(model, Mapping) else None
                return cp_span(model) + (f", source {src}" if src else "")
            extra = self._extra.get(spec.path)
            return extra[0] if extra else ""
        prop = ((res.record.get("properties") or {}).get(spec.prop) or {}) if spec.prop else {}
        if spec.part == "value":
            ent = prop.get("entered")
            if isinstance(ent, Mapping):
                return f"entered as {number_text(ent.get('value'))} {ent.get('unit')}"
        if spec.part == "source" and prop.get("source"):
            snap = self.tk.snapshot
            src = snap.sources.get(prop["source"]) if snap else None
            if isinstance(src, Mapping):
                return str(src.get("title", ""))
        extra = self._extra.get(spec.path)
        return extra[0] if extra else ""

    def _cells(self, i: int) -> list[str]:
        row = self.rows[i]
        if row.kind == "section":
            return [printable(row.text)]
        if row.kind == "info":
            if row.cells:
                return ["", *row.cells]
            label = SPEC_BY_PATH[row.path].label if row.path in SPEC_BY_PATH else ""
            return ["", label, "", printable(row.text)]
        assert self.edit is not None and row.path is not None
        spec = self._spec(row.path)
        return [self._row_marks(row.path), row_label(spec), printable(self.edit.text(row.path)),
                printable(self._note(spec))]

    def _style(self, i: int) -> str | None:
        row = self.rows[i]
        if row.kind == "section":
            return "group"
        if row.kind == "info":
            return {"error": "error", "warning": "warning"}.get(row.severity)
        if self._result is not None and row.path in self._result.problems:
            return "error"
        return None

    def _field_info(self) -> None:
        """The details of the field under the cursor, in the panel above the edit line."""
        try:
            panel = self.query_one("#field-info", Static)
            line = self.query_one("#editor", EditLine)
        except NoMatches:
            return
        path = self.current_path
        result = self._result
        if path is None or result is None or self.edit is None:
            i = self.table.cursor
            row = self.rows[i] if 0 <= i < len(self.rows) else None
            text = row.text if row is not None and row.kind == "info" else ""
            lines = [text] if text else []
            if row is not None and row.cells:  # a range break: H and S too, and the checks' verdict
                lines += [break_detail(b) for b in self._breaks if break_text(b) == text]
                lines += self._cp_check_lines()[:1]
            panel.update(lit_lines(lines))
            panel.set_class(False, "-problem")
            if not self.editing and line.value:
                with line.prevent(Input.Changed):
                    line.value = ""
            return
        spec = self._spec(path)
        if isinstance(spec, CpField):
            lines = self._cp_info_lines(spec, result)
        else:
            lines = self._info_lines(spec, result)
        panel.update(lit_lines(lines))
        panel.set_class(path in result.problems, "-problem")
        if not self.editing:
            want = printable(self.edit.text(path))
            if line.value != want:
                with line.prevent(Input.Changed):
                    line.value = want

    def _info_lines(self, spec: FieldSpec, result: EditResult) -> list[str]:
        path = spec.path
        lines: list[str] = [f"{row_label(spec)}" + (f" of {LABELS[spec.prop]}" if spec.prop else "")
                            + ("  (Enter edits)" if not self.editing and not self.read_only else "")]
        if path in result.problems:
            lines.append(f"✗ {result.problems[path]}")
        elif path in result.notes:
            lines.append(result.notes[path])
        note = self._note(spec)
        if note and note not in lines[-1]:
            lines.append(note)
        if spec.part == "value" and len(lines) == 1:
            lines.append("a number, optionally with a unit (-68.3 kcal/mol); empty removes the value")
        lines += [x for x in self._extra.get(path, []) if x != note]
        return lines

    def _cp_check_lines(self) -> list[str]:
        """What the cp-model and cp-continuity checks say of the edited model (nothing before an edit:
        the record's own findings are listed then)."""
        found = self._cp_checks
        if found is None:
            return []
        if not found:
            return ["the edited model passes the cp-model and cp-continuity checks"]
        return [f"{'✗' if f.severity == 'error' else '!'} {f.check}: {f.message}" for f in found]

    def _cp_info_lines(self, spec: CpField, result: EditResult) -> list[str]:
        """The panel for a part of the model: what it is, its problem or the Cp at the nearest range break
        from both sides, then the checks' verdict on the edited model (or H and S at the break)."""
        path = spec.path
        if path == CP_MODEL:
            hint = "  (Enter or ctrl+d removes the whole model)" if not self.read_only else ""
            lines = [f"the Cp(T) model{hint}"]
        else:
            hint = "  (Enter edits)" if not self.editing and not self.read_only else ""
            lines = [f"{row_label(spec)} of the Cp(T) model{hint}"]
        problem = result.problems.get(path) or result.problems.get(CP_MODEL)
        parts = path.split(".")
        rng = int(parts[2]) if len(parts) > 2 and parts[1] == "ranges" else None
        near = [b for b in self._breaks if rng is None or b.below in (rng - 1, rng)]
        near.sort(key=lambda b: abs(b.cp_below - b.cp_above), reverse=True)
        if problem:
            lines.append(f"✗ {problem}")
        elif path in result.notes:
            lines.append(result.notes[path])
        elif near:
            lines.append(break_text(near[0]))
        checks = self._cp_check_lines()
        if checks:
            lines.append(checks[0])
        elif near and not problem:
            lines.append(break_detail(near[0]).strip())
        else:
            lines += self._extra.get(path, [])[:1]
        return lines

    # -- navigating and typing -------------------------------------------------------------------------

    @on(VirtualTable.RowHighlighted, "#record-table")
    def on_row_highlighted(self, event: VirtualTable.RowHighlighted) -> None:
        self._field_info()

    @on(VirtualTable.RowSelected, "#record-table")
    def on_row_selected(self, event: VirtualTable.RowSelected) -> None:
        row = self.rows[event.row]
        if row.kind == "info" and row.path:
            self.focus_path(row.path)
            return
        if row.kind != "field" or row.path is None:
            return
        if self.read_only:
            self.tk.notify(f"read-only: user {self.tk.user} may not edit; ctrl+f raises a flag",
                           severity="warning", markup=False)
            return
        if row.path == CP_MODEL:
            self.action_remove_model()
            return
        self.start_edit(row.path)

    def start_edit(self, path: str) -> None:
        """Put a field's text in the edit line and focus it."""
        assert self.edit is not None
        self.focus_path(path)
        self.editing = path
        self._before_edit = self.edit.text(path)
        line = self.query_one("#editor", EditLine)
        with line.prevent(Input.Changed):
            line.value = printable(self._before_edit)
        line.cursor_position = len(line.value)
        line.focus()
        self._field_info()

    def stop_edit(self, keep: bool) -> None:
        path = self.editing
        if path is None or self.edit is None:
            return
        if not keep:
            self.edit.set_text(path, self._before_edit)
        self.editing = None
        self.table.focus()
        self.refresh_view()

    @on(Input.Changed, "#editor")
    def on_editor_changed(self, event: Input.Changed) -> None:
        path = self.editing
        if path is None or self.edit is None:
            return
        value = event.value
        original = field_text(self.edit.original, path)
        if value == printable(original):
            value = original  # an escaped control character shown, not typed
        self.edit.set_text(path, value)
        self.refresh_view()

    @on(Input.Submitted, "#editor")
    def on_editor_submitted(self, event: Input.Submitted) -> None:
        self.stop_edit(keep=True)

    # -- actions ---------------------------------------------------------------------------------------

    def action_undo_field(self) -> None:
        path = self.current_path
        if path and self.edit is not None:
            self.edit.undo_field(path)
            if self.editing == path:
                self._before_edit = self.edit.text(path)
                line = self.query_one("#editor", EditLine)
                with line.prevent(Input.Changed):
                    line.value = printable(self._before_edit)
            self.refresh_view()

    def action_undo_all(self) -> None:
        if self.edit is not None and self.edit.dirty:
            n = len(self.edit.dirty)
            if self.editing:
                self.stop_edit(keep=False)
            self.edit.undo_all()
            self.refresh_view()
            self.tk.notify(f"{n} unsaved edit{'s' if n != 1 else ''} undone", markup=False)

    def _rebase(self, theirs: Mapping, quiet: bool = False) -> None:
        assert self.edit is not None
        if self.editing:
            self.stop_edit(keep=True)
        self.edit.rebase(theirs)
        self.changed_on_disk = False
        self._banner()
        self.refresh_view()
        if not quiet:
            self.tk.notify("their version is loaded and your edits are applied over it: check and save",
                           markup=False)

    def action_reload_record(self) -> None:
        disk = self._record()
        if disk is None:
            self.tk.notify("the record is not on disk any more", severity="warning", markup=False)
            return
        self._rebase(disk)

    def action_remove_model(self) -> None:
        """Remove the whole Cp(T) model, after a confirmation; saved like any edit (ctrl+s, a reason)."""
        edit = self.edit
        if edit is None:
            return
        if self.read_only:
            self.tk.notify(f"user {self.tk.user} may not edit this dataset (the steward role edits)",
                           severity="error", markup=False)
            return
        model = edit.original.get(CP_MODEL)
        if not isinstance(model, Mapping):
            self.tk.notify("the record has no Cp(T) model", severity="warning", markup=False)
            return
        if CP_MODEL in edit.texts:
            self.tk.notify("the model is already marked for removal (ctrl+z on its line keeps it)",
                           markup=False)
            return
        body = [f"{edit.text(CP_MODEL)}, {self._note(self._cp_specs[CP_MODEL])}",
                "The removal is saved with ctrl+s and a reason; the journal keeps the old model."]

        def answer(yes: bool | None) -> None:
            if not yes:
                return
            if self.editing:
                self.stop_edit(keep=True)
            edit.set_text(CP_MODEL, "")
            self.refresh_view()
            self.focus_path(CP_MODEL)

        self.app.push_screen(ConfirmDialog(f"Remove the Cp(T) model of {self.species_id}?", body), answer)

    def action_flag(self) -> None:
        self.tk.raise_flag_dialog(self.species_id, flag_field(self.current_path))

    def action_flags(self) -> None:
        self.tk.open_flags(self.species_id)

    def action_back(self) -> None:
        if self.editing:
            self.stop_edit(keep=False)
            return
        if not self.has_unsaved():
            self.dismiss()
            return
        assert self.edit is not None

        def answer(yes: bool | None) -> None:
            if yes:
                self.dismiss()

        self.app.push_screen(ConfirmDialog(
            f"Leave {self.species_id} without saving?",
            [f"{len(self.edit.dirty)} unsaved edit(s) will be lost:",
             *changes_lines(detailed_changes(self.edit.original, self.edit.result().record))]),
            answer)

    def action_save(self) -> None:
        edit = self.edit
        if edit is None:
            return
        if self.read_only:
            self.tk.notify(f"user {self.tk.user} may not edit this dataset (the steward role edits); "
                           "raise a flag instead (ctrl+f)", severity="error", markup=False)
            return
        if self.editing:
            self.stop_edit(keep=True)
        result = edit.result()
        if not result.ok:
            self.tk.notify(printable(result.sentences()[0]), severity="error", markup=False)
            self.focus_path(next(iter(result.problems)))
            return
        changes = detailed_changes(edit.original, result.record)
        if not changes:
            self.tk.notify("nothing to save", markup=False)
            return

        def with_reason(reason: str | None) -> None:
            if reason:
                self._save(reason)

        self.app.push_screen(TextDialog(f"Save {self.species_id}", "Reason for the journal:",
                                        body=changes_lines(changes), placeholder="why this change"),
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
            self._banner()
            self.refresh_view()
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
