"""Modal dialogs: confirm, ask for a text (reason, comment, resolution), raise a flag.

Every dialog shows data through ``lit`` or ``markup=False`` widgets. Enter accepts, Escape cancels.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, ClassVar, cast

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.content import Content
from textual.screen import ModalScreen
from textual.widgets import Button, Checkbox, Input, Label, Select, Static

from ..editing import FieldChange, number_text
from ..flags import FLAGGABLE, raise_flag
from ..model import LABELS
from ..text import printable
from .literal import lit, lit_lines

if TYPE_CHECKING:
    from .app import TablekeeperApp


def value_text(v: object, present: bool = True) -> str:
    """A leaf value as shown in diffs: numbers in shortest round-trip form, text escaped."""
    if not present:
        return "(none)"
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int | float):
        return number_text(v)
    if isinstance(v, list):
        return "[" + ", ".join(value_text(x) for x in v) + "]"
    return printable(v)


class MarkCheckbox(Checkbox):
    """A checkbox whose state is a character, not a colour alone: ``[x]`` on, ``[ ]`` off (NO_COLOR).
    Defined here, beside the dialogs that use it, and offered to the other screens by ``views``."""

    @property
    def _button(self) -> Content:
        return Content.styled("[x]" if self.value else "[ ]", "bold")


def changes_lines(changes: Sequence[FieldChange]) -> list[str]:
    lines = [f"{c.field}: {value_text(c.old, c.old_present)} → {value_text(c.new, c.new_present)}"
             for c in changes]
    return lines or ["(no change)"]


class ConfirmDialog(ModalScreen[bool]):
    """Ask yes or no. y / Enter: yes; n / Escape: no."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("y", "answer(True)", "Yes", id="confirm.yes"),
        Binding("n,escape", "answer(False)", "No", id="confirm.no"),
    ]

    def __init__(self, title: str, body: Sequence[str]) -> None:
        super().__init__()
        self.title_text = title
        self.body = list(body)

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(lit(self.title_text), classes="dialog-title", markup=False)
            with VerticalScroll(classes="dialog-body"):
                yield Static(lit_lines(self.body), markup=False)
            with Horizontal(classes="buttons"):
                yield Button("Yes (y)", id="yes", variant="primary", compact=True)
                yield Button("No (n)", id="no", compact=True)

    def on_mount(self) -> None:
        self.query_one("#yes", Button).focus()

    def action_answer(self, yes: bool) -> None:
        self.dismiss(yes)

    @on(Button.Pressed)
    def on_button_pressed(self, event: Button.Pressed) -> None:
        self.dismiss(event.button.id == "yes")


class TextDialog(ModalScreen[str | None]):
    """Ask for one line of text (a save's reason, a comment, a resolution). Enter: accept; Escape: cancel.

    An empty answer is refused in place when ``required``.
    """

    BINDINGS: ClassVar[list[BindingType]] = [Binding("escape", "cancel", "Cancel", id="text.cancel")]

    def __init__(self, title: str, prompt: str, *, body: Sequence[str] = (), required: bool = True,
                 placeholder: str = "") -> None:
        super().__init__()
        self.title_text = title
        self.prompt = prompt
        self.body = list(body)
        self.required = required
        self.placeholder = placeholder

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(lit(self.title_text), classes="dialog-title", markup=False)
            if self.body:
                with VerticalScroll(classes="dialog-body"):
                    yield Static(lit_lines(self.body), markup=False)
            yield Label(self.prompt, markup=False)
            yield Input(placeholder=self.placeholder, id="answer", compact=True)
            yield Static("", id="problem", classes="msg -problem", markup=False)
            yield Static("Enter: accept   Escape: cancel", classes="hint", markup=False)

    def on_mount(self) -> None:
        inp = self.query_one("#answer", Input)
        inp.cursor_blink = False
        inp.focus()

    @on(Input.Submitted, "#answer")
    def on_answer(self, event: Input.Submitted) -> None:
        text = event.value.strip()
        if self.required and not text:
            self.query_one("#problem", Static).update(lit("an answer is needed (Escape cancels)"))
            return
        self.dismiss(text)

    def action_cancel(self) -> None:
        self.dismiss(None)


def _field_label(name: str) -> str:
    return f"{LABELS[name]} ({name})" if name in LABELS else name


class FlagDialog(ModalScreen[dict | None]):
    """Raise a flag on a value: field picker, note, blocking toggle. The flag is saved through
    ``tablekeeper.flags.raise_flag`` (one file per flag, journaled)."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape", "cancel", "Cancel", id="flag.cancel"),
        Binding("ctrl+s", "raise", "Raise", id="flag.raise"),
    ]

    def __init__(self, species: str, field: str | None = None) -> None:
        super().__init__()
        self.species = species
        self.field = field if field in FLAGGABLE else "record"

    @property
    def tk(self) -> TablekeeperApp:
        return cast("TablekeeperApp", self.app)

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(lit(f"Raise a flag on {self.species}"), classes="dialog-title", markup=False)
            with Horizontal(classes="row"):
                yield Label("field", classes="label", markup=False)
                yield Select([(_field_label(f), f) for f in FLAGGABLE], value=self.field, allow_blank=False,
                             id="field", compact=True)
            with Horizontal(classes="row"):
                yield Label("note", classes="label", markup=False)
                yield Input(placeholder="what looks wrong", id="note", compact=True)
            with Horizontal(classes="row"):
                yield Label("", classes="label", markup=False)
                yield MarkCheckbox("blocking (stops a release while open)", id="blocking", compact=True)
            yield Static("", id="problem", classes="msg -problem", markup=False)
            yield Static("Enter in the note or ctrl+s: raise   Escape: cancel", classes="hint", markup=False)

    def on_mount(self) -> None:
        note = self.query_one("#note", Input)
        note.cursor_blink = False
        note.focus()

    @on(Input.Submitted, "#note")
    def on_note_submitted(self, event: Input.Submitted) -> None:
        self.action_raise()

    def action_raise(self) -> None:
        field = self.query_one("#field", Select).value
        note = self.query_one("#note", Input).value
        blocking = self.query_one("#blocking", Checkbox).value
        if not note.strip():
            self.query_one("#problem", Static).update(lit("a flag needs a note saying what looks wrong"))
            return
        ds = self.tk.dataset

        def done(rec: dict) -> None:
            self.tk.notify(f"flag raised on {printable(self.species)} {printable(rec.get('field'))}",
                           markup=False)
            self.tk.reload()
            self.dismiss(rec)

        def failed(exc: Exception) -> None:
            self.query_one("#problem", Static).update(lit(str(exc)))

        self.tk.run_disk(lambda: raise_flag(ds, self.species, str(field), note, blocking=bool(blocking)),
                         done, failed)

    def action_cancel(self) -> None:
        self.dismiss(None)
