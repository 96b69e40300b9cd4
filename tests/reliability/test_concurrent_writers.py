"""Concurrent writers: separate processes racing read-modify-write saves on one record.

Eight processes each try 150 saves that raise a counter in one shared species record (its notes hold
``count=N``), in two rounds. With the store's lock every accepted save must survive (the final counter
equals the number of accepted saves), every refused one must be a ConflictError, and the journal must
hold exactly one line per accepted save. The control run turns the lock off and shows updates lost.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from tablekeeper.store import Dataset

WRITERS = 8
ATTEMPTS = 150
TARGET = "shared-counter"


def _round(
    root: Path, child, safety: str, tag: str, writers: int = WRITERS, attempts: int = ATTEMPTS
) -> list[dict]:
    go = root.parent / f"go-{tag}"
    procs = [child("counter", root, TARGET, attempts, go, safety=safety) for _ in range(writers)]
    go.touch()
    results = []
    for p in procs:
        out, err = p.communicate(timeout=120)
        assert p.returncode == 0, f"writer failed: {err.decode()[-2000:]}"
        results.append(json.loads(out.decode().strip().splitlines()[-1]))
    return results


def _state(root: Path) -> tuple[int, int, int]:
    """(counter in the record, revision of the record, journal update lines for the record)."""
    ds = Dataset(root)
    rec = ds.load("species", TARGET)
    entries, problems = ds.journal()
    assert not problems, problems
    updates = [e for e in entries if e.get("target") == f"species/{TARGET}" and e.get("action") == "update"]
    return int(rec["notes"].split("=")[1]), rec["revision"], len(updates)


def _setup(tmp_path: Path, make_species) -> Path:
    ds = Dataset.init(tmp_path / "ds", "race")
    ds.save("species", make_species(TARGET, notes="count=0"), expected_revision=None)
    return ds.root


@pytest.mark.timeout(900)
@pytest.mark.parametrize(
    ("writers", "attempts"), [(WRITERS, ATTEMPTS), pytest.param(16, 600, marks=pytest.mark.slow)]
)
def test_concurrent_writers_lose_no_accepted_save(
    tmp_path, child, make_species, leftovers, writers, attempts
):
    root = _setup(tmp_path, make_species)
    accepted_total = 0
    for rnd in (1, 2):
        results = _round(root, child, "", f"r{rnd}", writers, attempts)
        accepted = sum(r["accepted"] for r in results)
        conflicts = sum(r["conflicts"] for r in results)
        others = [o for r in results for o in r["others"]]
        accepted_total += accepted
        counter, revision, journal_updates = _state(root)
        print(
            f"round {rnd}: {accepted} accepted + {conflicts} conflicts of {writers * attempts} attempts; "
            f"counter {counter}, revision {revision}, journal {journal_updates} updates "
            f"(cumulative accepted {accepted_total})"
        )
        assert not others, f"refusals that were not ConflictError: {others[:5]}"
        assert accepted + conflicts == writers * attempts, (
            f"{accepted} accepted + {conflicts} conflicts != {writers * attempts} attempts"
        )
        assert counter == accepted_total, (
            f"counter {counter} != {accepted_total} accepted saves: updates lost"
        )
        assert revision == accepted_total + 1, f"revision {revision} != {accepted_total} saves + creation"
        assert journal_updates == accepted_total, (
            f"journal has {journal_updates} update lines for {accepted_total} accepted saves"
        )
        assert conflicts > 0, "no conflict at all: the writers did not really race"
    assert leftovers(root) == [], f"temporary files left: {leftovers(root)}"
    print(f"{accepted_total} of {accepted_total} accepted saves kept over 2 rounds")


@pytest.mark.timeout(240)
def test_control_without_lock_loses_updates(tmp_path, child, make_species):
    """The same race with ``SAFETY.lock = False``: the test above would have caught the loss."""
    root = _setup(tmp_path, make_species)
    results = _round(root, child, "lock=0", "control")
    accepted = sum(r["accepted"] for r in results)
    counter, revision, journal_updates = _state(root)
    lost = accepted - counter
    print(
        f"control without lock: {accepted} saves reported accepted, counter {counter} "
        f"({lost} lost), revision {revision}, journal {journal_updates} update lines"
    )
    assert lost > 0 or journal_updates != counter, (
        f"without the lock no update was lost ({accepted} accepted, counter {counter}): the race did "
        "not happen, so the protected run proves nothing"
    )
