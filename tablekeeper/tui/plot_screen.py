"""The plot screen: Cp°(T) and S°(T) of one species from its Cp model, drawn in the terminal.

The numbers come from the core: ``derived_table`` on a grid inside the model's validity range (the same
call the ``table`` command makes), or ``CpModel.cp`` alone when the record cannot give S (no S°, or a
model that does not reach 298.15 K). The validity range is marked with ``┊`` rules, range breaks with
``╎``, and the record's own Cp°(298.15 K) and S°(298.15 K) with ``◆``, so a model that misses its anchor
shows at a glance.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

import numpy as np
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.widgets import Static

from ..errors import TablekeeperError
from ..text import printable
from ..thermo import T_REF, CpModel, derived_table, property_value, record_model
from . import registry
from .literal import lit_lines
from .plot import PlotView
from .plotgeom import BREAK, Curve, Mark, Rule
from .views import SpeciesView, view_bindings
from .widgets import InfoBar, KeyLine

#: Points of the plotted grid: enough for a smooth curve at any terminal width (2 dots per cell).
GRID_POINTS = 241

CP_TITLE = "Cp° / J/(mol·K)"
S_TITLE = "S° / J/(mol·K)"
LEGEND = f"⠿ model  ◆ record at 298.15 K  ┊ validity range  {BREAK} range break"


@dataclass(frozen=True)
class PlotData:
    """What a species' plots show: the grid, Cp (and S when the record gives it), the model, anchors."""

    model: CpModel
    T: np.ndarray
    cp: np.ndarray
    S: np.ndarray | None
    s_problem: str | None  # why S is not plotted
    cp298: float | None  # the record's values at 298.15 K
    s298: float | None
    cp298_model: float | None  # the model's values there (from the same table)
    s298_model: float | None


def plot_grid(model: CpModel, n: int = GRID_POINTS) -> np.ndarray:
    """Temperatures to plot: evenly spaced over the validity range, plus 298.15 K (when covered) and the
    range breaks, so that the anchor and each break are drawn exactly. Never outside the range."""
    pts = [np.linspace(model.tmin, model.tmax, n), np.asarray(model.breaks, dtype=float)]
    if model.covers_reference() and model.tmin <= T_REF:
        pts.append(np.array([T_REF]))
    return np.unique(np.concatenate(pts))


def plot_data(record: dict, n: int = GRID_POINTS) -> PlotData:
    """The plotted numbers of a record, all from core calls. InputError when it has no usable model."""
    model = record_model(record)
    T = plot_grid(model, n)
    cp298 = property_value(record, "Cp298")
    s298 = property_value(record, "S298")
    try:
        table = derived_table(record, T)
    except TablekeeperError as exc:
        # No S°, or a model that does not reach 298.15 K: Cp alone, and the reason S is missing.
        cp = np.asarray(model.cp(T), dtype=float)
        return PlotData(model, T, cp, None, str(getattr(exc, "reason", exc)),
                        cp298[0] if cp298 else None, s298[0] if s298 else None, None, None)
    at_ref = table[table["T_K"] == T_REF]
    return PlotData(model, table["T_K"].to_numpy(), table["Cp_J_per_molK"].to_numpy(),
                    table["S_J_per_molK"].to_numpy(), None,
                    cp298[0] if cp298 else None, s298[0] if s298 else None,
                    float(at_ref["Cp_J_per_molK"].iloc[0]) if len(at_ref) else None,
                    float(at_ref["S_J_per_molK"].iloc[0]) if len(at_ref) else None)


def range_rules(model: CpModel) -> list[Rule]:
    return [Rule(model.tmin), Rule(model.tmax), *(Rule(b, BREAK, "break") for b in model.breaks)]


def _anchor_text(name: str, record_value: float | None, model_value: float | None) -> str:
    rec = f"{record_value:g}" if record_value is not None else "none"
    mod = f"{model_value:.2f}" if model_value is not None else "—"
    return f"{name} {rec} ({mod})"


class PlotScreen(SpeciesView):
    """Cp°(T) and S°(T) of a species from its model. v: both plots, Cp only or S only."""

    ENTRY = "plot"
    TITLE_TEXT = "Plot"
    BINDINGS: ClassVar[list[BindingType]] = [
        *view_bindings("plot"),
        Binding("v", "cycle_view", "Cp/S/both", id="plot.view"),
    ]

    VIEWS = ("both", "cp", "s")

    def __init__(self, species: str | None = None) -> None:
        super().__init__(species)
        self.view = "both"
        self.data: PlotData | None = None

    def compose(self) -> ComposeResult:
        yield InfoBar()
        yield Static("", id="view-head", markup=False)
        yield PlotView(id="cp-plot")
        yield PlotView(id="s-plot")
        yield Static(LEGEND, id="view-legend", markup=False)
        yield KeyLine()

    def update_bar(self) -> None:
        self.TITLE_TEXT = f"Plot {self.species_id}" if self.species_id else "Plot"
        super().update_bar()

    def show_record(self, record: dict | None) -> None:
        self.update_bar()
        head = self.query_one("#view-head", Static)
        cp_plot = self.query_one("#cp-plot", PlotView)
        s_plot = self.query_one("#s-plot", PlotView)
        self.data = None
        if record is None or not self.can_show(record):
            head.update(lit_lines([self.heading(record), self.absent_text()]))
            cp_plot.say(CP_TITLE, "")
            s_plot.say(S_TITLE, "")
            return
        try:
            data = plot_data(record)
        except TablekeeperError as exc:
            head.update(lit_lines([self.heading(record), f"✗ {exc}"]))
            cp_plot.say(CP_TITLE, str(exc))
            s_plot.say(S_TITLE, "")
            return
        self.data = data
        m = data.model
        src = f", source {m.source}" if m.source else ""
        lines = [self.heading(record) + printable(f" · {m.kind}, {m.range_text()}{src}"),
                 "at 298.15 K, record (model): " + _anchor_text("Cp°", data.cp298, data.cp298_model) + ", "
                 + _anchor_text("S°", data.s298, data.s298_model) + " J/(mol·K)"]
        head.update(lit_lines(lines))
        rules = range_rules(m)
        cp_marks = [Mark(T_REF, data.cp298)] if data.cp298 is not None else []
        cp_plot.show(CP_TITLE, [Curve(data.T, data.cp)], cp_marks, rules)
        if data.S is None:
            s_plot.say(S_TITLE, f"S°(T) not plotted: {data.s_problem}")
        else:
            s_marks = [Mark(T_REF, data.s298)] if data.s298 is not None else []
            s_plot.show(S_TITLE, [Curve(data.T, data.S)], s_marks, rules)
        self._apply_view()

    def _apply_view(self) -> None:
        self.query_one("#cp-plot", PlotView).display = self.view in ("both", "cp")
        self.query_one("#s-plot", PlotView).display = self.view in ("both", "s")

    def action_cycle_view(self) -> None:
        self.view = self.VIEWS[(self.VIEWS.index(self.view) + 1) % len(self.VIEWS)]
        self._apply_view()


registry.register(registry.ScreenEntry(
    "plot", "Plot", "5,f6", lambda app, species: PlotScreen(species),
    "Cp°(T) and S°(T) of the species from its model, with its range and anchors", PlotScreen))
