"""Measured reactions: each reaction with its measured ΔrH°, ΔrG° or log10 K and the reaction-closure
findings beside it; edit, add and delete them.

The findings come from the check report the app already holds (``editing.reaction_findings``). The
editor is a dialog over ``editing.apply_reaction_edit``: every key press applies the typed texts to the
would-be record, checks it against the reaction schema, parses and balances its equation against the
species on screen, and shows what the reaction-closure check would say of it
(``editing.reaction_closure_preview``). Saves and deletions go through ``editing.save_reaction`` and
``editing.delete_reaction`` (revision checked, journaled with the user's reason); a save that meets
someone else's shows both versions, as for species.
"""

from __future__ import annotations

import copy
from collections.abc import Mapping
from typing import TYPE_CHECKING, ClassVar, cast

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Input, Label, Static

from ..checks import Finding
from ..editing import (
    REACTION_FIELDS,
    REACTION_QUANTITIES,
    apply_reaction_edit,
    conflict_rows,
    delete_reaction,
    detailed_changes,
    number_text,
    reaction_closure_preview,
    reaction_findings,
    reaction_text,
    save_reaction,
)
from ..errors import ConflictError
from ..text import printable
from . import registry
from .dialogs import ConfirmDialog, TextDialog, changes_lines
from .literal import lit, lit_lines
from .views import ListScreen
from .vtable import Column, VirtualTable

if TYPE_CHECKING:
    from .app import TablekeeperApp

_SEV = {"error": "E", "warning": "W", "info": "i"}
_SEV_RANK = {"error": 0, "warning": 1, "info": 2}

#: The editor's labels (12 cells at most: the dialog's label column).
FIELD_LABELS: dict[str, str] = {
    "id": "id", "equation": "equation", "temperature_K": "T / K",
    "drH.value": "ΔrH° kJ/mol", "drH.uncertainty": "u(ΔrH°)",
    "drG.value": "ΔrG° kJ/mol", "drG.uncertainty": "u(ΔrG°)",
    "logK.value": "log10 K", "logK.uncertainty": "u(log10 K)",
    "source": "source", "notes": "notes",
}
_HINTS = {"equation": "CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)", "temperature_K": "298.15 when empty",
          "drH.value": "-890.5, or with a unit: -212.8 kcal/mol", "source": "an id on the sources screen"}


def measured_text(record: Mapping, short: bool = False) -> str:
    """The measured quantities of a reaction: ``ΔrH° -285.83 ± 0.05 kJ/mol`` (short: the first one and
    a count of the others, without units)."""
    parts = []
    for key, (label, unit, _field) in REACTION_QUANTITIES.items():
        q = record.get(key)
        if not isinstance(q, Mapping):
            continue
        text = f"{label} {number_text(q.get('value'))}"
        if q.get("uncertainty") is not None:
            text += f" ± {number_text(q.get('uncertainty'))}"
        if unit and not short:
            text += f" {unit}"
        parts.append(text)
    if not parts:
        return "no measured value"
    if short:
        return parts[0] + (f" +{len(parts) - 1}" if len(parts) > 1 else "")
    return "; ".join(parts)


class ReactionTable(VirtualTable):
    """The reactions; Enter edits the one under the cursor."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("enter", "select", "Edit", id="reactions.select"),
    ]


def finding_line(f: Finding, short: bool = False) -> str:
    """A finding in one line; short: from its numbers (measured, what the species data give, the
    tolerance), which fit the detail panel where the whole sentence would be cut."""
    mark = "✗" if f.severity == "error" else ("!" if f.severity == "warning" else "i")
    if short and f.observed is not None and f.expected is not None and f.field in REACTION_QUANTITIES:
        label, unit, _ = REACTION_QUANTITIES[f.field]
        tol = f" (tolerance {f.tolerance:.4g})" if f.tolerance is not None else ""
        unit = f" {unit}" if unit else ""
        return (f"{mark} {f.check}: measured {label} {f.observed:.6g}, the species data give "
                f"{f.expected:.6g}{unit}{tol}")
    return f"{mark} {f.check}: {f.message}"


class ReactionsScreen(ListScreen):
    """Measured reactions and their closure with the species data (Hess's law). e or Enter: edit; n: add;
    d: delete; k: open the equation in the reaction calculator."""

    ENTRY = "reactions"
    TITLE_TEXT = "Measured reactions"
    TABLE_ID = "reactions-table"
    ITEMS_NAME = "reactions"
    DETAIL_ID = "reaction-detail"
    TABLE_CLASS = ReactionTable
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape", "back", "Back", id="reactions.back"),
        Binding("e", "edit", "Edit", id="reactions.edit"),
        Binding("n", "new", "Add", id="reactions.new"),
        Binding("d", "delete", "Delete", id="reactions.delete"),
        Binding("k", "calculate", "Calculator", id="reactions.calculate"),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.items: list[dict] = []
        self._findings: dict[str, list[Finding]] = {}

    def findings_of(self, ident: str) -> list[Finding]:
        return self._findings.get(ident, [])

    def data_changed(self) -> None:
        self.update_bar()
        if not self.ready:
            return
        snap = self.tk.snapshot
        keep = (self.current or {}).get("id")
        reactions = snap.context.reactions if snap else {}
        items = sorted((r for r in reactions.values() if isinstance(r, dict)), key=lambda r: str(r.get("id")))
        self.items = items
        report = snap.report if snap else None
        self._findings = {str(r.get("id")): reaction_findings(report.findings, str(r.get("id")))
                          for r in items} if report is not None else {}
        cols = [Column("mark", ("",), 1), Column("id", ("id",), 16), Column("equation", ("equation",), 26),
                Column("measured", ("measured",), 20), Column("source", ("source",), 12)]

        def cells(i: int) -> list[str]:
            r = items[i]
            found = self.findings_of(str(r.get("id")))
            worst = min((f.severity for f in found), key=_SEV_RANK.get, default=None)
            return [_SEV.get(worst or "", " "), printable(r.get("id", "")), printable(r.get("equation", "")),
                    printable(measured_text(r, short=True)), printable(r.get("source", ""))]

        def style(i: int) -> str | None:
            found = self.findings_of(str(items[i].get("id")))
            if any(f.severity == "error" for f in found):
                return "error"
            return "warning" if any(f.severity == "warning" for f in found) else None

        cursor = next((i for i, r in enumerate(items) if r.get("id") == keep), 0)
        self.table.empty_text = "no measured reactions (n adds one)"
        self.table.set_data(cols, len(items), cells, style, cursor=cursor)
        self.show_detail()

    def show_detail(self) -> None:
        r = self.current
        snap = self.tk.snapshot
        if r is None or snap is None:
            self.detail.update(lit("n: add a measured reaction" if snap else "loading…"))
            return
        ident = str(r.get("id"))
        T = r.get("temperature_K")
        at = f" at {number_text(T)} K" if T is not None else " at 298.15 K"
        src = r.get("source")
        title = (snap.sources.get(src) or {}).get("title") if isinstance(src, str) else None
        lines = [f"{ident}: {r.get('equation')}",
                 measured_text(r) + at + (f" · source {src}" if src else "") + (f" ({title})" if title else "")]
        if snap.report is None:
            lines.append("checking…")
        else:
            found = self.findings_of(ident)
            lines += [finding_line(f, short=True) for f in found] or [
                "closes with the species data (reaction-closure: no finding)"]
        if r.get("notes"):
            lines.append(f"notes: {r.get('notes')}")
        self.detail.update(lit_lines(lines))

    @on(VirtualTable.RowSelected, "#reactions-table")
    def on_row_selected(self, event: VirtualTable.RowSelected) -> None:
        self.action_edit()

    def action_edit(self) -> None:
        r = self.current
        if r is not None and self.may_edit():
            self.app.push_screen(ReactionDialog(r))

    def action_new(self) -> None:
        if self.may_edit():
            self.app.push_screen(ReactionDialog(None))

    def action_delete(self) -> None:
        r = self.current
        if r is None or not self.may_edit():
            return
        ident = str(r.get("id"))
        ds = self.tk.dataset
        record = copy.deepcopy(r)

        def with_reason(reason: str | None) -> None:
            if not reason:
                return

            def done(_: object) -> None:
                self.tk.notify(f"deleted reaction {printable(ident)}", markup=False)
                self.tk.reload()

            self.tk.run_disk(lambda: delete_reaction(ds, record, reason), done)

        def confirmed(yes: bool | None) -> None:
            if yes:
                self.app.push_screen(TextDialog(f"Delete reaction {ident}", "Reason for the journal:",
                                                placeholder="why it goes"), with_reason)

        body = [f"{ident}: {r.get('equation')}", measured_text(r),
                "The journal keeps every value of the deleted reaction."]
        self.app.push_screen(ConfirmDialog(f"Delete reaction {ident}?", body), confirmed)

    def action_calculate(self) -> None:
        from .reaction_screen import ReactionScreen

        r = self.current
        if r is None:
            return
        T = r.get("temperature_K")
        eq = printable(r.get("equation", ""))
        self.app.push_screen(ReactionScreen(eq, float(T) if isinstance(T, int | float) else 298.15))


class ReactionDialog(ModalScreen[dict | None]):
    """Add or edit a measured reaction, validated as you type: the schema, the equation parsed and
    balanced against the species, and the closure with the species data. ctrl+s saves (with a reason);
    Escape cancels."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape", "cancel", "Cancel", id="reaction_edit.cancel"),
        Binding("ctrl+s", "save", "Save", id="reaction_edit.save"),
    ]

    def __init__(self, original: Mapping | None) -> None:
        super().__init__()
        self.original = copy.deepcopy(dict(original)) if original else None
        self.texts: dict[str, str] = {}
        self.saving = False

    @property
    def tk(self) -> TablekeeperApp:
        return cast("TablekeeperApp", self.app)

    def compose(self) -> ComposeResult:
        title = "Add a measured reaction" if self.original is None else \
            f"Edit reaction {self.original.get('id')} (revision {self.original.get('revision')})"
        with Vertical(classes="dialog wide"):
            yield Static(lit(title), classes="dialog-title", markup=False)
            for name in REACTION_FIELDS:
                with Horizontal(classes="row"):
                    yield Label(FIELD_LABELS[name], classes="label", markup=False)
                    inp = Input(value=printable(reaction_text(self.original, name)), name=name,
                                id=f"rx-{name.replace('.', '-')}", placeholder=_HINTS.get(name, ""),
                                compact=True, select_on_focus=False,
                                disabled=name == "id" and self.original is not None)
                    inp.cursor_blink = False
                    yield inp
            with VerticalScroll(classes="dialog-body"):
                yield Static("", id="reaction-problems", classes="msg", markup=False)
            yield Static("ctrl+s: save (asks a reason)   Escape: cancel   Tab: next field", classes="hint",
                         markup=False)

    def on_mount(self) -> None:
        first = "rx-id" if self.original is None else "rx-equation"
        self.query_one(f"#{first}", Input).focus()
        self._validate()

    def input_for(self, name: str) -> Input:
        return self.query_one(f"#rx-{name.replace('.', '-')}", Input)

    @on(Input.Changed)
    def on_changed(self, event: Input.Changed) -> None:
        name = event.input.name
        if not name:
            return
        value = event.value
        orig = reaction_text(self.original, name)
        if value == printable(orig):
            value = orig  # an escaped control character shown, not typed
        if value == orig and self.original is not None:
            self.texts.pop(name, None)
        else:
            self.texts[name] = value
        self._validate()

    @on(Input.Submitted)
    def on_submitted(self, event: Input.Submitted) -> None:
        self.focus_next()

    def result(self):
        snap = self.tk.snapshot
        return apply_reaction_edit(self.original, self.texts, snap.species if snap else None,
                                   snap.sources if snap else None)

    def _validate(self) -> bool:
        """Show the problems of the would-be reaction, or its notes and what the closure check says."""
        result = self.result()
        lines = [f"✗ {FIELD_LABELS.get(name, name)}: {msg}" for name, msg in result.problems.items()]
        if result.ok:
            lines += [f"{FIELD_LABELS.get(name, name)}: {msg}" for name, msg in result.notes.items()]
            snap = self.tk.snapshot
            if snap is not None:
                found = reaction_closure_preview(snap.context, result.record)
                if found:
                    lines += [finding_line(f) for f in found]
                elif any(isinstance(result.record.get(k), Mapping) for k in REACTION_QUANTITIES):
                    lines.append("closes with the species data: the reaction-closure check passes")
        out = self.query_one("#reaction-problems", Static)
        out.update(lit_lines(lines))
        out.set_class(not result.ok, "-problem")
        return result.ok

    def action_save(self) -> None:
        if self.saving or not self._validate():
            return
        result = self.result()
        if self.original is not None and not self.texts:
            self.dismiss(None)
            return
        changes = detailed_changes(self.original or {}, result.record)
        ident = result.record.get("id")

        def with_reason(reason: str | None) -> None:
            if reason:
                self._save(reason)

        self.app.push_screen(TextDialog(f"Save reaction {ident}", "Reason for the journal:",
                                        body=changes_lines([c for c in changes if c.field != "revision"]),
                                        placeholder="why this change"), with_reason)

    def _save(self, reason: str) -> None:
        ds = self.tk.dataset
        snap = self.tk.snapshot
        original, texts = self.original, dict(self.texts)
        species = snap.species if snap else None
        self.saving = True

        def done(saved: dict) -> None:
            self.saving = False
            self.tk.notify(f"saved reaction {printable(saved.get('id'))} (revision {saved.get('revision')})",
                           markup=False)
            self.tk.reload()
            self.dismiss(saved)

        def failed(exc: Exception) -> None:
            self.saving = False
            if isinstance(exc, ConflictError):
                self._conflict(exc)
                return
            self.query_one("#reaction-problems", Static).update(lit(str(exc)))
            self.query_one("#reaction-problems", Static).set_class(True, "-problem")

        self.tk.run_disk(lambda: save_reaction(ds, original, texts, reason, species=species), done, failed)

    def _conflict(self, exc: ConflictError) -> None:
        """Someone saved (or deleted) the reaction first: both versions, field by field; ``t`` takes theirs
        as the new base and keeps the typed texts over it."""
        from .conflict_screen import ConflictScreen

        base = self.original or {}
        mine = self.result().record
        rows = conflict_rows(base, mine, exc.theirs)

        def decided(choice: str | None) -> None:
            if choice == "rebase" and exc.theirs is not None:
                self.original = copy.deepcopy(dict(exc.theirs))
                for name in list(self.texts):
                    if self.texts[name] == reaction_text(self.original, name):
                        del self.texts[name]
                for name in REACTION_FIELDS:
                    if name not in self.texts:
                        inp = self.input_for(name)
                        with inp.prevent(Input.Changed):
                            inp.value = printable(reaction_text(self.original, name))
                self.tk.notify("their version is loaded and your edits are applied over it: check and save",
                               markup=False)
            self._validate()

        self.app.push_screen(ConflictScreen(str(base.get("id") or mine.get("id")), rows, exc), decided)

    def action_cancel(self) -> None:
        self.dismiss(None)


registry.register(registry.ScreenEntry(
    "reactions", "Measured reactions", "0", lambda app, species: ReactionsScreen(),
    "measured reactions with their closure findings: edit, add, delete", ReactionsScreen))
