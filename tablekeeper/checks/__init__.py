"""The check catalogue: the Finding type, the registry, the context the checks share, and the runner.

Each check family lives in its own module and registers itself with ``@check(id, summary)``. A check
receives the ``Context`` (the whole table as a DataFrame plus the raw records) and returns findings;
checks are written over whole columns, not as a loop per record, so that 100k species check in seconds.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from ..bulk import paused_gc
from ..model import species_frame
from ..store import Dataset, LoadReport

SEVERITIES = ("error", "warning", "info")
_RANK = {s: i for i, s in enumerate(SEVERITIES)}


@dataclass(frozen=True)
class Finding:
    """What one check found about one species and field."""

    check: str
    severity: str
    message: str
    species: str | None = None
    field: str | None = None
    observed: float | None = None
    expected: float | None = None
    tolerance: float | None = None
    suggestion: str | None = None

    def __post_init__(self) -> None:
        if self.severity not in _RANK:
            raise ValueError(f"severity must be one of {SEVERITIES}")
        if self.check not in CHECKS:
            raise ValueError(f"unknown check id {self.check!r}")
        for name in ("observed", "expected", "tolerance"):
            v = getattr(self, name)
            if v is not None and not isinstance(v, float):
                object.__setattr__(self, name, float(v))

    def to_json(self) -> dict[str, Any]:
        def num(v: float | None) -> float | None:
            return None if v is None or not math.isfinite(v) else v

        return {"check": self.check, "severity": self.severity, "species": self.species,
                "field": self.field, "message": self.message, "observed": num(self.observed),
                "expected": num(self.expected), "tolerance": num(self.tolerance),
                "suggestion": self.suggestion}

    @property
    def sort_key(self) -> tuple:
        return (_RANK[self.severity], self.check, self.species or "", self.field or "", self.message)


@dataclass(frozen=True)
class CheckSpec:
    id: str
    summary: str
    run: Callable[[Context], Iterable[Finding]]


CHECKS: dict[str, CheckSpec] = {}


def check(ident: str, summary: str) -> Callable:
    """Register a check function under its fixed id."""

    def deco(fn: Callable[[Context], Iterable[Finding]]) -> Callable:
        CHECKS[ident] = CheckSpec(ident, summary, fn)
        return fn

    return deco


@dataclass
class Context:
    """Everything a check may look at, loaded once."""

    meta: dict
    species: dict[str, dict]
    sources: dict[str, dict]
    reactions: dict[str, dict]
    flags: dict[str, dict]
    frame: pd.DataFrame
    damaged: list = field(default_factory=list)
    root: str | None = None
    dataset: Dataset | None = None

    @classmethod
    def from_records(cls, meta: dict, species: Mapping[str, dict], sources: Mapping[str, dict] | None = None,
                     reactions: Mapping[str, dict] | None = None, flags: Mapping[str, dict] | None = None,
                     damaged: list | None = None, root: str | None = None) -> Context:
        species = dict(species)
        return cls(meta=meta, species=species, sources=dict(sources or {}), reactions=dict(reactions or {}),
                   flags=dict(flags or {}), frame=species_frame(species), damaged=list(damaged or []),
                   root=root)

    @classmethod
    def load(cls, dataset: Dataset) -> Context:
        reports: dict[str, LoadReport] = {k: dataset.load_all(k)
                                          for k in ("species", "sources", "reactions", "flags")}
        damaged = [d for r in reports.values() for d in r.damaged]
        ctx = cls.from_records(dataset.meta, reports["species"].records, reports["sources"].records,
                               reports["reactions"].records, reports["flags"].records, damaged,
                               root=str(dataset.root))
        ctx.dataset = dataset
        return ctx


@dataclass
class Report:
    """The findings of one run, sorted, with a summary by severity."""

    dataset: str
    findings: list[Finding]

    @property
    def summary(self) -> dict[str, int]:
        out = dict.fromkeys(SEVERITIES, 0)
        for f in self.findings:
            out[f.severity] += 1
        return out

    def to_json(self) -> dict[str, Any]:
        return {"dataset": self.dataset, "summary": self.summary,
                "findings": [f.to_json() for f in self.findings]}

    def fails(self, fail_on: str) -> bool:
        s = self.summary
        if fail_on == "never":
            return False
        if fail_on == "warning":
            return s["error"] + s["warning"] > 0
        return s["error"] > 0

    def for_species(self, ident: str) -> list[Finding]:
        return [f for f in self.findings if f.species == ident]

    def rows(self) -> list[tuple]:
        """Flat rows (check, severity, species, field) for tests and tables."""
        return [(f.check, f.severity, f.species, f.field) for f in self.findings]


#: Modules of check families; importing one registers its checks, in catalogue order.
FAMILIES = ("basic", "consistency", "heat_capacity", "curation")


def _load_families() -> None:
    import importlib

    for name in FAMILIES:
        importlib.import_module(f"{__name__}.{name}")


def run(ctx: Context, only: Iterable[str] | None = None) -> Report:
    """Run the registered checks (or ``only`` those ids) over a context."""
    _load_families()
    wanted = set(only) if only else None
    findings: list[Finding] = []
    with paused_gc():  # the checks build many long-lived objects over a large heap (tablekeeper.bulk)
        for spec in CHECKS.values():
            if wanted is not None and spec.id not in wanted:
                continue
            findings.extend(spec.run(ctx))
    findings.sort(key=lambda f: f.sort_key)
    name = ctx.meta.get("name") if isinstance(ctx.meta, dict) else None
    return Report(dataset=str(name or ctx.root or "?"), findings=findings)


def check_dataset(dataset: Dataset, only: Iterable[str] | None = None) -> Report:
    return run(Context.load(dataset), only)
