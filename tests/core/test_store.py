"""The dataset folder: layout, canonical bytes, revisions, conflicts, journal, ids, roles, damage and
recovery after a failed or killed save."""

from __future__ import annotations

import itertools
import os
import struct
from pathlib import Path

import orjson
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tablekeeper import flags, jsonio, store, validation
from tablekeeper.errors import (
    ConflictError,
    DamagedFileError,
    IdentifierError,
    InputError,
    NotFoundError,
    PermissionDenied,
)
from tablekeeper.store import KINDS, Dataset, check_id


def _journal_lines(ds: Dataset) -> list[dict]:
    return [orjson.loads(line) for line in (ds.root / "journal.jsonl").read_bytes().splitlines()]


# -- layout ----------------------------------------------------------------------------------------------

def test_init_writes_the_documented_layout(tmp_path: Path) -> None:
    ds = Dataset.init(tmp_path / "ds", "layout", title="Layout")
    root = tmp_path / "ds"
    for kind in KINDS:
        assert (root / kind).is_dir()
    meta = jsonio.read(root / "dataset.json")
    assert validation.errors("dataset", meta) == []
    assert (meta["name"], meta["title"], meta["standard_pressure_bar"], meta["reference_temperature_K"]) == \
        ("layout", "Layout", 1, 298.15)
    assert "journal.jsonl merge=union" in (root / ".gitattributes").read_text().splitlines()
    [entry] = _journal_lines(ds)
    assert validation.errors("journal", entry) == []
    assert (entry["action"], entry["target"], entry["user"]) == ("init", "dataset", "tester")
    assert ds.ids("species") == []


def test_init_refuses_an_existing_dataset_and_a_non_empty_folder(tmp_path: Path) -> None:
    Dataset.init(tmp_path / "ds", "one")
    before = (tmp_path / "ds" / "dataset.json").read_bytes()
    with pytest.raises(InputError, match="already holds a dataset"):
        Dataset.init(tmp_path / "ds", "two")
    assert (tmp_path / "ds" / "dataset.json").read_bytes() == before
    (tmp_path / "other").mkdir()
    (tmp_path / "other" / "notes.txt").write_text("mine")
    with pytest.raises(InputError, match="not empty"):
        Dataset.init(tmp_path / "other", "three")


def test_opening_a_folder_without_dataset_json_is_refused(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="is not a dataset folder"):
        Dataset(tmp_path)


# -- canonical bytes and round trips ---------------------------------------------------------------------

def test_saved_file_is_canonical_and_loads_back_to_the_same_bytes(dataset: Dataset, species_record) -> None:
    dataset.save("species", species_record(), expected_revision=None)
    raw = (dataset.root / "species" / "water-l.json").read_bytes()
    assert raw.endswith(b"}\n") and b'\n  "charge": 0,\n' in raw  # 2-space indent, trailing newline
    keys = list(orjson.loads(raw))
    assert keys == sorted(keys)
    assert jsonio.dumps(jsonio.loads(raw)) == raw
    assert jsonio.dumps(dataset.load("species", "water-l")) == raw


def test_a_hand_formatted_but_valid_file_still_loads(dataset: Dataset, species_record) -> None:
    import json

    path = dataset.root / "species" / "water-l.json"
    path.write_text(json.dumps(species_record(), indent=4))
    assert dataset.load("species", "water-l") == species_record()


_counter = itertools.count()
finite = st.floats(min_value=-1e12, max_value=1e12, allow_nan=False)
free_text = st.text(max_size=40).filter(lambda s: s[:1] not in ("=", "+", "@", "\t", "\r"))


@st.composite
def records(draw: st.DrawFn) -> dict:
    props = {}
    for f in draw(st.sets(st.sampled_from(["dfH298", "dfG298", "S298", "Cp298"]))):
        unit = "kJ/mol" if f in ("dfH298", "dfG298") else "J/(mol*K)"
        pv = {"value": draw(finite), "unit": unit, "uncertainty": draw(st.floats(0, 1e9)),
              "coverage": draw(st.floats(0.01, 10))}
        if draw(st.booleans()):
            pv["entered"] = {"value": draw(finite), "unit": "kcal/mol"}
        props[f] = pv
    rec = {"id": f"sp-{next(_counter)}", "revision": 1, "formula": "H2O", "phase": "l", "charge": 0,
           "status": "draft", "name": draw(free_text), "notes": draw(free_text), "properties": props}
    if draw(st.booleans()):
        points = draw(st.lists(st.tuples(finite, finite).map(list), min_size=2, max_size=4))
        rec["cp_model"] = {"kind": "tabulated", "points": points}
    return rec


def _bits(obj: object) -> object:
    """The document with every float replaced by its IEEE-754 bytes (so -0.0 differs from 0.0)."""
    if isinstance(obj, float):
        return struct.pack("<d", obj)
    if isinstance(obj, dict):
        return {k: _bits(v) for k, v in obj.items()}
    if isinstance(obj, list):
        return [_bits(v) for v in obj]
    return obj


@pytest.fixture(scope="module")
def shared_dataset(tmp_path_factory: pytest.TempPathFactory) -> Dataset:
    return Dataset.init(tmp_path_factory.mktemp("roundtrip") / "ds", "roundtrip")


@given(rec=records())
@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
def test_records_round_trip_exactly_floats_bit_for_bit(rec: dict, shared_dataset: Dataset) -> None:
    assert validation.errors("species", rec) == []
    saved = shared_dataset.save("species", rec, expected_revision=None)
    loaded = shared_dataset.load("species", rec["id"])
    assert _bits(loaded) == _bits(saved) == _bits(dict(rec, revision=1))
    raw = (shared_dataset.root / "species" / f"{rec['id']}.json").read_bytes()
    assert jsonio.dumps(jsonio.loads(raw)) == raw


# -- revisions and conflicts -----------------------------------------------------------------------------

def test_each_save_raises_the_revision_by_one(dataset: Dataset, species_record) -> None:
    rec = dataset.save("species", species_record(), expected_revision=None)
    assert rec["revision"] == 1
    for expected in (2, 3, 4):
        rec = dataset.save("species", dict(rec, name=f"water {expected}"), expected_revision=rec["revision"])
        assert rec["revision"] == expected
        assert dataset.load("species", "water-l")["revision"] == expected


def test_a_stale_revision_is_a_conflict_carrying_both_versions(dataset: Dataset, species_record) -> None:
    loaded = dataset.save("species", species_record(), expected_revision=None)
    theirs = dataset.save("species", dict(loaded, name="their water"), expected_revision=1)
    path = dataset.root / "species" / "water-l.json"
    before = (path.read_bytes(), (dataset.root / "journal.jsonl").read_bytes())
    mine = dict(loaded, name="my water")
    with pytest.raises(ConflictError) as info:
        dataset.save("species", mine, expected_revision=1)
    err = info.value
    assert (err.expected, err.found, err.target) == (1, 2, "species/water-l")
    assert err.theirs == theirs and err.mine == mine
    assert "revision 1" in str(err) and "revision 2" in str(err)
    assert (path.read_bytes(), (dataset.root / "journal.jsonl").read_bytes()) == before  # nothing written


def test_creating_a_record_that_exists_is_refused(dataset: Dataset, species_record) -> None:
    first = dataset.save("species", species_record(name="first"), expected_revision=None)
    with pytest.raises(ConflictError) as info:
        dataset.save("species", species_record(name="second"), expected_revision=None)
    assert info.value.theirs == first
    assert dataset.load("species", "water-l")["name"] == "first"


def test_saving_with_a_revision_for_a_record_that_does_not_exist_is_a_conflict(dataset: Dataset,
                                                                                species_record) -> None:
    with pytest.raises(ConflictError):
        dataset.save("species", species_record(), expected_revision=3)
    assert dataset.ids("species") == []


def test_loading_a_missing_record_is_not_found(dataset: Dataset) -> None:
    with pytest.raises(NotFoundError, match="no species named 'nothing'"):
        dataset.load("species", "nothing")


# -- journal ---------------------------------------------------------------------------------------------

def test_journal_holds_field_level_changes_user_and_reason(dataset: Dataset, species_record,
                                                           monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("TABLEKEEPER_USER", "alice")
    ds = Dataset(dataset.root)
    rec = ds.save("species", species_record(), expected_revision=None, reason="first entry")
    changed = dict(rec, properties=dict(rec["properties"], dfH298=dict(rec["properties"]["dfH298"],
                                                                        value=-285.8)))
    changed.pop("name")
    ds.save("species", changed, expected_revision=1, reason="typo in the value")
    last = _journal_lines(ds)[-1]
    assert validation.errors("journal", last) == []
    assert (last["user"], last["action"], last["target"], last["revision"], last["reason"]) == \
        ("alice", "update", "species/water-l", 2, "typo in the value")
    assert last["changes"] == [{"field": "name", "old": "water"},
                               {"field": "properties.dfH298.value", "old": -285.83, "new": -285.8}]
    entries, problems = ds.journal()
    assert problems == [] and entries[-1] == last
    assert entries[-2]["action"] == "create" and entries[-2]["reason"] == "first entry"


def test_torn_last_journal_line_is_reported_then_set_aside(dataset: Dataset, species_record) -> None:
    journal = dataset.root / "journal.jsonl"
    good = journal.read_bytes()
    torn = b'{"action":"update","target":"species/wat'
    journal.write_bytes(good + torn)  # a writer killed in the middle of its line
    entries, problems = dataset.journal()
    assert len(entries) == len(good.splitlines())
    assert len(problems) == 1 and "torn last line" in problems[0] and "journal.jsonl" in problems[0]
    dataset.save("species", species_record(), expected_revision=None)
    assert torn in (dataset.root / "journal.torn").read_bytes()
    entries, problems = dataset.journal()
    assert problems == []
    assert entries[-1]["target"] == "species/water-l"
    assert journal.read_bytes().startswith(good) and journal.read_bytes().endswith(b"\n")


def test_a_damaged_line_in_the_middle_of_the_journal_is_reported(dataset: Dataset) -> None:
    journal = dataset.root / "journal.jsonl"
    journal.write_bytes(journal.read_bytes() + b"garbage\n" + jsonio.dumps_line({"action": "init"}))
    entries, problems = dataset.journal()
    assert len(problems) == 1 and "damaged line" in problems[0]
    assert entries[-1] == {"action": "init"}


# -- identifiers -----------------------------------------------------------------------------------------

UNSAFE_IDS = ["../x", "../../etc/passwd", "/abs", "/tmp/x", "a/b", "a\\b", "a\x00b", "Water", "WATER",
              "a" * 65, ".", "..", ".hidden", "-x", "_x", "", " x", "x ", "x\n", "h2о",  # Cyrillic о
              "ｈ2o",  # fullwidth h
              "wat\u200ber", "ﬁ", "ıd", "x.json/..", None, 5, ["x"]]


@pytest.mark.parametrize("ident", UNSAFE_IDS)
def test_unsafe_ids_are_refused_before_reaching_a_path(ident: object, dataset: Dataset, species_record,
                                                       folder_digest, tmp_path: Path) -> None:
    before = folder_digest(tmp_path)
    with pytest.raises(IdentifierError):
        check_id(ident)
    with pytest.raises(IdentifierError):
        dataset.path("species", ident)  # type: ignore[arg-type]
    with pytest.raises(IdentifierError):
        dataset.load("species", ident)  # type: ignore[arg-type]
    with pytest.raises(IdentifierError):
        dataset.save("species", species_record(ident), expected_revision=None)
    assert folder_digest(tmp_path) == before


def test_the_longest_safe_id_is_accepted(dataset: Dataset, species_record) -> None:
    ident = "a" * 64
    assert check_id(ident) == ident
    dataset.save("species", species_record(ident), expected_revision=None)
    assert dataset.ids("species") == [ident]


def test_identifier_error_is_one_sentence_naming_the_id() -> None:
    with pytest.raises(IdentifierError) as info:
        check_id("../x", "species id")
    assert str(info.value).startswith("field id: '../x' is not a valid species id")
    assert "\n" not in str(info.value)


# -- roles -----------------------------------------------------------------------------------------------

def _with_roles(ds: Dataset, roles: dict) -> None:
    ds.save_meta(dict(ds.meta, roles=roles), reason="roles")


def test_without_roles_everyone_may_do_everything(dataset: Dataset, species_record) -> None:
    ds = Dataset(dataset.root, user="anyone")
    assert all(ds.may(a) for a in ("edit", "flag", "comment", "resolve", "release"))
    ds.save("species", species_record(), expected_revision=None)
    flags.raise_flag(ds, "water-l", "dfH298", "Looks high.")


def test_a_reviewer_may_flag_but_not_edit_a_steward_may_edit(dataset: Dataset, species_record) -> None:
    dataset.save("species", species_record(), expected_revision=None)
    _with_roles(dataset, {"steward": ["ann"], "reviewer": ["bob"]})
    assert validation.errors("dataset", dataset.meta) == []
    bob = Dataset(dataset.root, user="bob")
    flag = flags.raise_flag(bob, "water-l", "dfH298", "Looks high by 4.184 times.")
    assert flag["raised_by"] == "bob"
    before = (dataset.root / "species" / "water-l.json").read_bytes()
    with pytest.raises(PermissionDenied) as info:
        bob.save("species", species_record(name="bob's water", revision=1), expected_revision=1)
    assert isinstance(info.value, PermissionError)
    assert str(info.value) == "user 'bob' may not edit: the dataset gives that to the steward role"
    assert (dataset.root / "species" / "water-l.json").read_bytes() == before
    with pytest.raises(PermissionDenied):
        flags.resolve(bob, flag["id"], "fine")
    ann = Dataset(dataset.root, user="ann")
    saved = ann.save("species", species_record(name="ann's water"), expected_revision=1)
    assert saved["revision"] == 2
    assert flags.resolve(ann, flag["id"], "checked")["status"] == "resolved"


def test_a_user_with_no_role_may_not_even_flag(dataset: Dataset, species_record) -> None:
    dataset.save("species", species_record(), expected_revision=None)
    _with_roles(dataset, {"steward": ["ann"]})
    with pytest.raises(PermissionDenied):
        flags.raise_flag(Dataset(dataset.root, user="eve"), "water-l", "dfH298", "Hm.")
    assert Dataset(dataset.root).ids("flags") == []


# -- damaged files ---------------------------------------------------------------------------------------

DAMAGE = {
    "duplicate-key": b'{"id": "bad", "id": "bad", "revision": 1}\n',
    "nan": b'{"id": "bad", "revision": NaN}\n',
    "infinity": b'{"id": "bad", "revision": Infinity}\n',
    "overflow": b'{"id": "bad", "revision": 1e400}\n',
    "bom": b'\xef\xbb\xbf{"id": "bad", "revision": 1}\n',
    "bad-utf8": b'{"id": "bad", "name": "\xff\xfe"}\n',
    "truncated": b'{"id": "bad", "revi',
    "empty": b"",
    "not-an-object": b'["id", "bad"]\n',
    "wrong-id": b'{"id": "good", "revision": 1}\n',
    "huge": b'{"id": "bad", "notes": "' + b"x" * (jsonio.MAX_FILE_BYTES + 1) + b'"}\n',
}


@pytest.mark.parametrize("damage", sorted(DAMAGE))
def test_a_damaged_record_file_is_an_error_naming_the_file(damage: str, dataset: Dataset,
                                                           species_record) -> None:
    dataset.save("species", species_record(), expected_revision=None)
    path = dataset.root / "species" / "bad.json"
    path.write_bytes(DAMAGE[damage])
    with pytest.raises(DamagedFileError) as info:
        dataset.load("species", "bad")
    assert info.value.file == str(path)
    assert str(info.value).startswith(str(path))
    assert "\n" not in str(info.value)
    report = dataset.load_all("species")
    assert list(report.records) == ["water-l"]
    assert [d.file for d in report.damaged] == [str(path)]
    with pytest.raises(DamagedFileError):
        dataset.save("species", species_record("bad"), expected_revision=1)
    assert path.read_bytes() == DAMAGE[damage]  # never overwritten


def test_load_all_reports_a_file_whose_name_is_not_an_id(dataset: Dataset) -> None:
    path = dataset.root / "species" / "Bad Name.json"
    path.write_bytes(b"{}\n")
    report = dataset.load_all("species")
    assert report.records == {} and [d.file for d in report.damaged] == [str(path)]


def test_a_damaged_dataset_json_is_refused_at_open(dataset: Dataset) -> None:
    meta = dataset.root / "dataset.json"
    meta.write_bytes(b'{"name": "x", "name": "y"}')
    with pytest.raises(DamagedFileError) as info:
        Dataset(dataset.root)
    assert info.value.file == str(meta)


# -- recovery --------------------------------------------------------------------------------------------

def test_leftover_temporary_files_are_removed_at_the_next_open(dataset: Dataset, species_record) -> None:
    dataset.save("species", species_record(), expected_revision=None)
    record = (dataset.root / "species" / "water-l.json").read_bytes()
    leftovers = [dataset.root / "species" / ".water-l.json.tmp-4242-0badcafe",
                 dataset.root / "flags" / ".flag-1.json.tmp-4242-deadbeef",
                 dataset.root / ".dataset.json.tmp-4242-01234567"]
    for p in leftovers:
        p.write_bytes(b'{"half": ')
    ds = Dataset(dataset.root)
    assert not any(p.exists() for p in leftovers)
    assert (dataset.root / "species" / "water-l.json").read_bytes() == record
    assert ds.load_all("species").damaged == []


def test_a_failed_write_leaves_the_old_record_and_no_temporary_file(dataset: Dataset, species_record,
                                                                    monkeypatch: pytest.MonkeyPatch) -> None:
    dataset.save("species", species_record(), expected_revision=None)
    path = dataset.root / "species" / "water-l.json"
    before = path.read_bytes()

    def broken_replace(src: object, dst: object) -> None:
        raise OSError(28, "No space left on device")

    journal = (dataset.root / "journal.jsonl").read_bytes()
    monkeypatch.setattr(os, "replace", broken_replace)
    with pytest.raises(OSError):
        dataset.save("species", species_record(name="new"), expected_revision=1)
    monkeypatch.undo()
    assert path.read_bytes() == before
    assert sorted(os.listdir(path.parent)) == [".keep", "water-l.json"]
    # The journal line is written before the rename; the failed rename takes it back.
    assert (dataset.root / "journal.jsonl").read_bytes() == journal


@pytest.mark.parametrize("action", ["save", "delete"])
def test_an_error_after_the_change_puts_the_file_back_and_takes_the_journal_line_back(
        action: str, dataset: Dataset, species_record, monkeypatch: pytest.MonkeyPatch) -> None:
    dataset.save("species", species_record(), expected_revision=None)
    path = dataset.root / "species" / "water-l.json"
    before = (path.read_bytes(), (dataset.root / "journal.jsonl").read_bytes())

    def broken_fsync(folder: Path) -> None:  # the folder fsync, after the rename or the unlink
        raise OSError(5, "Input/output error")

    monkeypatch.setattr(store, "_fsync_dir", broken_fsync)
    with pytest.raises(OSError):
        if action == "save":
            dataset.save("species", species_record(name="new"), expected_revision=1)
        else:
            dataset.delete("species", "water-l", expected_revision=1)
    monkeypatch.undo()
    assert (path.read_bytes(), (dataset.root / "journal.jsonl").read_bytes()) == before
    assert sorted(os.listdir(path.parent)) == [".keep", "water-l.json"]


def test_an_import_naming_a_record_twice_is_refused(dataset: Dataset, species_record) -> None:
    before = (dataset.root / "journal.jsonl").read_bytes()
    with pytest.raises(InputError, match="record water-l: appears twice in one import"):
        dataset.save_many("species", [(species_record(), None), (species_record(name="again"), None)],
                          reason="import")
    assert dataset.ids("species") == []
    assert (dataset.root / "journal.jsonl").read_bytes() == before


class _Killed(BaseException):
    """Stands for SIGKILL: raised inside a save with the rollback switched off."""


def _kill_before_rename(dataset: Dataset, monkeypatch: pytest.MonkeyPatch, record: dict) -> None:
    """A save stopped dead after its journal line, before its rename (the files a kill leaves there)."""
    def killed(*args: object) -> None:
        raise _Killed

    monkeypatch.setattr(os, "replace", killed)
    monkeypatch.setattr(Dataset, "_rollback", lambda *args: None)
    monkeypatch.setattr(Dataset, "_forget", staticmethod(lambda kept: None))
    with pytest.raises(_Killed):
        dataset.save("species", record, expected_revision=record["revision"] - 1)
    monkeypatch.undo()


def test_a_journaled_staged_save_is_renamed_into_place_at_the_next_open(
        dataset: Dataset, species_record, monkeypatch: pytest.MonkeyPatch) -> None:
    dataset.save("species", species_record(), expected_revision=None)
    _kill_before_rename(dataset, monkeypatch, species_record(name="staged", revision=2))
    staged = dataset.root / "species" / ".water-l.json.tmp-pending"
    assert staged.exists() and dataset.load("species", "water-l")["name"] == "water"
    assert dataset.journal()[0][-1]["revision"] == 2
    ds = Dataset(dataset.root)
    assert not staged.exists()
    assert ds.load("species", "water-l") == species_record(name="staged", revision=2)
    assert [p.name for p in (dataset.root / "species").iterdir() if ".tmp-" in p.name] == []


@pytest.mark.parametrize("tamper", ["not-the-next-revision", "journal-line-cut", "a-link"])
def test_a_staged_file_that_does_not_match_the_journal_is_removed_not_renamed(
        tamper: str, dataset: Dataset, species_record, monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    dataset.save("species", species_record(), expected_revision=None)
    path = dataset.root / "species" / "water-l.json"
    before = path.read_bytes()
    _kill_before_rename(dataset, monkeypatch, species_record(name="staged", revision=2))
    staged = dataset.root / "species" / ".water-l.json.tmp-pending"
    journal = dataset.root / "journal.jsonl"
    if tamper == "not-the-next-revision":
        staged.write_bytes(jsonio.dumps(species_record(name="staged", revision=3)))
    elif tamper == "journal-line-cut":  # killed inside the append: the line is torn, not an entry
        raw = journal.read_bytes()
        journal.write_bytes(raw[: len(raw) - 20])
    else:  # a link planted under the staged name must never be followed or moved into place
        outside = tmp_path / "outside.json"
        outside.write_bytes(jsonio.dumps(species_record(name="staged", revision=2)))
        staged.unlink()
        staged.symlink_to(outside)
    Dataset(dataset.root)
    assert not staged.exists() and not staged.is_symlink()
    assert path.read_bytes() == before
