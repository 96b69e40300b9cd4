"""Hostile identifiers: thousands of path-like, encoded, look-alike, overlong and device-name ids through
every door that turns an id into a path: store.check_id, Dataset.path, save, load, flags.raise_flag,
the import CSV's id column and the command line.

Each id must be refused, or accepted only as a slug that stays inside the dataset. A canary folder
beside the dataset must stay empty, and no file may appear outside the dataset (or at an absolute
path an id names).
"""

from __future__ import annotations

import contextlib
import csv
import io
import os
import random
import subprocess
import sys
from pathlib import Path

import pytest

from tablekeeper import cli, flags
from tablekeeper.errors import ConflictError, IdentifierError, InputError, NotFoundError, TablekeeperError
from tablekeeper.importers import plan_import
from tablekeeper.store import SLUG, Dataset, check_id

HOSTILE = [
    "..",
    ".",
    "../",
    "../x",
    "../../etc/passwd",
    "..\\..\\windows\\win.ini",
    "/etc/passwd",
    "/tmp/tk-escape",
    "C:\\evil",
    "c:",
    "\\\\server\\share",
    "a/b",
    "a\\b",
    "a\x00b",
    "\x00",
    "abc\x00.json",
    "%2e%2e",
    "%2e%2e%2f",
    "..%2f",
    "%2fetc",
    "%00",
    "~",
    "~root",
    "$HOME",
    "${HOME}",
    "a\nb",
    "abc\n",
    "\nabc",
    " abc",
    "abc ",
    "abc\t",
    "ＡＢＣ",
    "ａｂｃ",
    "\u0430bc",
    "ab\u0441",
    "stra\u00dfe",
    "\ufb01le",
    "\u0131d",
    "\u212aelvin",
    "e\u0301",
    "\u202eabc",
    "a\u200bb",
    "\ufeffabc",
    "x" * 300,
    "a" * 65,
    "CON",
    "Con",
    "con",
    "aux",
    "nul",
    "prn",
    "com1",
    "lpt1",
    "con.txt",
    "nul.json",
    ".hidden",
    "-abc",
    "_abc",
    "abc.",
    "abc.json",
    ".json",
    "a..b",
    "abc/",
    "abc:stream",
    "abc*",
    "abc?",
    "abc|",
    "abc<",
    "abc>",
    'abc"',
    "",
    " ",
    "A",
    "ABC",
    "abc-\u2013",
    "1\u00bd",
    "\u0661\u0662",
    "x\udcff",
    "abc\r",
    "abc\x1b[2J",
    "\u2024\u2024",
    "\uff0e\uff0e",
    "\u2215etc",
    "\u29f5x",
]
NOT_STRINGS = [None, 123, 1.5, ["a"], {"a": 1}, b"abc", True]

_FRAGMENTS = [
    "..",
    ".",
    "/",
    "\\",
    "%2e",
    "%2f",
    "%5c",
    "\x00",
    "a",
    "z9",
    "-",
    "_",
    " ",
    "\n",
    "\t",
    "con",
    "\u0430",
    "\uff0e",
    "\u2215",
    "\u202e",
    "\u200b",
    "C:",
    "~",
    "x" * 70,
    "É",
    "ǅ",
    "\U0001f600",
    "etc",
    "passwd",
    "\r",
    "$",
    "*",
]


def hostile_ids(n: int, seed: int = 7) -> list[str]:
    """The list above plus seeded random compositions of dangerous fragments, without repeats."""
    rng = random.Random(seed)
    out = dict.fromkeys(HOSTILE)
    while len(out) < n:
        out.setdefault("".join(rng.choice(_FRAGMENTS) for _ in range(rng.randint(1, 5))))
    return list(out)


def _tree(base: Path) -> set[str]:
    return {str(p.relative_to(base)) for p in base.rglob("*")}


def _inside(path: Path, folder: Path) -> bool:
    return os.path.realpath(path).startswith(os.path.realpath(folder) + os.sep)


def _species(ident: object) -> dict:
    return {"id": ident, "formula": "He", "phase": "g", "charge": 0, "status": "draft", "properties": {}}


@pytest.mark.timeout(240)
def test_no_identifier_escapes_the_dataset(tmp_path, capsys):
    ids = hostile_ids(10_000)
    root = tmp_path / "ds"
    ds = Dataset.init(root, "idtest")
    ds.save("species", _species("anchor"), expected_revision=None)
    canary = tmp_path / "canary"
    canary.mkdir()
    absolute = {i: Path(i + ".json") for i in ids if i.startswith("/") and "\x00" not in i}
    before_abs = {i for i, p in absolute.items() if p.exists()}
    before = _tree(tmp_path)
    accepted: list[str] = []
    escaped: list[str] = []
    crashes: list[str] = []
    for ident in ids + NOT_STRINGS:
        try:
            ok = check_id(ident)
            assert ok == ident and SLUG.match(ident)
            accepted.append(ident)
        except IdentifierError:
            ok = None
        for step in ("path", "save", "load", "flag"):
            try:
                if step == "path":
                    p = ds.path("species", ident)
                    if not (_inside(p, root / "species") and p.name == f"{ident}.json"):
                        escaped.append(f"path {ident!r} -> {p}")
                elif step == "save":
                    ds.save("species", _species(ident), expected_revision=None)
                elif step == "load":
                    ds.load("species", ident)
                else:
                    flags.raise_flag(ds, ident, "dfH298", "hostile id")
            except (IdentifierError, NotFoundError, ConflictError):
                pass
            except TablekeeperError as exc:
                if ok is not None:  # a valid id refused for another reason is fine; say which
                    crashes.append(f"{step} {ident!r}: {exc}")
            except Exception as exc:  # anything else is an unguarded door
                crashes.append(f"{step} {ident!r}: {type(exc).__name__}: {exc}")
    # The import's id column: a sample, each id alone in a CSV, and the CLI (in process).
    inputs = tmp_path / "inputs"
    inputs.mkdir()
    sample = random.Random(3).sample(ids, 800) + HOSTILE
    for k, ident in enumerate(sample):
        f = inputs / f"in{k}.csv"
        buf = io.StringIO()
        csv.writer(buf).writerows([["id", "formula", "phase"], [ident, "He", "g"]])
        f.write_text(buf.getvalue(), encoding="utf-8", errors="surrogateescape")
        try:
            plan_import(ds, f)
        except InputError:
            pass
        except Exception as exc:
            crashes.append(f"import {ident!r}: {type(exc).__name__}: {exc}")
    for ident in sample[:120]:
        if "\x00" in ident:
            continue  # an argv cannot hold NUL
        with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
            try:
                rc = cli.main(["flag", str(root), ident, "dfH298", "--note", "hostile"])
            except SystemExit as exc:  # argparse refusing an option-like id
                rc = exc.code
        if rc not in (0, 2):
            crashes.append(f"cli flag {ident!r}: exit {rc}")
    # What is on disk now.
    after = _tree(tmp_path)
    new = after - before
    outside = sorted(
        p
        for p in new
        if not p.startswith(("ds/species/", "ds/flags/", "inputs"))
        and p not in ("ds/journal.jsonl", "ds/.tablekeeper.lock")
    )
    bad_names = sorted(p for p in new if p.startswith("ds/species/") and not SLUG.match(Path(p).stem))
    escaped += outside + bad_names
    escaped += [f"absolute {i!r}" for i, p in absolute.items() if p.exists() and i not in before_abs]
    assert not any(canary.iterdir()), "the canary folder beside the dataset is not empty"
    windows = sorted(i for i in accepted if i.split(".")[0] in ("con", "aux", "nul", "prn", "com1", "lpt1"))
    n = len(ids) + len(NOT_STRINGS)
    print(
        f"identifiers: {len(escaped)} of {n} escaped; {len(accepted)} accepted as slugs (inside the "
        f"dataset), {n - len(accepted)} refused; import column {len(sample)} ids, CLI 120; "
        f"Windows device names accepted as slugs: {windows}"
    )
    assert not escaped, escaped[:20]
    assert not crashes, crashes[:20]
    assert not windows, f"Windows device names must be refused: {windows}"


@pytest.mark.timeout(60)
def test_command_line_refuses_path_like_ids_as_a_process(clean_dataset, tmp_path):
    root = clean_dataset.root
    for ident in ("../../canary", "/tmp/tk-escape", "..", "a\\b", "\u0430bc"):
        r = subprocess.run(
            [sys.executable, "-m", "tablekeeper.cli", "flag", str(root), ident, "dfH298", "--note", "x"],
            capture_output=True,
            text=True,
            timeout=60,
        )
        assert r.returncode == 2, (ident, r.stdout, r.stderr)
        assert "is not a valid identifier" in r.stderr or "no species named" in r.stderr, r.stderr
        assert "Traceback" not in r.stderr
    assert not Path("/tmp/tk-escape.json").exists()


def test_control_without_id_check_paths_escape(tmp_path, monkeypatch):
    """The same path computation with the slug check replaced by a pass-through: the escape detection
    above would have fired (no file is written here)."""
    from tablekeeper import store

    root = tmp_path / "ds"
    ds = Dataset.init(root, "control")
    monkeypatch.setattr(store, "check_id", lambda ident, what="identifier": ident)
    escaped = [i for i in HOSTILE if "\x00" not in i and not _inside(ds.path("species", i), root / "species")]
    print(
        f"control without the id check: {len(escaped)} of {len(HOSTILE)} hostile ids give a path outside "
        "species/"
    )
    assert escaped, "no hostile id escapes even without the check: the test cannot fail"
