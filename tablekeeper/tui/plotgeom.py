"""Geometry of a plot drawn in character cells: axis ranges, tick values and labels, and the canvas.

Pure functions over numbers (numpy only, no textual), so that the scaling can be tested on its own. A
curve is drawn in braille dots (2 × 4 dots per cell, the finest grid a text terminal offers); the
validity range and range breaks are vertical rules, tabulated points are ``+`` and the record's own
values at 298.15 K (the anchors) are ``◆``. Every kind of cell has its own character, so the plot reads
the same without colour.

The numbers drawn come from the core (the screens call ``derived_table`` or ``CpModel.cp``); nothing
here computes a thermodynamic quantity.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

#: Cell kinds of a canvas (the widget styles each kind; the character alone carries the meaning).
KINDS = ("", "title", "axis", "label", "curve", "rule", "break", "point", "anchor")

ANCHOR = "◆"
POINT = "+"
RULE = "┊"
BREAK = "╎"

# Bit of each braille dot: (column, row) inside the 2 × 4 cell, per the Unicode braille pattern block.
_DOT_BITS = {(0, 0): 0x01, (0, 1): 0x02, (0, 2): 0x04, (1, 0): 0x08, (1, 1): 0x10, (1, 2): 0x20,
             (0, 3): 0x40, (1, 3): 0x80}
_BRAILLE = 0x2800


def nice_step(span: float, max_ticks: int) -> float:
    """The smallest step of the form 1, 2 or 5 × 10ⁿ that cuts ``span`` into at most ``max_ticks``
    intervals."""
    if not (span > 0 and math.isfinite(span)):
        return 1.0
    raw = span / max(1, max_ticks)
    mag = 10.0 ** math.floor(math.log10(raw))
    for m in (1.0, 2.0, 5.0, 10.0):
        if m * mag >= raw * (1 - 1e-12):
            return m * mag
    return 10.0 * mag


@dataclass(frozen=True)
class Axis:
    """An axis from ``lo`` to ``hi`` (both multiples of ``step``) with its tick values."""

    lo: float
    hi: float
    step: float
    ticks: tuple[float, ...]

    @property
    def decimals(self) -> int:
        return max(0, -math.floor(math.log10(self.step) + 1e-9)) if self.step < 1 else 0

    def text(self, value: float) -> str:
        """A tick label: as many decimals as the step needs, never ``-0``."""
        s = f"{value:.{self.decimals}f}"
        return s[1:] if s.startswith("-") and float(s) == 0 else s


def nice_axis(lo: float, hi: float, max_ticks: int = 5) -> Axis:
    """An axis covering [lo, hi] whose ends are multiples of a 1-2-5 step."""
    if not (math.isfinite(lo) and math.isfinite(hi)):
        raise ValueError("an axis needs finite ends")
    if hi < lo:
        lo, hi = hi, lo
    if hi - lo <= 1e-12 * max(1.0, abs(lo)):
        pad = abs(lo) * 0.05 or 1.0  # a flat curve still gets a visible band around it
        lo, hi = lo - pad, hi + pad
    step = nice_step(hi - lo, max_ticks)
    a = math.floor(lo / step + 1e-9) * step
    b = math.ceil(hi / step - 1e-9) * step
    n = round((b - a) / step)
    ticks = tuple(a + i * step for i in range(n + 1))
    return Axis(a, b, step, ticks)


@dataclass(frozen=True)
class Curve:
    """A curve through (x, y) points, drawn as connected braille dots."""

    x: np.ndarray
    y: np.ndarray


@dataclass(frozen=True)
class Mark:
    """A single symbol at (x, y): an anchor ``◆`` or a data point ``+``."""

    x: float
    y: float
    symbol: str = ANCHOR
    kind: str = "anchor"


@dataclass(frozen=True)
class Rule:
    """A vertical rule at x: the ends of the validity range (``┊``) or a range break (``╎``)."""

    x: float
    symbol: str = RULE
    kind: str = "rule"


@dataclass
class Canvas:
    """The plot as rows of characters, with the kind of every cell and the mapping from data to cells.

    Row 0 is the title, rows ``top``..``bottom - 1`` the plot area, the last row the x tick labels;
    columns before ``left`` hold the y tick labels and the y axis.
    """

    width: int
    height: int
    x_axis: Axis
    y_axis: Axis
    left: int
    top: int
    bottom: int
    chars: list[list[str]] = field(repr=False)
    kinds: list[list[str]] = field(repr=False)

    @property
    def dots_wide(self) -> int:
        return 2 * (self.width - self.left)

    @property
    def dots_high(self) -> int:
        return 4 * (self.bottom - self.top)

    def dot_x(self, x: float) -> int:
        span = self.x_axis.hi - self.x_axis.lo
        return round(float((x - self.x_axis.lo) / span * (self.dots_wide - 1)))

    def dot_y(self, y: float) -> int:
        span = self.y_axis.hi - self.y_axis.lo
        return round(float((self.y_axis.hi - y) / span * (self.dots_high - 1)))

    def col_of(self, x: float) -> int:
        """The cell column where x is drawn."""
        return self.left + self.dot_x(x) // 2

    def row_of(self, y: float) -> int:
        """The cell row where y is drawn."""
        return self.top + self.dot_y(y) // 4

    def rows(self) -> list[str]:
        return ["".join(r) for r in self.chars]

    def cells(self, kind: str) -> list[tuple[int, int]]:
        """(row, column) of every cell of a kind."""
        return [(r, c) for r in range(self.height) for c in range(self.width) if self.kinds[r][c] == kind]


def _extent(values: Sequence[np.ndarray], extra: Sequence[float]) -> tuple[float, float] | None:
    parts = [np.asarray(v, dtype=float).ravel() for v in values] + [np.asarray(extra, dtype=float)]
    allv = np.concatenate(parts) if parts else np.array([])
    allv = allv[np.isfinite(allv)]
    if allv.size == 0:
        return None
    return float(allv.min()), float(allv.max())


def layout(width: int, height: int, *, curves: Sequence[Curve] = (), marks: Sequence[Mark] = (),
           rules: Sequence[Rule] = (), title: str = "") -> Canvas | None:
    """Lay out a plot in ``width`` × ``height`` cells; None when there is nothing to draw or no room.

    The x axis spans the curves, marks and rules; the y axis the curves and marks. Both are widened to
    1-2-5 tick multiples, so every curve point, mark and rule lies inside the plot area.
    """
    if width < 12 or height < 4:
        return None
    xr = _extent([c.x for c in curves], [m.x for m in marks] + [r.x for r in rules])
    yr = _extent([c.y for c in curves], [m.y for m in marks])
    if xr is None or yr is None:
        return None
    plot_rows = height - 2
    y_axis = nice_axis(*yr, max_ticks=max(1, min(5, plot_rows // 2)))
    label_w = max(len(y_axis.text(t)) for t in y_axis.ticks)
    left = label_w + 1
    plot_cols = width - left
    if plot_cols < 6:
        return None
    x_axis = nice_axis(*xr, max_ticks=max(1, min(8, plot_cols // 7)))
    chars = [[" "] * width for _ in range(height)]
    kinds = [[""] * width for _ in range(height)]
    canvas = Canvas(width, height, x_axis, y_axis, left, 1, height - 1, chars, kinds)

    def put(row: int, col: int, ch: str, kind: str) -> None:
        if 0 <= row < height and 0 <= col < width:
            chars[row][col] = ch
            kinds[row][col] = kind

    for i, ch in enumerate(title[:width]):
        put(0, i, ch, "title")
    # The y axis and its labels.
    for row in range(canvas.top, canvas.bottom):
        put(row, label_w, "│", "axis")
    for t in y_axis.ticks:
        row = canvas.row_of(t)
        text = y_axis.text(t)
        for i, ch in enumerate(text.rjust(label_w)):
            put(row, i, ch, "label")
        put(row, label_w, "┤", "axis")
    # The x tick labels, centred under their column, dropped where they would overlap.
    free_from = left
    for t in x_axis.ticks:
        text = x_axis.text(t)
        start = min(max(canvas.col_of(t) - len(text) // 2, left), width - len(text))
        if start < free_from:
            continue
        for i, ch in enumerate(text):
            put(height - 1, start + i, ch, "label")
        free_from = start + len(text) + 1
    # Curves, in braille dots.
    bits = np.zeros((canvas.bottom - canvas.top, plot_cols), dtype=np.int32)

    def dot(dx: int, dy: int) -> None:
        if 0 <= dx < canvas.dots_wide and 0 <= dy < canvas.dots_high:
            bits[dy // 4, dx // 2] |= _DOT_BITS[(dx % 2, dy % 4)]

    for c in curves:
        x = np.asarray(c.x, dtype=float).ravel()
        y = np.asarray(c.y, dtype=float).ravel()
        prev: tuple[int, int] | None = None
        for xi, yi in zip(x, y, strict=True):
            if not (math.isfinite(xi) and math.isfinite(yi)):
                prev = None
                continue
            cur = (canvas.dot_x(xi), canvas.dot_y(yi))
            if prev is None:
                dot(*cur)
            else:
                steps = max(abs(cur[0] - prev[0]), abs(cur[1] - prev[1]), 1)
                for k in range(1, steps + 1):
                    dot(prev[0] + round((cur[0] - prev[0]) * k / steps),
                        prev[1] + round((cur[1] - prev[1]) * k / steps))
            prev = cur
    # Rules first, the curve over them, then points and anchors on top.
    for r in rules:
        col = canvas.col_of(r.x)
        for row in range(canvas.top, canvas.bottom):
            put(row, col, r.symbol, r.kind)
    for row in range(bits.shape[0]):
        for col in range(bits.shape[1]):
            if bits[row, col]:
                put(canvas.top + row, left + col, chr(_BRAILLE + int(bits[row, col])), "curve")
    for m in sorted(marks, key=lambda m: m.kind == "anchor"):
        put(canvas.row_of(m.y), canvas.col_of(m.x), m.symbol, m.kind)
    return canvas
