"""Kills aimed at each step of a write-ahead save, import and delete.

A child process stops at one boundary (an os function replaced by one that blocks on a pipe the parent
never writes, see ``child._pause_at``) and is killed with SIGKILL there. The next open must then finish
every change whose journal line was written (rename the staged file, carry out the delete) and discard
every other one, so that the records and the journal agree: each record's revision is the revision of
the journal's last entry for it, and a record that is gone has a delete as its last entry. The control
case runs the old order (rename, then journal: ``SAFETY.journal_first = False``) and shows the same
check catching the journal line it loses.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from tablekeeper import store
from tablekeeper.store import Dataset

sys.path.insert(0, str(Path(__file__).parent))
from child import step_record

pytestmark = pytest.mark.timeout(120)

IDS = ("water", "ice", "steam")
OLD = {"water": (1, None), "ice": (1, None), "steam": None}
NEW = {
    "save": {"water": (2, "saved")},
    "save_many": {"water": (2, "imported"), "ice": (2, "imported"), "steam": (1, "imported")},
    "delete": {"ice": None},
}

# (action, step, nth) -> whether the change must be finished ("done") or discarded ("undone") by the
# next open; "by-journal": an import whose journal bytes were cut keeps the records whose lines are
# whole and discards the rest.
CASES = [
    ("save", "journal-open", 0, "undone"),
    ("save", "journal-torn", 0, "undone"),
    ("save", "replace", 1, "done"),
    ("save", "dir-fsync", 0, "done"),
    ("save_many", "journal-open", 0, "undone"),
    ("save_many", "journal-torn", 0, "by-journal"),
    ("save_many", "replace", 1, "done"),
    ("save_many", "replace", 2, "done"),
    ("save_many", "replace", 3, "done"),
    ("save_many", "dir-fsync", 0, "done"),
    ("delete", "journal-open", 0, "undone"),
    ("delete", "journal-torn", 0, "undone"),
    ("delete", "unlink", 0, "done"),
    ("delete", "dir-fsync", 0, "done"),
]


def _setup(tmp_path: Path) -> Path:
    ds = Dataset.init(tmp_path / "ds", "steps")
    ds.save("species", step_record("water"), expected_revision=None)
    ds.save("species", step_record("ice", phase="cr"), expected_revision=None)
    ds.save("species", step_record("probe", formula="He", phase="g"), expected_revision=None)
    return ds.root


def _state(root: Path) -> dict[str, tuple[int, str | None] | None]:
    """Each record as (revision, notes), read with the standard library, or None when absent."""
    out: dict[str, tuple[int, str | None] | None] = {}
    for ident in IDS:
        path = root / "species" / f"{ident}.json"
        if path.exists():
            rec = json.loads(path.read_bytes())
            out[ident] = (rec["revision"], rec.get("notes"))
        else:
            out[ident] = None
    return out


def _whole_lines(raw: bytes) -> list[dict]:
    """The journal entries whose line is whole (ends with a newline and parses)."""
    out = []
    for line in raw.split(b"\n")[:-1]:
        try:
            out.append(json.loads(line))
        except ValueError:
            pass
    return out


def disagreements(root: Path) -> list[str]:
    """Where the records and the journal disagree: a record whose revision is not that of the journal's
    last entry for it, a missing record whose last entry is not a delete, revisions journaled out of
    order (twice, or with a gap)."""
    entries = _whole_lines((root / store.JOURNAL).read_bytes())
    problems = []
    for ident, st in _state(root).items():
        mine = [e for e in entries if e.get("target") == f"species/{ident}"]
        revs: list[int] = []  # revisions since the last delete (a record created again restarts at 1)
        for e in mine:
            revs = [] if e["action"] == "delete" else [*revs, e["revision"]]
            if revs and revs != list(range(1, len(revs) + 1)):
                problems.append(f"{ident}: journaled revisions {revs} do not run 1, 2, 3...")
                break
        last = mine[-1] if mine else None
        if st is None:
            if last is not None and last["action"] != "delete":
                problems.append(f"{ident}: absent, but the journal's last entry is {last['action']} "
                                f"revision {last['revision']}")
        elif last is None or last["action"] == "delete" or last["revision"] != st[0]:
            shown = "none" if last is None else f"{last['action']} revision {last.get('revision')}"
            problems.append(f"{ident}: at revision {st[0]}, the journal's last entry is {shown}")
    return problems


def _kill_at(child, root: Path, action: str, step: str, nth: int, safety: str = "") -> None:
    p = child("stepkill", root, action, step, nth, safety=safety, stdin=subprocess.PIPE)
    line = p.stdout.readline()
    assert json.loads(line) == {"paused": step}, (line, p.stderr.read().decode()[-2000:])
    os.kill(p.pid, signal.SIGKILL)
    p.communicate(timeout=30)
    assert p.returncode == -signal.SIGKILL


@pytest.mark.parametrize(("action", "step", "nth", "outcome"), CASES,
                         ids=[f"{a}-{s}{n or ''}" for a, s, n, _ in CASES])
def test_a_kill_at_each_step_is_finished_or_discarded_by_the_next_open(tmp_path, child, leftovers, action,
                                                                      step, nth, outcome):
    root = _setup(tmp_path)
    journal_before = (root / store.JOURNAL).read_bytes()
    _kill_at(child, root, action, step, nth)
    assert leftovers(root), "the kill left nothing to recover: it did not land inside the change"
    raw = (root / store.JOURNAL).read_bytes()
    assert raw.startswith(journal_before)
    written = _whole_lines(raw[len(journal_before):])
    torn = not raw.endswith(b"\n")
    assert torn == (step == "journal-torn")

    ds = Dataset(root)  # the next open: recover()
    assert leftovers(root) == [], f"temporary files survive the next open: {leftovers(root)}"
    new = NEW[action]
    if outcome == "done":
        want = dict(OLD, **new)
    elif outcome == "undone":
        want = dict(OLD)
    else:  # by-journal: the targets whose journal line is whole are finished, the others discarded
        whole = {e["target"].split("/")[1] for e in written}
        assert whole < set(new), f"the cut left {whole} whole: the import was not cut inside its lines"
        want = dict(OLD, **{k: v for k, v in new.items() if k in whole})
    assert _state(root) == want
    assert disagreements(root) == []
    problems = ds.journal()[1]
    assert bool(problems) == torn and all("torn last line" in p for p in problems)
    if outcome == "undone":
        assert (root / store.JOURNAL).read_bytes() == journal_before + (raw[len(journal_before):] if torn
                                                                        else b"")

    # The dataset goes on: the kill released the lock, the next append sets a torn line aside.
    probe = ds.load("species", "probe")
    ds.save("species", dict(probe, notes="after the kill"), expected_revision=probe["revision"])
    assert ds.journal()[1] == []
    if torn:
        assert (root / store.TORN).read_bytes() == raw[raw.rfind(b"\n") + 1:] + b"\n"
    assert disagreements(root) == []
    if want["water"] is not None:
        again = ds.save("species", dict(ds.load("species", "water"), notes="next"),
                        expected_revision=want["water"][0])
        assert again["revision"] == want["water"][0] + 1
    assert disagreements(root) == []


def test_a_dataset_open_during_the_kill_finishes_a_journaled_delete_before_recreating(tmp_path, child):
    """A delete killed after its journal line, while this process had the dataset open: saving the record
    again as new first carries out the journaled delete (one stat finds its marker), so the journal reads
    delete, then create, and never holds a create of a record that still existed."""
    root = _setup(tmp_path)
    ds = Dataset(root)
    _kill_at(child, root, "delete", "unlink", 0)
    assert (root / "species" / "ice.json").exists()
    created = ds.save("species", step_record("ice", phase="cr", notes="again"), expected_revision=None)
    assert created["revision"] == 1
    actions = [e["action"] for e in ds.journal()[0] if e.get("target") == "species/ice"]
    assert actions == ["create", "delete", "create"]
    assert disagreements(root) == []


def test_control_rename_before_journal_loses_the_journal_line(tmp_path, child, leftovers):
    """The same kill between the rename and the folder fsync, with the old order (rename, fsync, then
    journal): the save reaches the disk and the journal never hears of it; the check above catches it."""
    root = _setup(tmp_path)
    _kill_at(child, root, "save", "dir-fsync", 0, safety="journal_first=0")
    Dataset(root)
    assert leftovers(root) == []
    assert _state(root)["water"] == (2, "saved")  # the save is on disk
    found = disagreements(root)
    print(f"control, rename before journal: {found}")
    assert found == ["water: at revision 2, the journal's last entry is create revision 1"]
