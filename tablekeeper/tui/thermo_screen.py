"""The thermo table view: Cp°, S°, H° − H°(298.15) and G° − H°(298.15) of one species on a grid.

Exactly the numbers of ``tablekeeper table``: the same core calls (``default_grid`` with the same
defaults, then ``derived_table``) and the same cell text (``tablekeeper.thermo.table_cells``). The grid
is edited in three inputs (tmin, tmax, step); an empty input takes the command's default. A bad entry
shows the core's sentence and leaves the last good table on screen.
"""

from __future__ import annotations

import math
from typing import ClassVar

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal
from textual.widgets import Input, Label, Static

from ..errors import InputError, TablekeeperError
from ..text import printable
from ..thermo import TABLE_HEADS, default_grid, derived_table, property_value, record_model, table_cells
from . import registry
from .literal import lit_lines
from .views import ReadTable, SpeciesView, view_bindings
from .vtable import Column, VirtualTable
from .widgets import InfoBar, KeyLine

#: The command's default step (``table --step``), K.
DEFAULT_STEP = 100.0


def grid_number(text: str, name: str) -> float | None:
    """An input's number (None when empty: the default applies); InputError naming the input."""
    text = text.strip()
    if not text:
        return None
    try:
        value = float(text)
    except ValueError:
        raise InputError(f"{printable(text)[:40]!r} is not a number of kelvin", field=name) from None
    if not math.isfinite(value):
        raise InputError("must be a finite number of kelvin", field=name)
    return value


class ThermoScreen(SpeciesView):
    """The derived table of a species. e edits the grid (tmin, tmax, step); Enter or Escape returns to
    the table."""

    ENTRY = "thermo"
    TITLE_TEXT = "Thermo table"
    BINDINGS: ClassVar[list[BindingType]] = [
        *view_bindings("thermo"),
        Binding("e", "edit_grid", "Edit grid", id="thermo.edit_grid"),
        Binding("ctrl+r", "reset_grid", "Default grid", id="thermo.reset_grid"),
    ]

    def __init__(self, species: str | None = None) -> None:
        super().__init__(species)
        self.rows: list[list[str]] = []
        self._rows_for: str | None = None  # the species the rows on screen belong to

    def compose(self) -> ComposeResult:
        yield InfoBar()
        yield Static("", id="view-head", markup=False)
        with Horizontal(classes="inputs"):
            for name, hint in (("tmin", "298.15"), ("tmax", ""), ("step", "100")):
                yield Label(f"{name} K", markup=False)
                yield Input(placeholder=hint, id=name, compact=True,
                            classes="short" if name != "tmax" else "")
        yield Static("", id="view-msg", markup=False)
        table = ReadTable(id="thermo-table")
        table.empty_text = "no table"
        yield table
        yield KeyLine()

    def on_mount(self) -> None:
        for inp in self.query(Input):
            inp.cursor_blink = False
        self.table.focus()
        super().on_mount()

    @property
    def table(self) -> VirtualTable:
        return self.query_one("#thermo-table", VirtualTable)

    def update_bar(self) -> None:
        self.TITLE_TEXT = f"Thermo table {self.species_id}" if self.species_id else "Thermo table"
        super().update_bar()

    # -- the table -------------------------------------------------------------------------------------

    def grid_args(self) -> tuple[float, float | None, float | None]:
        """(step, tmin, tmax) from the inputs, as ``table --step --tmin --tmax`` takes them."""
        step = grid_number(self.query_one("#step", Input).value, "step")
        tmin = grid_number(self.query_one("#tmin", Input).value, "tmin")
        tmax = grid_number(self.query_one("#tmax", Input).value, "tmax")
        return (DEFAULT_STEP if step is None else step), tmin, tmax

    def _message(self, text: str | None) -> None:
        msg = self.query_one("#view-msg", Static)
        msg.update(lit_lines([f"✗ {text}"] if text else []))
        msg.set_class(bool(text), "-shown")
        msg.set_class(bool(text), "-problem")

    def show_record(self, record: dict | None) -> None:
        self.update_bar()
        head = self.query_one("#view-head", Static)
        if record is None or not self.can_show(record):
            head.update(lit_lines([self.heading(record), self.absent_text()]))
            self.rows = []
            self._fill()
            self._message(None)
            return
        try:
            model = record_model(record)
            s298 = property_value(record, "S298")
        except TablekeeperError as exc:
            head.update(lit_lines([self.heading(record), f"✗ {exc}"]))
            self.rows = []
            self._fill()
            return
        self.query_one("#tmax", Input).placeholder = f"{model.tmax:g}"
        src = f", source {model.source}" if model.source else ""
        s_text = f"; S°(298.15 K) = {s298[0]:g} J/(mol·K)" if s298 else "; no S°(298.15 K)"
        head.update(lit_lines([self.heading(record),
                               printable(f"Cp model: {model.kind}, {model.range_text()}{src}{s_text}")]))
        self.recompute()

    def recompute(self) -> None:
        """Rebuild the table from the inputs; on a bad entry keep the last table and say why."""
        record = self.record()
        if record is None or not self.can_show(record):
            return
        try:
            step, tmin, tmax = self.grid_args()
            # The same two calls as ``tablekeeper table`` (cli_thermo.cmd_table).
            grid = default_grid(record_model(record), step, tmin=tmin, tmax=tmax)
            frame = derived_table(record, grid)
        except TablekeeperError as exc:
            self._message(str(exc))
            if self.rows and self._rows_for != self.species_id:
                self.rows = []
                self._fill()
            return
        self._message(None)
        self.rows = table_cells(frame)
        self._rows_for = self.species_id
        self._fill()

    def _fill(self) -> None:
        # One more cell than the widest text: the columns then stand two spaces apart, as in the command.
        widths = [1 + max(len(h), len(u), *(len(r[j]) for r in self.rows)) if self.rows else len(h) + 2
                  for j, (h, u, _) in enumerate(TABLE_HEADS)]
        cols = [Column(h, (h, u), w, right=True) for (h, u, _), w in zip(TABLE_HEADS, widths, strict=True)]
        rows = self.rows
        self.table.set_data(cols, len(rows), lambda i: rows[i])

    # -- events ----------------------------------------------------------------------------------------

    @on(Input.Changed)
    def on_grid_changed(self, event: Input.Changed) -> None:
        self.recompute()

    @on(Input.Submitted)
    def on_grid_submitted(self, event: Input.Submitted) -> None:
        self.table.focus()

    def action_edit_grid(self) -> None:
        self.query_one("#tmin", Input).focus()

    def action_reset_grid(self) -> None:
        for inp in self.query(Input):
            with inp.prevent(Input.Changed):
                inp.value = ""
        self.recompute()

    def action_back(self) -> None:
        if any(inp.has_focus for inp in self.query(Input)):
            self.table.focus()
            return
        super().action_back()


registry.register(registry.ScreenEntry(
    "thermo", "Thermo table", "8,f9", lambda app, species: ThermoScreen(species),
    "Cp°, S°, H°−H°(298.15) and G°−H°(298.15) of the species on an editable grid", ThermoScreen))
