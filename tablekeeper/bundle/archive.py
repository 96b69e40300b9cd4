"""The bundle archive ``<name>-<version>.tar.gz``: written byte for byte reproducibly, opened safely.

Writing: a ustar archive of the bundle folder, members in a fixed order (the folder, then
``datapackage.json``, the CSV files, ``CHANGES.md``), every member with the release time as mtime, uid
and gid 0, empty user and group names, mode 0644 (files) or 0755 (the folder); gzip with header
mtime 0 and no file name. The same files and release time give the same bytes.

Opening: the archive is decompressed to a private temporary file (with a size cap), every member is
inspected before anything is extracted, and a member that is not a plain file or folder of the bundle
(``..``, an absolute path, a link, a device, a FIFO, a duplicate, an unexpected name) refuses the whole
archive: nothing is extracted. What passes is extracted with tarfile's ``data`` filter as a second
guard. Finally the tar stream must equal the canonical one rebuilt from the extracted files, so a
changed byte in a header or in padding is noticed too.
"""

from __future__ import annotations

import gzip
import hashlib
import io
import os
import shutil
import tarfile
import tempfile
import zlib
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import BinaryIO

from .tables import BUNDLE_FILES

#: The ten bytes of the gzip header we write: magic, deflate, no flags, mtime 0, XFL 0, OS unknown.
GZIP_HEADER = b"\x1f\x8b\x08\x00\x00\x00\x00\x00\x00\xff"
COMPRESS_LEVEL = 6
#: Largest decompressed archive opened, bytes (a gzip bomb stops here).
MAX_TAR_BYTES = 8 << 30
_CHUNK = 1 << 20
#: More members than this is no bundle (it has nine); the headers are not even all read.
MAX_MEMBERS = 64


def _infos(folder: Path, top: str, mtime: int) -> Iterator[tuple[tarfile.TarInfo, Path | None]]:
    d = tarfile.TarInfo(top)
    d.type = tarfile.DIRTYPE
    d.mode = 0o755
    yield d, None
    for name in BUNDLE_FILES:
        path = folder / name
        info = tarfile.TarInfo(f"{top}/{name}")
        info.size = path.stat().st_size
        info.mode = 0o644
        yield info, path


def _write_tar(folder: Path, top: str, mtime: int, out: BinaryIO) -> None:
    with tarfile.open(fileobj=out, mode="w|", format=tarfile.USTAR_FORMAT) as tar:
        for info, path in _infos(folder, top, mtime):
            info.mtime = mtime
            info.uid = info.gid = 0
            info.uname = info.gname = ""
            if path is None:
                tar.addfile(info)
            else:
                with open(path, "rb") as fh:
                    tar.addfile(info, fh)


def write_archive(folder: Path, top: str, mtime: int, dest: Path) -> None:
    """Write the archive of a bundle folder to ``dest`` (a new file), fsynced."""
    with open(dest, "xb") as raw:
        with gzip.GzipFile(filename="", mode="wb", fileobj=raw, mtime=0, compresslevel=COMPRESS_LEVEL) as gz:
            _write_tar(folder, top, mtime, gz)
        raw.flush()
        os.fsync(raw.fileno())


class _Hasher(io.RawIOBase):
    """A write-only sink that hashes what it is given."""

    def __init__(self) -> None:
        self.h = hashlib.sha256()

    def writable(self) -> bool:
        return True

    def write(self, b) -> int:  # type: ignore[override]
        self.h.update(b)
        return len(b)


def canonical_tar_digest(folder: Path, top: str, mtime: int) -> bytes:
    sink = _Hasher()
    _write_tar(folder, top, mtime, sink)  # type: ignore[arg-type]
    return sink.h.digest()


@dataclass
class Opened:
    """An archive opened into a temporary folder (``folder`` is None when it was refused)."""

    folder: Path | None
    top: str | None
    mtime: int | None
    problems: list[str] = field(default_factory=list)


def _member_problem(m: tarfile.TarInfo, top: str | None) -> str | None:
    name = m.name
    shown = repr(name[:120])
    if name.startswith("/") or (len(name) > 1 and name[1] == ":"):
        return f"member {shown} has an absolute path"
    parts = name.split("/")
    if ".." in parts or "\\" in name:
        return f"member {shown} has a path that leaves the bundle folder"
    if m.issym() or m.islnk():
        return f"member {shown} is a link (to {m.linkname[:120]!r})"
    if m.ischr() or m.isblk():
        return f"member {shown} is a device"
    if m.isfifo():
        return f"member {shown} is a FIFO"
    if not (m.isreg() or m.isdir()):
        return f"member {shown} is not a plain file or folder"
    if m.isdir():
        if len(parts) != 1 or parts[0] in ("", "."):
            return f"member {shown} is a folder other than the bundle folder"
        return None
    if len(parts) != 2 or parts[0] != top or parts[1] not in BUNDLE_FILES:
        return f"member {shown} is not a file of the bundle"
    return None


@contextmanager
def opened(archive: Path) -> Iterator[Opened]:
    """Open a bundle archive into a temporary folder, removed on exit. See the module docstring."""
    tmp = Path(tempfile.mkdtemp(prefix="tablekeeper-bundle-"))
    try:
        yield _open_into(archive, tmp)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def _open_into(archive: Path, tmp: Path) -> Opened:
    name = archive.name
    try:
        with open(archive, "rb") as fh:
            head = fh.read(len(GZIP_HEADER))
    except OSError as exc:
        return Opened(None, None, None, [f"{name}: cannot be read ({exc.strerror})"])
    if head[:2] != GZIP_HEADER[:2]:
        return Opened(None, None, None, [f"{name}: is not a gzip file"])
    problems = []
    if head != GZIP_HEADER:
        problems.append(f"{name}: the gzip header is not the one a release writes (bytes 3 to 10 changed)")
    tar_path = tmp / "bundle.tar"
    digest = hashlib.sha256()
    total = 0
    try:
        with gzip.open(archive, "rb") as src, open(tar_path, "wb") as dst:
            while chunk := src.read(_CHUNK):
                total += len(chunk)
                if total > MAX_TAR_BYTES:
                    return Opened(None, None, None, [f"{name}: decompresses to more than "
                                                     f"{MAX_TAR_BYTES >> 30} GiB; refused"])
                digest.update(chunk)
                dst.write(chunk)
    except (OSError, EOFError, zlib.error) as exc:  # BadGzipFile is an OSError
        return Opened(None, None, None, [*problems, f"{name}: the compressed data is damaged ({exc})"])
    try:
        tar = tarfile.open(tar_path, "r:")
    except tarfile.TarError as exc:
        return Opened(None, None, None, [*problems, f"{name}: is not a tar archive ({exc})"])
    with tar:
        members = []
        try:
            for m in tar:  # read headers one by one: a hostile archive of a million members stops early
                members.append(m)
                if len(members) > MAX_MEMBERS:
                    return Opened(None, None, None, [*problems, f"{name}: holds more members than a bundle "
                                                     "has; refused, nothing was extracted"])
        except tarfile.TarError as exc:
            return Opened(None, None, None, [*problems, f"{name}: the tar data is damaged ({exc})"])
        if not members:
            return Opened(None, None, None, [*problems, f"{name}: the archive is empty"])
        top = members[0].name if members[0].isdir() else members[0].name.split("/")[0]
        refused = []
        seen: set[str] = set()
        for m in members:
            why = _member_problem(m, top)
            if why is None and m.name in seen:
                why = f"member {m.name[:120]!r} appears twice"
            seen.add(m.name)
            if why:
                refused.append(f"{name}: {why}; refused")
        if refused:
            return Opened(None, None, None, [*problems, *refused,
                                             f"{name}: nothing was extracted from this archive"])
        if not members[0].isdir():
            problems.append(f"{name}: the first member is not the bundle folder")
        mtimes = {int(m.mtime) for m in members}
        out = tmp / "x"
        out.mkdir()
        try:
            tar.extractall(out, members=members, filter="data")
        except (tarfile.TarError, OSError) as exc:
            return Opened(None, None, None, [*problems, f"{name}: cannot be extracted ({exc})"])
    folder = out / top
    if not folder.is_dir():
        return Opened(None, None, None, [*problems, f"{name}: holds no bundle folder"])
    mtime = min(mtimes)
    if len(mtimes) != 1:
        problems.append(f"{name}: members carry different times; a release gives all the release time")
    if all((folder / f).is_file() for f in BUNDLE_FILES) and len(members) == len(BUNDLE_FILES) + 1:
        if canonical_tar_digest(folder, top, mtime) != digest.digest():
            problems.append(f"{name}: the tar data is not what a release writes for these files "
                            "(a header, the order or the padding changed)")
    tar_path.unlink(missing_ok=True)
    return Opened(folder, top, mtime, problems)
