"""The dataset folder on disk: load, list, atomic saves, revisions, locking, roles and the journal.

Layout (DESIGN.md section 3)::

    <dataset>/dataset.json, species/, sources/, reactions/, flags/, releases/, journal.jsonl

Every save takes the dataset lock (``.tablekeeper.lock``, through ``filelock``), compares the revision
on disk with the one the editor loaded, writes a temporary file in the same folder, flushes and fsyncs
it, gives it the mode of the file it replaces, renames it over the target, fsyncs the folder, and
appends one journal line, all before the lock is released. A process killed at any moment leaves
either the old or the new record; leftover temporary files are removed at the next open, and a torn
last journal line is set aside in ``journal.torn`` instead of being loaded.
"""

from __future__ import annotations

import datetime as _dt
import getpass
import os
import re
import secrets
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import filelock
import orjson

from . import jsonio
from .bulk import paused_gc
from .errors import (
    ConflictError,
    DamagedFileError,
    IdentifierError,
    InputError,
    NotFoundError,
    PermissionDenied,
)

SLUG = re.compile(r"^[a-z0-9][a-z0-9._-]{0,63}\Z")
KINDS = ("species", "sources", "reactions", "flags", "releases")
LOCK_NAME = ".tablekeeper.lock"
JOURNAL = "journal.jsonl"
TORN = "journal.torn"
_TMP_MARK = ".tmp-"

#: Which roles may do what. A dataset without roles lets every user do everything.
ROLE_FOR_ACTION: dict[str, tuple[str, ...]] = {
    "edit": ("steward",),
    "flag": ("steward", "reviewer"),
    "comment": ("steward", "reviewer"),
    "resolve": ("steward",),
    "release": ("release",),
}
ACTION_OF_KIND = {"species": "edit", "sources": "edit", "reactions": "edit", "flags": "flag",
                  "releases": "release"}


@dataclass
class Safety:
    """The protections of a save. Only the reliability tests' control runs turn them off, to show that
    the tests would catch their absence."""

    lock: bool = True
    fsync: bool = True
    atomic: bool = True


SAFETY = Safety()


def check_id(ident: Any, what: str = "identifier") -> str:
    """Return ``ident`` if it is a safe slug, else raise IdentifierError (before it reaches a path)."""
    if not isinstance(ident, str) or not SLUG.match(ident) or ident in (".", ".."):
        shown = repr(ident)[:80]
        raise IdentifierError(f"{shown} is not a valid {what}: use 1 to 64 of a-z, 0-9, '.', '_', '-', "
                              "starting with a letter or digit", field="id")
    return ident


def current_user() -> str:
    """The acting user: $TABLEKEEPER_USER, else the OS login name."""
    name = os.environ.get("TABLEKEEPER_USER") or getpass.getuser()
    name = re.sub(r"[^A-Za-z0-9._@-]", "_", name)[:64]
    return name or "unknown"


def utc_now() -> str:
    return _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat().replace("+00:00", "Z")


def flatten(obj: Any, prefix: str = "") -> dict[str, Any]:
    """Dotted paths to leaves; lists are leaves (a Cp coefficient list changes as one value)."""
    if isinstance(obj, dict):
        out: dict[str, Any] = {}
        for k, v in obj.items():
            out.update(flatten(v, f"{prefix}.{k}" if prefix else k))
        return out
    return {prefix: obj}


def field_changes(old: dict | None, new: dict | None) -> list[dict[str, Any]]:
    """Field-level differences, ignoring the revision counter."""
    a = flatten(old or {})
    b = flatten(new or {})
    out = []
    for key in sorted(set(a) | set(b)):
        if key == "revision":
            continue
        if a.get(key, _MISSING) != b.get(key, _MISSING) or (key in a) != (key in b):
            change: dict[str, Any] = {"field": key}
            if key in a:
                change["old"] = a[key]
            if key in b:
                change["new"] = b[key]
            out.append(change)
    return out


_MISSING = object()


def _line_start(fd: int, size: int) -> int:
    """Offset just after the last newline before ``size`` (0 when there is none), however long the
    last line is."""
    end = size
    while end > 0:
        start = max(0, end - (1 << 20))
        cut = os.pread(fd, end - start, start).rfind(b"\n")
        if cut >= 0:
            return start + cut + 1
        end = start
    return 0


def _is_entry(raw: bytes) -> bool:
    try:
        return isinstance(orjson.loads(raw), dict)
    except orjson.JSONDecodeError:
        return False


def _fsync_dir(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _new_file_mode(folder: Path) -> int:
    """Mode for a new file: what the umask allows, plus group write when the folder is group-writable
    (a shared dataset stays shared)."""
    umask = os.umask(0)
    os.umask(umask)
    mode = 0o666 & ~umask
    try:
        if folder.stat().st_mode & 0o020:
            mode |= 0o060
    except OSError:
        pass
    return mode


def atomic_write(path: Path, data: bytes) -> None:
    """Replace ``path`` with ``data`` atomically: temp file, fsync, mode, rename, fsync folder.

    An error at any step leaves the previous file untouched and removes the temporary file.
    """
    folder = path.parent
    if not SAFETY.atomic:  # control runs of the reliability tests only
        with open(path, "wb") as fh:
            fh.write(data)
        return
    try:
        mode = path.stat().st_mode & 0o7777
    except FileNotFoundError:
        mode = _new_file_mode(folder)
    tmp = folder / f".{path.name}{_TMP_MARK}{os.getpid()}-{secrets.token_hex(4)}"
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    try:
        try:
            view = memoryview(data)
            while view:
                n = os.write(fd, view)
                view = view[n:]
            if SAFETY.fsync:
                os.fsync(fd)
            os.fchmod(fd, mode)
        finally:
            os.close(fd)
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    if SAFETY.fsync:
        _fsync_dir(folder)


@dataclass
class LoadReport:
    """Records loaded from one folder, and the files that could not be loaded."""

    records: dict[str, dict] = field(default_factory=dict)
    damaged: list[DamagedFileError] = field(default_factory=list)


class _NoLock:
    def __enter__(self) -> None:
        return None

    def __exit__(self, *exc: object) -> None:
        return None


class Dataset:
    """A dataset folder. Cheap to construct; reads on demand."""

    def __init__(self, root: str | os.PathLike[str], user: str | None = None) -> None:
        self.root = Path(root)
        self.user = user or current_user()
        meta_path = self.root / "dataset.json"
        if not meta_path.is_file():
            raise InputError("is not a dataset folder (no dataset.json)", file=str(self.root))
        self.meta: dict = jsonio.read(meta_path)
        if not isinstance(self.meta, dict):
            raise DamagedFileError("must hold a JSON object", file=str(meta_path))
        self._lock = filelock.FileLock(str(self.root / LOCK_NAME), timeout=30, mode=_new_file_mode(self.root))
        self.recover()

    # -- creation --------------------------------------------------------------------------------------

    @classmethod
    def init(cls, root: str | os.PathLike[str], name: str, title: str | None = None,
             user: str | None = None, description: str | None = None) -> Dataset:
        """Create an empty dataset folder; refuse to touch an existing dataset."""
        check_id(name, "dataset name")
        root = Path(root)
        if (root / "dataset.json").exists():
            raise InputError("already holds a dataset", file=str(root))
        if root.exists() and any(root.iterdir()):
            raise InputError("exists and is not empty; choose a new folder", file=str(root))
        root.mkdir(parents=True, exist_ok=True)
        for kind in KINDS:
            (root / kind).mkdir(exist_ok=True)
            (root / kind / ".keep").touch()
        meta = {
            "name": name,
            "title": title or name,
            "schema_version": 1,
            "standard_pressure_bar": 1,
            "reference_temperature_K": 298.15,
            "element_references": {},
            "policy": {"tolerance_k": 2, "require_uncertainty": True, "max_relative_uncertainty": 0.5},
        }
        if description:
            meta["description"] = description
        atomic_write(root / "dataset.json", jsonio.dumps(meta))
        # Git: one file per record merges per record; the journal is append-only, merge it as a union.
        (root / ".gitattributes").write_text(f"{JOURNAL} merge=union\n")
        (root / ".gitignore").write_text(f"{LOCK_NAME}\n*{_TMP_MARK}*\n{TORN}\n")
        (root / JOURNAL).touch()
        ds = cls(root, user=user)
        ds.append_journal("init", "dataset", revision=0, reason=f"created dataset {name}")
        return ds

    # -- paths and locking ---------------------------------------------------------------------------

    @property
    def name(self) -> str:
        return str(self.meta.get("name", self.root.name))

    def path(self, kind: str, ident: str) -> Path:
        if kind not in KINDS:
            raise InputError(f"{kind!r} is not a record kind")
        return self.root / kind / f"{check_id(ident)}.json"

    def lock(self) -> filelock.FileLock | _NoLock:
        return self._lock if SAFETY.lock else _NoLock()

    def recover(self) -> list[Path]:
        """Remove temporary files left by a killed save. Done under the lock, so never one in use."""
        leftovers = [p for kind in KINDS if (self.root / kind).is_dir()
                     for p in (self.root / kind).iterdir() if _TMP_MARK in p.name]
        leftovers += [p for p in self.root.iterdir() if _TMP_MARK in p.name]
        if not leftovers:
            return []
        try:
            with self._lock.acquire(timeout=2):
                for p in leftovers:
                    try:
                        p.unlink()
                    except FileNotFoundError:
                        pass
        except (filelock.Timeout, OSError):
            return []  # read-only or busy: leave them, the next writer's open will do it
        return leftovers

    # -- permissions -----------------------------------------------------------------------------------

    def roles_of(self, user: str | None = None) -> set[str]:
        roles = self.meta.get("roles") or {}
        user = user or self.user
        return {role for role, users in roles.items() if user in (users or [])}

    def may(self, action: str, user: str | None = None) -> bool:
        roles = self.meta.get("roles") or {}
        if not any(roles.values()):
            return True
        return bool(self.roles_of(user) & set(ROLE_FOR_ACTION[action]))

    def require(self, action: str) -> None:
        if not self.may(action):
            raise PermissionDenied(self.user, action, ROLE_FOR_ACTION[action])

    # -- reading ---------------------------------------------------------------------------------------

    def ids(self, kind: str) -> list[str]:
        folder = self.root / kind
        if not folder.is_dir():
            return []
        return sorted(n[:-5] for n in os.listdir(folder) if n.endswith(".json") and not n.startswith("."))

    def load(self, kind: str, ident: str) -> dict:
        path = self.path(kind, ident)
        if not path.is_file():
            raise NotFoundError(kind.rstrip("s") if kind != "species" else "species", ident)
        return self._checked(path, ident)

    def _checked(self, path: Path, ident: str) -> dict:
        rec = jsonio.read(path)
        if not isinstance(rec, dict):
            raise DamagedFileError("must hold a JSON object", file=str(path))
        if rec.get("id", ident) != ident and path.parent.name != "releases":
            raise DamagedFileError(f"holds id {str(rec.get('id'))[:80]!r}, not the file name {ident!r}",
                                   file=str(path), record=ident, field="id")
        return rec

    def load_all(self, kind: str) -> LoadReport:
        """Every record of a kind; damaged files are reported, never loaded.

        The same tests as ``load`` per file, on path strings: pathlib objects cost more than the JSON
        parse of a small record. The garbage collector is paused while the records are built (see
        tablekeeper.bulk).
        """
        report = LoadReport()
        folder = self.root / kind
        if not folder.is_dir():
            return report
        base = str(folder) + os.sep
        check_id_field = kind != "releases"
        records, damaged = report.records, report.damaged
        read = jsonio.read
        with paused_gc():
            for name in sorted(os.listdir(folder)):
                if not name.endswith(".json") or name.startswith("."):
                    continue
                ident = name[:-5]
                path = base + name
                if not SLUG.match(ident):
                    damaged.append(DamagedFileError("has a file name that is not a valid identifier",
                                                    file=path))
                    continue
                try:
                    rec = read(path)
                    if not isinstance(rec, dict):
                        raise DamagedFileError("must hold a JSON object", file=path)
                    if check_id_field and rec.get("id", ident) != ident:
                        raise DamagedFileError(
                            f"holds id {str(rec.get('id'))[:80]!r}, not the file name {ident!r}",
                            file=path, record=ident, field="id")
                    records[ident] = rec
                except DamagedFileError as exc:
                    damaged.append(exc)
        return report

    def journal(self) -> tuple[list[dict], list[str]]:
        """Journal entries, and the problems met (a torn or damaged line is reported, not loaded)."""
        path = self.root / JOURNAL
        entries: list[dict] = []
        problems: list[str] = []
        try:
            raw = path.read_bytes()
        except FileNotFoundError:
            return entries, problems
        lines = raw.split(b"\n")
        last = len(lines) - 1
        for i, line in enumerate(lines):
            if not line:
                continue
            try:
                obj = orjson.loads(line)
                if not isinstance(obj, dict):
                    raise ValueError
                entries.append(obj)
            except (orjson.JSONDecodeError, ValueError):
                what = "a torn last line" if i == last else "a damaged line"
                problems.append(f"{path}: line {i + 1} is {what} and was set aside")
        return entries, problems

    # -- writing ---------------------------------------------------------------------------------------

    def append_journal(self, action: str, target: str, *, revision: int | None = None,
                       changes: list | None = None, reason: str | None = None,
                       _locked: bool = False) -> dict:
        entry: dict[str, Any] = {"time": utc_now(), "user": self.user, "action": action, "target": target}
        if revision is not None:
            entry["revision"] = revision
        if changes:
            entry["changes"] = changes
        if reason:
            entry["reason"] = reason
        if _locked:
            self._append_line(jsonio.dumps_line(entry))
        else:
            with self.lock():
                self._append_line(jsonio.dumps_line(entry))
        return entry

    def _append_line(self, line: bytes) -> None:
        path = self.root / JOURNAL
        fd = os.open(path, os.O_RDWR | os.O_CREAT | os.O_APPEND, _new_file_mode(self.root))
        try:
            size = os.fstat(fd).st_size
            if size and os.pread(fd, 1, size - 1) != b"\n":
                keep = _line_start(fd, size)
                torn = os.pread(fd, size - keep, keep)
                if _is_entry(torn):
                    # A whole entry that lost only its newline (journal() loads it): complete it.
                    os.write(fd, b"\n")
                else:
                    # A torn last line from a killed writer: set it aside, never glue onto it.
                    with open(self.root / TORN, "ab") as fh:
                        fh.write(torn + b"\n")
                    os.ftruncate(fd, keep)
            view = memoryview(line)
            while view:
                n = os.write(fd, view)
                view = view[n:]
            if SAFETY.fsync:
                os.fsync(fd)
        finally:
            os.close(fd)

    def _journal_size(self) -> int:
        try:
            return os.stat(self.root / JOURNAL).st_size
        except FileNotFoundError:
            return 0

    @staticmethod
    def _keep(path: Path) -> Path | bytes | None:
        """Keep the version a save replaces until the save is complete: a hard link (it needs no free
        space to put back, which matters when the disk is full), or the bytes where links fail. The
        link is named as a temporary file, so recover() removes one left by a killed process."""
        if not path.exists():
            return None
        keep = path.parent / f".{path.name}{_TMP_MARK}keep-{os.getpid()}-{secrets.token_hex(4)}"
        try:
            os.link(path, keep)
            return keep
        except OSError:
            return path.read_bytes()

    @staticmethod
    def _forget(kept: list[tuple[Path, Path | bytes | None]]) -> None:
        for _, keep in kept:
            if isinstance(keep, Path):
                keep.unlink(missing_ok=True)

    def _undo(self, kept: list[tuple[Path, Path | bytes | None]], journal_size: int) -> None:
        """After a save failed past its rename (a folder fsync, the journal append): put the files and
        the journal back as they were, so that an error reported to the user means nothing changed."""
        for path, keep in kept:
            try:
                if keep is None:
                    path.unlink(missing_ok=True)
                elif isinstance(keep, Path):
                    if path.exists() and os.path.samefile(keep, path):
                        keep.unlink()  # failed before the rename; rename() of two links is a no-op
                    else:
                        os.replace(keep, path)
                elif not path.is_file() or path.read_bytes() != keep:
                    atomic_write(path, keep)
            except OSError:
                pass  # the original error is raised; a disk this broken is reported by the next check
        try:
            if self._journal_size() > journal_size:
                os.truncate(self.root / JOURNAL, journal_size)
        except OSError:
            pass

    def save(self, kind: str, record: dict, *, expected_revision: int | None, reason: str | None = None,
             action: str | None = None) -> dict:
        """Save a record if the revision on disk is ``expected_revision`` (None: must not exist yet).

        Returns the saved record with its raised revision. Raises ConflictError, carrying both
        versions, when someone else saved first; nothing is written then.
        """
        self.require(ACTION_OF_KIND[kind])
        ident = check_id(record.get("id") if kind != "releases" else record.get("version"))
        path = self.path(kind, ident)
        with self.lock():
            old = self._checked(path, ident) if path.exists() else None
            found = int(old.get("revision", 0)) if old else 0
            want = expected_revision or 0
            if old is None and expected_revision not in (None, 0):
                raise ConflictError(f"{kind}/{ident}", want, 0, None, record)
            if old is not None and found != want:
                raise ConflictError(f"{kind}/{ident}", want, found, old, record)
            new = dict(record)
            if kind != "releases":
                new["revision"] = found + 1
            kept = [(path, self._keep(path))]
            size = self._journal_size()
            try:
                atomic_write(path, jsonio.dumps(new))
                changes = field_changes(old, new)
                self.append_journal(action or ("create" if old is None else "update"), f"{kind}/{ident}",
                                    revision=new.get("revision", 1), changes=changes, reason=reason,
                                    _locked=True)
            except BaseException:
                self._undo(kept, size)
                raise
            self._forget(kept)
        return new

    def save_many(self, kind: str, records: Iterable[tuple[dict, int | None]], *, reason: str | None,
                  action: str = "import") -> list[dict]:
        """Save several records all or nothing: every revision is checked before anything is written,
        all temporary files are written before the first rename."""
        self.require(ACTION_OF_KIND[kind])
        items = list(records)
        with self.lock():
            plans = []
            for record, expected in items:
                ident = check_id(record.get("id"))
                path = self.path(kind, ident)
                old = self._checked(path, ident) if path.exists() else None
                found = int(old.get("revision", 0)) if old else 0
                if (old is None and expected not in (None, 0)) or (old is not None and found != (expected or 0)):
                    raise ConflictError(f"{kind}/{ident}", expected or 0, found, old, record)
                new = dict(record, revision=found + 1)
                plans.append((path, old, new))
            staged: list[tuple[Path, Path]] = []
            kept = [(p, self._keep(p)) for p, _, _ in plans]
            size = self._journal_size()
            try:
                for path, _old, new in plans:
                    tmp = path.parent / f".{path.name}{_TMP_MARK}{os.getpid()}-{secrets.token_hex(4)}"
                    staged.append((tmp, path))
                    atomic_write(tmp, jsonio.dumps(new))  # fsynced under its own temporary name
                    if _old is not None:  # keep the mode of the file it replaces, as save() does
                        os.chmod(tmp, path.stat().st_mode & 0o7777)
                for tmp, path in staged:
                    os.replace(tmp, path)
                if SAFETY.fsync and staged:
                    _fsync_dir(staged[0][1].parent)
                for path, old, new in plans:
                    self.append_journal(action if old is None else "update", f"{kind}/{path.stem}",
                                        revision=new["revision"], changes=field_changes(old, new),
                                        reason=reason, _locked=True)
            except BaseException:
                for tmp, _ in staged:
                    tmp.unlink(missing_ok=True)
                self._undo(kept, size)
                raise
            self._forget(kept)
        return [new for _, _, new in plans]

    def delete(self, kind: str, ident: str, *, expected_revision: int, reason: str | None = None) -> None:
        self.require(ACTION_OF_KIND[kind])
        path = self.path(kind, ident)
        with self.lock():
            if not path.exists():
                raise NotFoundError(kind, ident)
            old = self._checked(path, ident)
            found = int(old.get("revision", 0))
            if found != expected_revision:
                raise ConflictError(f"{kind}/{ident}", expected_revision, found, old, None)
            kept = [(path, self._keep(path))]
            size = self._journal_size()
            try:
                path.unlink()
                if SAFETY.fsync:
                    _fsync_dir(path.parent)
                self.append_journal("delete", f"{kind}/{ident}", revision=found,
                                    changes=field_changes(old, None), reason=reason, _locked=True)
            except BaseException:
                self._undo(kept, size)
                raise
            self._forget(kept)

    def save_meta(self, meta: dict, reason: str | None = None) -> None:
        self.require("edit")
        with self.lock():
            old = jsonio.read(self.root / "dataset.json")
            atomic_write(self.root / "dataset.json", jsonio.dumps(meta))
            self.append_journal("update", "dataset", changes=field_changes(old, meta), reason=reason,
                                _locked=True)
        self.meta = meta

    def stamp(self) -> tuple:
        """A cheap fingerprint of the folder (mtimes and sizes) to notice other users' changes."""
        parts = []
        for kind in ("species", "sources", "reactions", "flags", "releases"):
            try:
                st = os.stat(self.root / kind)
                parts.append((st.st_mtime_ns, st.st_nlink))
            except OSError:
                parts.append(None)
        try:
            st = os.stat(self.root / JOURNAL)
            parts.append((st.st_mtime_ns, st.st_size))
        except OSError:
            parts.append(None)
        return tuple(parts)


def iter_kinds() -> Iterator[str]:
    yield from KINDS
