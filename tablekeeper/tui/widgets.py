"""Small widgets shared by the screens: the top bar and the base class of the app's screens."""

from __future__ import annotations

from typing import TYPE_CHECKING, cast

from textual.content import Content
from textual.css.query import NoMatches
from textual.screen import Screen
from textual.widgets import Static

from .literal import lit

if TYPE_CHECKING:
    from .app import TablekeeperApp


class KeyLine(Static):
    """The footer: the keys that work now, one line. Rebuilt as one Content when the bindings change
    (the stock Footer recomposes a widget per key on every focus change, which costs tenths of a second
    per key press on a slow machine and redraws more over SSH)."""

    def __init__(self) -> None:
        super().__init__("", id="keys", markup=False)

    def on_mount(self) -> None:
        self.screen.bindings_updated_signal.subscribe(self, self._changed)
        self._changed(self.screen)

    def on_unmount(self) -> None:
        self.screen.bindings_updated_signal.unsubscribe(self)

    def _changed(self, screen: Screen) -> None:
        if screen is not self.screen:
            return
        seen: set[str] = set()
        parts: list[Content] = []
        for _node, binding, enabled, _tip in screen.active_bindings.values():
            if not binding.show or not enabled or binding.action in seen:
                continue
            seen.add(binding.action)
            key = self.app.get_key_display(binding)
            parts.append(Content.assemble((key, "bold reverse"), f" {binding.description}"))
        parts.append(Content.assemble(("^p", "bold reverse"), " palette"))
        self.update(Content("  ").join(parts))


class InfoBar(Static):
    """One line at the top of a screen: where you are, the dataset, the user and what is running."""

    def __init__(self, *, id: str | None = "bar") -> None:
        super().__init__("", id=id, markup=False)


def status_text(app: TablekeeperApp, where: str) -> str:
    snap = app.snapshot
    meta = app.dataset.meta
    # The short name: a title would push the counts off an 80-column line.
    parts = [where, str(meta.get("name") or app.dataset.root.name)]
    if snap is not None:
        parts.append(f"{len(snap.species)} species")
        if snap.report is not None:
            s = snap.report.summary
            parts.append(f"{s['error']} error{'s' if s['error'] != 1 else ''} "
                         f"{s['warning']} warning{'s' if s['warning'] != 1 else ''}")
    parts.append(f"{app.user} ({app.role_text()})")
    if app.loading:
        parts.append("loading…")
    elif app.checking:
        parts.append("checking…")
    if app.load_error:
        parts.append("load failed")
    return " · ".join(parts)


class TkScreen(Screen):
    """Base of the app's screens: a typed ``app``, a top bar, and ``data_changed`` called by the app when
    a new snapshot or check report is in."""

    TITLE_TEXT = ""
    #: Set when the screen's widgets are mounted and ``data_changed`` may query them.
    ready = False

    @property
    def tk(self) -> TablekeeperApp:
        return cast("TablekeeperApp", self.app)

    def update_bar(self) -> None:
        try:
            bar = self.query_one("#bar", InfoBar)
        except NoMatches:  # not composed yet
            return
        bar.update(lit(status_text(self.tk, self.TITLE_TEXT)))

    def data_changed(self) -> None:
        self.update_bar()
