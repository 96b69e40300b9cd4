"""A save conflict: someone else saved the record first. Both versions, field by field; nothing is lost.

``t`` takes their version as the new base and applies your edits over it again (you then check and save);
Escape keeps editing with your version untouched (saving again shows the conflict again).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static

from ..editing import ConflictRow
from ..errors import ConflictError
from .dialogs import value_text
from .literal import lit, lit_lines
from .vtable import Column, VirtualTable
from .widgets import KeyLine


class ConflictScreen(ModalScreen[str | None]):
    """Your version and theirs, field by field (* marks a field both of you changed differently)."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("t", "rebase", "Take theirs + reapply mine", id="conflict.rebase"),
        Binding("escape,k", "keep", "Keep editing", id="conflict.keep"),
    ]

    def __init__(self, species: str, rows: Sequence[ConflictRow], error: ConflictError) -> None:
        super().__init__()
        self.species = species
        self.rows = list(rows)
        self.error = error

    def compose(self) -> ComposeResult:
        theirs = self.error.theirs
        with Vertical(classes="dialog wide"):
            yield Static(lit(f"Conflict: {self.species} was saved by someone else"), classes="dialog-title",
                         markup=False)
            if theirs is None:
                what = "They deleted the record. Your version is kept in the editor."
            else:
                what = (f"You loaded revision {self.error.expected}; the file is now at revision "
                        f"{self.error.found}. t: take theirs and apply your edits again; "
                        "Escape: keep editing.")
            yield Static(lit(what), markup=False, id="conflict-what")
            yield VirtualTable(id="conflict-table")
            yield Static("", id="conflict-detail", markup=False)
        yield KeyLine()

    def on_mount(self) -> None:
        table = self.query_one("#conflict-table", VirtualTable)
        rows = self.rows
        width = max([len(r.field) for r in rows] + [5])
        cols = [Column("clash", ("",), 1), Column("field", ("field",), min(width, 28)),
                Column("yours", ("yours",), 20), Column("theirs", ("theirs",), 20)]

        def cells(i: int) -> list[str]:
            r = rows[i]
            return ["*" if r.clash else " ", r.field,
                    value_text(r.mine) if r.mine is not None else "(none)",
                    value_text(r.theirs) if r.theirs is not None else "(none)"]

        table.empty_text = "no field differs"
        table.set_data(cols, len(rows), cells, lambda i: "warning" if rows[i].clash else None, cursor=0)
        table.focus()
        self._detail(0)

    def on_virtual_table_row_highlighted(self, event: VirtualTable.RowHighlighted) -> None:
        self._detail(event.row)

    def _detail(self, i: int) -> None:
        if not self.rows:
            return
        r = self.rows[i]
        who = "both changed it" if r.mine_changed and r.theirs_changed else (
            "you changed it" if r.mine_changed else "they changed it")
        lines = [f"{r.field}: {who}", f"  loaded: {value_text(r.base)}", f"  yours:  {value_text(r.mine)}",
                 f"  theirs: {value_text(r.theirs)}"]
        self.query_one("#conflict-detail", Static).update(lit_lines(lines))

    def action_rebase(self) -> None:
        if self.error.theirs is None:
            self.notify("their side deleted the record: there is no version to take", markup=False)
            return
        self.dismiss("rebase")

    def action_keep(self) -> None:
        self.dismiss("keep")
