"""The fit view: fit a Shomate or NASA 7-coefficient model to a species' tabulated Cp points, read the
residuals, see the curve over the points, and save the model as the record's new ``cp_model``.

The fit is ``tablekeeper.thermo.fit`` over the record's points, pinned to the record's own Cp°, ΔfH° and
S° at 298.15 K when it has them (and the points reach 298.15 K); the fitted values shown are the model's
``cp`` at the points (a core call) and the residuals are the fit's own. Saving goes through
``tablekeeper.editing.save_cp_model`` in a worker: revision-checked, journaled, with the fit's residual
statistics (n, rms, max) in the reason. The tabulated points it replaces stay in the journal.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

import numpy as np
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal
from textual.widgets import Static

from ..editing import number_text, save_cp_model
from ..errors import InputError, TablekeeperError
from ..text import printable
from ..thermo import T_REF, FitResult, fit, fit_summary, property_value, record_model
from . import registry
from .dialogs import TextDialog
from .literal import lit_lines
from .plot import PlotView
from .plot_screen import GRID_POINTS, range_rules
from .plotgeom import POINT, Curve, Mark
from .views import ReadTable, SpeciesView, view_bindings
from .vtable import Column
from .widgets import InfoBar, KeyLine

KINDS = ("shomate", "nasa7")
KIND_TEXT = {"shomate": "Shomate", "nasa7": "NASA 7-coefficient"}
#: Anchors a fit can be pinned to, in the order they are named.
ANCHOR_FIELDS = ("Cp298", "dfH298", "S298")


@dataclass(frozen=True)
class FitView:
    """A fit of a record's points and what the screen shows of it (all numbers from core calls)."""

    kind: str
    points: np.ndarray  # (T, Cp) of the record's tabulated model
    result: FitResult
    fitted: np.ndarray  # the model's Cp at the points
    anchors: tuple[str, ...]  # the anchors the fit was pinned to
    note: str | None  # why anchors were left out, when they were
    source: str | None

    def model_json(self) -> dict:
        """The fitted model as the record's ``cp_model``, citing the source of the points."""
        obj = self.result.model.to_json()
        if self.source:
            obj["source"] = self.source
        return obj


def record_points(record: dict) -> tuple[np.ndarray, str | None]:
    """The (T, Cp) points of a record's tabulated model and their source; InputError when it has none."""
    model = record.get("cp_model")
    if not isinstance(model, dict) or model.get("kind") != "tabulated":
        raise InputError("has no tabulated Cp(T) points to fit", record=record.get("id"), field="cp_model")
    record_model(record)  # the core's checks of the points (numbers, increasing T)
    pts = np.asarray(model.get("points"), dtype=float)
    return pts, model.get("source")


def record_anchors(record: dict) -> dict[str, float]:
    """The record's Cp°, ΔfH° and S° at 298.15 K in canonical units, where it has them."""
    out = {}
    for name in ANCHOR_FIELDS:
        pv = property_value(record, name)
        if pv is not None:
            out[name] = pv[0]
    return out


def fit_record(record: dict, kind: str) -> FitView:
    """Fit a record's points with the core, pinned to the record's anchors when the points reach 298.15 K."""
    points, source = record_points(record)
    anchors = record_anchors(record)
    note = None
    try:
        result = fit(points, kind, anchors=anchors)
    except InputError as exc:
        if not anchors or "anchors" not in exc.reason:
            raise
        # The points do not reach 298.15 K, where the anchors sit: fit the shape alone and say so.
        result = fit(points, kind)
        note = f"not pinned: {exc.reason}"
        anchors = {}
    fitted = np.asarray(result.model.cp(points[:, 0]), dtype=float)
    return FitView(kind, points, result, fitted, tuple(anchors), note, source)


class FitScreen(SpeciesView):
    """Fit a model to a species' tabulated Cp points. k switches Shomate / NASA 7; ctrl+s saves the model
    as the record's Cp model (the steward role edits)."""

    ENTRY = "fit"
    TITLE_TEXT = "Fit"
    NEEDS = "tabulated Cp points"
    LACKS = "has no tabulated Cp points"
    BINDINGS: ClassVar[list[BindingType]] = [
        *view_bindings("fit"),
        Binding("k", "switch_kind", "Shomate/NASA 7", id="fit.kind"),
        Binding("ctrl+s", "save", "Save model", id="fit.save"),
    ]

    def __init__(self, species: str | None = None, kind: str = "shomate") -> None:
        super().__init__(species)
        self.kind = kind
        self.view: FitView | None = None
        self.saving = False

    def can_show(self, record: dict) -> bool:
        model = record.get("cp_model")
        return isinstance(model, dict) and model.get("kind") == "tabulated"

    def compose(self) -> ComposeResult:
        yield InfoBar()
        yield Static("", id="view-head", markup=False)
        with Horizontal(id="fit-body"):
            table = ReadTable(id="fit-table")
            table.empty_text = "no points"
            yield table
            yield PlotView(id="fit-plot")
        yield Static("", id="view-msg", markup=False)
        yield KeyLine()

    def on_mount(self) -> None:
        self.query_one("#fit-table", ReadTable).focus()
        super().on_mount()

    def update_bar(self) -> None:
        self.TITLE_TEXT = f"Fit {self.species_id}" if self.species_id else "Fit"
        super().update_bar()

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action == "save":
            return self.view is not None and not self.saving and self.tk.may("edit")
        return True

    # -- showing ---------------------------------------------------------------------------------------

    def _message(self, lines: list[str], problem: bool = False) -> None:
        msg = self.query_one("#view-msg", Static)
        msg.update(lit_lines(lines))
        msg.set_class(bool(lines), "-shown")
        msg.set_class(problem, "-problem")

    def show_record(self, record: dict | None) -> None:
        self.update_bar()
        head = self.query_one("#view-head", Static)
        table = self.query_one("#fit-table", ReadTable)
        plot = self.query_one("#fit-plot", PlotView)
        self.view = None
        self.refresh_bindings()
        cols = [Column("T", ("T", "K"), 8, True), Column("cp", ("Cp° given", "J/(mol·K)"), 10, True),
                Column("fit", ("Cp° fit", "J/(mol·K)"), 10, True), Column("r", ("residual", ""), 10, True)]
        if record is None or not self.can_show(record):
            head.update(lit_lines([self.heading(record), self.absent_text()]))
            table.set_data(cols, 0, lambda i: ())
            plot.say("Cp° / J/(mol·K)", "")
            self._message([])
            return
        try:
            view = fit_record(record, self.kind)
        except TablekeeperError as exc:
            head.update(lit_lines([self.heading(record), f"{KIND_TEXT[self.kind]} fit"]))
            table.set_data(cols, 0, lambda i: ())
            plot.say("Cp° / J/(mol·K)", "")
            self._message([f"✗ {exc}"], problem=True)
            return
        self.view = view
        self.refresh_bindings()
        pts, res = view.points, view.result
        src = f", source {view.source}" if view.source else ""
        pinned = f"pinned to {', '.join(view.anchors)}" if view.anchors else "not pinned (no anchors)"
        head.update(lit_lines([
            self.heading(record),
            printable(f"{KIND_TEXT[view.kind]} fit to {len(pts)} tabulated points{src}; {pinned}"),
        ]))
        rows = [[number_text(float(T)), number_text(float(cp)), f"{f:.3f}", f"{r:+.3f}"]
                for (T, cp), f, r in zip(pts, view.fitted, res.residuals, strict=True)]
        table.set_data(cols, len(rows), lambda i: rows[i])
        m = res.model
        grid = np.linspace(m.tmin, m.tmax, GRID_POINTS)
        curve = Curve(grid, np.asarray(m.cp(grid), dtype=float))
        marks = [Mark(float(T), float(cp), POINT, "point") for T, cp in pts]
        anchors = record_anchors(record)
        if "Cp298" in anchors:
            marks.append(Mark(T_REF, anchors["Cp298"]))
        plot.show("Cp°  ⠿ fit  + points  ◆ record", [curve], marks, range_rules(m))
        lines = [fit_summary(res, KIND_TEXT[view.kind], view.anchors)]
        lines += [*(view.note,)] if view.note else []
        lines += list(res.notes)
        if not self.tk.may("edit"):
            lines.append(f"read-only: user {self.tk.user} may not save a model (the steward role edits)")
        self._message([printable(x) for x in lines])

    # -- actions ---------------------------------------------------------------------------------------

    def action_switch_kind(self) -> None:
        self.kind = KINDS[(KINDS.index(self.kind) + 1) % len(KINDS)]
        self.redraw()

    def action_save(self) -> None:
        view = self.view
        record = self.record()
        if view is None or record is None:
            self.tk.notify("nothing to save: no fit on screen", severity="warning", markup=False)
            return
        if not self.tk.may("edit"):
            self.tk.notify(f"user {self.tk.user} may not edit this dataset (the steward role edits)",
                           severity="error", markup=False)
            return
        stats = fit_summary(view.result, KIND_TEXT[view.kind], view.anchors)
        old = record.get("cp_model") or {}
        body = [f"cp_model of {record.get('id')}: tabulated, {len(old.get('points') or [])} points → "
                f"{view.kind}, {view.result.model.range_text()}",
                stats,
                "The tabulated points are replaced; the journal keeps them (old value of cp_model)."]
        ds = self.tk.dataset
        model_json = view.model_json()

        def done(saved: dict) -> None:
            self.saving = False
            self.refresh_bindings()
            self.tk.notify(f"saved the {view.kind} model of {printable(saved.get('id'))} "
                           f"(revision {saved.get('revision')})", markup=False)
            self.tk.reload()

        def failed(exc: Exception) -> None:
            self.saving = False
            self.refresh_bindings()
            self.tk.show_error(exc)

        def with_reason(reason: str | None) -> None:
            if not reason:
                return
            self.saving = True
            self.refresh_bindings()
            full = f"{reason.strip()}; {stats}"
            self.tk.run_disk(lambda: save_cp_model(ds, record, model_json, full), done, failed)

        self.app.push_screen(TextDialog(f"Save the fitted model of {record.get('id')}",
                                        "Reason for the journal (the fit's statistics are added):",
                                        body=body, placeholder="why this model"), with_reason)


registry.register(registry.ScreenEntry(
    "fit", "Fit", "9,f10", lambda app, species: FitScreen(species),
    "fit a Shomate or NASA 7 model to tabulated Cp points; residuals; save as the record's model",
    FitScreen))
