"""Releasing: the gate, the version rules, reproducible bytes, the release record, no half bundles."""

from __future__ import annotations

import gzip
import hashlib
import os
import tarfile
from pathlib import Path

import pytest

from tablekeeper import jsonio, validation
from tablekeeper.bundle import BUNDLE_FILES, GateRefused, release
from tablekeeper.errors import InputError, PermissionDenied
from tablekeeper.flags import raise_flag, resolve
from tablekeeper.store import Dataset


def _edit(ds: Dataset, ident: str, fn) -> None:
    rec = ds.load("species", ident)
    fn(rec)
    ds.save("species", rec, expected_revision=rec["revision"])


def _files(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


def test_bundle_holds_exactly_the_files_of_the_design(clean_dataset, tmp_path, fixed_time):
    done = release(clean_dataset, "1.0.0", out=tmp_path / "out")
    assert done.folder == tmp_path / "out" / "keyvalues-1.0.0"
    assert done.archive == tmp_path / "out" / "keyvalues-1.0.0.tar.gz"
    assert sorted(os.listdir(done.folder)) == sorted(
        ["datapackage.json", "species.csv", "values.csv", "cp_models.csv", "thermo_table.csv", "sources.csv",
         "findings.csv", "CHANGES.md"])
    assert sorted(os.listdir(tmp_path / "out")) == ["keyvalues-1.0.0", "keyvalues-1.0.0.tar.gz"]


def test_same_dataset_released_twice_gives_identical_bytes(clean_dataset, copy_dataset, tmp_path, fixed_time):
    twin = copy_dataset(clean_dataset, "twin")
    a = release(clean_dataset, "1.0.0", out=tmp_path / "a")
    b = release(twin, "1.0.0", out=tmp_path / "b")
    assert a.archive.read_bytes() == b.archive.read_bytes()
    assert _files(a.folder) == _files(b.folder)
    assert a.record["digest"] == b.record["digest"]


def test_archive_metadata_is_fixed(clean_dataset, tmp_path, fixed_time):
    done = release(clean_dataset, "1.0.0", out=tmp_path / "out")
    raw = done.archive.read_bytes()
    assert raw[:4] == b"\x1f\x8b\x08\x00"  # gzip, deflate, no flags: no file name stored
    assert raw[4:8] == b"\x00\x00\x00\x00"  # gzip header mtime 0
    with tarfile.open(done.archive, "r:gz") as tar:
        members = tar.getmembers()
    assert [m.name for m in members] == ["keyvalues-1.0.0"] + [f"keyvalues-1.0.0/{f}" for f in BUNDLE_FILES]
    assert {(m.uid, m.gid, m.uname, m.gname) for m in members} == {(0, 0, "", "")}
    assert {m.mtime for m in members} == {1700000000}
    assert members[0].mode == 0o755 and {m.mode for m in members[1:]} == {0o644}
    # The same bytes unpacked: the archive carries the folder's files.
    with tarfile.open(done.archive, "r:gz") as tar:
        for f in BUNDLE_FILES:
            assert tar.extractfile(f"keyvalues-1.0.0/{f}").read() == (done.folder / f).read_bytes()


def test_csv_files_use_lf_and_utf8_and_sorted_rows(clean_dataset, tmp_path, fixed_time):
    done = release(clean_dataset, "1.0.0", out=tmp_path / "out")
    for f in BUNDLE_FILES:
        data = (done.folder / f).read_bytes()
        data.decode("utf-8")
        assert b"\r" not in data
        assert data.endswith(b"\n")
    lines = (done.folder / "species.csv").read_text().splitlines()[1:]
    ids = [line.split(",")[0] for line in lines]
    assert ids == sorted(ids) == sorted(r["id"] for r in clean_dataset.load_all("species").records.values())


def test_release_record_is_saved_valid_and_journaled(clean_dataset, tmp_path, fixed_time):
    done = release(clean_dataset, "1.0.0", out=tmp_path / "out", note="first publication")
    rec = jsonio.read(clean_dataset.root / "releases" / "1.0.0.json")
    assert validation.errors("releases", rec) == []
    assert rec["version"] == "1.0.0" and rec["previous"] is None
    assert rec["created"] == fixed_time and rec["user"] == "tester" and rec["note"] == "first publication"
    descriptor = (done.folder / "datapackage.json").read_bytes()
    assert rec["digest"] == "sha256:" + hashlib.sha256(descriptor).hexdigest()
    assert rec["archive_digest"] == "sha256:" + hashlib.sha256(done.archive.read_bytes()).hexdigest()
    assert rec["summary"] == {"error": 0, "warning": 0, "info": 0}
    kept = clean_dataset.root / "releases" / "keyvalues-1.0.0.tar.gz"
    assert kept.read_bytes() == done.archive.read_bytes()
    entries, _ = clean_dataset.journal()
    assert [(e["action"], e["target"]) for e in entries][-1] == ("release", "releases/1.0.0")


def test_created_is_the_release_time_without_source_date_epoch(clean_dataset, tmp_path, monkeypatch):
    monkeypatch.delenv("SOURCE_DATE_EPOCH", raising=False)
    done = release(clean_dataset, "1.0.0", out=tmp_path / "out")
    desc = jsonio.read(done.folder / "datapackage.json")
    assert desc["created"] == done.record["created"]
    assert desc["created"].endswith("Z") and desc["created"][:2] == "20"


# -- the gate ---------------------------------------------------------------------------------------------

def _nothing_published(ds: Dataset, out: Path) -> bool:
    return (not out.exists() or os.listdir(out) == []) and ds.ids("releases") == []


def test_gate_refuses_errors_and_writes_nothing(clean_dataset, tmp_path):
    # A negative S° for a gas breaks the third law (and the entropy floor): errors.
    _edit(clean_dataset, "h2o-g", lambda r: r["properties"]["S298"].update(value=-1.0))
    with pytest.raises(GateRefused) as info:
        release(clean_dataset, "1.0.0", out=tmp_path / "out")
    gate = info.value.gate
    assert gate.errors and any(f.check == "third-law" and f.species == "h2o-g" for f in gate.errors)
    assert any("third-law" in r for r in gate.reasons())
    assert _nothing_published(clean_dataset, tmp_path / "out")


def test_gate_refuses_an_open_blocking_flag_until_it_is_resolved(clean_dataset, tmp_path):
    flag = raise_flag(clean_dataset, "co-g", "dfH298", "value disagrees with our calorimetry", blocking=True)
    with pytest.raises(GateRefused) as info:
        release(clean_dataset, "1.0.0", out=tmp_path / "out")
    assert [f["id"] for f in info.value.gate.blocking_flags] == [flag["id"]]
    assert any(flag["id"] in r for r in info.value.gate.reasons())
    assert _nothing_published(clean_dataset, tmp_path / "out")
    resolve(clean_dataset, flag["id"], "checked, the value stands")
    assert release(clean_dataset, "1.0.0", out=tmp_path / "out").version == "1.0.0"


def test_a_non_blocking_flag_does_not_refuse(clean_dataset, tmp_path):
    raise_flag(clean_dataset, "co-g", "dfH298", "source to double-check")
    gate_ok = release(clean_dataset, "1.0.0", out=tmp_path / "out", allow_warnings=True)
    assert gate_ok.gate.blocking_flags == []


def test_warnings_refuse_unless_allowed_and_are_then_listed(clean_dataset, tmp_path, fixed_time):
    _edit(clean_dataset, "co-g", lambda r: r["properties"]["Cp298"].pop("uncertainty"))
    with pytest.raises(GateRefused) as info:
        release(clean_dataset, "1.0.0", out=tmp_path / "out")
    assert info.value.gate.warnings and not info.value.gate.errors
    assert "--allow-warnings" in str(info.value)
    done = release(clean_dataset, "1.0.0", out=tmp_path / "out", allow_warnings=True)
    findings = (done.folder / "findings.csv").read_text().splitlines()
    assert findings[0].startswith("check,severity,species,field,message")
    assert any(line.startswith("uncertainty,warning,co-g,Cp298,") for line in findings[1:])
    desc = jsonio.read(done.folder / "datapackage.json")
    assert {"check": "uncertainty", "species": "co-g", "field": "Cp298"}.items() <= \
        desc["tablekeeper:accepted_warnings"][0].items()
    assert desc["tablekeeper:check_summary"]["warning"] == len(desc["tablekeeper:accepted_warnings"]) >= 1


def test_release_requires_the_release_role(clean_dataset, tmp_path):
    meta = dict(clean_dataset.meta, roles={"steward": ["tester"], "release": ["manager"]})
    clean_dataset.save_meta(meta)
    with pytest.raises(PermissionDenied):
        release(Dataset(clean_dataset.root), "1.0.0", out=tmp_path / "out")
    manager = Dataset(clean_dataset.root, user="manager")
    assert release(manager, "1.0.0", out=tmp_path / "out").version == "1.0.0"


# -- versions ---------------------------------------------------------------------------------------------

def test_version_rules(clean_dataset, tmp_path):
    out = tmp_path / "out"
    release(clean_dataset, "1.9.0", out=out)
    with pytest.raises(InputError, match="never reused"):
        release(clean_dataset, "1.9.0", out=tmp_path / "other")
    for lower in ("1.8.9", "0.10.0", "1.8.10"):
        with pytest.raises(InputError, match=r"does not increase over the last release 1\.9\.0"):
            release(clean_dataset, lower, out=out)
    for bad in ("1.10", "v1.10.0", "1.10.0-rc1", "01.2.3", "1.10.0\n"):
        with pytest.raises(InputError, match="not a version"):
            release(clean_dataset, bad, out=out)
    # Numbers, not text: 1.10.0 follows 1.9.0.
    assert release(clean_dataset, "1.10.0", out=out).previous == "1.9.0"
    assert sorted(clean_dataset.ids("releases")) == ["1.10.0", "1.9.0"]


def test_an_existing_bundle_is_never_overwritten(clean_dataset, tmp_path):
    out = tmp_path / "out"
    (out / "keyvalues-1.0.0").mkdir(parents=True)
    (out / "keyvalues-1.0.0" / "mine.txt").write_text("keep me")
    with pytest.raises(InputError, match="never overwrites"):
        release(clean_dataset, "1.0.0", out=out)
    assert (out / "keyvalues-1.0.0" / "mine.txt").read_text() == "keep me"
    (out / "keyvalues-1.0.0" / "mine.txt").unlink()
    (out / "keyvalues-1.0.0").rmdir()
    (out / "keyvalues-1.0.0.tar.gz").write_bytes(b"not mine to replace")
    with pytest.raises(InputError, match="never overwrites"):
        release(clean_dataset, "1.0.0", out=out)
    assert (out / "keyvalues-1.0.0.tar.gz").read_bytes() == b"not mine to replace"
    assert clean_dataset.ids("releases") == []


def test_a_failure_while_writing_leaves_no_half_bundle(clean_dataset, tmp_path, monkeypatch):
    from tablekeeper.bundle import writer

    def broken(*args, **kwargs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(writer, "write_archive", broken)
    out = tmp_path / "out"
    with pytest.raises(OSError):
        release(clean_dataset, "1.0.0", out=out)
    assert os.listdir(out) == []  # no bundle, no archive, no temporary folder
    assert clean_dataset.ids("releases") == []
    assert not (clean_dataset.root / "releases" / "keyvalues-1.0.0.tar.gz").exists()


def test_a_failure_when_saving_the_record_unpublishes_the_bundle(clean_dataset, tmp_path, monkeypatch):
    def conflict(*args, **kwargs):
        raise InputError("simulated: someone else released 1.0.0 at the same moment")

    monkeypatch.setattr(Dataset, "save", conflict)
    out = tmp_path / "out"
    with pytest.raises(InputError, match="simulated"):
        release(clean_dataset, "1.0.0", out=out)
    assert os.listdir(out) == []
    assert not (clean_dataset.root / "releases" / "keyvalues-1.0.0.tar.gz").exists()


def test_progress_is_reported_in_order(clean_dataset, tmp_path):
    seen: list[float] = []
    release(clean_dataset, "1.0.0", out=tmp_path / "out", progress=lambda stage, f: seen.append(f))
    assert seen[0] == 0.0 and seen[-1] == 1.0 and seen == sorted(seen)


def test_thermo_table_matches_the_shomate_equation_for_co2(clean_dataset, tmp_path):
    # NIST Chemistry WebBook CO2 Shomate coefficients (from memory, in conftest): at 500 K,
    # Cp = A + B t + C t² + D t³ + E/t² with t = 0.5 (the Shomate equation, evaluated here by hand).
    done = release(clean_dataset, "1.0.0", out=tmp_path / "out")
    rows = [line.split(",") for line in (done.folder / "thermo_table.csv").read_text().splitlines()[1:]]
    co2 = {float(r[1]): r for r in rows if r[0] == "co2-g"}
    assert min(co2) == 298.15 and max(co2) == 1200.0  # never outside the model's range
    t = 0.5
    cp = 24.99735 + 55.18696 * t - 33.69137 * t**2 + 7.948387 * t**3 - 0.136638 / t**2
    assert float(co2[500.0][2]) == pytest.approx(cp, rel=1e-12)
    assert float(co2[298.15][3]) == 213.785  # S at 298.15 K is the record's S°
    # NIST-JANAF (Chase 1998), CO2 at 500 K, from memory: H − H298 = 8.305 kJ/mol, S = 234.901 J/(mol·K).
    assert float(co2[500.0][4]) == pytest.approx(8.305, abs=0.01)
    assert float(co2[500.0][3]) == pytest.approx(234.901, abs=0.02)
    # Species without a model have no rows; gzip of the whole archive reads back.
    assert {r[0] for r in rows} == {"co2-g", "n2-g"}
    gzip.decompress(done.archive.read_bytes())


def test_preview_shows_last_version_changes_and_gate(clean_dataset, tmp_path):
    from tablekeeper.bundle import preview

    first = preview(clean_dataset)
    assert first.last_version is None and first.diff is None and first.suggested_version == "1.0.0"
    assert first.gate.passed
    release(clean_dataset, "1.0.0", out=tmp_path / "out")
    _edit(clean_dataset, "h2o-l", lambda r: r["properties"]["S298"].update(value=69.91))
    after = preview(clean_dataset)
    assert after.last_version == "1.0.0"
    assert [c.species for c in after.diff.changed] == ["h2o-l"]
    assert after.suggested_version == "1.0.1"


def test_demo_dataset_is_held_back_by_its_blocking_flag(demo_copy, tmp_path):
    ds = Dataset(demo_copy)
    with pytest.raises(GateRefused) as info:
        release(ds, "9.0.0", out=tmp_path / "out", allow_warnings=True)
    flags = info.value.gate.blocking_flags
    assert flags and all(f["status"] == "open" and f["blocking"] is True for f in flags)
    assert not (tmp_path / "out").exists()
