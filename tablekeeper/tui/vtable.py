"""A virtual table: draws only the rows on screen, whatever the number of rows behind it.

The stock DataTable builds every row up front (seconds for 10k rows); this widget asks its owner for
the cells of a row only when that row is drawn (textual's line API: ``render_line`` returns a Strip).
Cells are plain strings made printable by the owner; they become Segments, which the terminal shows
literally, so data never passes through a markup parser here. A cursor move that does not scroll draws
only the two rows whose look changed.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import ClassVar

from rich.segment import Segment
from rich.style import Style
from textual import events
from textual.binding import Binding, BindingType
from textual.geometry import Region, Size
from textual.message import Message
from textual.reactive import reactive
from textual.scroll_view import ScrollView
from textual.strip import Strip

from .literal import fit


@dataclass(frozen=True)
class Column:
    """A column: key, header lines (one or two), width in cells, right-aligned or not."""

    key: str
    label: tuple[str, ...]
    width: int
    right: bool = False


RowFn = Callable[[int], Sequence[str]]
StyleFn = Callable[[int], str | None]


class VirtualTable(ScrollView, can_focus=True):
    """A scrolling table over ``count`` rows whose cells come from ``row_fn(i)``.

    Messages up: ``RowHighlighted`` when the cursor moves, ``RowSelected`` on Enter or a click on the
    current row, ``HeaderClicked`` for a click on a column title.
    """

    COMPONENT_CLASSES: ClassVar[set[str]] = {
        "vtable--header",
        "vtable--cursor",
        "vtable--error",
        "vtable--warning",
        "vtable--info",
        "vtable--group",
        "vtable--dim",
    }

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("up", "cursor(-1)", "Up", show=False, id="table.up"),
        Binding("down", "cursor(1)", "Down", show=False, id="table.down"),
        Binding("pageup", "page(-1)", "Page up", show=False, id="table.pageup"),
        Binding("pagedown", "page(1)", "Page down", show=False, id="table.pagedown"),
        Binding("home", "edge(0)", "First", show=False, id="table.home"),
        Binding("end", "edge(1)", "Last", show=False, id="table.end"),
        Binding("left", "pan(-8)", "Left", show=False, id="table.left"),
        Binding("right", "pan(8)", "Right", show=False, id="table.right"),
        Binding("enter", "select", "Open", id="table.select"),
    ]

    # No repaint by the reactive itself: watch_cursor decides what to draw again.
    cursor = reactive(0, always_update=True, init=False, repaint=False)

    class RowHighlighted(Message):
        def __init__(self, table: VirtualTable, row: int) -> None:
            self.table = table
            self.row = row
            super().__init__()

        @property
        def control(self) -> VirtualTable:
            return self.table

    class RowSelected(Message):
        def __init__(self, table: VirtualTable, row: int) -> None:
            self.table = table
            self.row = row
            super().__init__()

        @property
        def control(self) -> VirtualTable:
            return self.table

    class HeaderClicked(Message):
        def __init__(self, table: VirtualTable, key: str) -> None:
            self.table = table
            self.key = key
            super().__init__()

        @property
        def control(self) -> VirtualTable:
            return self.table

    def __init__(self, *, name: str | None = None, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)
        self.columns: list[Column] = []
        self.count = 0
        self._row_fn: RowFn = lambda i: ()
        self._style_fn: StyleFn | None = None
        self.header_marks: dict[str, str] = {}  # column key -> mark shown after its title (sort order)
        self.empty_text = ""
        self._pass_styles: dict[str, Style] | None = None

    # -- data ------------------------------------------------------------------------------------------

    @property
    def header_height(self) -> int:
        return max((len(c.label) for c in self.columns), default=0)

    @property
    def total_width(self) -> int:
        return sum(c.width for c in self.columns) + max(0, len(self.columns) - 1)

    def set_data(self, columns: Sequence[Column], count: int, row_fn: RowFn,
                 style_fn: StyleFn | None = None, cursor: int | None = None) -> None:
        """Show new rows. The cursor stays where it was (clamped) unless ``cursor`` is given."""
        self.columns = list(columns)
        self.count = count
        self._row_fn = row_fn
        self._style_fn = style_fn
        self.virtual_size = Size(self.total_width, count + self.header_height)
        new = self.cursor if cursor is None else cursor
        self.cursor = max(0, min(new, count - 1)) if count else 0
        self.refresh()

    # -- cursor and scrolling --------------------------------------------------------------------------

    @property
    def page_rows(self) -> int:
        return max(1, self.scrollable_content_region.height - self.header_height)

    def validate_cursor(self, value: int) -> int:
        return max(0, min(value, self.count - 1)) if self.count else 0

    def watch_cursor(self, old: int, new: int) -> None:
        top = self.scroll_offset.y
        self._scroll_cursor_into_view()
        if self.scroll_offset.y == top and old != new:
            # Only the two rows whose cursor style changed are drawn again (a whole page costs textual
            # about ten times as much, and sends that much more over a slow link).
            hh = self.header_height
            self.refresh_lines(old + hh)
            self.refresh_lines(new + hh)
        else:
            self.refresh()
        self.post_message(self.RowHighlighted(self, new))

    def _scroll_cursor_into_view(self) -> None:
        if not self.size.height:
            return  # not laid out yet: on_resize comes back here
        top = round(self.scroll_y)
        rows = self.page_rows
        if self.cursor < top:
            self.scroll_to(y=self.cursor, animate=False, force=True)
        elif self.cursor >= top + rows:
            self.scroll_to(y=self.cursor - rows + 1, animate=False, force=True)

    def action_cursor(self, step: int) -> None:
        self.cursor = self.cursor + step

    def action_page(self, direction: int) -> None:
        self.cursor = self.cursor + direction * self.page_rows

    def action_edge(self, end: int) -> None:
        self.cursor = self.count - 1 if end else 0

    def action_pan(self, step: int) -> None:
        self.scroll_to(x=max(0, self.scroll_x + step), animate=False)

    def action_select(self) -> None:
        if self.count:
            self.post_message(self.RowSelected(self, self.cursor))

    def on_click(self, event: events.Click) -> None:
        y = event.y
        if y < self.header_height:
            x = event.x + round(self.scroll_x)
            pos = 0
            for col in self.columns:
                if pos <= x < pos + col.width + 1:
                    self.post_message(self.HeaderClicked(self, col.key))
                    return
                pos += col.width + 1
            return
        row = round(self.scroll_y) + y - self.header_height
        if 0 <= row < self.count:
            if row == self.cursor:
                self.post_message(self.RowSelected(self, row))
            else:
                self.cursor = row

    def on_resize(self, event: events.Resize) -> None:
        self._scroll_cursor_into_view()

    # -- drawing ---------------------------------------------------------------------------------------

    def _style(self, name: str) -> Style:
        pass_styles = self._pass_styles
        if pass_styles is None:
            return self.get_component_rich_style(f"vtable--{name}")
        style = pass_styles.get(name)
        if style is None:
            style = pass_styles[name] = self.get_component_rich_style(f"vtable--{name}")
        return style

    def render_lines(self, crop: Region) -> list[Strip]:
        # Styles are looked up once per drawing pass, not once per line (each lookup walks the CSS).
        self._pass_styles = {"": self.rich_style}
        try:
            return super().render_lines(crop)
        finally:
            self._pass_styles = None

    def render_line(self, y: int) -> Strip:
        width = self.size.width
        scroll_x = self.scroll_offset.x
        base = self._pass_styles[""] if self._pass_styles is not None else self.rich_style
        hh = self.header_height
        if y < hh:
            style = base + self._style("header")
            cells = []
            for col in self.columns:
                lines = col.label
                text = lines[y - (hh - len(lines))] if y >= hh - len(lines) else ""
                if y == hh - 1 and col.key in self.header_marks:
                    text = f"{text}{self.header_marks[col.key]}"
                cells.append(fit(text, col.width, col.right and y == hh - 1))
            strip = Strip([Segment(" ".join(cells), style)])
            return strip.crop_extend(scroll_x, scroll_x + width, style)
        row = self.scroll_offset.y + y - hh
        if row >= self.count:
            if row == 0 and self.empty_text:
                dim = base + self._style("dim")
                return Strip([Segment(fit(self.empty_text, width), dim)]).crop_extend(0, width, dim)
            return Strip.blank(width, base)
        style = base
        kind = self._style_fn(row) if self._style_fn else None
        if kind:
            style = style + self._style(kind)
        if row == self.cursor:
            style = style + self._style("cursor")
        values = self._row_fn(row)
        if kind == "group":
            # A group heading spans the whole row.
            text = fit(values[0] if values else "", max(width, self.total_width))
        else:
            text = " ".join(fit(v, c.width, c.right) for v, c in zip(values, self.columns, strict=False))
        strip = Strip([Segment(text, style)])
        return strip.crop_extend(scroll_x, scroll_x + width, style)
