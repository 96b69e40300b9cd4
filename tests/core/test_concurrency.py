"""Real processes: two saves of one revision race; a save killed before its rename loses nothing."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest

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

real_replace = os.replace

def paused_replace(src, dst):
    # Stop right before the rename: the temporary file is written and fsynced, the target untouched.
    print("paused " + os.fspath(src), flush=True)
    sys.stdin.readline()  # blocks until the parent kills this process
    real_replace(src, dst)

os.replace = paused_replace
ds = Dataset(sys.argv[1])
rec = ds.load("species", "water-l")
ds.save("species", dict(rec, name="half-saved"), expected_revision=rec["revision"])
print("finished", flush=True)
"""


def test_a_save_killed_before_its_rename_leaves_the_old_record_whole(dataset: Dataset,
                                                                    species_record) -> None:
    dataset.save("species", species_record(), expected_revision=None)
    path = dataset.root / "species" / "water-l.json"
    before = path.read_bytes()
    journal_before = (dataset.root / "journal.jsonl").read_bytes()
    child = _spawn(KILLED, dataset.root, user="ann")
    line = child.stdout.readline().strip()
    assert line.startswith("paused "), child.stderr.read()
    tmp = Path(line.removeprefix("paused "))
    assert tmp.parent == path.parent and tmp.exists()
    assert b"half-saved" in tmp.read_bytes()  # the new version is complete, only the rename is missing
    child.send_signal(signal.SIGKILL)
    child.wait(timeout=30)
    assert child.returncode == -signal.SIGKILL
    assert path.read_bytes() == before
    assert (dataset.root / "journal.jsonl").read_bytes() == journal_before
    assert tmp.exists()  # still there until someone opens the dataset
    ds = Dataset(dataset.root)  # the kill released the lock; the open cleans up
    assert not tmp.exists()
    assert ds.load("species", "water-l")["name"] == "water"
    report = ds.load_all("species")
    assert list(report.records) == ["water-l"] and report.damaged == []
    # And the dataset takes the next save normally: the kill released the lock (a held lock would time out).
    assert ds.save("species", dict(ds.load("species", "water-l"), name="after"), expected_revision=1)[
        "revision"] == 2
