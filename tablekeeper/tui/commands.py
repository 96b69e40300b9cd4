"""Command palette: ``Species: Go to …`` finds a species by id, formula or name.

Hits are built as rich ``Text`` objects: the palette parses any other prompt as markup, and a formula
such as ``K4[Fe(CN)6]`` or a hostile name must appear exactly as stored. The search is a substring
match over the loaded species (not fuzzy: 10k candidates per key press would be slow), exact and prefix
matches first, at most ``MAX_HITS`` shown.
"""

from __future__ import annotations

from functools import partial

from rich.text import Text
from textual.command import DiscoveryHit, Hit, Hits, Provider

from ..model import display_name
from ..text import printable

MAX_HITS = 40


class SpeciesCommands(Provider):
    """Species: Go to … (by id, formula or name)."""

    def _label(self, ident: str, rec: dict) -> Text:
        name = rec.get("name")
        label = Text("Species: Go to ", style="bold")
        label.append(printable(ident))
        label.append(f"  {printable(display_name(rec))}")
        if isinstance(name, str) and name:
            label.append(f"  {printable(name)}", style="dim")
        return label

    async def search(self, query: str) -> Hits:
        app = self.app
        snap = getattr(app, "snapshot", None)
        if snap is None:
            return
        q = query.strip().lower()
        for prefix in ("species:", "go to", "go"):
            if q.startswith(prefix):
                q = q[len(prefix):].strip()
        if not q:
            return
        scored: list[tuple[float, str]] = []
        for ident, rec in snap.species.items():
            formula = str(rec.get("formula", "")).lower()
            name = str(rec.get("name", "") or "").lower()
            if ident == q or formula == q:
                score = 1.0
            elif ident.startswith(q) or formula.startswith(q):
                score = 0.8
            elif q in ident or q in formula:
                score = 0.6
            elif q in name:
                score = 0.4
            else:
                continue
            scored.append((score, ident))
        scored.sort(key=lambda t: (-t[0], t[1]))
        for score, ident in scored[:MAX_HITS]:
            rec = snap.species[ident]
            label = self._label(ident, rec)
            yield Hit(score, label, partial(app.open_record, ident), text=label.plain)

    async def discover(self) -> Hits:
        snap = getattr(self.app, "snapshot", None)
        ident = getattr(self.app, "current_species", None)
        if snap is not None and ident in snap.species:
            label = self._label(ident, snap.species[ident])
            yield DiscoveryHit(label, partial(self.app.open_record, ident), text=label.plain)
