"""The reaction calculator: type an equation, read ΔrH°, ΔrS°, ΔrG°(T), log10 K, ΔS of the surroundings
and of the universe, the verdict and where ΔrG° changes sign, each with its standard uncertainty.

Every figure comes from ``tablekeeper.thermo.reaction_properties`` (the call behind ``tablekeeper
reaction``) and is worded by ``tablekeeper.thermo.reaction_rows``, the rows the command prints. The
computation runs in a worker that ends in one ``ReactionComputed`` message; a message for an equation or
temperature that has changed since is dropped. A bad equation shows the core's sentence, never a
traceback. The caution sentence stays on screen.
"""

from __future__ import annotations

import math
import textwrap
from typing import ClassVar

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal
from textual.message import Message
from textual.widgets import Input, Label, Static

from ..errors import TablekeeperError
from ..text import printable
from ..thermo import CAUTION, T_REF, ReactionResult, parse_equation, reaction_properties, reaction_rows
from . import registry
from .literal import lit_lines
from .widgets import InfoBar, KeyLine, TkScreen

#: Kelvin per press of the step keys.
T_STEP = 100.0
LABEL_WIDTH = 16

HINT = ("Type an equation, species by id or formula(phase): CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l). "
        "'=', '->' and '→' all work; coefficients may be fractions (1/2). ctrl+o loads the dataset's "
        "measured reactions one after another.")


def step_temperature(T: float, direction: int, step: float = T_STEP) -> float:
    """The next temperature up (direction > 0) or down from T on the grid the ``table`` command uses:
    298.15 K and the multiples of ``step`` (leaving out a multiple closer than step/2 to 298.15 K, so
    one press from 298.15 K always moves by about a step). Never below the first multiple."""
    targets = [T_REF] + [k * step for k in range(1, int(max(T, T_REF) // step) + 3)
                         if abs(k * step - T_REF) >= step / 2]
    targets.sort()
    if direction > 0:
        return next((t for t in targets if t > T + 1e-9), T)
    below = [t for t in targets if t < T - 1e-9]
    return below[-1] if below else T


def result_lines(result: ReactionResult, width: int) -> list[str]:
    """The core's rows as text lines of at most ``width`` cells: label column, value wrapped under it."""
    lines: list[str] = []
    body = max(20, width - LABEL_WIDTH - 1)
    for label, value in reaction_rows(result):
        wrapped = textwrap.wrap(value, body) or [""]
        lines.append(f"{label:<{LABEL_WIDTH}} {wrapped[0]}")
        lines += [f"{'':<{LABEL_WIDTH}} {w}" for w in wrapped[1:]]
    return lines


class ReactionComputed(Message):
    """A reaction's result (or the sentence why there is none) for one equation at one temperature."""

    def __init__(self, key: tuple[str, str], result: ReactionResult | None, error: str | None) -> None:
        self.key = key
        self.result = result
        self.error = error
        super().__init__()


class ReactionScreen(TkScreen):
    """Reaction calculator. ↑/↓ (or page up/down) step T by 100 K; ctrl+t goes back to 298.15 K."""

    ENTRY = "reaction"
    IS_LIST = True
    CSS_PATH = "views.tcss"
    TITLE_TEXT = "Reaction"
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape", "back", "Back", id="reaction.back"),
        # Priority: the inputs would otherwise take the arrows (as scroll keys that do nothing here).
        Binding("up,pageup", "step_t(1)", "T+100 K", priority=True, id="reaction.t_up"),
        Binding("down,pagedown", "step_t(-1)", "T−100 K", priority=True, id="reaction.t_down"),
        Binding("ctrl+t", "reset_t", "298.15 K", id="reaction.t_ref"),
        Binding("ctrl+o", "next_reaction", "Dataset reaction", id="reaction.next"),
    ]

    def __init__(self, equation: str = "", temperature: float = T_REF) -> None:
        super().__init__()
        self.initial_equation = equation
        self.initial_temperature = temperature
        self.result: ReactionResult | None = None
        self.error: str | None = None
        self._key: tuple[str, str] = ("", "")
        self._species: object = None  # the species mapping the shown result was computed from

    def compose(self) -> ComposeResult:
        yield InfoBar()
        with Horizontal(classes="inputs"):
            yield Label("equation", markup=False)
            yield Input(value=self.initial_equation, placeholder="CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)",
                        id="equation", compact=True)
        with Horizontal(classes="inputs"):
            yield Label("T / K   ", markup=False)
            yield Input(value=f"{self.initial_temperature:g}", id="temperature", compact=True,
                        classes="short")
            yield Label("  ↑/↓ ±100 K, ctrl+t 298.15 K", markup=False)
        yield Static("", id="rx-result", markup=False)
        yield Static(CAUTION, id="rx-caution", markup=False)
        yield KeyLine()

    def on_mount(self) -> None:
        self.ready = True
        for inp in self.query(Input):
            inp.cursor_blink = False
        self.query_one("#equation", Input).focus()
        self.data_changed()

    # -- inputs ----------------------------------------------------------------------------------------

    @property
    def equation(self) -> str:
        return self.query_one("#equation", Input).value

    @property
    def temperature_text(self) -> str:
        return self.query_one("#temperature", Input).value

    def set_equation(self, text: str) -> None:
        self.query_one("#equation", Input).value = text  # Input.Changed recomputes

    def set_temperature(self, T: float) -> None:
        self.query_one("#temperature", Input).value = f"{T:g}"

    # -- computing -------------------------------------------------------------------------------------

    def data_changed(self) -> None:
        self.update_bar()
        if not self.ready:
            return
        snap = self.tk.snapshot
        if snap is not None and snap.species is not self._species:
            self.recompute()  # new records on disk: the figures may have changed

    def recompute(self) -> None:
        snap = self.tk.snapshot
        eq, t_text = self.equation, self.temperature_text
        self._key = (eq, t_text)
        if snap is None:
            self._show(None, "loading the dataset…")
            return
        if not eq.strip():
            self.result, self.error = None, None
            self._species = snap.species
            self._show(None, None)
            return
        try:
            T = float(t_text)
        except ValueError:
            self._show(None, f"the temperature {printable(t_text)[:40]!r} is not a number of kelvin")
            return
        species = snap.species
        key = self._key

        def work() -> None:
            try:
                res = reaction_properties(parse_equation(eq, species), species, T)
            except TablekeeperError as exc:
                self.post_message(ReactionComputed(key, None, str(exc)))
                return
            except Exception as exc:  # a fault in the engine must not take the app down
                why = f"the computation failed: {type(exc).__name__}: {exc}"
                self.post_message(ReactionComputed(key, None, why))
                return
            self.post_message(ReactionComputed(key, res, None))

        self._species = species
        self.run_worker(work, thread=True, exclusive=True, group="reaction", name="reaction")

    def on_reaction_computed(self, message: ReactionComputed) -> None:
        if message.key != self._key:
            return  # typed on since: a newer result is coming
        self._show(message.result, message.error)

    def _show(self, result: ReactionResult | None, error: str | None) -> None:
        self.result, self.error = result, error
        out = self.query_one("#rx-result", Static)
        width = max(40, (self.size.width or 80) - 2)
        if error:
            lines = textwrap.wrap(f"✗ {printable(error)}", width)
        elif result is None:
            lines = textwrap.wrap(HINT, width)
        else:
            lines = result_lines(result, width)
        out.update(lit_lines(lines))
        out.set_class(bool(error), "-problem")

    # -- events and actions ----------------------------------------------------------------------------

    @on(Input.Changed)
    def on_input_changed(self, event: Input.Changed) -> None:
        self.recompute()

    def _current_t(self) -> float:
        try:
            T = float(self.temperature_text)
        except ValueError:
            return T_REF
        return T if math.isfinite(T) and T > 0 else T_REF

    def action_step_t(self, direction: int) -> None:
        self.set_temperature(step_temperature(self._current_t(), direction))

    def action_reset_t(self) -> None:
        self.set_temperature(T_REF)

    def action_next_reaction(self) -> None:
        snap = self.tk.snapshot
        if snap is None:
            return
        eqs = [str(r.get("equation")) for _, r in sorted(snap.context.reactions.items())
               if isinstance(r, dict) and r.get("equation")]
        if not eqs:
            self.tk.notify("the dataset has no measured reactions", severity="warning", markup=False)
            return
        cur = self.equation
        # Shown literally in the input: control characters from a record become visible escapes.
        eqs = [printable(e) for e in eqs]
        self.set_equation(eqs[(eqs.index(cur) + 1) % len(eqs)] if cur in eqs else eqs[0])

    def action_back(self) -> None:
        self.dismiss()


registry.register(registry.ScreenEntry(
    "reaction", "Reaction", "6,f7", lambda app, species: ReactionScreen(),
    "the reaction calculator: ΔrH°, ΔrS°, ΔrG°(T), K, ΔS of the universe", ReactionScreen))
