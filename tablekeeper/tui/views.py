"""What screens share: the species views (plot, thermo table, fit) and the list screens (findings, flags,
sources, reactions).

A species view opens on the species the user is on (the table's row or the open record); ``g`` asks for an
id or ``formula(phase)`` (resolved by the core's ``resolve_species``, as equations are), ``n``/``p`` step
through the species that the view can show. A view redraws only when its record changed on disk.

A list screen is a top bar, a virtual table of items, a detail panel about the highlighted item and the
key line (``ListScreen``).
"""

from __future__ import annotations

from typing import Any, ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.widgets import Static

from ..errors import TablekeeperError
from ..model import display_name
from ..text import printable
from ..thermo import resolve_species
from .dialogs import MarkCheckbox, TextDialog
from .vtable import VirtualTable
from .widgets import InfoBar, KeyLine, TkScreen

__all__ = ["ListScreen", "MarkCheckbox", "ReadTable", "SpeciesView", "view_bindings"]


class ListScreen(TkScreen):
    """Base of a list screen: top bar, a table of ``items``, a detail panel below it, the key line.

    A subclass names its widgets (``TABLE_ID``, ``DETAIL_ID``), fills ``items`` and the table in
    ``data_changed``, and writes the panel in ``show_detail`` (called whenever the cursor moves).
    """

    IS_LIST = True
    TABLE_ID = "list-table"
    DETAIL_ID = "list-detail"
    #: The table widget: a subclass may name what Enter does in the key line.
    TABLE_CLASS: type[VirtualTable] = VirtualTable
    DEFAULT_CSS = """
    ListScreen > .list-detail {
        height: auto;
        max-height: 5;
        border-top: solid $panel-lighten-2;
    }
    """

    def __init__(self) -> None:
        super().__init__()
        self.items: list[Any] = []

    def compose(self) -> ComposeResult:
        yield InfoBar()
        yield self.TABLE_CLASS(id=self.TABLE_ID)
        yield Static("", id=self.DETAIL_ID, classes="list-detail", markup=False)
        yield KeyLine()

    def on_mount(self) -> None:
        self.ready = True
        self.table.focus()
        self.data_changed()

    @property
    def table(self) -> VirtualTable:
        return self.query_one(f"#{self.TABLE_ID}", VirtualTable)

    @property
    def detail(self) -> Static:
        return self.query_one(f"#{self.DETAIL_ID}", Static)

    def item_at(self, i: int) -> Any:
        """The item shown on row ``i`` (None for a heading or past the end)."""
        return self.items[i] if 0 <= i < len(self.items) else None

    @property
    def current(self) -> Any:
        """The item under the cursor, or None."""
        return self.item_at(self.table.cursor)

    def show_detail(self) -> None:
        raise NotImplementedError

    #: What the list holds, for the refusal message of ``may_edit``.
    ITEMS_NAME = "records"

    def may_edit(self) -> bool:
        """True when the user holds the edit role; else say so and return False."""
        if self.tk.may("edit"):
            return True
        self.tk.notify(f"user {self.tk.user} may not edit {self.ITEMS_NAME} (the steward role edits)",
                       severity="error", markup=False)
        return False

    def on_virtual_table_row_highlighted(self, event: VirtualTable.RowHighlighted) -> None:
        if event.table.id == self.TABLE_ID:
            self.show_detail()

    def action_back(self) -> None:
        self.dismiss()


class ReadTable(VirtualTable):
    """A table to read, not to open rows from: Enter does nothing and is not offered in the key bar."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("enter", "select", "Open", show=False, id="readtable.select"),
    ]


def view_bindings(prefix: str) -> list[Binding]:
    """The bindings every species view has (listed in each view's own BINDINGS for the help screen)."""
    return [
        Binding("escape", "back", "Back", id=f"{prefix}.back"),
        Binding("g", "goto", "Go to species", id=f"{prefix}.goto"),
        Binding("n", "step(1)", "Next", id=f"{prefix}.next"),
        Binding("p", "step(-1)", "Previous", id=f"{prefix}.previous"),
    ]


class SpeciesView(TkScreen):
    """Base of a screen about one species. Subclasses draw in ``show_record``."""

    IS_LIST = True
    CSS_PATH = "views.tcss"
    #: What the view needs of a record, in words (for the messages when a species has none).
    NEEDS = "a Cp(T) model"
    LACKS = "has no Cp(T) model"

    def __init__(self, species: str | None = None) -> None:
        super().__init__()
        self.species_id = species
        self._shown: object = None  # the record object last drawn (snapshots replace records)

    # -- what the view can show ------------------------------------------------------------------------

    def can_show(self, record: dict) -> bool:
        return isinstance(record.get("cp_model"), dict)

    def record(self) -> dict | None:
        snap = self.tk.snapshot
        if snap is None or self.species_id is None:
            return None
        return snap.species.get(self.species_id)

    def heading(self, record: dict | None) -> str:
        if record is None:
            return printable(self.species_id or "")
        name = f"  {record['name']}" if record.get("name") else ""
        return printable(f"{record.get('id')}  {display_name(record)}{name}")

    def absent_text(self) -> str:
        snap = self.tk.snapshot
        if snap is None:
            return "loading…"
        if self.species_id is None:
            return f"no species chosen: g picks one, n the first with {self.NEEDS}"
        if self.species_id not in snap.species:
            return f"no species {printable(self.species_id)} in the dataset (g picks another)"
        return f"{printable(self.species_id)} {self.LACKS} (n: the next species with {self.NEEDS})"

    # -- updates ---------------------------------------------------------------------------------------

    def on_mount(self) -> None:
        self.ready = True
        self.data_changed()

    def data_changed(self) -> None:
        self.update_bar()
        if not self.ready:
            return
        rec = self.record()
        if rec is self._shown and rec is not None:
            return
        self._shown = rec
        self.show_record(rec)

    def redraw(self) -> None:
        self._shown = self.record()
        self.show_record(self._shown)  # type: ignore[arg-type]

    def show_record(self, record: dict | None) -> None:
        raise NotImplementedError

    # -- moving ----------------------------------------------------------------------------------------

    def choose(self, ident: str) -> None:
        self.species_id = ident
        self.redraw()

    def candidates(self) -> list[str]:
        snap = self.tk.snapshot
        if snap is None:
            return []
        return sorted(i for i, r in snap.species.items() if isinstance(r, dict) and self.can_show(r))

    def action_step(self, direction: int) -> None:
        ids = self.candidates()
        if not ids:
            self.tk.notify(f"no species has {self.NEEDS}", severity="warning", markup=False)
            return
        cur = self.species_id
        if cur in ids:
            nxt = ids[(ids.index(cur) + direction) % len(ids)]
        else:
            after = [i for i in ids if cur is None or i > cur]
            nxt = (after[0] if after else ids[0]) if direction > 0 else ids[-1]
        self.choose(nxt)

    def action_goto(self) -> None:
        def chosen(term: str | None) -> None:
            snap = self.tk.snapshot
            if not term or snap is None:
                return
            term = term.strip()
            if term in snap.species:
                self.choose(term)
                return
            try:
                self.choose(resolve_species(term, snap.species))
            except TablekeeperError as exc:
                self.tk.notify(printable(exc), severity="error", markup=False)

        self.app.push_screen(TextDialog("Go to species", "Species id, or formula(phase) such as CO2(g):",
                                        placeholder="ch4-g or CH4(g)"), chosen)

    def action_back(self) -> None:
        self.dismiss()
