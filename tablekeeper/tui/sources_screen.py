"""Sources: the bibliography, the values citing each source, and an editor (add, edit).

Source editing goes through ``tablekeeper.editing.build_source`` / ``save_source`` (schema-checked, saved
with ``Dataset.save("sources", ...)`` and journaled).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, ClassVar, cast

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label, Static

from ..editing import SOURCE_FIELDS, SOURCE_KINDS, build_source, save_source, source_text
from ..model import LABELS
from ..text import printable
from .literal import lit, lit_lines
from .views import ListScreen
from .vtable import Column, VirtualTable

if TYPE_CHECKING:
    from .app import TablekeeperApp


class SourcesScreen(ListScreen):
    """Bibliographic sources. n: add; e or Enter: edit; the values citing the highlighted source below."""

    ENTRY = "sources"
    TITLE_TEXT = "Sources"
    TABLE_ID = "sources-table"
    ITEMS_NAME = "sources"
    DETAIL_ID = "source-detail"
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape", "back", "Back", id="sources.back"),
        Binding("n", "new", "Add source", id="sources.new"),
        Binding("e", "edit", "Edit", id="sources.edit"),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.items: list[dict] = []

    def data_changed(self) -> None:
        self.update_bar()
        if not self.ready:
            return
        snap = self.tk.snapshot
        keep = (self.current or {}).get("id")
        items = sorted((s for s in (snap.sources.values() if snap else []) if isinstance(s, dict)),
                       key=lambda s: str(s.get("id")))
        self.items = items
        cols = [Column("id", ("id",), 18), Column("year", ("year",), 4), Column("authors", ("authors",), 22),
                Column("title", ("title",), 31)]

        def cells(i: int) -> list[str]:
            s = items[i]
            return [printable(s.get("id", "")), printable(s.get("year", "")),
                    printable(source_text(s, "authors")), printable(s.get("title", ""))]

        cursor = next((i for i, s in enumerate(items) if s.get("id") == keep), 0)
        self.table.empty_text = "no sources yet (n adds one)"
        self.table.set_data(cols, len(items), cells, cursor=cursor)
        self.show_detail()

    def show_detail(self) -> None:
        s = self.current
        detail = self.detail
        snap = self.tk.snapshot
        if s is None or snap is None:
            detail.update(lit(""))
            return
        cites = snap.citations(str(s.get("id")))
        lines = [f"{s.get('id')}: {s.get('title')}"]
        if s.get("authors"):
            year = f" ({s.get('year')})" if s.get("year") else ""
            lines.append(f"authors: {source_text(s, 'authors')}{year}")
        extra = [f"{k} {s.get(k)}" for k in ("kind", "identifier") if s.get(k)]
        if extra:
            lines.append("; ".join(extra))
        if s.get("notes"):
            lines.append(f"notes: {s.get('notes')}")
        shown = ", ".join(f"{sp} {LABELS.get(fld, fld)}" for sp, fld in cites[:12])
        more = f" and {len(cites) - 12} more" if len(cites) > 12 else ""
        lines.append(f"cited by {len(cites)} value{'s' if len(cites) != 1 else ''}"
                     + (f": {shown}{more}" if cites else ""))
        detail.update(lit_lines(lines))

    @on(VirtualTable.RowSelected, "#sources-table")
    def on_row_selected(self, event: VirtualTable.RowSelected) -> None:
        self.action_edit()

    def action_new(self) -> None:
        if self.may_edit():
            self.app.push_screen(SourceDialog(None))

    def action_edit(self) -> None:
        s = self.current
        if s is not None and self.may_edit():
            self.app.push_screen(SourceDialog(s))


class SourceDialog(ModalScreen[dict | None]):
    """Add or edit a source, with live schema validation. ctrl+s saves; Escape cancels."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape", "cancel", "Cancel", id="source.cancel"),
        Binding("ctrl+s", "save", "Save", id="source.save"),
    ]

    def __init__(self, original: Mapping | None) -> None:
        super().__init__()
        self.original = dict(original) if original else None
        self.texts: dict[str, str] = {}

    @property
    def tk(self) -> TablekeeperApp:
        return cast("TablekeeperApp", self.app)

    def compose(self) -> ComposeResult:
        title = "Add a source" if self.original is None else f"Edit source {self.original.get('id')}"
        with Vertical(classes="dialog wide"):
            yield Static(lit(title), classes="dialog-title", markup=False)
            for name in SOURCE_FIELDS:
                with Horizontal(classes="row"):
                    yield Label(name, classes="label", markup=False)
                    hint = {"authors": "Last, F.; Other, G.", "kind": " | ".join(SOURCE_KINDS),
                            "identifier": "DOI, report number or URL"}.get(name, "")
                    inp = Input(value=printable(source_text(self.original, name)), name=name,
                                id=f"src-{name}", placeholder=hint, compact=True, select_on_focus=False,
                                disabled=name == "id" and self.original is not None)
                    inp.cursor_blink = False
                    yield inp
            yield Static("", id="source-problems", classes="msg -problem", markup=False)
            yield Static("ctrl+s: save   Escape: cancel", classes="hint", markup=False)

    def on_mount(self) -> None:
        first = "src-id" if self.original is None else "src-title"
        self.query_one(f"#{first}", Input).focus()
        self._validate()

    @on(Input.Changed)
    def on_changed(self, event: Input.Changed) -> None:
        name = event.input.name
        if not name:
            return
        value = event.value
        orig = source_text(self.original, name)
        if value == printable(orig):
            value = orig
        if value == orig and self.original is not None:
            self.texts.pop(name, None)
        else:
            self.texts[name] = value
        self._validate()

    @on(Input.Submitted)
    def on_submitted(self, event: Input.Submitted) -> None:
        self.focus_next()

    def _validate(self) -> bool:
        result = build_source(self.original, self.texts)
        lines = [f"✗ {name}: {msg}" for name, msg in result.problems.items()]
        self.query_one("#source-problems", Static).update(lit_lines(lines))
        return result.ok

    def action_save(self) -> None:
        if not self._validate():
            return
        if self.original is not None and not self.texts:
            self.dismiss(None)
            return
        ds = self.tk.dataset
        original, texts = self.original, dict(self.texts)

        def done(saved: dict) -> None:
            self.tk.notify(f"saved source {printable(saved.get('id'))}", markup=False)
            self.tk.reload()
            self.dismiss(saved)

        def failed(exc: Exception) -> None:
            self.query_one("#source-problems", Static).update(lit(str(exc)))

        self.tk.run_disk(lambda: save_source(ds, original, texts), done, failed)

    def action_cancel(self) -> None:
        self.dismiss(None)
