"""The help screen: every binding of the app and of each screen, generated from their BINDINGS.

A screen added through ``registry.register`` appears here with its keys without any edit of this file.
"""

from __future__ import annotations

from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import VerticalScroll
from textual.widgets import Static

from . import registry
from .literal import lit_lines
from .widgets import InfoBar, KeyLine, TkScreen

INTRO = """\
tablekeeper keeps a thermochemical table honest. Keys work in every terminal: letters, digits, F-keys,
arrows and ctrl+letter. ctrl+p opens the command palette ("Species: Go to …" finds a species by id,
formula or name).

Species table marks: E error, W warning, i info (worst finding of the species); F an open flag,
! an open blocking flag. Numbers are shown exactly as stored (shortest form that reads back the same).
In an editor, type a value with its unit ("-68.3 kcal/mol"): it is converted to the canonical unit
and what you typed is kept as the entered value."""


def _binding_lines(bindings: list, title: str) -> list[str]:
    lines = [title]
    for b in bindings:
        if not isinstance(b, Binding) or not b.description:
            continue
        keys = ", ".join(k.strip().replace("question_mark", "?").replace("slash", "/")
                         for k in b.key.split(","))
        lines.append(f"  {keys:<18} {b.description}")
    return lines


def help_text() -> str:
    from .app import TablekeeperApp
    from .conflict_screen import ConflictScreen
    from .dialogs import ConfirmDialog, FlagDialog, TextDialog
    from .record_screen import FieldTable, RecordScreen
    from .sources_screen import SourceDialog
    from .vtable import VirtualTable

    sections: list[tuple[str, list]] = [
        ("Everywhere", [*TablekeeperApp.BINDINGS, Binding("ctrl+p", "command_palette", "Command palette")]),
        ("Tables", list(VirtualTable.BINDINGS)),
    ]
    for entry in registry.SCREENS.values():
        if entry.screen_class is not None:
            sections.append((f"{entry.title} ({entry.keys.replace(',', ', ')})",
                             list(getattr(entry.screen_class, "BINDINGS", []))))
    sections += [
        ("Record and editor (Enter on a species)", [*FieldTable.BINDINGS, *RecordScreen.BINDINGS]),
        ("Save conflict", list(ConflictScreen.BINDINGS)),
        ("Flag dialog", list(FlagDialog.BINDINGS)),
        ("Source editor", list(SourceDialog.BINDINGS)),
        ("Questions", list(ConfirmDialog.BINDINGS) + list(TextDialog.BINDINGS)),
    ]
    lines = [INTRO, ""]
    for title, bindings in sections:
        lines += _binding_lines(bindings, title)
        lines.append("")
    return "\n".join(lines)


class HelpScreen(TkScreen):
    """Every key binding, by screen."""

    TITLE_TEXT = "Help"
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape,f1,question_mark", "back", "Back", id="help.back"),
    ]

    def compose(self) -> ComposeResult:
        yield InfoBar()
        with VerticalScroll(id="help"):
            yield Static(lit_lines(help_text().split("\n")), markup=False)
        yield KeyLine()

    def on_mount(self) -> None:
        self.query_one("#help", VerticalScroll).focus()
        self.update_bar()

    def action_back(self) -> None:
        self.dismiss()
