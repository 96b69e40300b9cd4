"""Disk full and I/O errors: ENOSPC or EIO at the n-th os.write, os.fsync or os.replace of one save,
for every n that save makes; and a real full disk (a small tmpfs) where mounting one is allowed.

After each injected failure the user must get the error, the previous record must be byte-identical,
the journal must be byte-identical (no partial line), no temporary file may remain, and a failed
fsync must never be reported as success.
"""

from __future__ import annotations

import errno
import os
import shutil
import subprocess
from collections.abc import Callable
from pathlib import Path

import pytest

from tablekeeper import store
from tablekeeper.store import Dataset

OPS = ("write", "fsync", "replace")


class Injector:
    """Counts calls of os.write/os.fsync/os.replace and fails the n-th call of one of them."""

    def __init__(self, monkeypatch: pytest.MonkeyPatch) -> None:
        self.calls = dict.fromkeys(OPS, 0)
        self.fail_op: str | None = None
        self.fail_at = 0
        self.err = errno.ENOSPC
        self.fired = False
        for op in OPS:
            monkeypatch.setattr(os, op, self._wrap(op, getattr(os, op)))

    def _wrap(self, op: str, real: Callable) -> Callable:
        def wrapper(*args, **kw):
            self.calls[op] += 1
            if op == self.fail_op and self.calls[op] == self.fail_at:
                self.fired = True
                raise OSError(self.err, os.strerror(self.err))
            return real(*args, **kw)

        return wrapper

    def arm(self, op: str | None, n: int = 0, err: int = errno.ENOSPC) -> None:
        self.calls = dict.fromkeys(OPS, 0)
        self.fail_op, self.fail_at, self.err, self.fired = op, n, err, False


def _snapshot(root: Path) -> dict[str, bytes]:
    return {
        str(p.relative_to(root)): p.read_bytes()
        for p in sorted(root.rglob("*"))
        if p.is_file() and p.name != store.LOCK_NAME
    }


def _pristine(tmp_path: Path, make_species) -> Path:
    ds = Dataset.init(tmp_path / "pristine", "diskfull")
    ds.save("species", make_species("water", notes="before"), expected_revision=None)
    ds.save("species", make_species("ice", phase="cr", notes="before"), expected_revision=None)
    return ds.root


def _save_one(ds: Dataset, make_species) -> None:
    rec = ds.load("species", "water")
    ds.save("species", dict(rec, notes="after " * 2000), expected_revision=rec["revision"])


def _save_many(ds: Dataset, make_species) -> None:
    items = [
        (dict(ds.load("species", "water"), notes="after"), 1),
        (dict(ds.load("species", "ice"), notes="x"), 1),
        (make_species("steam", phase="g"), None),
    ]
    ds.save_many("species", items, reason="import")


def _delete(ds: Dataset, make_species) -> None:
    ds.delete("species", "ice", expected_revision=1)


ACTIONS = {"save": _save_one, "save_many": _save_many, "delete": _delete}


@pytest.mark.timeout(120)
@pytest.mark.parametrize("action", sorted(ACTIONS))
def test_every_failing_call_of_a_save_leaves_the_dataset_as_it_was(
    tmp_path, monkeypatch, make_species, action
):
    pristine = _pristine(tmp_path, make_species)
    inj = Injector(monkeypatch)
    run = ACTIONS[action]
    # A dry run counts the calls one save makes.
    dry = tmp_path / "dry"
    shutil.copytree(pristine, dry)
    inj.arm(None)
    run(Dataset(dry), make_species)
    counts = dict(inj.calls)
    assert counts["write"] and counts["fsync"], counts
    cases = failures = 0
    problems: list[str] = []
    for op in OPS:
        for n in range(1, counts[op] + 1):
            for err in (errno.ENOSPC, errno.EIO):
                cases += 1
                root = tmp_path / f"case-{op}-{n}-{err}"
                shutil.copytree(pristine, root)
                before = _snapshot(root)
                ds = Dataset(root)
                inj.arm(op, n, err)
                try:
                    run(ds, make_species)
                    raised = None
                except OSError as exc:
                    raised = exc
                fired = inj.fired
                inj.arm(None)
                where = f"{action}: {errno.errorcode[err]} at {op} #{n}"
                if not fired:
                    problems.append(f"{where}: the call was never made")
                    continue
                if raised is None:
                    problems.append(f"{where}: reported as success")
                    continue
                failures += 1
                after = _snapshot(root)
                changed = sorted(k for k in set(before) | set(after) if before.get(k) != after.get(k))
                if changed:
                    problems.append(f"{where}: changed {changed}")
                if any(".tmp-" in k for k in after):
                    problems.append(f"{where}: temporary file left")
                journal = (root / store.JOURNAL).read_bytes()
                if journal and not journal.endswith(b"\n"):
                    problems.append(f"{where}: partial journal line")
                # The dataset still works after the failure.
                Dataset(root).load("species", "water")
    print(
        f"{action}: {counts} calls; {failures} of {cases} injected failures reported to the caller "
        f"and left every file byte-identical"
        if not problems
        else f"{action}: {len(problems)} problems"
    )
    assert not problems, "\n".join(problems)


def _mount_tmpfs(where: Path, size: str) -> bool:
    where.mkdir()
    if os.geteuid() != 0:
        return False
    r = subprocess.run(
        ["mount", "-t", "tmpfs", "-o", f"size={size}", "tmpfs", str(where)], capture_output=True, timeout=10
    )
    return r.returncode == 0


def _fill_and_save(mnt: Path, make_species) -> tuple[int, int, int]:
    """Save a 150 kB record with 0..304 kB free: (refused, refused that changed files, completed)."""
    refused = damaged = kept = 0
    for free_kb in range(0, 320, 16):
        root = mnt / "ds"
        shutil.rmtree(root, ignore_errors=True)
        for f in mnt.glob("filler*"):
            f.unlink()
        ds = Dataset.init(root, "full")
        ds.save("species", make_species("water", notes="before"), expected_revision=None)
        before = _snapshot(root)
        st = os.statvfs(mnt)
        fill = st.f_bavail * st.f_frsize - free_kb * 1024
        if fill > 0:
            (mnt / "filler").write_bytes(b"\0" * fill)
        rec = ds.load("species", "water")
        big = dict(rec, cp_model={"kind": "tabulated", "points": [[100.0 + i, 30.0] for i in range(3000)]})
        try:
            ds.save("species", big, expected_revision=rec["revision"])
            kept += 1
            assert Dataset(root).load("species", "water") == dict(big, revision=2)
        except OSError as exc:
            assert exc.errno == errno.ENOSPC, exc
            refused += 1
            damaged += _snapshot(root) != before or any(".tmp-" in p.name for p in root.rglob("*"))
    return refused, damaged, kept


@pytest.mark.timeout(120)
def test_full_tmpfs_refuses_saves_and_keeps_previous_files(tmp_path, make_species, monkeypatch):
    """A real ENOSPC: a 1 MiB tmpfs filled to leave 0..304 kB free before a 150 kB save. The control
    run writes in place (``SAFETY.atomic = False``) and shows a refused save destroying the record."""
    mnt = tmp_path / "mnt"
    if not _mount_tmpfs(mnt, "1m"):
        pytest.skip("no tmpfs can be mounted here (needs root); the injection test above covers ENOSPC")
    try:
        refused, damaged, kept = _fill_and_save(mnt, make_species)
        print(
            f"full tmpfs: {refused} saves refused with ENOSPC, {damaged} of them changed a file; "
            f"{kept} saves completed"
        )
        assert refused > 0 and kept > 0, (refused, kept)
        assert damaged == 0, f"{damaged} of {refused} refused saves changed files"
        monkeypatch.setattr(store.SAFETY, "atomic", False)
        c_refused, c_damaged, _ = _fill_and_save(mnt, make_species)
        print(f"control without atomic rename: {c_damaged} of {c_refused} refused saves changed the record")
        assert c_damaged > 0, "writing in place on a full disk damaged nothing: the test cannot fail"
    finally:
        subprocess.run(["umount", str(mnt)], capture_output=True, timeout=10)


@pytest.mark.parametrize("err", [errno.EIO, errno.EACCES])
def test_a_delete_whose_unlink_fails_leaves_the_record_and_no_journal_line(tmp_path, monkeypatch, make_species,
                                                                          err):
    """The delete's journal line is written before the unlink; an unlink that fails takes it back (the
    injection above covers write, fsync and rename; unlink is the step only a delete makes)."""
    root = _pristine(tmp_path, make_species)
    before = _snapshot(root)
    ds = Dataset(root)
    real_unlink = os.unlink
    record = str(root / "species" / "ice.json")

    def failing_unlink(path, *args, **kw):
        if os.fspath(path) == record:
            raise OSError(err, os.strerror(err))
        return real_unlink(path, *args, **kw)

    monkeypatch.setattr(os, "unlink", failing_unlink)
    with pytest.raises(OSError):
        ds.delete("species", "ice", expected_revision=1)
    monkeypatch.undo()
    assert _snapshot(root) == before
    assert Dataset(root).load("species", "ice")["revision"] == 1
