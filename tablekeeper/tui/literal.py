"""Text from data, made literal for the screen.

Textual reads a plain ``str`` as markup, and markup can carry actions (``[@click=app.quit]``) or break a
widget (``[/nope]``). Every string that comes from a dataset reaches the screen through ``lit`` (a
``Content`` built literally, never parsed) after ``tablekeeper.text.printable`` turned control characters
into visible escapes, or through a widget created with ``markup=False``.
"""

from __future__ import annotations

from collections.abc import Iterable

from rich.cells import cell_len, set_cell_size
from textual.content import Content

from ..text import printable


def lit(value: object, style: str = "") -> Content:
    """Literal content of a value: control characters escaped, markup never interpreted."""
    return Content.styled(printable(value), style) if style else Content(printable(value))


def lit_lines(lines: Iterable[object]) -> Content:
    """Several values, one per line: each escaped on its own (a newline inside data stays visible as
    an escape), joined by real line breaks."""
    return Content("\n".join(printable(line) for line in lines))


def join(parts: Iterable[Content | str], sep: str = "") -> Content:
    """Join literal pieces; plain ``str`` pieces are taken literally too (they are code, not data)."""
    return Content(sep).join(p if isinstance(p, Content) else Content(p) for p in parts)


def fit(text: str, width: int, right: bool = False) -> str:
    """``text`` padded or cut (with an ellipsis) to exactly ``width`` cells."""
    if width <= 0:
        return ""
    n = cell_len(text)
    if n > width:
        return set_cell_size(text, width - 1) + "…"
    pad = " " * (width - n)
    return pad + text if right else text + pad
