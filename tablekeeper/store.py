"""The dataset folder on disk: load, list, atomic saves, revisions, locking, roles and the journal.

Layout (DESIGN.md section 3)::

    <dataset>/dataset.json, species/, sources/, reactions/, flags/, releases/, journal.jsonl

Every save takes the dataset lock (``.tablekeeper.lock``, through ``filelock``), compares the revision
on disk with the one the editor loaded, and then writes ahead: (1) the new version goes to a temporary
file in the same folder, flushed, fsynced and given the mode of the file it replaces; (2) its journal
line is appended and fsynced; (3) the temporary file is renamed over the target; (4) the folder is
fsynced; all before the lock is released. A delete journals first and unlinks after. The journal is
the audit trail, so the journal line comes before the change it records: a process killed at any
moment leaves the old or the new record and a journal that agrees with it once ``recover()`` (run at
every open, and for one record before each save of it) has renamed into place a staged save whose
journal line exists, carried out a journaled delete, and removed every other temporary file. A save
that fails with an error takes its journal line back and leaves the previous file as it was. A torn
last journal line is set aside in ``journal.torn`` instead of being loaded.
"""

from __future__ import annotations

import datetime as _dt
import getpass
import os
import re
import secrets
import stat
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

# A slug, and not a name Windows reserves for a device (con, nul, com1, ...): a dataset is shared through
# git, and such a file name breaks a checkout there.
SLUG = re.compile(r"^(?!(?:con|prn|aux|nul|com[0-9]|lpt[0-9])(?:\.|\Z))[a-z0-9][a-z0-9._-]{0,63}\Z")
KINDS = ("species", "sources", "reactions", "flags", "releases")
LOCK_NAME = ".tablekeeper.lock"
JOURNAL = "journal.jsonl"
TORN = "journal.torn"
_TMP_MARK = ".tmp-"
#: Tags after ``_TMP_MARK``: a save staged under the lock, the marker of a delete in progress, and
#: the kept previous version of a record (``keep-`` prefix).
_PENDING = "pending"
_DELETING = "delete"
_KEEP = "keep-"

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
    #: Write ahead: the journal line before the rename (False: after it, which loses the journal line of
    #: a save killed between the two).
    journal_first: bool = True


SAFETY = Safety()


def check_id(ident: Any, what: str = "identifier") -> str:
    """Return ``ident`` if it is a safe slug, else raise IdentifierError (before it reaches a path)."""
    if not isinstance(ident, str) or not SLUG.match(ident) or ident in (".", ".."):
        shown = repr(ident)[:80]
        raise IdentifierError(f"{shown} is not a valid {what}: use 1 to 64 of a-z, 0-9, '.', '_', '-', "
                              "starting with a letter or digit and not a device name such as con or nul",
                              field="id")
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


def _mode_for(path: Path) -> int:
    """The mode a new version of ``path`` gets: the mode of the file it replaces, else a new file's."""
    try:
        return path.stat().st_mode & 0o7777
    except FileNotFoundError:
        return _new_file_mode(path.parent)


def _temp_name(path: Path) -> Path:
    return path.parent / f".{path.name}{_TMP_MARK}{os.getpid()}-{secrets.token_hex(4)}"


def _pending_path(path: Path) -> Path:
    """Where a save stages the new version of ``path``. A fixed name under the lock, so that the next
    writer of the record finds a killed save with one stat; a unique name without the lock (control
    runs only), where two writers would otherwise collide."""
    if SAFETY.lock:
        return path.parent / f".{path.name}{_TMP_MARK}{_PENDING}"
    return _temp_name(path)


def _delete_marker(path: Path) -> Path:
    return path.parent / f".{path.name}{_TMP_MARK}{_DELETING}"


def _write_temp(tmp: Path, data: bytes, mode: int) -> None:
    """Create ``tmp`` (never an existing file or link: O_EXCL), write ``data``, fsync it, give it
    ``mode``. On any error the temporary file is removed and the error raised."""
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
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def _last_entry(raw: bytes, target: str) -> dict | None:
    """The last whole journal entry for ``target`` in the journal bytes ``raw`` (a torn or damaged line
    is not an entry). Scans from the end; lines that do not mention the target are not parsed."""
    needle = target.encode()
    for line in reversed(raw.split(b"\n")):
        if needle not in line:
            continue
        try:
            obj = orjson.loads(line)
        except orjson.JSONDecodeError:
            continue
        if isinstance(obj, dict) and obj.get("target") == target:
            return obj
    return None


def atomic_write(path: Path, data: bytes) -> None:
    """Replace ``path`` with ``data`` atomically: temp file, fsync, mode, rename, fsync folder.

    An error at any step leaves the previous file untouched and removes the temporary file.
    """
    folder = path.parent
    if not SAFETY.atomic:  # control runs of the reliability tests only
        with open(path, "wb") as fh:
            fh.write(data)
        return
    tmp = _temp_name(path)
    _write_temp(tmp, data, _mode_for(path))
    try:
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
        """Finish or discard what killed processes left; returns the temporary files found.

        Done under the lock, so never work in progress. A staged save whose journal line exists is
        renamed into place, a journaled delete is carried out, every other temporary file (a save killed
        before its journal line, a kept previous version, a torn temporary file) is removed. Afterwards
        the journal and the records agree.
        """
        leftovers = [p for kind in KINDS if (self.root / kind).is_dir()
                     for p in (self.root / kind).iterdir() if _TMP_MARK in p.name]
        leftovers += [p for p in self.root.iterdir() if _TMP_MARK in p.name]
        if not leftovers:
            return []
        try:
            with self._lock.acquire(timeout=2):
                self._settle_files(sorted(leftovers))
        except (filelock.Timeout, OSError):
            return []  # read-only or busy: leave them, the next writer's open will do it
        return leftovers

    def _settle(self, path: Path) -> None:
        """Before a save or delete of one record (under the lock): finish or discard a killed save or
        delete of the same record. Another process may have been killed after this one opened the
        dataset, and its journal line must not be followed by a second save of the same revision. Two
        stats when there is nothing to do."""
        if SAFETY.lock:
            found = [p for p in (path.parent / f".{path.name}{_TMP_MARK}{_PENDING}", _delete_marker(path))
                     if os.path.lexists(p)]
            if found:
                self._settle_files(found)

    def _settle_files(self, leftovers: list[Path]) -> None:
        """Rename, carry out or remove each temporary file (see ``recover``). Under the lock."""
        raw: bytes | None = None
        touched: set[Path] = set()
        for p in leftovers:
            try:
                regular = stat.S_ISREG(os.lstat(p).st_mode)
            except FileNotFoundError:
                continue
            kind = p.parent.name if p.parent.parent == self.root else ""
            target_name, _, tag = p.name[1:].partition(_TMP_MARK)
            ident = target_name[:-5] if target_name.endswith(".json") else ""
            # Only a regular file named for a record can finish a save; dataset.json is saved in the
            # plain order (rename, then journal), so its temporary files are always removed.
            if kind in KINDS and regular and p.name.startswith(".") and SLUG.match(ident) \
                    and not tag.startswith(_KEEP):
                if raw is None:
                    try:
                        raw = (self.root / JOURNAL).read_bytes()
                    except FileNotFoundError:
                        raw = b""
                target = p.parent / target_name
                last = _last_entry(raw, f"{kind}/{ident}")
                if tag == _DELETING:
                    if self._journaled_delete(ident, target, last):
                        target.unlink()
                        touched.add(p.parent)
                elif self._journaled_save(kind, ident, target, p, last):
                    os.replace(p, target)
                    touched.add(p.parent)
                    continue
            p.unlink(missing_ok=True)
        if SAFETY.fsync:
            for folder in touched:
                _fsync_dir(folder)

    def _journaled_save(self, kind: str, ident: str, target: Path, tmp: Path, last: dict | None) -> bool:
        """True when ``tmp`` holds the record one revision past ``target`` (revision 1 where there is no
        target) and the journal's last entry for the record is that save: it was accepted, only its
        rename is missing."""
        if last is None or last.get("action") == "delete":
            return False
        try:
            new = jsonio.read(tmp)
            old = self._checked(target, ident) if target.exists() else None
        except (DamagedFileError, OSError):
            return False
        if not isinstance(new, dict) or new.get("version" if kind == "releases" else "id") != ident:
            return False
        if kind == "releases":  # releases carry no revision and are never replaced
            return old is None and last.get("revision") == 1
        found = old.get("revision", 0) if old else 0
        rev = new.get("revision")
        return isinstance(rev, int) and isinstance(found, int) and rev == found + 1 \
            and last.get("revision") == rev

    def _journaled_delete(self, ident: str, target: Path, last: dict | None) -> bool:
        """True when the journal's last entry for the record is a delete of the revision on disk: the
        delete was accepted, only the unlink is missing."""
        if last is None or last.get("action") != "delete" or not target.exists():
            return False
        try:
            old = self._checked(target, ident)
        except (DamagedFileError, OSError):
            return False
        return last.get("revision") == old.get("revision", 0)

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

    def _entry(self, action: str, target: str, *, revision: int | None = None,
               changes: list | None = None, reason: str | None = None) -> dict[str, Any]:
        entry: dict[str, Any] = {"time": utc_now(), "user": self.user, "action": action, "target": target}
        if revision is not None:
            entry["revision"] = revision
        if changes:
            entry["changes"] = changes
        if reason:
            entry["reason"] = reason
        return entry

    def append_journal(self, action: str, target: str, *, revision: int | None = None,
                       changes: list | None = None, reason: str | None = None,
                       _locked: bool = False) -> dict:
        entry = self._entry(action, target, revision=revision, changes=changes, reason=reason)
        if _locked:
            self._append_line(jsonio.dumps_line(entry))
        else:
            with self.lock():
                self._append_line(jsonio.dumps_line(entry))
        return entry

    def _append_line(self, line: bytes) -> int:
        """Append ``line`` (one or more whole entries) with one write and one fsync; return the offset
        it starts at, so that a save failing later can take it back. A failed write or fsync takes it
        back here: a reported failure leaves no partial line."""
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
                    size += 1
                else:
                    # A torn last line from a killed writer: set it aside, never glue onto it.
                    with open(self.root / TORN, "ab") as fh:
                        fh.write(torn + b"\n")
                    os.ftruncate(fd, keep)
                    size = keep
            try:
                view = memoryview(line)
                while view:
                    n = os.write(fd, view)
                    view = view[n:]
                if SAFETY.fsync:
                    os.fsync(fd)
            except BaseException:
                try:
                    os.ftruncate(fd, size)
                except OSError:
                    pass  # the original error is raised; the next append sets a partial line aside
                raise
        finally:
            os.close(fd)
        return size

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
                try:
                    keep.unlink(missing_ok=True)
                except OSError:
                    pass  # the change is complete; recover() removes the kept link at the next open

    def _rollback(self, staged: list[Path], kept: list[tuple[Path, Path | bytes | None]],
                  journal_start: int | None) -> None:
        """After a save or delete failed with an error: take its journal lines back (the journal first:
        should a broken disk refuse the rest, a staged file with its journal line is still finished by
        recover(), never a journal line left for a change that is gone), remove its temporary files
        and put back the files it replaced, so that an error reported to the user means nothing
        changed."""
        if journal_start is not None:
            try:
                if self._journal_size() > journal_start:
                    os.truncate(self.root / JOURNAL, journal_start)
            except OSError:
                return
        for tmp in staged:
            try:
                tmp.unlink(missing_ok=True)
            except OSError:
                pass
        self._undo(kept)

    def _undo(self, kept: list[tuple[Path, Path | bytes | None]]) -> None:
        """Put back the files a failed save replaced (or remove the ones it created)."""
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

    def _commit(self, writes: list[tuple[Path, bytes]], lines: bytes) -> None:
        """Write ahead, under the lock: stage every new version (written and fsynced under a temporary
        name), append all their journal lines with one write and one fsync, rename them into place,
        fsync the folder. A kill leaves either staged files without journal lines, which recover()
        removes, or journal lines and staged files, which recover() renames into place. An error leaves
        the files and the journal as they were."""
        if not SAFETY.atomic:  # control runs only: write in place, then journal
            for path, data in writes:
                atomic_write(path, data)
            self._append_line(lines)
            return
        kept = [(path, self._keep(path)) for path, _ in writes]
        staged: list[tuple[Path, Path]] = []
        start: int | None = None
        try:
            for path, data in writes:
                tmp = _pending_path(path)
                _write_temp(tmp, data, _mode_for(path))
                staged.append((tmp, path))
            if SAFETY.journal_first:
                start = self._append_line(lines)
            for tmp, path in staged:
                os.replace(tmp, path)
            if SAFETY.fsync:
                for folder in sorted({path.parent for path, _ in writes}):
                    _fsync_dir(folder)
            if not SAFETY.journal_first:  # control runs only: the order that loses journal lines
                start = self._append_line(lines)
        except BaseException:
            self._rollback([tmp for tmp, _ in staged], kept, start)
            raise
        self._forget(kept)

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
            self._settle(path)
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
            entry = self._entry(action or ("create" if old is None else "update"), f"{kind}/{ident}",
                                revision=new.get("revision", 1), changes=field_changes(old, new),
                                reason=reason)
            self._commit([(path, jsonio.dumps(new))], jsonio.dumps_line(entry))
        return new

    def save_many(self, kind: str, records: Iterable[tuple[dict, int | None]], *, reason: str | None,
                  action: str = "import") -> list[dict]:
        """Save several records all or nothing: every revision is checked before anything is written,
        all temporary files are written, then all journal lines appended in one write, before the first
        rename. A record may appear once: two saves of one revision would journal it twice."""
        self.require(ACTION_OF_KIND[kind])
        items = list(records)
        with self.lock():
            plans = []
            seen: set[str] = set()
            for record, expected in items:
                ident = check_id(record.get("id"))
                if ident in seen:
                    raise InputError("appears twice in one import; merge the two rows", record=ident)
                seen.add(ident)
                path = self.path(kind, ident)
                self._settle(path)
                old = self._checked(path, ident) if path.exists() else None
                found = int(old.get("revision", 0)) if old else 0
                if (old is None and expected not in (None, 0)) or (old is not None and found != (expected or 0)):
                    raise ConflictError(f"{kind}/{ident}", expected or 0, found, old, record)
                new = dict(record, revision=found + 1)
                plans.append((path, old, new))
            if plans:
                lines = b"".join(
                    jsonio.dumps_line(self._entry(action if old is None else "update", f"{kind}/{path.stem}",
                                                  revision=new["revision"], changes=field_changes(old, new),
                                                  reason=reason))
                    for path, old, new in plans)
                self._commit([(path, jsonio.dumps(new)) for path, _, new in plans], lines)
        return [new for _, _, new in plans]

    def delete(self, kind: str, ident: str, *, expected_revision: int, reason: str | None = None) -> None:
        self.require(ACTION_OF_KIND[kind])
        path = self.path(kind, ident)
        with self.lock():
            self._settle(path)
            if not path.exists():
                raise NotFoundError(kind, ident)
            old = self._checked(path, ident)
            found = int(old.get("revision", 0))
            if found != expected_revision:
                raise ConflictError(f"{kind}/{ident}", expected_revision, found, old, None)
            line = jsonio.dumps_line(self._entry("delete", f"{kind}/{ident}", revision=found,
                                                 changes=field_changes(old, None), reason=reason))
            kept = [(path, self._keep(path))]
            marker = _delete_marker(path)
            staged: list[Path] = []
            start: int | None = None
            try:
                if SAFETY.journal_first:
                    # Journal first, unlink after. The marker lets the next writer of this record (and
                    # recover()) find a delete killed between the two with one stat.
                    os.close(os.open(marker, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600))
                    staged.append(marker)
                    start = self._append_line(line)
                path.unlink()
                if SAFETY.fsync:
                    _fsync_dir(path.parent)
                if not SAFETY.journal_first:  # control runs only
                    start = self._append_line(line)
            except BaseException:
                self._rollback(staged, kept, start)
                raise
            try:
                marker.unlink(missing_ok=True)
            except OSError:
                pass  # done and journaled; recover() removes the marker of a record that is gone
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
