"""What changed between two states of a table: datasets, bundles (folder or .tar.gz) or ``git:REV``.

Both sides are reduced to the rows a release would write (species, values, cp_models, sources), so a
dataset and a bundle compare like with like, in either order. The result lists species added, removed
and changed, value by value, with each change of a value given as new − old and in units of its
standard uncertainty (u of the new value, else of the old one), and suggests the version bump
(major: species removed or the bundle format changed; minor: species added; patch: values or other
fields corrected). The same result renders as text (``tablekeeper diff``), as JSON, and as the
Markdown of a release's ``CHANGES.md``.
"""

from __future__ import annotations

import os
import re
import shutil
import tempfile
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass, field
from decimal import Decimal
from pathlib import Path
from typing import Any

from ..errors import InputError
from ..model import FIELDS, LABELS
from ..store import Dataset
from . import gitsrc
from .tables import TABLES, Row, cp_model_rows, source_rows, species_rows, values_rows
from .verify import is_archive, load_verified

#: Species columns compared (the rest of species.csv is derived from these and from values.csv).
ATTRIBUTES = ("formula", "phase", "form", "charge", "name", "status", "reference_state", "cas")
_DIFF_TABLES = ("species", "values", "cp_models", "sources")
BUMPS = ("none", "patch", "minor", "major")
_VERSION = re.compile(r"(0|[1-9][0-9]{0,5})\.(0|[1-9][0-9]{0,5})\.(0|[1-9][0-9]{0,5})")


@dataclass
class Snapshot:
    """One side of a diff: the release rows of a dataset or a bundle."""

    label: str
    version: str | None
    species: dict[str, Row]
    values: dict[tuple[str, str], Row]
    cp_models: dict[str, list[Row]]
    sources: dict[str, Row]
    columns: dict[str, tuple[str, ...]] = field(
        default_factory=lambda: {t.name: tuple(t.header) for t in TABLES})

    @classmethod
    def from_rows(cls, label: str, version: str | None, rows: Mapping[str, list[Row]],
                  columns: dict[str, tuple[str, ...]] | None = None) -> Snapshot:
        cp: dict[str, list[Row]] = {}
        for r in rows["cp_models"]:
            cp.setdefault(r["species"], []).append(r)
        snap = cls(label=label, version=version, species={r["id"]: r for r in rows["species"]},
                   values={(r["species"], r["property"]): r for r in rows["values"]}, cp_models=cp,
                   sources={r["id"]: r for r in rows["sources"]})
        if columns is not None:
            snap.columns = columns
        return snap

    @classmethod
    def from_records(cls, label: str, species: Mapping[str, Mapping], sources: Mapping[str, Mapping],
                     version: str | None = None) -> Snapshot:
        rows = {"species": species_rows(species), "values": values_rows(species),
                "cp_models": cp_model_rows(species), "sources": source_rows(sources)}
        return cls.from_rows(label, version, rows)

    def display(self, ident: str) -> str:
        r = self.species.get(ident) or {}
        form = f", {r['form']}" if r.get("form") else ""
        return f"{r.get('formula') or '?'}({r.get('phase') or '?'}{form})"


def snapshot_of_dataset(dataset: Dataset, label: str | None = None) -> Snapshot:
    """A dataset's release rows; a damaged record file makes the diff impossible (InputError)."""
    sp = dataset.load_all("species")
    src = dataset.load_all("sources")
    damaged = sp.damaged + src.damaged
    if damaged:
        raise InputError(f"cannot be compared: {damaged[0]}", file=str(dataset.root))
    return Snapshot.from_records(label or str(dataset.root), sp.records, src.records)


def snapshot_of_bundle(path: Path, *, light: bool = False) -> Snapshot:
    """A verified bundle's rows (DamagedFileError when it does not verify). ``light``: see
    verify.verify_folder; only for a bundle whose digest matched its release record."""
    report = load_verified(path, keep=_DIFF_TABLES, light=light)
    desc = report.descriptor or {}
    columns = {r["name"]: tuple(f["name"] for f in r.get("schema", {}).get("fields", []))
               for r in desc.get("resources", []) if "schema" in r}
    return Snapshot.from_rows(str(path), report.version, report.rows, columns)


@contextmanager
def open_side(spec: str, other: str | None = None) -> Iterator[Snapshot]:
    """The snapshot named by a command-line operand: a dataset folder, a bundle folder or archive, or
    ``git:REV`` (the dataset of the other operand, else of the current folder, as it stood at REV)."""
    if spec.startswith("git:"):
        rev = spec[4:]
        named = other is not None and not other.startswith("git:") and _is_dataset(Path(other))
        base = Path(other) if named and other is not None else Path.cwd()
        if not _is_dataset(base):
            raise InputError(f"{spec} needs a dataset: give one as the other operand or run in its folder")
        tmp = Path(tempfile.mkdtemp(prefix="tablekeeper-git-"))
        try:
            commit = gitsrc.export_dataset(rev, base.resolve(), tmp / "dataset")
            yield snapshot_of_dataset(Dataset(tmp / "dataset"), label=f"git:{rev} ({commit[:12]})")
        finally:
            shutil.rmtree(tmp, ignore_errors=True)
        return
    path = Path(spec)
    if _is_dataset(path):
        yield snapshot_of_dataset(Dataset(path), label=spec)
    elif (path.is_dir() and (path / "datapackage.json").exists()) or (path.is_file() and is_archive(path)):
        yield snapshot_of_bundle(path)
    elif not path.exists():
        raise InputError("does not exist", file=spec)
    else:
        raise InputError("is neither a dataset, a bundle folder nor a bundle archive (.tar.gz)", file=spec)


def _is_dataset(path: Path) -> bool:
    return (path / "dataset.json").is_file()


# -- the comparison --------------------------------------------------------------------------------------

def _unit(unit: str | None) -> str:
    return (unit or "").replace("*", "·")


def num(v: float | None) -> str:
    """A number as shown in a change: shortest round-trip digits, a true minus sign."""
    if v is None:
        return "—"
    text = repr(float(v))
    if text.endswith(".0"):
        text = text[:-2]
    return text.replace("-", "−") if text.startswith("-") else text


def decimal_delta(old: float, new: float) -> str:
    """new − old on the digits as written (−74.87 − (−74.6) is −0.27, not −0.27000000000000313)."""
    d = Decimal(repr(float(new))) - Decimal(repr(float(old)))
    text = format(d, "f")
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    if text in ("-0", ""):
        text = "0"
    return ("+" + text) if not text.startswith("-") and text != "0" else text


def _std_u(row: Row | None) -> float | None:
    if not row or row.get("uncertainty") is None:
        return None
    k = row.get("coverage") or 1.0
    return row["uncertainty"] / k if k > 0 else None


@dataclass(frozen=True)
class Change:
    """One changed field of one species."""

    kind: str  # value | uncertainty | source | method | attribute | cp_model
    field: str
    old: Any = None
    new: Any = None
    unit: str | None = None
    delta: str | None = None  # new − old as signed decimal text with ASCII signs ("-0.27", "+1.5")
    u: float | None = None  # standard uncertainty the change is measured in
    in_u: float | None = None  # |new − old| / u

    def text(self) -> str:
        label = LABELS.get(self.field, self.field)
        unit = _unit(self.unit)
        if self.kind == "value":
            if self.old is None:
                return f"{label} added: {num(self.new)} {unit}"
            if self.new is None:
                return f"{label} removed (was {num(self.old)} {unit})"
            scale = f"{self.in_u:.1f} u" if self.in_u is not None else "no uncertainty given"
            delta = (self.delta or "").replace("-", "−")
            return f"{label} {num(self.old)} → {num(self.new)} {unit} ({delta}, {scale})"
        if self.kind == "uncertainty":
            return f"uncertainty of {label} {self.old} → {self.new} {unit}".rstrip()
        if self.kind in ("source", "method"):
            return f"{self.kind} of {label} {self.old or '—'} → {self.new or '—'}"
        if self.kind == "cp_model":
            return f"Cp model {self.old or 'none'} → {self.new or 'none'}"
        return f"{self.field} {_shown(self.old)} → {_shown(self.new)}"

    def to_json(self) -> dict[str, Any]:
        out = {"kind": self.kind, "field": self.field, "old": self.old, "new": self.new}
        for k in ("unit", "delta", "u", "in_u"):
            if getattr(self, k) is not None:
                out[k] = getattr(self, k)
        return out


def _shown(v: Any) -> str:
    if v is None:
        return "—"
    if isinstance(v, bool):
        return "true" if v else "false"
    return str(v)


@dataclass
class SpeciesChanges:
    species: str
    label: str
    changes: list[Change]


@dataclass
class Diff:
    """The difference between two snapshots."""

    old: str
    new: str
    old_version: str | None
    new_version: str | None
    added: list[tuple[str, str]] = field(default_factory=list)
    removed: list[tuple[str, str]] = field(default_factory=list)
    changed: list[SpeciesChanges] = field(default_factory=list)
    sources_added: list[str] = field(default_factory=list)
    sources_removed: list[str] = field(default_factory=list)
    sources_changed: list[str] = field(default_factory=list)
    schema_changes: list[str] = field(default_factory=list)

    @property
    def bump(self) -> str:
        if self.removed or self.schema_changes:
            return "major"
        if self.added:
            return "minor"
        if self.changed or self.sources_added or self.sources_removed or self.sources_changed:
            return "patch"
        return "none"

    @property
    def bump_reason(self) -> str:
        if self.bump == "major":
            if self.removed and self.schema_changes:
                return "species removed and the bundle format changed"
            return "species removed" if self.removed else "the bundle format changed"
        return {"minor": "species added", "patch": "values or other fields corrected",
                "none": "nothing changed"}[self.bump]

    @property
    def suggested_version(self) -> str | None:
        return next_version(self.old_version, self.bump) if self.old_version else None

    @property
    def empty(self) -> bool:
        return self.bump == "none"

    def to_json(self) -> dict[str, Any]:
        return {
            "old": self.old, "new": self.new,
            "old_version": self.old_version, "new_version": self.new_version,
            "added": [{"species": i, "label": lab} for i, lab in self.added],
            "removed": [{"species": i, "label": lab} for i, lab in self.removed],
            "changed": [{"species": c.species, "label": c.label, "changes": [x.to_json() for x in c.changes]}
                        for c in self.changed],
            "sources": {"added": self.sources_added, "removed": self.sources_removed,
                        "changed": self.sources_changed},
            "schema_changes": self.schema_changes,
            "bump": self.bump, "suggested_version": self.suggested_version,
        }

    def text(self) -> str:
        """Plain text for the command line (data text not yet made printable: the face does that)."""
        counts = f"{len(self.added)} added, {len(self.removed)} removed, {len(self.changed)} changed"
        lines = [f"{self.old} → {self.new}", f"species: {counts}"]
        for ident, label in self.added:
            lines.append(f"+ {ident} {label}")
        for ident, label in self.removed:
            lines.append(f"- {ident} {label}")
        for c in self.changed:
            lines.append(f"~ {c.species} {c.label}")
            lines.extend(f"    {x.text()}" for x in c.changes)
        for what, ids in (("added", self.sources_added), ("removed", self.sources_removed),
                          ("changed", self.sources_changed)):
            if ids:
                lines.append(f"sources {what}: {', '.join(ids)}")
        lines.extend(f"format: {s}" for s in self.schema_changes)
        lines.append(f"suggested bump: {self.bump} ({self.bump_reason})"
                     + (f"; next version {self.suggested_version}" if self.suggested_version else ""))
        return "\n".join(lines)


def next_version(version: str, bump: str) -> str | None:
    major, minor, patch = parse_version(version)
    return {"major": f"{major + 1}.0.0", "minor": f"{major}.{minor + 1}.0",
            "patch": f"{major}.{minor}.{patch + 1}", "none": None}[bump]


def parse_version(text: str) -> tuple[int, int, int]:
    """X.Y.Z → (X, Y, Z); InputError for anything else (no prerelease or build labels)."""
    if not isinstance(text, str) or not _VERSION.fullmatch(text):
        raise InputError(f"{str(text)[:40]!r} is not a version of the form X.Y.Z (for example 1.4.0)",
                         field="version")
    a, b, c = text.split(".")
    return int(a), int(b), int(c)


def compare(old: Snapshot, new: Snapshot) -> Diff:
    """The Diff from ``old`` to ``new``."""
    d = Diff(old=old.label, new=new.label, old_version=old.version, new_version=new.version)
    old_ids, new_ids = set(old.species), set(new.species)
    d.added = [(i, new.display(i)) for i in sorted(new_ids - old_ids)]
    d.removed = [(i, old.display(i)) for i in sorted(old_ids - new_ids)]
    for ident in sorted(old_ids & new_ids):
        changes = _species_changes(ident, old, new)
        if changes:
            d.changed.append(SpeciesChanges(ident, new.display(ident), changes))
    d.sources_added = sorted(set(new.sources) - set(old.sources))
    d.sources_removed = sorted(set(old.sources) - set(new.sources))
    d.sources_changed = sorted(i for i in set(old.sources) & set(new.sources)
                               if old.sources[i] != new.sources[i])
    for t in TABLES:
        a, b = old.columns.get(t.name), new.columns.get(t.name)
        if a != b:
            if a is None or b is None:
                d.schema_changes.append(f"{t.path} {'added' if a is None else 'removed'}")
            else:
                gone = [c for c in a if c not in b]
                came = [c for c in b if c not in a]
                what = "; ".join(x for x in (f"columns removed: {', '.join(gone)}" if gone else "",
                                             f"columns added: {', '.join(came)}" if came else "") if x)
                d.schema_changes.append(f"{t.path}: {what or 'columns reordered'}")
    return d


def _species_changes(ident: str, old: Snapshot, new: Snapshot) -> list[Change]:
    out: list[Change] = []
    a, b = old.species[ident], new.species[ident]
    for attr in ATTRIBUTES:
        if a.get(attr) != b.get(attr):
            out.append(Change("attribute", attr, a.get(attr), b.get(attr)))
    for fld in FIELDS:
        va, vb = old.values.get((ident, fld)), new.values.get((ident, fld))
        if va is None and vb is None:
            continue
        unit = (vb or va or {}).get("unit")
        if va is None or vb is None:
            out.append(Change("value", fld, va and va["value"], vb and vb["value"], unit=unit))
            continue
        if va["value"] != vb["value"] or va["unit"] != vb["unit"]:
            u = _std_u(vb) or _std_u(va)
            ratio = abs(vb["value"] - va["value"]) / u if u else None
            out.append(Change("value", fld, va["value"], vb["value"], unit=unit,
                              delta=decimal_delta(va["value"], vb["value"]), u=u, in_u=ratio))
        if va["uncertainty"] != vb["uncertainty"] or va["coverage"] != vb["coverage"]:
            out.append(Change("uncertainty", fld, _u_text(va), _u_text(vb), unit=unit))
        for k in ("source", "method"):
            if va.get(k) != vb.get(k):
                out.append(Change(k, fld, va.get(k), vb.get(k)))
    ca, cb = old.cp_models.get(ident, []), new.cp_models.get(ident, [])
    if ca != cb:
        sa, sb = _model_summary(ca), _model_summary(cb)
        if sa == sb:
            sb += ", coefficients changed"
        out.append(Change("cp_model", "cp_model", sa, sb))
    return out


def _u_text(row: Row) -> str:
    u = row.get("uncertainty")
    if u is None:
        return "none"
    k = row.get("coverage") or 1.0
    return num(u) + (f" (k = {num(k)})" if k != 1.0 else "")


def _model_summary(rows: list[Row]) -> str | None:
    if not rows:
        return None
    kind = rows[0]["model"]
    n = len(rows)
    what = f"{n} point{'s' if n != 1 else ''}" if kind == "tabulated" else f"{n} range{'s' if n != 1 else ''}"
    lo = min(r["tmin_K"] for r in rows)
    hi = max(r["tmax_K"] for r in rows)
    return f"{kind}, {what}, {num(lo)}–{num(hi)} K"


def diff(old: str | os.PathLike[str], new: str | os.PathLike[str]) -> Diff:
    """Compare two operands as ``tablekeeper diff`` takes them (datasets, bundles, ``git:REV``)."""
    old_s, new_s = str(old), str(new)
    with open_side(old_s, new_s) as a, open_side(new_s, old_s) as b:
        return compare(a, b)


# -- Markdown for CHANGES.md ------------------------------------------------------------------------------

_MD_SPECIAL = set("\\`*_[]<>|~&")


def md(text: Any) -> str:
    """Data text made literal in Markdown: specials escaped, control characters shown as escapes."""
    from ..text import printable

    return "".join("\\" + c if c in _MD_SPECIAL else c for c in printable(text))


def markdown(d: Diff | None, *, name: str, version: str, created: str, previous: str | None, note: str | None,
             counts: Mapping[str, int], cautions: tuple[str, ...]) -> str:
    """The CHANGES.md of a release."""
    out = [f"# {md(name)} {version}", "", f"Released {created}."]
    if note:
        out += ["", md(note)]
    out += ["", f"This release holds {counts['species']} species, {counts['values']} values and "
            f"{counts['sources']} sources."]
    if previous is None:
        out += ["", "This is the first release; there is no earlier release to compare with."]
    elif d is None:
        out += ["", f"## Changes since {previous}", "",
                f"The bundle of release {previous} was found neither in the dataset's releases folder nor "
                "beside this bundle, so the changes are not listed."]
    else:
        out += ["", f"## Changes since {previous}", "",
                "Each changed value is given as old → new, then the change (new − old) and the change in "
                "units of the standard uncertainty u of the new value (of the old one when the new has "
                "none).", "",
                f"- species added: {len(d.added)}", f"- species removed: {len(d.removed)}",
                f"- species changed: {len(d.changed)}",
                f"- version bump the changes call for: {d.bump} ({d.bump_reason})"]
        if d.added:
            out += ["", "### Added species", ""] + [f"- `{i}` {md(lab)}" for i, lab in d.added]
        if d.removed:
            out += ["", "### Removed species", ""] + [f"- `{i}` {md(lab)}" for i, lab in d.removed]
        if d.changed:
            out += ["", "### Changed species"]
            for c in d.changed:
                out += ["", f"#### `{c.species}` {md(c.label)}", ""]
                out += [f"- {md(x.text())}" for x in c.changes]
        src = [(w, ids) for w, ids in (("added", d.sources_added), ("removed", d.sources_removed),
                                       ("changed", d.sources_changed)) if ids]
        if src:
            out += ["", "### Sources", ""] + [f"- {w}: " + ", ".join(f"`{i}`" for i in ids) for w, ids in src]
        if d.schema_changes:
            out += ["", "### Bundle format", ""] + [f"- {md(s)}" for s in d.schema_changes]
    out += ["", "## Cautions", ""] + [f"- {c}" for c in cautions]
    return "\n".join(out) + "\n"
