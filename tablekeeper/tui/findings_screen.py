"""All findings of the check catalogue, grouped by severity and check.

The checks run in a worker (the app's ``run_checks``); until they are in, the screen says "checking…".
Enter opens the record with the finding's field focused; ``u`` applies a unit-suspect correction after
a confirmation, through ``tablekeeper.editing.apply_unit_fix`` (saved and journaled).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from textual import on
from textual.binding import Binding, BindingType

from ..checks import Finding
from ..editing import apply_unit_fix, editor_path, field_path, number_text, slip_unit
from ..text import printable
from .dialogs import ConfirmDialog
from .literal import lit, lit_lines
from .views import ListScreen
from .vtable import Column, VirtualTable

_SEV = {"error": "E", "warning": "W", "info": "i"}


@dataclass(frozen=True)
class _Row:
    finding: Finding | None = None
    heading: str = ""
    severity: str = ""


class FindingsScreen(ListScreen):
    """Findings by severity and check. Enter: open the record at the field; u: apply a unit fix."""

    ENTRY = "findings"
    TITLE_TEXT = "Findings"
    TABLE_ID = "findings-table"
    DETAIL_ID = "finding-detail"
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape", "back", "Back", id="findings.back"),
        Binding("u", "unit_fix", "Apply unit fix", id="findings.unit_fix"),
        Binding("c", "check", "Check again", id="findings.check"),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.rows: list[_Row] = []
        self._report = None

    @property
    def species_id(self) -> str | None:
        f = self.current
        return f.species if f else None

    def item_at(self, i: int) -> Finding | None:
        return self.rows[i].finding if 0 <= i < len(self.rows) else None

    def data_changed(self) -> None:
        self.update_bar()
        if not self.ready:
            return
        snap = self.tk.snapshot
        report = snap.report if snap else None
        table = self.table
        if report is None:
            table.empty_text = "checking…"
            table.set_data(self._columns(), 0, lambda i: ())
            self.show_detail()
            return
        table.empty_text = "checking…" if self.tk.checking else "no findings: the checks pass"
        if report is self._report:
            self.show_detail()
            return
        keep = self.current
        self._report = report
        rows: list[_Row] = []
        last: tuple[str, str] | None = None
        counts: dict[tuple[str, str], int] = {}
        for f in report.findings:
            counts[(f.severity, f.check)] = counts.get((f.severity, f.check), 0) + 1
        for f in report.findings:
            key = (f.severity, f.check)
            if key != last:
                rows.append(_Row(heading=f"── {f.severity} · {f.check} ({counts[key]})", severity=f.severity))
                last = key
            rows.append(_Row(finding=f, severity=f.severity))
        self.rows = rows
        cursor = next((i for i, r in enumerate(rows) if keep is not None and r.finding == keep),
                      1 if len(rows) > 1 else 0)
        table.set_data(self._columns(), len(rows), self._cells, self._style, cursor=cursor)
        self.show_detail()

    def _columns(self) -> list[Column]:
        return [Column("sev", ("",), 1), Column("species", ("species",), 16),
                Column("field", ("field",), 12), Column("message", ("message",), 120)]

    def _cells(self, i: int) -> list[str]:
        r = self.rows[i]
        if r.finding is None:
            return [r.heading]
        f = r.finding
        return [_SEV.get(f.severity, "?"), printable(f.species or ""), printable(f.field or ""),
                printable(f.message)]

    def _style(self, i: int) -> str | None:
        r = self.rows[i]
        if r.finding is None:
            return "group"
        return {"error": "error", "warning": "warning"}.get(r.severity)

    def show_detail(self) -> None:
        detail = self.detail
        f = self.current
        if f is None:
            snap = self.tk.snapshot
            n = len(snap.report.findings) if snap and snap.report else 0
            detail.update(lit(f"{n} findings" if snap and snap.report else "checking…"))
            return
        lines = [f"{f.severity} {f.check}  {f.species or '(dataset)'} {f.field or ''}", f.message]
        nums = [f"{name} {number_text(v)}" for name, v in
                (("observed", f.observed), ("expected", f.expected), ("tolerance", f.tolerance))
                if v is not None]
        if nums:
            lines.append("  ".join(nums))
        if f.suggestion:
            lines.append(f"suggestion: {f.suggestion}")
        if f.check == "unit-suspect":
            lines.append("u: apply this correction")
        detail.update(lit_lines(lines))

    @on(VirtualTable.RowSelected, "#findings-table")
    def on_row_selected(self, event: VirtualTable.RowSelected) -> None:
        f = self.current
        if f is None or not f.species:
            return
        self.tk.open_record(f.species, editor_path(f.field))

    def action_check(self) -> None:
        self.tk.run_checks()

    def action_unit_fix(self) -> None:
        f = self.current
        if f is None or f.check != "unit-suspect":
            self.tk.notify("u applies the correction of a unit-suspect finding; this is not one",
                           severity="warning", markup=False)
            return
        if not self.tk.may("edit"):
            self.tk.notify(f"user {self.tk.user} may not edit (the steward role edits)", severity="error",
                           markup=False)
            return
        path = field_path(f.field)
        prop = path.split(".")[1] if path and path.startswith("properties.") else str(f.field)
        unit = slip_unit(prop, f.observed, f.expected) if f.observed is not None and f.expected is not None \
            else None
        body = [f"{f.species} {prop}: {number_text(f.observed)} → {number_text(f.expected)}"]
        if unit:
            body.append(f"The stored number is kept as entered in {unit}.")
        body.append("The uncertainty is left as it is. The change is saved and journaled.")
        ds = self.tk.dataset

        def confirmed(yes: bool | None) -> None:
            if not yes:
                return

            def done(saved: dict) -> None:
                self.tk.notify(f"corrected {printable(f.species)} {prop} (revision {saved.get('revision')})",
                               markup=False)
                self.tk.reload()

            self.tk.run_disk(lambda: apply_unit_fix(ds, f), done)

        self.app.push_screen(ConfirmDialog("Apply the unit correction?", body), confirmed)
