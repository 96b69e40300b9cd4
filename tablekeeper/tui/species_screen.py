"""The species table screen: filter as you type, sort by any column, open a record."""

from __future__ import annotations

from typing import ClassVar

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.widgets import Input, Static

from ..model import display_name
from ..text import printable
from .literal import lit
from .species_model import COLUMNS, NUMERIC, SpeciesModel
from .vtable import Column, VirtualTable
from .widgets import InfoBar, KeyLine, TkScreen

_ROW_STYLE = {0: "error", 1: "warning"}


class SpeciesScreen(TkScreen):
    """Every species of the dataset in a virtual table (only the visible rows are drawn).

    Marks column: E error, W warning, i info; F an open flag, ! an open blocking flag.
    """

    ENTRY = "species"
    TITLE_TEXT = "Species"
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("slash", "filter", "Filter", id="species.filter"),
        Binding("s", "sort", "Sort", id="species.sort"),
        Binding("r", "reverse", "Reverse", id="species.reverse"),
        Binding("n", "flag", "Flag", id="species.flag"),
        Binding("c", "check", "Check", id="species.check"),
        Binding("escape", "escape", "Clear filter", show=False, id="species.escape"),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.model: SpeciesModel | None = None
        self._marks_serial = -1
        self._detail_text: str | None = None
        self.filter_text = ""
        self.sort_key = "id"
        self.descending = False

    def compose(self) -> ComposeResult:
        yield InfoBar()
        yield Input(placeholder="filter by id, formula or name  ( / )", id="filter", compact=True)
        table = VirtualTable(id="species-table")
        table.empty_text = "loading…"
        yield table
        yield Static("", id="detail", markup=False)
        yield KeyLine()

    def on_mount(self) -> None:
        self.ready = True
        self.query_one("#filter", Input).cursor_blink = False
        self.table.focus()
        # The detail line follows the cursor in the same turn as the cursor itself (a watcher runs at
        # once; a RowHighlighted message would arrive after the table was painted and cost a second
        # paint per key press).
        self.watch(self.table, "cursor", self._cursor_moved, init=False)
        self.data_changed()

    @property
    def table(self) -> VirtualTable:
        return self.query_one("#species-table", VirtualTable)

    @property
    def species_id(self) -> str | None:
        if self.model is None:
            return None
        return self.model.ident_at(self.table.cursor)

    # -- data ------------------------------------------------------------------------------------------

    def data_changed(self) -> None:
        self.update_bar()
        snap = self.tk.snapshot
        if snap is None or not self.ready:
            return
        if snap.model is not self.model:
            keep = self.species_id
            self.model = snap.model
            self._marks_serial = self.model.marks_serial
            self.model.filter_text = self.filter_text
            self.model.sort_key = self.sort_key
            self.model.descending = self.descending
            self.model.apply()
            self._show(keep)
        elif self.model.marks_serial != self._marks_serial:
            # The checks arrived: marks changed, and so does the order when the table is sorted by them.
            self._marks_serial = self.model.marks_serial
            if self.model.sort_key == "marks":
                keep = self.species_id
                self.model.apply()
                self._show(keep)
            else:
                self.table.refresh()
                self._detail()
        else:
            # Only the state shown in the bar changed (loading, checking): the rows are as they were.
            self._detail()

    def _show(self, keep: str | None = None, cursor: int | None = None) -> None:
        model = self.model
        if model is None:
            return
        if keep is not None:
            idx = model.view_index_of(keep)
            cursor = idx if idx is not None else 0
        columns = [Column(key, label, model.widths[key], key in NUMERIC) for key, label, _ in COLUMNS]
        table = self.table
        table.header_marks = {model.sort_key: "↓" if model.descending else "↑"}
        table.empty_text = ("no species match the filter" if model.filter_text
                            else "the dataset has no species")
        order = model.order
        table.set_data(columns, len(order), lambda i: model.cells(int(order[i])),
                       lambda i: _ROW_STYLE.get(model.severity_of_row(int(order[i]))), cursor=cursor)
        self._detail()

    def _detail(self) -> None:
        self._set_detail(self._detail_line())

    def _set_detail(self, text: str) -> None:
        """Show the detail line; a new layout only when its height changes.

        The line follows the cursor, so it changes on most key presses; a layout pass re-arranges and
        repaints the whole screen one frame later (a second paint per key press), while the line's own
        repaint is all a same-height change needs.
        """
        old = self._detail_text
        if text == old:
            return
        detail = self.query_one("#detail", Static)
        self._detail_text = text
        width = detail.content_region.width
        content = lit(text)
        # The height textual's layout would give each text (before any max-height cap).
        same_height = (old is not None and width > 0
                       and lit(old).get_height(detail.styles, width) == content.get_height(detail.styles, width))
        detail.update(content, layout=not same_height)

    def _detail_line(self) -> str:
        snap = self.tk.snapshot
        ident = self.species_id
        if snap is None or ident is None or ident not in snap.species:
            n = 0 if self.model is None else len(self.model.order)
            return f"{n} shown"
        rec = snap.species[ident]
        parts = [printable(ident), printable(display_name(rec))]
        if rec.get("name"):
            parts.append(printable(rec.get("name")))
        nf = len(snap.findings_for(ident))
        if nf:
            parts.append(f"{nf} finding{'s' if nf != 1 else ''}")
        open_flags = [f for f in snap.flags_for(ident) if f.get("status") == "open"]
        if open_flags:
            blocking = any(f.get("blocking") for f in open_flags)
            parts.append(f"{len(open_flags)} open flag{'s' if len(open_flags) != 1 else ''}"
                         + (" (blocking)" if blocking else ""))
        parts.append(f"{len(self.model.order) if self.model else 0} shown")
        return "  ·  ".join(parts)

    # -- events ----------------------------------------------------------------------------------------

    @on(Input.Changed, "#filter")
    def on_filter_changed(self, event: Input.Changed) -> None:
        self.filter_text = event.value
        if self.model is not None:
            keep = self.species_id
            self.model.set_filter(event.value)
            self._show(keep)

    @on(Input.Submitted, "#filter")
    def on_filter_submitted(self, event: Input.Submitted) -> None:
        self.table.focus()

    def _cursor_moved(self, old: int, new: int) -> None:
        self._detail()

    @on(VirtualTable.RowSelected, "#species-table")
    def on_row_selected(self, event: VirtualTable.RowSelected) -> None:
        ident = self.species_id
        if ident:
            self.tk.open_record(ident)

    @on(VirtualTable.HeaderClicked, "#species-table")
    def on_header_clicked(self, event: VirtualTable.HeaderClicked) -> None:
        if self.model is None:
            return
        desc = not self.model.descending if self.model.sort_key == event.key else False
        self._sort(event.key, desc)

    # -- actions ---------------------------------------------------------------------------------------

    def _sort(self, key: str, descending: bool) -> None:
        if self.model is None:
            return
        keep = self.species_id
        self.model.set_sort(key, descending)
        self.sort_key, self.descending = key, descending
        self._show(keep)

    def action_filter(self) -> None:
        self.query_one("#filter", Input).focus()

    def action_sort(self) -> None:
        if self.model is not None:
            i = [c[0] for c in COLUMNS].index(self.model.sort_key)
            self._sort(COLUMNS[(i + 1) % len(COLUMNS)][0], False)

    def action_reverse(self) -> None:
        if self.model is not None:
            self._sort(self.model.sort_key, not self.model.descending)

    def action_escape(self) -> None:
        filt = self.query_one("#filter", Input)
        if filt.has_focus:
            self.table.focus()
        elif filt.value:
            filt.value = ""

    def action_flag(self) -> None:
        ident = self.species_id
        if ident:
            self.tk.raise_flag_dialog(ident)

    def action_check(self) -> None:
        self.tk.run_checks()
