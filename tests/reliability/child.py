"""Child processes of the reliability tests: writers that race each other or are killed mid-save.

Run as ``python child.py MODE ARGS...``. The environment variable ``TK_SAFETY`` (e.g. ``lock=0``)
turns protections of ``tablekeeper.store.SAFETY`` off, for the control runs that show a test would
catch their absence. Each mode prints JSON lines on stdout, flushed at once, so that a parent that
kills the child knows exactly how far it got.
"""

from __future__ import annotations

import json
import os
import stat
import sys
import time

from tablekeeper import store
from tablekeeper.errors import ConflictError
from tablekeeper.store import Dataset


def _apply_safety() -> None:
    for part in filter(None, os.environ.get("TK_SAFETY", "").split(",")):
        name, value = part.split("=")
        setattr(store.SAFETY, name, value == "1")


def _say(obj: dict) -> None:
    sys.stdout.write(json.dumps(obj) + "\n")
    sys.stdout.flush()


def counter(root: str, ident: str, attempts: int, go: str) -> None:
    """Read-modify-write ``attempts`` times: notes ``count=N`` becomes ``count=N+1``."""
    ds = Dataset(root)
    while not os.path.exists(go):  # a barrier, so that all writers start together
        time.sleep(0.001)
    accepted = conflicts = 0
    others: list[str] = []
    for _ in range(attempts):
        rec = ds.load("species", ident)
        n = int(rec["notes"].split("=")[1])
        new = dict(rec, notes=f"count={n + 1}")
        try:
            ds.save("species", new, expected_revision=rec["revision"], reason="counter")
            accepted += 1
        except ConflictError:
            conflicts += 1
        except Exception as exc:  # counted and reported: the test asserts there are none
            others.append(f"{type(exc).__name__}: {exc}")
    _say({"accepted": accepted, "conflicts": conflicts, "others": others})


def big_record(ident: str, revision: int, points: int) -> dict:
    """A species record of about 50 bytes per tabulated point whose content is a function of its
    revision, so that the parent can rebuild every version the child may have written."""
    pts = [[100.0 + i * 0.25, 20.0 + ((revision * 7919 + i * 31) % 100000) / 1000.0] for i in range(points)]
    return {
        "id": ident,
        "formula": "C8H18",
        "phase": "l",
        "charge": 0,
        "status": "draft",
        "name": f"large record r{revision}",
        "properties": {},
        "cp_model": {"kind": "tabulated", "points": pts},
    }


def bigsave(root: str, ident: str, points: int) -> None:
    """Save new versions of one large record in a loop until killed. Prints ``begin`` before each
    save and ``done`` after it."""
    ds = Dataset(root)
    rev = ds.load("species", ident)["revision"]
    _say({"ready": rev})
    while True:
        _say({"begin": rev + 1})
        rec = big_record(ident, rev + 1, points)
        ds.save("species", rec, expected_revision=rev, reason="large save")
        rev += 1
        _say({"done": rev})


def saver(root: str, ident: str, note: str) -> None:
    """One save of an existing species (shared-folder tests run this as another OS user)."""
    ds = Dataset(root)
    rec = ds.load("species", ident)
    ds.save("species", dict(rec, notes=note), expected_revision=rec["revision"])
    new = {
        "id": f"{ident}-{os.getuid()}",
        "formula": "He",
        "phase": "g",
        "charge": 0,
        "status": "draft",
        "properties": {},
    }
    ds.save("species", new, expected_revision=None)
    _say({"saved": [ident, new["id"]]})


def step_record(ident: str, **extra: object) -> dict:
    """The small species records of the step-kill tests."""
    rec = {"id": ident, "formula": "H2O", "phase": "l", "charge": 0, "status": "draft", "properties": {}}
    rec.update(extra)
    return rec


def _pause_at(step: str, nth: int) -> None:
    """Replace os functions so that the process stops (blocked on stdin, which the parent never writes)
    at one boundary of a save: ``journal-open`` (staged, nothing journaled), ``journal-torn`` (half of
    the journal bytes written), ``replace`` (the ``nth`` rename), ``unlink`` (a delete's unlink),
    ``dir-fsync`` (renamed, folder not yet fsynced). Prints ``{"paused": step}`` first."""
    real_open, real_write, real_replace = os.open, os.write, os.replace
    real_fsync, real_unlink = os.fsync, os.unlink
    journal_fds: set[int] = set()
    seen = {"replace": 0}

    def hold() -> None:
        _say({"paused": step})
        sys.stdin.readline()
        time.sleep(3600)

    def p_open(path, flags, *args, **kw):
        is_journal = os.fspath(path).endswith("journal.jsonl")
        if is_journal and step == "journal-open":
            hold()
        fd = real_open(path, flags, *args, **kw)
        if is_journal:
            journal_fds.add(fd)
        return fd

    def p_write(fd, data):
        if step == "journal-torn" and fd in journal_fds and len(data) > 1:
            real_write(fd, bytes(data[: len(data) // 2]))
            hold()
        return real_write(fd, data)

    def p_replace(src, dst):
        seen["replace"] += 1
        if step == "replace" and seen["replace"] == nth:
            hold()
        return real_replace(src, dst)

    def p_fsync(fd):
        if step == "dir-fsync" and stat.S_ISDIR(os.fstat(fd).st_mode):
            hold()
        return real_fsync(fd)

    def p_unlink(path, *args, **kw):
        if step == "unlink" and not os.path.basename(os.fspath(path)).startswith("."):
            hold()
        return real_unlink(path, *args, **kw)

    os.open, os.write, os.replace, os.fsync, os.unlink = p_open, p_write, p_replace, p_fsync, p_unlink


def stepkill(root: str, action: str, step: str, nth: int) -> None:
    """One save, import or delete that stops at ``step`` (see ``_pause_at``) until killed:
    ``save`` updates water (revision 1), ``save_many`` updates water and ice (revision 1) and creates
    steam, ``delete`` deletes ice (revision 1)."""
    ds = Dataset(root)
    water, ice = ds.load("species", "water"), ds.load("species", "ice")
    _pause_at(step, nth)
    if action == "save":
        ds.save("species", dict(water, notes="saved"), expected_revision=1, reason="step kill")
    elif action == "save_many":
        items = [(dict(water, notes="imported"), 1), (dict(ice, notes="imported"), 1),
                 (step_record("steam", phase="g", notes="imported"), None)]
        ds.save_many("species", items, reason="step kill")
    elif action == "delete":
        ds.delete("species", "ice", expected_revision=1, reason="step kill")
    _say({"finished": action})


def _drop_privileges() -> None:
    """Become another OS user (shared-folder tests). Done after the imports: the interpreter may live
    where that user cannot read."""
    uid, gid = os.environ.get("TK_AS_UID"), os.environ.get("TK_AS_GID")
    if uid:
        import filelock  # noqa: F401  (loaded while still readable)

        os.setgroups([int(gid)])
        os.setgid(int(gid))
        os.setuid(int(uid))


if __name__ == "__main__":
    _apply_safety()
    _drop_privileges()
    mode, args = sys.argv[1], sys.argv[2:]
    if mode == "counter":
        counter(args[0], args[1], int(args[2]), args[3])
    elif mode == "bigsave":
        bigsave(args[0], args[1], int(args[2]))
    elif mode == "saver":
        saver(args[0], args[1], args[2])
    elif mode == "stepkill":
        stepkill(args[0], args[1], args[2], int(args[3]))
    else:
        raise SystemExit(f"unknown mode {mode}")
    sys.stdout.flush()
