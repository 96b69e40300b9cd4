"""Small widgets shared by the screens: the top bar and the base class of the app's screens."""

from __future__ import annotations

from typing import TYPE_CHECKING, cast

from textual.css.query import NoMatches
from textual.screen import Screen
from textual.widgets import Static

from .literal import lit

if TYPE_CHECKING:
    from .app import TablekeeperApp


class InfoBar(Static):
    """One line at the top of a screen: where you are, the dataset, the user and what is running."""

    def __init__(self, *, id: str | None = "bar") -> None:
        super().__init__("", id=id, markup=False)


def status_text(app: TablekeeperApp, where: str) -> str:
    snap = app.snapshot
    meta = app.dataset.meta
    parts = [where, str(meta.get("title") or meta.get("name") or app.dataset.root.name)]
    if snap is not None:
        parts.append(f"{len(snap.species)} species")
        if snap.report is not None:
            s = snap.report.summary
            parts.append(f"{s['error']} errors {s['warning']} warnings")
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
