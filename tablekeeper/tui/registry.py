"""The screens the app can show by key, and where further screens plug in.

A screen module registers a ``ScreenEntry``; the app turns every entry into a binding (id
``screen.<name>``), a command-palette command and a line of the help screen. Modules named in
``EXTENSIONS`` are imported when present, so a new screen (plots, reactions, release, ...) needs no
edit of the app: write the module, call ``register`` at import, add its name here.
"""

from __future__ import annotations

import importlib
from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from textual.screen import Screen

#: Optional screen modules, imported if they exist.
EXTENSIONS: tuple[str, ...] = (
    "tablekeeper.tui.plot_screen",
    "tablekeeper.tui.reaction_screen",
    "tablekeeper.tui.release_screen",
    "tablekeeper.tui.thermo_screen",
    "tablekeeper.tui.fit_screen",
    "tablekeeper.tui.reactions_screen",
)


@dataclass(frozen=True)
class ScreenEntry:
    """A screen reachable by key.

    ``factory(app, species)`` builds it; ``species`` is the species the user is on (the table's
    highlighted row or the open record), or None.
    """

    name: str
    title: str
    keys: str  # comma-separated, keys every terminal delivers (digits, F-keys)
    factory: Callable[[Any, str | None], Screen | None]
    description: str = ""
    screen_class: type | None = None  # its BINDINGS are listed on the help screen


SCREENS: dict[str, ScreenEntry] = {}


def register(entry: ScreenEntry) -> ScreenEntry:
    SCREENS[entry.name] = entry
    return entry


def load_extensions() -> None:
    for name in EXTENSIONS:
        try:
            importlib.import_module(name)
        except ModuleNotFoundError as exc:
            if exc.name != name:  # a missing dependency inside a present module is a real error
                raise
