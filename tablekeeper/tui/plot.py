"""A plot widget drawn in character cells (braille dots for curves), over ``plotgeom``'s layout.

The owner hands down what to draw (``show``) or a sentence instead (``say``); the widget lays the plot
out for its current size (cached until the size or the data change) and draws it line by line as
Segments, so nothing passes through a markup parser. Each kind of cell has its own component class for
colour; the characters alone already tell a curve, a rule, a point and an anchor apart (NO_COLOR).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import ClassVar

from rich.segment import Segment
from rich.style import Style
from textual.strip import Strip
from textual.widget import Widget

from ..text import printable
from .literal import fit
from .plotgeom import Canvas, Curve, Mark, Rule, layout


class PlotView(Widget):
    """A Cp(T) or S(T) plot: curves, rules at the validity range and breaks, points and anchors."""

    COMPONENT_CLASSES: ClassVar[set[str]] = {
        "plot--title", "plot--axis", "plot--label", "plot--curve", "plot--rule", "plot--break",
        "plot--point", "plot--anchor", "plot--message",
    }

    DEFAULT_CSS = """
    PlotView { height: 1fr; min-height: 5; }
    PlotView > .plot--title { text-style: bold; }
    PlotView > .plot--axis { text-style: dim; }
    PlotView > .plot--label { text-style: dim; }
    PlotView > .plot--curve { color: $accent; }
    PlotView > .plot--rule { color: $warning; }
    PlotView > .plot--break { text-style: dim; }
    PlotView > .plot--point { text-style: bold; }
    PlotView > .plot--anchor { color: $error; text-style: bold; }
    PlotView > .plot--message { text-style: italic; }
    """

    def __init__(self, *, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes)
        self.title = ""
        self.curves: tuple[Curve, ...] = ()
        self.marks: tuple[Mark, ...] = ()
        self.rules: tuple[Rule, ...] = ()
        self.message = ""
        self._canvas: Canvas | None = None
        self._canvas_size: tuple[int, int] | None = None

    # -- data (attributes go down) ---------------------------------------------------------------------

    def show(self, title: str, curves: Sequence[Curve], marks: Sequence[Mark] = (),
             rules: Sequence[Rule] = ()) -> None:
        self.title = title
        self.curves, self.marks, self.rules = tuple(curves), tuple(marks), tuple(rules)
        self.message = ""
        self._canvas_size = None
        self.refresh()

    def say(self, title: str, message: str) -> None:
        """Show a sentence (from data or the core: made printable) in place of a plot."""
        self.title = title
        self.curves, self.marks, self.rules = (), (), ()
        self.message = printable(message)
        self._canvas_size = None
        self.refresh()

    @property
    def canvas(self) -> Canvas | None:
        """The layout for the current size (None when there is nothing to draw or no room)."""
        size = (self.size.width, self.size.height)
        if self._canvas_size != size:
            self._canvas = None if self.message else layout(
                size[0], size[1], curves=self.curves, marks=self.marks, rules=self.rules, title=self.title)
            self._canvas_size = size
        return self._canvas

    # -- drawing ---------------------------------------------------------------------------------------

    def _style(self, kind: str) -> Style:
        return self.rich_style + self.get_component_rich_style(f"plot--{kind}") if kind else self.rich_style

    def render_line(self, y: int) -> Strip:
        width = self.size.width
        canvas = self.canvas
        if canvas is None:
            if y == 0:
                return Strip([Segment(fit(self.title, width), self._style("title"))])
            if y == 1:
                text = self.message or ("nothing to plot" if not self.curves else "too small to plot")
                return Strip([Segment(fit(text, width), self._style("message"))])
            return Strip.blank(width, self.rich_style)
        if y >= canvas.height:
            return Strip.blank(width, self.rich_style)
        chars, kinds = canvas.chars[y], canvas.kinds[y]
        segments: list[Segment] = []
        start = 0
        for x in range(1, canvas.width + 1):
            if x == canvas.width or kinds[x] != kinds[start]:
                segments.append(Segment("".join(chars[start:x]), self._style(kinds[start])))
                start = x
        return Strip(segments).crop_extend(0, width, self.rich_style)
