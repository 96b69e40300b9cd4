"""Flags: questions raised about values. Raise, comment, resolve; who and when are shown.

Saves go through ``tablekeeper.flags`` (roles enforced there: reviewers may flag and comment, stewards
also resolve).
"""

from __future__ import annotations

from typing import ClassVar

from textual import on
from textual.binding import Binding, BindingType

from .. import flags as core_flags
from ..editing import editor_path
from ..text import printable
from .dialogs import TextDialog
from .literal import lit, lit_lines
from .record_screen import flag_field
from .views import ListScreen
from .vtable import Column, VirtualTable


class FlagsScreen(ListScreen):
    """Flags of the dataset (or of one species): open ones first."""

    ENTRY = "flags"
    TITLE_TEXT = "Flags"
    TABLE_ID = "flags-table"
    DETAIL_ID = "flag-detail"
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape", "back", "Back", id="flags.back"),
        Binding("n", "new", "New flag", id="flags.new"),
        Binding("c", "comment", "Comment", id="flags.comment"),
        Binding("v", "resolve", "Resolve", id="flags.resolve"),
        Binding("a", "toggle_all", "Open/all", id="flags.toggle_all"),
    ]

    def __init__(self, species: str | None = None) -> None:
        super().__init__()
        self.only_species = species
        self.show_resolved = True
        self.items: list[dict] = []
        if species:
            self.TITLE_TEXT = f"Flags of {species}"

    @property
    def species_id(self) -> str | None:
        cur = self.current
        return self.only_species or (str(cur.get("species")) if cur else None)

    def data_changed(self) -> None:
        self.update_bar()
        if not self.ready:
            return
        snap = self.tk.snapshot
        keep = (self.current or {}).get("id")
        items = [f for f in (snap.flags.values() if snap else []) if isinstance(f, dict)]
        if self.only_species:
            items = [f for f in items if f.get("species") == self.only_species]
        if not self.show_resolved:
            items = [f for f in items if f.get("status") == "open"]
        items.sort(key=lambda f: str(f.get("raised_at", "")), reverse=True)
        items.sort(key=lambda f: f.get("status") != "open")
        self.items = items
        cursor = next((i for i, f in enumerate(items) if f.get("id") == keep), 0)
        cols = [Column("status", ("status",), 8), Column("b", ("!",), 1), Column("species", ("species",), 14),
                Column("field", ("field",), 9), Column("by", ("by",), 10), Column("at", ("raised at",), 20),
                Column("note", ("note",), 60)]

        def cells(i: int) -> list[str]:
            f = items[i]
            return [printable(f.get("status", "")), "!" if f.get("blocking") else " ",
                    printable(f.get("species", "")), printable(f.get("field", "")),
                    printable(f.get("raised_by", "")), printable(f.get("raised_at", "")),
                    printable(f.get("note", ""))]

        self.table.empty_text = "no flags" if self.show_resolved else "no open flags"
        self.table.set_data(cols, len(items), cells,
                            lambda i: None if items[i].get("status") == "open" else "dim", cursor=cursor)
        self.show_detail()

    def show_detail(self) -> None:
        f = self.current
        detail = self.detail
        if f is None:
            detail.update(lit("n: raise a flag on the species you are on"))
            return
        lines = [f"{f.get('status')}{' blocking' if f.get('blocking') else ''} flag {f.get('id')} on "
                 f"{f.get('species')} {f.get('field')}, raised by {f.get('raised_by')} "
                 f"at {f.get('raised_at')}",
                 f"note: {f.get('note')}"]
        for c in f.get("comments") or []:
            if isinstance(c, dict):
                lines.append(f"  {c.get('by')} at {c.get('at')}: {c.get('text')}")
        if f.get("status") == "resolved":
            lines.append(f"resolved by {f.get('resolved_by')} at {f.get('resolved_at')}"
                         + (f": {f.get('resolution')}" if f.get("resolution") else ""))
        detail.update(lit_lines(lines))

    @on(VirtualTable.RowSelected, "#flags-table")
    def on_row_selected(self, event: VirtualTable.RowSelected) -> None:
        f = self.current
        if f and isinstance(f.get("species"), str):
            self.tk.open_record(f["species"], editor_path(f.get("field")))

    def action_toggle_all(self) -> None:
        self.show_resolved = not self.show_resolved
        self.data_changed()

    def action_new(self) -> None:
        ident = self.species_id or self.tk.current_species
        if not ident:
            self.tk.notify("open a species (or highlight one in the table) to flag it", markup=False)
            return
        cur = self.current
        field = cur.get("field") if cur and cur.get("species") == ident else None
        self.tk.raise_flag_dialog(ident, flag_field(field) if field else None)

    def action_comment(self) -> None:
        f = self.current
        if f is None:
            return
        if not self.tk.may("comment"):
            self.tk.notify(f"user {self.tk.user} may not comment (steward or reviewer role)",
                           severity="error", markup=False)
            return
        ds = self.tk.dataset
        flag_id, rev = str(f.get("id")), int(f.get("revision", 0))

        def answered(text: str | None) -> None:
            if text:
                self.tk.run_disk(lambda: core_flags.comment(ds, flag_id, text, expected_revision=rev),
                                 lambda _: self._saved("comment added"))

        self.app.push_screen(TextDialog(f"Comment on flag {flag_id}", "Comment:",
                                        body=[str(f.get("note", ""))]), answered)

    def action_resolve(self) -> None:
        f = self.current
        if f is None:
            return
        if f.get("status") != "open":
            self.tk.notify("this flag is already resolved", markup=False)
            return
        if not self.tk.may("resolve"):
            self.tk.notify(f"user {self.tk.user} may not resolve flags (the steward role resolves)",
                           severity="error", markup=False)
            return
        ds = self.tk.dataset
        flag_id, rev = str(f.get("id")), int(f.get("revision", 0))

        def answered(text: str | None) -> None:
            if text is not None:
                self.tk.run_disk(lambda: core_flags.resolve(ds, flag_id, text, expected_revision=rev),
                                 lambda _: self._saved("flag resolved"))

        self.app.push_screen(TextDialog(f"Resolve flag {flag_id}", "Resolution (what was done):",
                                        body=[str(f.get("note", ""))], required=False), answered)

    def _saved(self, what: str) -> None:
        self.tk.notify(what, markup=False)
        self.tk.reload()
