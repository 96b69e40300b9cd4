"""Real processes: two saves of one revision race; a save killed before or after its journal line leaves
the record and the journal agreeing once the dataset is opened again."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from tablekeeper.errors import ConflictError
from tablekeeper.store import Dataset

pytestmark = pytest.mark.timeout(120)

RACER = r"""
import json, os, sys, time
from pathlib import Path
from tablekeeper.errors import ConflictError
from tablekeeper.store import Dataset

root, name, barrier = sys.argv[1], sys.argv[2], Path(sys.argv[3])
ds = Dataset(root)
rec = ds.load("species", "water-l")
loaded = rec["revision"]
print("ready", flush=True)
while not barrier.exists():  # released by the parent at one moment
    time.sleep(0.0005)
try:
    saved = ds.save("species", dict(rec, name=name), expected_revision=loaded, reason="by " + name)
    print(json.dumps({"result": "saved", "revision": saved["revision"]}), flush=True)
except ConflictError as exc:
    print(json.dumps({"result": "conflict", "expected": exc.expected, "found": exc.found,
                      "theirs": exc.theirs["name"]}), flush=True)
"""


def _spawn(script: str, *args: str | Path, user: str) -> subprocess.Popen:
    env = dict(os.environ, TABLEKEEPER_USER=user)
    return subprocess.Popen([sys.executable, "-c", script, *map(str, args)], stdin=subprocess.PIPE,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)


@pytest.mark.parametrize("attempt", range(3))
def test_two_processes_saving_one_revision_one_wins_one_gets_a_conflict(attempt: int, dataset: Dataset,
                                                                      species_record, tmp_path: Path) -> None:
    dataset.save("species", species_record(), expected_revision=None)
    journal_before = len(dataset.journal()[0])
    barrier = tmp_path / "go"
    procs = [_spawn(RACER, dataset.root, name, barrier, user=name) for name in ("ann", "bob")]
    for p in procs:
        assert p.stdout.readline().strip() == "ready", p.stderr.read()
    barrier.touch()
    results = {}
    for name, p in zip(("ann", "bob"), procs, strict=True):
        out, err = p.communicate(timeout=60)
        assert p.returncode == 0, err
        results[name] = json.loads(out)
    outcomes = sorted(r["result"] for r in results.values())
    assert outcomes == ["conflict", "saved"]
    winner = next(n for n, r in results.items() if r["result"] == "saved")
    loser = next(n for n, r in results.items() if r["result"] == "conflict")
    assert results[winner]["revision"] == 2
    assert (results[loser]["expected"], results[loser]["found"], results[loser]["theirs"]) == (1, 2, winner)
    rec = Dataset(dataset.root).load("species", "water-l")
    assert (rec["name"], rec["revision"]) == (winner, 2)
    entries, problems = Dataset(dataset.root).journal()
    assert problems == []
    new = entries[journal_before:]
    assert len(new) == 1
    assert (new[0]["user"], new[0]["reason"], new[0]["revision"]) == (winner, f"by {winner}", 2)
    assert new[0]["changes"] == [{"field": "name", "old": "water", "new": winner}]


KILLED = r"""
import os, sys
from tablekeeper.store import Dataset

step = sys.argv[2]
real_open, real_replace = os.open, os.replace

def pause(what):
    print("paused " + what, flush=True)
    sys.stdin.readline()  # blocks until the parent kills this process

def paused_open(path, *args, **kw):
    # Stop before the journal append: the temporary file is written and fsynced, nothing journaled.
    if step == "before-journal" and os.fspath(path).endswith("journal.jsonl"):
        pause("journal")
    return real_open(path, *args, **kw)

def paused_replace(src, dst):
    # Stop right before the rename: the journal line is written, the target untouched.
    if step == "before-rename":
        pause(os.fspath(src))
    real_replace(src, dst)

ds = Dataset(sys.argv[1])
rec = ds.load("species", "water-l")
os.open, os.replace = paused_open, paused_replace
ds.save("species", dict(rec, name="half-saved"), expected_revision=rec["revision"])
print("finished", flush=True)
"""


def _kill_paused(root: Path, step: str) -> str:
    child = _spawn(KILLED, root, step, user="ann")
    line = child.stdout.readline().strip()
    assert line.startswith("paused "), child.stderr.read()
    child.send_signal(signal.SIGKILL)
    child.wait(timeout=30)
    assert child.returncode == -signal.SIGKILL
    return line.removeprefix("paused ")


def test_a_save_killed_before_its_journal_line_leaves_the_old_record_and_journal(dataset: Dataset,
                                                                                species_record) -> None:
    dataset.save("species", species_record(), expected_revision=None)
    path = dataset.root / "species" / "water-l.json"
    before = path.read_bytes()
    journal_before = (dataset.root / "journal.jsonl").read_bytes()
    _kill_paused(dataset.root, "before-journal")
    staged = dataset.root / "species" / ".water-l.json.tmp-pending"
    assert b"half-saved" in staged.read_bytes()  # written, fsynced, never journaled
    assert path.read_bytes() == before
    assert (dataset.root / "journal.jsonl").read_bytes() == journal_before
    ds = Dataset(dataset.root)  # the kill released the lock; the open discards the unjournaled save
    assert not staged.exists()
    assert path.read_bytes() == before
    assert (dataset.root / "journal.jsonl").read_bytes() == journal_before
    report = ds.load_all("species")
    assert list(report.records) == ["water-l"] and report.damaged == []
    # And the dataset takes the next save normally: the kill released the lock (a held lock would time out).
    assert ds.save("species", dict(ds.load("species", "water-l"), name="after"), expected_revision=1)[
        "revision"] == 2


def test_a_save_killed_after_its_journal_line_is_finished_at_the_next_open(dataset: Dataset,
                                                                          species_record) -> None:
    dataset.save("species", species_record(), expected_revision=None)
    path = dataset.root / "species" / "water-l.json"
    before = path.read_bytes()
    tmp = Path(_kill_paused(dataset.root, "before-rename"))
    assert tmp.parent == path.parent and b"half-saved" in tmp.read_bytes()
    assert path.read_bytes() == before  # killed before the rename
    last = dataset.journal()[0][-1]
    assert (last["user"], last["target"], last["revision"]) == ("ann", "species/water-l", 2)
    ds = Dataset(dataset.root)  # the journal holds the save: the open renames it into place
    assert not tmp.exists()
    rec = ds.load("species", "water-l")
    assert (rec["name"], rec["revision"]) == ("half-saved", 2)
    entries, problems = ds.journal()
    assert problems == [] and [e["revision"] for e in entries if e.get("target") == "species/water-l"] == [1, 2]


def test_a_dataset_open_before_the_kill_finishes_the_killed_save_before_its_own(dataset: Dataset,
                                                                                species_record) -> None:
    """Another process killed after its journal line, while this one had the dataset open: this one's
    save of the same record first finishes the killed one, then reports the conflict; the journal never
    holds two saves of one revision."""
    loaded = dataset.save("species", species_record(), expected_revision=None)
    _kill_paused(dataset.root, "before-rename")
    with pytest.raises(ConflictError) as info:
        dataset.save("species", dict(loaded, name="mine"), expected_revision=1)
    assert (info.value.found, info.value.theirs["name"]) == (2, "half-saved")
    revs = [e["revision"] for e in dataset.journal()[0] if e.get("target") == "species/water-l"]
    assert revs == [1, 2]
    assert dataset.save("species", dict(info.value.theirs, name="mine"), expected_revision=2)["revision"] == 3
