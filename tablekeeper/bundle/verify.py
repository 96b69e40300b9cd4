"""Verification of a release bundle, folder or ``.tar.gz``: every damage is found and reported.

A bundle is intact when the folder holds exactly the files of a bundle (plain files, no links); the
descriptor is canonical JSON, valid against ``schemas/datapackage.schema.json`` and matches its own
descriptor hash; it lists exactly the bundle's resources with the Table Schemas a release writes;
every file has the byte count and sha256 the descriptor gives; every CSV has the right header, cells
of the right types, unique primary keys, foreign keys that resolve, and the canonical bytes; and, for
an archive, the archive checks of ``archive.py`` pass. Nothing stops at the first problem.
"""

from __future__ import annotations

import os
import stat
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .. import jsonio
from ..errors import DamagedFileError, InputError
from . import descriptor as _desc
from .archive import Opened, opened
from .tables import BUNDLE_FILES, CHANGES, DESCRIPTOR, TABLE_BY_NAME, TABLES, Row, decode_rows

MAX_DESCRIPTOR_BYTES = 64 << 20
_REFERENCED = {r for t in TABLES for _, r, _ in t.foreign_keys}


@dataclass
class VerifyReport:
    """What verification found. ``damages`` is empty for an intact bundle."""

    path: str
    damages: list[str] = field(default_factory=list)
    descriptor: dict[str, Any] | None = None
    files: dict[str, int] = field(default_factory=dict)  # file → bytes, of the files that were read
    rows: dict[str, list[Row]] = field(default_factory=dict)

    @property
    def ok(self) -> bool:
        return not self.damages

    @property
    def version(self) -> str | None:
        return self.descriptor.get("version") if isinstance(self.descriptor, dict) else None

    @property
    def name(self) -> str | None:
        return self.descriptor.get("name") if isinstance(self.descriptor, dict) else None


def is_archive(path: Path) -> bool:
    return path.name.endswith((".tar.gz", ".tgz"))


def verify_folder(folder: Path, *, keep: tuple[str, ...] = (), label: str | None = None,
                  light: bool = False) -> VerifyReport:
    """Verify a bundle folder; the rows of the tables named in ``keep`` are returned typed.

    ``light`` is for a bundle whose archive digest was just matched against a release record: every
    hash is still compared, but only the tables in ``keep`` (and those they reference) are parsed, and
    their canonical bytes are not rebuilt.
    """
    report = VerifyReport(path=label or str(folder))
    dmg = report.damages.append
    try:
        entries = sorted(os.listdir(folder))
    except OSError as exc:
        dmg(f"{folder}: cannot be read ({exc.strerror})")
        return report
    present: set[str] = set()
    for entry in entries:
        st = os.lstat(folder / entry)
        if entry not in BUNDLE_FILES:
            dmg(f"{entry}: is not a file of a bundle")
        elif not stat.S_ISREG(st.st_mode):
            dmg(f"{entry}: is not a plain file (a link or a folder)")
        else:
            present.add(entry)
    for name in BUNDLE_FILES:
        if name not in entries:
            dmg(f"{name}: is missing")

    desc = _read_descriptor(folder, present, dmg)
    report.descriptor = desc
    if desc is None:
        return report
    report.files[DESCRIPTOR] = (folder / DESCRIPTOR).stat().st_size

    by_path: dict[str, dict] = {}
    resources = desc.get("resources") if isinstance(desc.get("resources"), list) else []
    for res in resources:
        path = res.get("path") if isinstance(res, dict) else None
        if path not in BUNDLE_FILES or path == DESCRIPTOR:
            dmg(f"{DESCRIPTOR}: lists a resource {str(path)[:80]!r} that is not a file of a bundle")
            continue  # never open a path the descriptor invents
        if path in by_path:
            dmg(f"{DESCRIPTOR}: lists {path} twice")
        by_path[path] = res
    for name in BUNDLE_FILES[1:]:
        if name not in by_path:
            dmg(f"{DESCRIPTOR}: does not list {name}")

    id_sets: dict[str, set] = {}
    refs: list[tuple[str, str, set, str, str]] = []
    for name in BUNDLE_FILES[1:]:
        res = by_path.get(name)
        if name not in present:
            continue
        data = (folder / name).read_bytes()
        report.files[name] = len(data)
        if res is not None:
            if res.get("bytes") != len(data):
                dmg(f"{name}: is {len(data)} bytes, the descriptor says {res.get('bytes')}")
            if res.get("hash") != _desc.sha256(data):
                dmg(f"{name}: its sha256 does not match the descriptor (the file was changed)")
        if name == CHANGES:
            try:
                data.decode("utf-8")
            except UnicodeDecodeError as exc:
                dmg(f"{name}: is not UTF-8 text (byte {exc.start})")
            continue
        table = TABLE_BY_NAME[name[:-4]]
        if res is not None and res.get("schema") != table.table_schema():
            dmg(f"{name}: the descriptor's Table Schema is not the one this bundle format defines")
        # Referenced tables (species, sources) are small; their rows are kept for the foreign keys.
        referenced = table.name in _REFERENCED
        if light and table.name not in keep and not referenced:
            continue
        rows, problems, fk_values = decode_rows(table, data, keep=table.name in keep or referenced,
                                                canonical=not light)
        for p in problems:
            dmg(f"{name}: {p}")
        if table.name in keep:
            report.rows[table.name] = rows
        if referenced:
            id_sets[table.name] = {r[table.primary_key[0]] for r in rows}
        for fields, target, target_fields in table.foreign_keys:
            refs.append((name, fields[0], fk_values[fields[0]], target, target_fields[0]))
    for name, column, values, target, _ in refs:
        if target not in id_sets or (light and name[:-4] not in keep):
            continue
        missing = sorted(str(v) for v in values - id_sets[target])
        if missing:
            shown = ", ".join(missing[:5]) + (f" and {len(missing) - 5} more" if len(missing) > 5 else "")
            dmg(f"{name}: column {column} names {shown}, not in {TABLE_BY_NAME[target].path}")
    return report


def _read_descriptor(folder: Path, present: set[str], dmg) -> dict | None:
    if DESCRIPTOR not in present:
        return None
    path = folder / DESCRIPTOR
    size = path.stat().st_size
    if size > MAX_DESCRIPTOR_BYTES:
        dmg(f"{DESCRIPTOR}: is {size} bytes, more than a descriptor may be")
        return None
    raw = path.read_bytes()
    try:
        desc = jsonio.loads(raw, file=DESCRIPTOR)
    except DamagedFileError as exc:
        dmg(str(exc))
        return None
    if not isinstance(desc, dict):
        dmg(f"{DESCRIPTOR}: does not hold a JSON object")
        return None
    if jsonio.dumps(desc) != raw:
        dmg(f"{DESCRIPTOR}: is not in the canonical JSON form a release writes (the file was changed)")
    for err in _desc.schema_errors(desc):
        dmg(f"{DESCRIPTOR} {err}")
    if desc.get(_desc.HASH_KEY) != _desc.descriptor_hash(desc):
        dmg(f"{DESCRIPTOR}: its content does not match {_desc.HASH_KEY} (the descriptor was changed)")
    return desc


def _created_epoch(desc: dict | None) -> int | None:
    import datetime as dt

    created = desc.get("created") if isinstance(desc, dict) else None
    try:
        return int(dt.datetime.fromisoformat(str(created).replace("Z", "+00:00")).timestamp())
    except ValueError:
        return None


def verify(path: str | os.PathLike[str], *, keep: tuple[str, ...] = (), light: bool = False) -> VerifyReport:
    """Verify a bundle folder or archive. Raises InputError only when the path is neither."""
    p = Path(path)
    if p.is_dir():
        if not any((p / f).exists() for f in BUNDLE_FILES):
            raise InputError("is not a bundle folder (it holds none of the files of a bundle)", file=str(p))
        return verify_folder(p, keep=keep, light=light)
    if p.is_file() and is_archive(p):
        with opened(p) as op:
            return verify_opened(p, op, keep, light=light)
    raise InputError("is neither a bundle folder nor a bundle archive (.tar.gz)", file=str(p))


def verify_opened(p: Path, op: Opened, keep: tuple[str, ...] = (), *, light: bool = False) -> VerifyReport:
    """Verify an archive already opened with ``archive.opened``."""
    if op.folder is None:
        return VerifyReport(path=str(p), damages=list(op.problems))
    report = verify_folder(op.folder, keep=keep, label=str(p), light=light)
    report.damages[:0] = op.problems
    desc = report.descriptor
    if isinstance(desc, dict):
        expected = f"{desc.get('name')}-{desc.get('version')}"
        if op.top != expected:
            report.damages.append(f"{p.name}: its folder is {op.top!r}, the descriptor names {expected!r}")
        if _created_epoch(desc) != op.mtime:
            report.damages.append(f"{p.name}: member times are not the release time of the descriptor")
    return report


def load_verified(path: str | os.PathLike[str], keep: tuple[str, ...], *,
                  light: bool = False) -> VerifyReport:
    """Verify and return the typed rows of ``keep``; DamagedFileError when any damage was found."""
    return raise_if_damaged(verify(path, keep=keep, light=light))


def raise_if_damaged(report: VerifyReport) -> VerifyReport:
    """The report itself when intact, else DamagedFileError naming the first damage."""
    path = report.path
    if not report.ok:
        first = report.damages[0]
        more = f" (and {len(report.damages) - 1} more problems; run tablekeeper verify)" \
            if len(report.damages) > 1 else ""
        raise DamagedFileError(f"is a damaged bundle: {first}{more}", file=str(path))
    return report
