"""What the app holds of a dataset at one moment: a snapshot loaded in a worker, then checked.

A snapshot is read whole (records, frame, flags, sources) through the core's ``Context.load`` and then
never changed; a reload makes a new one. ``stamp`` is the dataset's fingerprint taken *before* reading,
so a change made while reading is noticed at the next poll.
"""

from __future__ import annotations

import time
from collections.abc import Mapping
from dataclasses import dataclass, field

from .. import jsonio
from ..checks import Context, Report, run
from ..errors import DamagedFileError
from ..model import FIELDS
from ..store import Dataset
from .species_model import SpeciesModel, marks_from


@dataclass
class Snapshot:
    stamp: tuple
    context: Context
    model: SpeciesModel
    load_seconds: float
    report: Report | None = None
    check_seconds: float | None = None
    problems: list[str] = field(default_factory=list)

    @property
    def species(self) -> dict[str, dict]:
        return self.context.species

    @property
    def flags(self) -> dict[str, dict]:
        return self.context.flags

    @property
    def sources(self) -> dict[str, dict]:
        return self.context.sources

    @property
    def meta(self) -> dict:
        return self.context.meta

    def findings_for(self, ident: str) -> list:
        return self.report.for_species(ident) if self.report else []

    def flags_for(self, ident: str) -> list[dict]:
        out = [f for f in self.flags.values() if isinstance(f, Mapping) and f.get("species") == ident]
        return sorted(out, key=lambda f: (f.get("status") != "open", str(f.get("raised_at", ""))))

    def citations(self, source: str) -> list[tuple[str, str]]:
        """(species, property) of every value citing a source, from the species frame."""
        fr = self.context.frame
        out: list[tuple[str, str]] = []
        for fld in FIELDS:
            col = fr[f"src_{fld}"]
            out.extend((str(ident), fld) for ident in col.index[col.to_numpy(dtype=object) == source])
        return sorted(out)


def load_snapshot(dataset: Dataset) -> Snapshot:
    """Read the dataset (meta, species, sources, reactions, flags) and build the table model."""
    t0 = time.perf_counter()
    stamp = dataset.stamp()
    problems: list[str] = []
    try:
        meta = jsonio.read(dataset.root / "dataset.json")
        if isinstance(meta, dict):
            dataset.meta = meta  # roles may have changed
    except DamagedFileError as exc:
        problems.append(str(exc))
    ctx = Context.load(dataset)
    model = SpeciesModel(ctx.frame, marks_from(None, ctx.flags))
    return Snapshot(stamp, ctx, model, time.perf_counter() - t0, problems=problems)


def check_snapshot(snapshot: Snapshot) -> Report:
    """Run the check catalogue over a snapshot's context (the same runner the command line uses)."""
    t0 = time.perf_counter()
    report = run(snapshot.context)
    snapshot.check_seconds = time.perf_counter() - t0
    return report
