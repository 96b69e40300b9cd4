"""A stateful model test of the store: random sequences of creates, edits, stale edits, deletes, flags
raised and resolved, reopening, and simulated crashes (a leftover temporary file, a torn journal line,
a save or delete stopped dead before its journal line, before its rename or unlink, or before its
folder fsync, then the next open) against an in-memory model.

After every step the records on disk equal the model, and replaying the journal's field-level changes
(dotted field paths, old and new values) from nothing rebuilds the model; every ``old`` value in the
journal must equal what the replay holds at that point.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from pathlib import Path
from typing import ClassVar
from unittest import mock

import pytest
from hypothesis import HealthCheck, settings
from hypothesis import strategies as st
from hypothesis.stateful import RuleBasedStateMachine, invariant, precondition, rule

from tablekeeper import flags as flagmod
from tablekeeper import store
from tablekeeper.errors import ConflictError
from tablekeeper.store import Dataset, flatten

IDS = ("water", "steam", "ice", "co2", "n2", "argon")
FORMULAS = ("H2O", "CO2", "N2", "Ar", "CH4")
text = st.text(st.characters(codec="utf-8", exclude_categories=("Cs",)), min_size=1, max_size=30).filter(
    lambda s: s.strip() and s[0] not in "=+@\t\r" and s == s.strip()
)
value = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False)


def _set(rec: dict, dotted: str, val: object) -> None:
    *parents, leaf = dotted.split(".")
    for p in parents:
        rec = rec.setdefault(p, {})
    rec[leaf] = val


def _get(rec: dict, dotted: str, missing: object) -> object:
    for p in dotted.split("."):
        if not isinstance(rec, dict) or p not in rec:
            return missing
        rec = rec[p]
    return rec


def _unset(rec: dict, dotted: str) -> None:
    *parents, leaf = dotted.split(".")
    chain = [rec]
    for p in parents:
        chain.append(chain[-1][p])
    del chain[-1][leaf]
    for d, p in zip(reversed(chain[:-1]), reversed(parents), strict=True):  # prune emptied objects
        if not d[p]:
            del d[p]


_MISSING = object()
_TORN = b'{"action":"update","target":"species/water"'


def _parses(raw: bytes) -> bool:
    import json

    try:
        json.loads(raw)
        return True
    except ValueError:
        return False


def replay(entries: list[dict]) -> dict[str, dict]:
    """Rebuild every record from the journal's field-level changes; check each old value on the way."""
    state: dict[str, dict] = {}
    for e in entries:
        target = e.get("target", "")
        if not target.startswith(("species/", "flags/", "releases/")):
            continue
        rec = state.setdefault(target, {})
        for ch in e.get("changes", []):
            have = _get(rec, ch["field"], _MISSING)
            want = ch.get("old", _MISSING)
            assert have == want or (have is _MISSING and want is _MISSING), (
                f"journal {target} {ch['field']}: old {want!r} but the replay holds {have!r}"
            )
            if "new" in ch:
                _set(rec, ch["field"], ch["new"])
            else:
                _unset(rec, ch["field"])
        if e.get("action") == "delete":
            assert not rec, f"{target}: fields left after its delete: {rec}"
            del state[target]
    return state


class _Killed(BaseException):
    """Stands for SIGKILL inside a save: raised by a replaced os function, with the rollback and the
    clean-up switched off, it leaves the files as a kill at that point would (the lock is released, as
    the kernel releases it for a killed process)."""


def _kill(*_args: object, **_kw: object) -> None:
    raise _Killed


def _killed_at(step: str) -> contextlib.ExitStack:
    stack = contextlib.ExitStack()
    stack.enter_context(mock.patch.object(Dataset, "_rollback", lambda *a, **k: None))
    stack.enter_context(mock.patch.object(Dataset, "_forget", staticmethod(lambda kept: None)))
    if step == "before-journal":
        stack.enter_context(mock.patch.object(Dataset, "_append_line", _kill))
    elif step == "before-rename":
        stack.enter_context(mock.patch.object(os, "replace", _kill))
        stack.enter_context(mock.patch.object(os, "unlink", _kill))
    else:
        stack.enter_context(mock.patch.object(store, "_fsync_dir", _kill))
    return stack


class StoreMachine(RuleBasedStateMachine):
    counts: ClassVar[dict[str, int]] = {"runs": 0, "steps": 0, "released": 0, "refused": 0}

    def __init__(self) -> None:
        super().__init__()
        self.base = Path(tempfile.mkdtemp(prefix="tk-state-"))
        self.ds = Dataset.init(self.base / "ds", "model")
        self.species: dict[str, dict] = {}  # id -> record with revision
        self.flags: dict[str, dict] = {}
        self.releases: dict[str, dict] = {}
        self.release_tried = False
        self.torn_pending = False
        self.steps = 0

    def teardown(self) -> None:
        shutil.rmtree(self.base, ignore_errors=True)
        c = StoreMachine.counts
        c["runs"] += 1
        c["steps"] += self.steps
        print(
            f"store model: {c['runs']} runs, {c['steps']} checked steps, {c['released']} releases made, "
            f"{c['refused']} refused by the gate"
        )

    # -- rules ---------------------------------------------------------------------------------------

    @rule(ident=st.sampled_from(IDS), formula=st.sampled_from(FORMULAS), name=text, h=value)
    def create(self, ident: str, formula: str, name: str, h: float) -> None:
        rec = {
            "id": ident,
            "formula": formula,
            "phase": "g",
            "charge": 0,
            "status": "draft",
            "name": name,
            "properties": {"dfH298": {"value": h, "unit": "kJ/mol"}},
        }
        if ident in self.species:
            with pytest.raises(ConflictError):
                self.ds.save("species", rec, expected_revision=None)
            return
        self.species[ident] = self.ds.save("species", rec, expected_revision=None)
        self.torn_pending = False

    @precondition(lambda self: self.species)
    @rule(data=st.data(), what=st.sampled_from(["name", "notes", "dfH298", "S298", "drop-dfH298", "status"]))
    def edit(self, data, what: str) -> None:
        ident = data.draw(st.sampled_from(sorted(self.species)))
        old = self.species[ident]
        new = {k: (dict(v) if isinstance(v, dict) else v) for k, v in old.items()}
        props = {k: dict(v) for k, v in new["properties"].items()}
        if what in ("name", "notes"):
            new[what] = data.draw(text)
        elif what == "status":
            new["status"] = data.draw(st.sampled_from(["draft", "reviewed", "deprecated"]))
        elif what == "drop-dfH298":
            props.pop("dfH298", None)
        else:
            unit = "kJ/mol" if what == "dfH298" else "J/(mol*K)"
            props[what] = {"value": data.draw(value), "unit": unit, "uncertainty": data.draw(value.map(abs))}
        new["properties"] = props
        self.species[ident] = self.ds.save("species", new, expected_revision=old["revision"])
        self.torn_pending = False

    @precondition(lambda self: self.species)
    @rule(data=st.data())
    def stale_edit_is_refused(self, data) -> None:
        ident = data.draw(st.sampled_from(sorted(self.species)))
        old = self.species[ident]
        with pytest.raises(ConflictError):
            self.ds.save("species", dict(old, notes="stale"), expected_revision=old["revision"] - 1)

    @precondition(lambda self: self.species)
    @rule(data=st.data())
    def delete(self, data) -> None:
        ident = data.draw(st.sampled_from(sorted(self.species)))
        self.ds.delete("species", ident, expected_revision=self.species.pop(ident)["revision"])
        self.torn_pending = False

    @precondition(lambda self: self.species)
    @rule(data=st.data(), note=text, blocking=st.booleans())
    def raise_flag(self, data, note: str, blocking: bool) -> None:
        ident = data.draw(st.sampled_from(sorted(self.species)))
        rec = flagmod.raise_flag(
            self.ds, ident, data.draw(st.sampled_from(["dfH298", "S298", "name"])), note, blocking=blocking
        )
        self.flags[rec["id"]] = rec
        self.torn_pending = False

    @precondition(lambda self: any(f["status"] == "open" for f in self.flags.values()))
    @rule(data=st.data(), resolution=text)
    def resolve_flag(self, data, resolution: str) -> None:
        fid = data.draw(st.sampled_from(sorted(k for k, f in self.flags.items() if f["status"] == "open")))
        self.flags[fid] = flagmod.resolve(self.ds, fid, resolution)
        self.torn_pending = False

    @precondition(lambda self: not self.release_tried)  # once per run: a release runs every check
    @rule()
    def release(self) -> None:
        from tablekeeper import bundle

        self.release_tried = True
        version = f"1.0.{len(self.releases)}"
        try:
            done = bundle.release(self.ds, version, out=self.base / "out", allow_warnings=True)
        except bundle.GateRefused:
            StoreMachine.counts["refused"] += 1
            assert not (self.base / "out").exists() or not any((self.base / "out").iterdir())
            return
        self.releases[version] = done.record
        StoreMachine.counts["released"] += 1
        assert bundle.verify(done.archive).ok
        self.torn_pending = False

    @rule()
    def reopen(self) -> None:
        self.ds = Dataset(self.ds.root)

    @rule(kind=st.sampled_from(["species", "flags"]))
    def crash_leaves_temp_file(self, kind: str) -> None:
        (self.ds.root / kind / f".water.json{store._TMP_MARK}99999-deadbeef").write_bytes(b'{"id": "wat')

    @rule(
        garbage=st.binary(min_size=1, max_size=40).filter(lambda b: b"\n" not in b and not _parses(_TORN + b))
    )
    def crash_tears_journal(self, garbage: bytes) -> None:
        with open(self.ds.root / store.JOURNAL, "ab") as fh:
            fh.write(_TORN + garbage)
        self.torn_pending = True

    @precondition(lambda self: self.species)
    @rule(data=st.data(), op=st.sampled_from(["save", "delete"]),
          step=st.sampled_from(["before-journal", "before-rename", "before-fsync"]))
    def killed_mid_change(self, data, op: str, step: str) -> None:
        """A change stopped dead at ``step``, then the next open: a change whose journal line was written
        is finished, any other is discarded."""
        ident = data.draw(st.sampled_from(sorted(self.species)))
        old = self.species[ident]
        with _killed_at(step), pytest.raises(_Killed):
            if op == "save":
                self.ds.save("species", dict(old, notes=f"killed {step}"), expected_revision=old["revision"])
            else:
                self.ds.delete("species", ident, expected_revision=old["revision"])
        self.ds = Dataset(self.ds.root)  # the next open
        assert not [p for p in self.ds.root.rglob("*") if store._TMP_MARK in p.name]
        if step != "before-journal":  # journaled: the change holds
            if op == "save":
                self.species[ident] = dict(old, notes=f"killed {step}", revision=old["revision"] + 1)
            else:
                del self.species[ident]
            self.torn_pending = False

    @rule()
    def recover(self) -> None:
        self.ds = Dataset(self.ds.root)  # the constructor removes temporary files
        assert not [p for p in self.ds.root.rglob("*") if store._TMP_MARK in p.name]

    # -- invariants ----------------------------------------------------------------------------------

    @invariant()
    def disk_equals_model(self) -> None:
        sp = self.ds.load_all("species")
        fl = self.ds.load_all("flags")
        assert not sp.damaged and not fl.damaged
        assert sp.records == self.species
        assert fl.records == self.flags
        assert self.ds.load_all("releases").records == self.releases

    @invariant()
    def journal_replay_rebuilds_model(self) -> None:
        entries, problems = self.ds.journal()
        assert bool(problems) == self.torn_pending, problems
        state = replay(entries)
        want = {f"species/{k}": v for k, v in self.species.items()}
        want.update({f"flags/{k}": v for k, v in self.flags.items()})
        want.update({f"releases/{k}": v for k, v in self.releases.items()})
        assert set(state) == set(want)
        for target, rec in want.items():
            expected = {k: v for k, v in flatten(rec).items() if k != "revision"}
            assert flatten(state[target]) == expected, target
        self.steps += 1


TestStoreModel = StoreMachine.TestCase
TestStoreModel.settings = settings(
    max_examples=25, stateful_step_count=30, deadline=None, suppress_health_check=[HealthCheck.too_slow]
)
TestStoreModel = pytest.mark.timeout(240)(TestStoreModel)
