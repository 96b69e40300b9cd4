"""What the app holds of a dataset at one moment: a snapshot loaded in a worker, then checked.

A snapshot is read whole (records, frame, flags, sources) through the core's ``Context.load`` and then
never changed; a reload makes a new one. ``stamp`` is the dataset's fingerprint taken *before* reading,
so a change made while reading is noticed at the next poll.
"""

from __future__ import annotations

import gc
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
    _findings_index: tuple[Report, dict[str, list]] | None = field(default=None, repr=False, compare=False)
    _flags_index: dict[str, list[dict]] | None = field(default=None, repr=False, compare=False)

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
        """The report's findings on one species, in report order.

        The table asks on every cursor move: an index by species, built once per report, answers in
        constant time instead of a scan of every finding (thousands at 100k species).
        """
        report = self.report
        if report is None:
            return []
        if self._findings_index is None or self._findings_index[0] is not report:
            index: dict[str, list] = {}
            for f in report.findings:
                if f.species:
                    index.setdefault(f.species, []).append(f)
            self._findings_index = (report, index)
        return list(self._findings_index[1].get(ident, ()))

    def flags_for(self, ident: str) -> list[dict]:
        """Flags on one species, open ones first, then by when raised (index built once: the snapshot's
        flags never change)."""
        if self._flags_index is None:
            index: dict[str, list[dict]] = {}
            for f in self.flags.values():
                if isinstance(f, Mapping) and isinstance(f.get("species"), str):
                    index.setdefault(f["species"], []).append(f)
            self._flags_index = index
        out = self._flags_index.get(ident, [])
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
    if gc.get_freeze_count():
        # A reload: give what the last freeze held back to the collector and reclaim the app's garbage
        # since (closed screens hold reference cycles), so memory stays bounded over a long session.
        # This pass sees the previous snapshot: a pause at the start of a reload (about 0.6 s at 100k
        # species, in this worker), chosen over the same pause at an arbitrary key press.
        gc.unfreeze()
        gc.collect()
    ctx = Context.load(dataset)
    model = SpeciesModel(ctx.frame, marks_from(None, ctx.flags))
    _freeze()
    return Snapshot(stamp, ctx, model, time.perf_counter() - t0, problems=problems)


def check_snapshot(snapshot: Snapshot) -> Report:
    """Run the check catalogue over a snapshot's context (the same runner the command line uses)."""
    t0 = time.perf_counter()
    report = run(snapshot.context)
    _freeze()
    snapshot.check_seconds = time.perf_counter() - t0
    return report


def _freeze() -> None:
    """Move every object alive now out of the cyclic garbage collector's sight.

    A snapshot of 100k species is millions of objects; the collector's first full pass over them came at
    an arbitrary later moment (a key press) and stopped the app for over half a second. A snapshot holds
    no reference cycles, so when a reload replaces it, reference counting still frees it whole (a test
    proves it); frozen objects are only skipped by the cycle collector, never kept alive by it.
    """
    gc.freeze()
