"""Publishing a release: the gate, the version rules, the bundle written byte for byte reproducibly,
the release record, and the optional git tag.

Order of work, so that a refusal or a failure leaves nothing half done:

1. the user needs the ``release`` role; the version is X.Y.Z, new, and greater than every version in
   ``releases/`` (compared as numbers, 1.10.0 > 1.9.0); neither the bundle folder nor its archive
   exists (a bundle is never overwritten); with ``git_tag`` the dataset folder has no uncommitted
   change and the tag ``<name>-v<version>`` does not exist yet;
2. the gate: the records are read once and the check catalogue runs on that snapshot, which is also
   what gets written; any error, or any open blocking flag (read from the flag records directly as
   well), refuses; so does any warning unless ``allow_warnings``, and the accepted warnings and infos
   then go into ``findings.csv`` and the descriptor;
3. every file is written into a private temporary folder beside the output, then the archive;
4. the tag is created (when asked), the folder and the archive are renamed into place, a copy of the
   archive is kept in the dataset as ``releases/<name>-<version>.tar.gz`` (the next release's change
   log and ``diff`` compare against it), and the release record ``releases/<version>.json`` is saved
   and journaled (action ``release``). A failure in this step undoes what it had done.

``created`` is the time of the release (UTC, whole seconds), or ``SOURCE_DATE_EPOCH`` when that is
set, so that the same dataset released twice with the same time gives identical bytes.
"""

from __future__ import annotations

import datetime as _dt
import os
import shutil
import tempfile
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .. import jsonio, validation
from ..checks import Context, Finding, Report, check_dataset
from ..checks import run as run_checks
from ..errors import InputError, ReleaseRefused
from ..store import Dataset, atomic_write, utc_now
from . import descriptor as _desc
from . import gitsrc
from .archive import write_archive
from .diff import BUMPS, Diff, Snapshot, compare, markdown, next_version, parse_version, snapshot_of_bundle
from .tables import (
    CHANGES,
    DESCRIPTOR,
    TABLE_BY_NAME,
    cp_model_rows,
    encode_rows,
    finding_rows,
    source_rows,
    species_rows,
    thermo_text,
    unsafe_lead,
    values_rows,
)

Progress = Callable[[str, float], None]


# -- the gate --------------------------------------------------------------------------------------------

@dataclass
class Gate:
    """The checks' verdict on a release: what blocks and what would be accepted."""

    report: Report
    blocking_flags: list[dict]
    allow_warnings: bool = False

    @property
    def errors(self) -> list[Finding]:
        return [f for f in self.report.findings if f.severity == "error"]

    @property
    def warnings(self) -> list[Finding]:
        return [f for f in self.report.findings if f.severity == "warning"]

    @property
    def infos(self) -> list[Finding]:
        return [f for f in self.report.findings if f.severity == "info"]

    @property
    def passed(self) -> bool:
        return not self.errors and not self.blocking_flags and (self.allow_warnings or not self.warnings)

    @property
    def accepted(self) -> list[Finding]:
        """The findings a release carries (warnings and infos), in the report's order."""
        return [f for f in self.report.findings if f.severity in ("warning", "info")]

    def reasons(self) -> list[str]:
        """One line per thing that blocks, errors first."""
        out = [f"error {f.check} {f.species or ''} {f.field or ''}: {f.message}".replace("  ", " ")
               for f in self.errors]
        out += [f"open blocking flag {fl.get('id')} on {fl.get('species')} {fl.get('field')}: "
                f"{fl.get('note')}" for fl in self.blocking_flags]
        if self.warnings and not self.allow_warnings:
            out += [f"warning {f.check} {f.species or ''} {f.field or ''}: {f.message}".replace("  ", " ")
                    for f in self.warnings]
        return out

    def summary_text(self) -> str:
        parts = []
        if self.errors:
            parts.append(f"{len(self.errors)} error{'s' if len(self.errors) != 1 else ''}")
        if self.blocking_flags:
            n = len(self.blocking_flags)
            parts.append(f"{n} open blocking flag{'s' if n != 1 else ''}")
        if self.warnings and not self.allow_warnings:
            n = len(self.warnings)
            parts.append(f"{n} warning{'s' if n != 1 else ''} (give --allow-warnings to accept them)")
        return ", ".join(parts) or "nothing blocks"


class GateRefused(ReleaseRefused):
    """The gate refused: errors, open blocking flags, or warnings not accepted."""

    def __init__(self, gate: Gate) -> None:
        self.gate = gate
        super().__init__(f"release refused: {gate.summary_text()}")


def open_blocking_flags(flags: Mapping[str, dict]) -> list[dict]:
    """The open blocking flags, read from the flag records themselves (not only from the checks)."""
    return [f for _, f in sorted(flags.items()) if f.get("status") == "open" and f.get("blocking") is True]


def gate(dataset: Dataset, *, allow_warnings: bool = False, report: Report | None = None,
         flags: Mapping[str, dict] | None = None) -> Gate:
    """The gate: the checks' report (run now unless given) and the open blocking flags (read now unless
    the flag records are given)."""
    if report is None:
        report = check_dataset(dataset)
    if flags is None:
        flags = dataset.load_all("flags").records
    return Gate(report, open_blocking_flags(flags), allow_warnings)


# -- versions ---------------------------------------------------------------------------------------------

def released(dataset: Dataset) -> dict[str, dict]:
    """The release history: version → record. A damaged record is an error (InputError)."""
    rep = dataset.load_all("releases")
    if rep.damaged:
        raise rep.damaged[0]
    out = {}
    for ident, rec in rep.records.items():
        v = rec.get("version")
        try:
            parse_version(v)
        except InputError:
            raise InputError(f"holds the version {str(v)[:40]!r}, which is not X.Y.Z",
                             file=str(dataset.root / "releases" / f"{ident}.json"), field="version") from None
        if v != ident:
            raise InputError(f"holds version {v!r}, not the file name's", file=str(dataset.root / "releases" /
                                                                                 f"{ident}.json"))
        out[v] = rec
    return out


def last_version(dataset: Dataset) -> str | None:
    history = released(dataset)
    return max(history, key=parse_version) if history else None


def check_version(dataset: Dataset, version: str) -> str | None:
    """Apply the version rules; return the previous version (None for the first release)."""
    new = parse_version(version)
    history = released(dataset)
    if version in history:
        raise InputError(f"version {version} was released on {history[version].get('created')}; a version "
                         "is never reused", file=str(dataset.root / "releases" / f"{version}.json"),
                         field="version")
    last = max(history, key=parse_version) if history else None
    if last is not None and new <= parse_version(last):
        raise InputError(f"version {version} does not increase over the last release {last}", field="version")
    return last


def release_time() -> str:
    """UTC time of the release: SOURCE_DATE_EPOCH when set, else now (whole seconds, RFC 3339)."""
    sde = os.environ.get("SOURCE_DATE_EPOCH")
    if sde is None or sde == "":
        return utc_now()
    try:
        t = int(sde)
        when = _dt.datetime.fromtimestamp(t, _dt.UTC)
    except (ValueError, OverflowError, OSError):
        raise InputError(f"SOURCE_DATE_EPOCH={sde[:40]!r} is not a time in whole seconds since 1970"
                         ) from None
    return when.isoformat().replace("+00:00", "Z")


def _epoch(created: str) -> int:
    return int(_dt.datetime.fromisoformat(created.replace("Z", "+00:00")).timestamp())


# -- preview (the release screen) ------------------------------------------------------------------------

def archive_name(name: str, version: str) -> str:
    return f"{name}-{version}.tar.gz"


def stored_archive(dataset: Dataset, version: str) -> Path:
    """Where the dataset keeps its copy of a release's archive."""
    return dataset.root / "releases" / archive_name(dataset.name, version)


def previous_bundle(dataset: Dataset, version: str, record: dict, out: Path | None = None) -> Path | None:
    """The bundle of an earlier release: the dataset's copy, else the one in ``out``; checked against
    the digests the release record holds. None when neither exists."""
    cands = [stored_archive(dataset, version)]
    if out is not None:
        cands += [out / archive_name(dataset.name, version), out / f"{dataset.name}-{version}"]
    for path in cands:
        if path.is_file():
            if _desc.sha256(path.read_bytes()) != record.get("archive_digest"):
                raise InputError(f"does not match the archive digest recorded for release {version}",
                                 file=str(path))
            return path
        if path.is_dir() and (path / DESCRIPTOR).is_file():
            if _desc.sha256((path / DESCRIPTOR).read_bytes()) != record.get("digest"):
                raise InputError(f"does not match the digest recorded for release {version}", file=str(path))
            return path
    return None


@dataclass
class Preview:
    """What a release would do now: the last version, the changes since, the suggested version, the gate."""

    last_version: str | None
    diff: Diff | None
    suggested_version: str | None
    gate: Gate


def preview(dataset: Dataset, *, allow_warnings: bool = False, out: Path | None = None) -> Preview:
    from .diff import snapshot_of_dataset

    last = last_version(dataset)
    d = None
    if last is not None:
        prev = previous_bundle(dataset, last, released(dataset)[last], out)
        if prev is not None:
            d = compare(snapshot_of_bundle(prev), snapshot_of_dataset(dataset))
    if last is None:
        suggested = "1.0.0"
    elif d is None:
        suggested = None
    else:
        suggested = next_version(last, d.bump)
    return Preview(last, d, suggested, gate(dataset, allow_warnings=allow_warnings))


# -- the release ------------------------------------------------------------------------------------------

@dataclass
class Released:
    """What a release wrote."""

    version: str
    previous: str | None
    folder: Path
    archive: Path
    record: dict[str, Any]
    diff: Diff | None
    gate: Gate
    tag: str | None = None
    counts: dict[str, int] = field(default_factory=dict)

    @property
    def bump_hint(self) -> str | None:
        """A sentence when the version chosen is a smaller step than the changes call for."""
        if self.diff is None or self.previous is None:
            return None
        want = self.diff.bump
        old, new = parse_version(self.previous), parse_version(self.version)
        got = "major" if new[0] > old[0] else "minor" if new[1] > old[1] else "patch"
        if BUMPS.index(got) < BUMPS.index(want):
            return (f"the changes since {self.previous} call for a {want} version step "
                    f"({self.diff.bump_reason})")
        return None


def _noop(stage: str, fraction: float) -> None:
    return None


def release(dataset: Dataset, version: str, *, out: str | os.PathLike[str] | None = None,
            note: str | None = None, allow_warnings: bool = False, git_tag: bool = False,
            progress: Progress | None = None) -> Released:
    """Publish ``version`` of the dataset into ``out`` (default: the current folder). See the module."""
    say = progress or _noop
    say("checking the version", 0.0)
    dataset.require("release")
    if note is not None:
        note = note.strip() or None
    if note is not None and (unsafe_lead(note) or len(note) > 4000):
        raise InputError("a note may not begin with =, +, @, a tab or a carriage return, nor pass 4000 "
                         "characters", field="note")
    previous = check_version(dataset, version)
    name = dataset.name
    out_dir = Path(out) if out is not None else Path.cwd()
    folder = out_dir / f"{name}-{version}"
    archive = out_dir / archive_name(name, version)
    kept = stored_archive(dataset, version)
    for p in (folder, archive, kept):
        if os.path.lexists(p):
            raise InputError("already exists; a release never overwrites a bundle", file=str(p))
    tag = commit = None
    if git_tag:
        tag, commit = _git_preconditions(dataset, version)
    prev_path = None
    if previous is not None:
        prev_path = previous_bundle(dataset, previous, released(dataset)[previous], out_dir)

    say("reading the records and running the checks", 0.05)
    # One snapshot of the records is checked and written, so a save by someone else in between can
    # never slip unchecked into the bundle.
    ctx = Context.load(dataset)
    g = gate(dataset, allow_warnings=allow_warnings, report=run_checks(ctx), flags=ctx.flags)
    if not g.passed:
        raise GateRefused(g)
    species, sources = ctx.species, ctx.sources
    created = release_time()
    out_dir.mkdir(parents=True, exist_ok=True)
    staging = Path(tempfile.mkdtemp(prefix=f".{name}-{version}.partial-", dir=out_dir))
    published: list[Path] = []
    tagged = False
    try:
        bundle_dir = staging / folder.name
        bundle_dir.mkdir()
        result = _write_bundle(bundle_dir, dataset, version, previous, prev_path, created, species, sources,
                               g, note, say)
        say("writing the archive", 0.85)
        staged_archive = staging / archive.name
        write_archive(bundle_dir, folder.name, _epoch(created), staged_archive)
        archive_bytes = staged_archive.read_bytes()
        record: dict[str, Any] = {
            "version": version, "previous": previous, "created": created, "user": dataset.user,
            "digest": _desc.sha256((bundle_dir / DESCRIPTOR).read_bytes()),
            "archive_digest": _desc.sha256(archive_bytes),
            "summary": dict(g.report.summary),
        }
        if note:
            record["note"] = note
        if commit:
            record["git_commit"] = commit
        errs = validation.errors("releases", record)
        if errs:
            raise InputError(f"the release record would not be valid: {errs[0][0]} {errs[0][1]}",
                             file=f"releases/{version}.json")
        say("publishing", 0.95)
        if tag:
            message = f"{name} {version}" + (f"\n\n{note}" if note else "")
            gitsrc.create_tag(dataset.root, tag, commit, message)
            tagged = True
        _mode_for_sharing(bundle_dir)
        if os.path.lexists(folder):
            raise InputError("appeared while the release was written; a release never overwrites a bundle",
                             file=str(folder))
        os.rename(bundle_dir, folder)
        published.append(folder)
        os.link(staged_archive, archive)  # fails if the archive appeared meanwhile: never overwritten
        published.append(archive)
        atomic_write(kept, archive_bytes)
        published.append(kept)
        saved = dataset.save("releases", record, expected_revision=None, action="release",
                             reason=note or f"release {version}")
    except BaseException:
        for p in reversed(published):
            if p.is_dir() and not p.is_symlink():
                shutil.rmtree(p, ignore_errors=True)
            else:
                p.unlink(missing_ok=True)
        if tagged:
            gitsrc.delete_tag(dataset.root, tag)
        raise
    finally:
        shutil.rmtree(staging, ignore_errors=True)
    say("done", 1.0)
    return Released(version=version, previous=previous, folder=folder, archive=archive, record=saved,
                    diff=result["diff"], gate=g, tag=tag, counts=result["counts"])


def _git_preconditions(dataset: Dataset, version: str) -> tuple[str, str]:
    root = dataset.root.resolve()
    if gitsrc.work_tree(root) is None:
        raise InputError("is not inside a git work tree, so --git-tag cannot tag it", file=str(dataset.root))
    dirty = gitsrc.dirty_paths(root)
    if dirty:
        shown = ", ".join(dirty[:3]) + (f" and {len(dirty) - 3} more" if len(dirty) > 3 else "")
        raise InputError(f"has uncommitted changes ({shown}); commit them first, so that the tag names "
                         "what was released", file=str(dataset.root))
    tag = f"{dataset.name}-v{version}"
    if gitsrc.tag_exists(root, tag):
        raise InputError(f"the git tag {tag} exists already", file=str(dataset.root))
    return tag, gitsrc.head_commit(root)


def _mode_for_sharing(folder: Path) -> None:
    """mkdtemp makes a private folder; a published bundle gets the modes of any new folder and file."""
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(folder, 0o777 & ~umask)
    for p in folder.iterdir():
        os.chmod(p, 0o666 & ~umask)


def _write_file(path: Path, data: bytes) -> None:
    with open(path, "xb") as fh:
        fh.write(data)
        fh.flush()
        os.fsync(fh.fileno())


def _write_bundle(bundle_dir: Path, dataset: Dataset, version: str, previous: str | None,
                  prev_path: Path | None, created: str, species: dict, sources: dict, g: Gate,
                  note: str | None, say: Progress) -> dict[str, Any]:
    say("writing species, values, models and sources", 0.3)
    rows = {"species": species_rows(species), "values": values_rows(species),
            "cp_models": cp_model_rows(species), "sources": source_rows(sources),
            "findings": finding_rows(g.accepted)}
    files: dict[str, bytes] = {}
    for tname, trows in rows.items():
        files[f"{tname}.csv"] = encode_rows(TABLE_BY_NAME[tname], trows)

    n = max(len(species), 1)
    every = max(n // 50, 1)

    def tick(i: int) -> None:
        if i % every == 0:
            say("deriving the thermodynamic table", 0.35 + 0.45 * i / n)

    files["thermo_table.csv"] = thermo_text(species, tick=tick).encode("utf-8")

    say("writing the change log", 0.8)
    new_snap = Snapshot.from_rows(f"{dataset.name} {version}", version, rows)
    d = None
    if prev_path is not None:
        # previous_bundle matched its digest with the release record: a light verification suffices.
        d = compare(snapshot_of_bundle(prev_path, light=True), new_snap)
    counts = {"species": len(rows["species"]), "values": len(rows["values"]), "sources": len(rows["sources"])}
    files[CHANGES] = markdown(d, name=dataset.name, version=version, created=created, previous=previous,
                              note=note, counts=counts, cautions=_desc.CAUTIONS).encode("utf-8")
    desc = _desc.build(meta=dataset.meta, version=version, created=created, previous=previous, files=files,
                       summary=g.report.summary, accepted=[_desc.accepted_entry(f) for f in g.warnings],
                       note=note)
    errs = _desc.schema_errors(desc)
    if errs:
        raise InputError(f"the descriptor would not be valid: {errs[0]}", file=DESCRIPTOR)
    files[DESCRIPTOR] = jsonio.dumps(desc)
    for fname, data in files.items():
        _write_file(bundle_dir / fname, data)
    return {"diff": d, "counts": counts}
