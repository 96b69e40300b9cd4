"""verify and read: every changed byte is reported; hostile archives are refused and never extracted."""

from __future__ import annotations

import io
import shutil
import tarfile
from pathlib import Path

import pytest

from tablekeeper.bundle import BUNDLE_FILES, read, release, verify
from tablekeeper.errors import DamagedFileError, InputError


@pytest.fixture
def bundle(clean_dataset, tmp_path, fixed_time):
    return release(clean_dataset, "1.0.0", out=tmp_path / "out")


def _flip(path: Path, pos: int) -> bytes:
    data = path.read_bytes()
    changed = bytearray(data)
    # Keep ASCII ASCII (a digit stays a digit), so that the change is as quiet as a byte change can be.
    c = changed[pos]
    changed[pos] = (c + 1) if chr(c) not in "9zZ~\x7f\xff" else (c - 1)
    path.write_bytes(bytes(changed))
    return data


def test_intact_bundle_verifies_as_folder_and_archive(bundle):
    for path in (bundle.folder, bundle.archive):
        report = verify(path)
        assert report.ok, report.damages
        assert report.name == "keyvalues" and report.version == "1.0.0"
        assert sorted(report.files) == sorted(BUNDLE_FILES)


@pytest.mark.parametrize("where", ["first", "middle", "last"])
def test_every_file_with_one_byte_changed_fails_verify(bundle, where):
    for name in BUNDLE_FILES:
        path = bundle.folder / name
        size = path.stat().st_size
        pos = {"first": 0, "middle": size // 2, "last": size - 2}[where]
        original = _flip(path, pos)
        try:
            report = verify(bundle.folder)
            assert not report.ok, f"{name} changed at byte {pos} but verify found nothing"
            assert any(name in d for d in report.damages), report.damages
        finally:
            path.write_bytes(original)
    assert verify(bundle.folder).ok


def test_a_changed_value_with_a_recomputed_hash_is_still_caught(bundle):
    # Someone edits a value and updates the resource's hash: the descriptor's own hash no longer matches.
    import hashlib
    import json

    values = bundle.folder / "values.csv"
    values.write_text(values.read_text().replace("-110.53", "-111.53"))
    desc_path = bundle.folder / "datapackage.json"
    desc = json.loads(desc_path.read_text())
    for res in desc["resources"]:
        if res["path"] == "values.csv":
            res["hash"] = "sha256:" + hashlib.sha256(values.read_bytes()).hexdigest()
            res["bytes"] = values.stat().st_size
    from tablekeeper import jsonio

    desc_path.write_bytes(jsonio.dumps(desc))
    report = verify(bundle.folder)
    assert any("descriptor_hash" in d for d in report.damages)


@pytest.mark.parametrize("pos", [3, 4, 8, 9, 40, -200, -8, -1])
def test_archive_with_one_byte_changed_fails_verify(bundle, tmp_path, pos):
    copy = tmp_path / "copy.tar.gz"
    shutil.copyfile(bundle.archive, copy)
    size = copy.stat().st_size
    _flip(copy, pos % size)
    report = verify(copy)
    assert not report.ok
    with pytest.raises(DamagedFileError):
        read(copy)


def test_extra_and_missing_files_are_reported(bundle):
    (bundle.folder / "notes.txt").write_text("extra")
    (bundle.folder / "CHANGES.md").unlink()
    damages = verify(bundle.folder).damages
    assert any(d.startswith("notes.txt: is not a file of a bundle") for d in damages)
    assert any(d.startswith("CHANGES.md: is missing") for d in damages)


def test_a_symlink_in_the_folder_is_reported(bundle, tmp_path):
    target = tmp_path / "elsewhere.csv"
    shutil.copyfile(bundle.folder / "sources.csv", target)
    (bundle.folder / "sources.csv").unlink()
    (bundle.folder / "sources.csv").symlink_to(target)
    assert any("not a plain file" in d for d in verify(bundle.folder).damages)


def test_every_damage_is_reported_not_only_the_first(bundle):
    for name in ("species.csv", "values.csv", "sources.csv"):
        _flip(bundle.folder / name, 5)
    damaged = {d.split(":")[0] for d in verify(bundle.folder).damages}
    assert {"species.csv", "values.csv", "sources.csv"} <= damaged


def test_not_a_bundle_is_an_input_error(tmp_path, clean_dataset):
    (tmp_path / "x.txt").write_text("hello")
    with pytest.raises(InputError):
        verify(tmp_path / "x.txt")
    with pytest.raises(InputError, match="not a bundle folder"):
        verify(clean_dataset.root)


def test_a_bundle_without_its_descriptor_is_damaged_not_unknown(bundle):
    (bundle.folder / "datapackage.json").unlink()
    report = verify(bundle.folder)
    assert any(d.startswith("datapackage.json: is missing") for d in report.damages)


# -- hostile archives ---------------------------------------------------------------------------------------

def _archive(tmp_path: Path, bundle, extra: tarfile.TarInfo, data: bytes = b"") -> Path:
    """The intact bundle's members plus one hostile member, as a new .tar.gz."""
    path = tmp_path / "hostile.tar.gz"
    with tarfile.open(bundle.archive, "r:gz") as src, tarfile.open(path, "w:gz") as dst:
        for m in src.getmembers():
            dst.addfile(m, src.extractfile(m) if m.isfile() else None)
        dst.addfile(extra, io.BytesIO(data) if extra.isfile() else None)
    return path


def _member(name: str, kind: bytes = tarfile.REGTYPE, size: int = 0, link: str = "") -> tarfile.TarInfo:
    info = tarfile.TarInfo(name)
    info.type = kind
    info.size = size
    info.linkname = link
    return info


@pytest.mark.parametrize(("name", "kind", "link", "why"), [
    ("../x", tarfile.REGTYPE, "", "leaves the bundle folder"),
    ("keyvalues-1.0.0/../../x", tarfile.REGTYPE, "", "leaves the bundle folder"),
    ("/tmp/tablekeeper-absolute-x", tarfile.REGTYPE, "", "absolute path"),
    ("keyvalues-1.0.0/link.csv", tarfile.SYMTYPE, "/etc/passwd", "is a link"),
    ("keyvalues-1.0.0/hard.csv", tarfile.LNKTYPE, "keyvalues-1.0.0/values.csv", "is a link"),
    ("keyvalues-1.0.0/dev", tarfile.CHRTYPE, "", "is a device"),
    ("keyvalues-1.0.0/fifo", tarfile.FIFOTYPE, "", "is a FIFO"),
])
def test_hostile_member_refuses_the_whole_archive(bundle, tmp_path, name, kind, link, why):
    data = b"owned\n"
    size = len(data) if kind == tarfile.REGTYPE else 0
    path = _archive(tmp_path, bundle, _member(name, kind, size, link), data)
    report = verify(path)
    assert not report.ok
    assert any(why in d and "refused" in d for d in report.damages), report.damages
    assert any("nothing was extracted" in d for d in report.damages)
    with pytest.raises(DamagedFileError):
        read(path)
    assert not (tmp_path / "x").exists() and not (tmp_path.parent / "x").exists()
    assert not Path("/tmp/tablekeeper-absolute-x").exists()


def test_a_symlink_replacing_a_bundle_file_is_refused(bundle, tmp_path):
    path = tmp_path / "swapped.tar.gz"
    with tarfile.open(bundle.archive, "r:gz") as src, tarfile.open(path, "w:gz") as dst:
        for m in src.getmembers():
            if m.name.endswith("/sources.csv"):
                dst.addfile(_member(m.name, tarfile.SYMTYPE, 0, "/etc/passwd"))
            else:
                dst.addfile(m, src.extractfile(m) if m.isfile() else None)
    report = verify(path)
    assert any("is a link" in d for d in report.damages)


def test_a_rebuilt_archive_with_other_metadata_is_not_canonical(bundle, tmp_path):
    # Same files, but the archive was re-packed with the packer's own owner and times.
    path = tmp_path / "repacked.tar.gz"
    with tarfile.open(bundle.archive, "r:gz") as src, tarfile.open(path, "w:gz") as dst:
        for m in src.getmembers():
            m.uid, m.uname = 1000, "someone"
            dst.addfile(m, src.extractfile(m) if m.isfile() else None)
    assert not verify(path).ok


# -- read -------------------------------------------------------------------------------------------------

def test_read_returns_typed_frames(bundle):
    for path in (bundle.folder, bundle.archive):
        t = read(path)
        assert sorted(t) == sorted(["species", "values", "cp_models", "thermo_table", "sources", "findings"])
        sp = t["species"]
        assert str(sp["charge"].dtype) == "Int64"
        assert str(sp["reference_state"].dtype) == "boolean"
        assert str(sp["dfH298_kJ_per_mol"].dtype) == "float64"
        assert str(sp["id"].dtype) == "string"
        assert list(sp["id"]) == sorted(sp["id"])
        assert bool(sp.set_index("id").loc["o2-g", "reference_state"]) is True
        assert sp.set_index("id")["form"].isna().sum() == len(sp) - 1  # only graphite has a form
        assert str(t["values"]["value"].dtype) == "float64"
        assert str(t["cp_models"]["range"].dtype) == "Int64"
        assert len(t["findings"]) == 0


def test_read_refuses_a_damaged_bundle(bundle):
    _flip(bundle.folder / "values.csv", 100)
    with pytest.raises(DamagedFileError, match=r"values\.csv"):
        read(bundle.folder)


def test_an_archive_with_very_many_members_is_refused_early(bundle, tmp_path):
    path = tmp_path / "many.tar.gz"
    with tarfile.open(bundle.archive, "r:gz") as src, tarfile.open(path, "w:gz") as dst:
        for m in src.getmembers():
            dst.addfile(m, src.extractfile(m) if m.isfile() else None)
        for i in range(100):
            dst.addfile(_member(f"keyvalues-1.0.0/extra-{i}.csv", size=1), io.BytesIO(b"x"))
    report = verify(path)
    assert any("more members than a bundle has" in d for d in report.damages)
