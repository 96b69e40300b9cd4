"""Damaged files: one bit flipped, or a record truncated, at seeded places in a clean dataset.

An independent reading of each damaged file (the standard library's strict JSON parser, jsonschema with
format checking, the id against the file name) says whether the damage left a readable, schema-valid
record. When it did not, ``tablekeeper check`` must name the file and exit non-zero, and the store must
not load it silently. A flip that leaves a different but valid record (a digit changed) cannot be
told from an edit without checksums: such cases are counted and printed; released bundles carry
sha256 hashes for that reason.
"""

from __future__ import annotations

import json
import random
import subprocess
import sys
from pathlib import Path

import pytest
from jsonschema import Draft202012Validator

from tablekeeper import cli, validation
from tablekeeper.store import Dataset

SEED = 1989
FLIPS = 24
TRUNCATIONS = 12


def _dup_refused(pairs):
    keys = [k for k, _ in pairs]
    if len(keys) != len(set(keys)):
        raise ValueError("duplicate key")
    return dict(pairs)


def _valid(kind: str, ident: str, raw: bytes) -> bool:
    """The independent verdict: does this file still hold a valid record?"""
    try:
        obj = json.loads(
            raw.decode("utf-8"),
            object_pairs_hook=_dup_refused,
            parse_constant=lambda c: (_ for _ in ()).throw(ValueError(c)),
        )
    except (ValueError, UnicodeDecodeError, RecursionError):
        return False
    if raw.startswith(b"\xef\xbb\xbf") or not isinstance(obj, dict) or obj.get("id") != ident:
        return False
    v = Draft202012Validator(validation.schema(kind), format_checker=Draft202012Validator.FORMAT_CHECKER)
    return not list(v.iter_errors(obj))


def _check(root: Path, capsys) -> tuple[int, str]:
    capsys.readouterr()
    rc = cli.main(["check", str(root)])
    cap = capsys.readouterr()
    return rc, cap.out + cap.err


def _cases(files: list[Path], rng: random.Random) -> list[tuple[str, Path, int]]:
    cases = []
    for _ in range(FLIPS):
        f = rng.choice(files)
        cases.append(("flip", f, rng.randrange(f.stat().st_size * 8)))
    for _ in range(TRUNCATIONS):
        f = rng.choice(files)
        cases.append(("truncate", f, rng.randrange(f.stat().st_size)))
    return cases


@pytest.mark.timeout(180)
def test_check_names_every_damaged_record(clean_dataset, capsys):
    root = clean_dataset.root
    rc, out = _check(root, capsys)
    assert rc == 0, f"the clean dataset does not pass check:\n{out}"
    files = sorted((root / "species").glob("*.json")) + sorted((root / "sources").glob("*.json"))
    named = valid_after = caught_anyway = 0
    for how, path, where in _cases(files, random.Random(SEED)):
        raw = path.read_bytes()
        bad = bytearray(raw)
        if how == "flip":
            bad[where // 8] ^= 1 << (where % 8)
        else:
            del bad[where:]
        path.write_bytes(bytes(bad))
        kind, ident = path.parent.name, path.stem
        try:
            rc, out = _check(root, capsys)
            report = Dataset(root).load_all(kind)
        finally:
            path.write_bytes(raw)
        assert "Traceback" not in out
        rel = f"{kind}/{ident}.json"
        if _valid(kind, ident, bytes(bad)):
            valid_after += 1
            caught_anyway += rc != 0
            continue
        assert rc != 0, f"{how} at {where} of {rel}: check exits 0\n{out}"
        assert rel in out, f"{how} at {where} of {rel}: the output does not name the file\n{out}"
        damaged = [str(d) for d in report.damaged]
        loaded = report.records.get(ident)
        assert any(rel in d for d in damaged) or validation.errors(kind, loaded), (
            f"{how} at {where} of {rel}: loaded silently as a valid record"
        )
        named += 1
    total = FLIPS + TRUNCATIONS
    print(
        f"damage: {named} of {total - valid_after} damaged files named by check (exit 1); "
        f"{valid_after} damages left a different valid record ({caught_anyway} of them still failed a "
        f"consistency check)"
    )
    assert named == total - valid_after
    assert named >= total // 2, "most damages should break the record; the sampling is not testing"


@pytest.mark.timeout(120)
def test_check_command_names_damaged_file_as_a_process(clean_dataset):
    """The same through the installed command line, as a user runs it."""
    root = clean_dataset.root
    path = root / "species" / "h2o-l.json"
    path.write_bytes(path.read_bytes()[:57])
    r = subprocess.run(
        [sys.executable, "-m", "tablekeeper.cli", "check", str(root)],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert r.returncode == 1, (r.returncode, r.stdout, r.stderr)
    assert "species/h2o-l.json" in r.stdout and "not valid JSON" in r.stdout, r.stdout
    assert "Traceback" not in r.stderr


BUNDLE_FLIPS = 40


@pytest.mark.timeout(180)
def test_verify_names_every_bit_flip_in_a_bundle(clean_dataset, tmp_path, capsys):
    from tablekeeper import bundle

    done = bundle.release(clean_dataset, "1.0.0", out=tmp_path / "out")
    targets = [*sorted(p for p in done.folder.iterdir() if p.is_file()), done.archive]
    capsys.readouterr()
    assert cli.main(["verify", str(done.folder)]) == 0 and cli.main(["verify", str(done.archive)]) == 0
    rng = random.Random(SEED)
    named = 0
    for k in range(BUNDLE_FLIPS):
        path = targets[k % len(targets)]  # every file in turn, at a random bit
        raw = path.read_bytes()
        bit = rng.randrange(len(raw) * 8)
        bad = bytearray(raw)
        bad[bit // 8] ^= 1 << (bit % 8)
        path.write_bytes(bytes(bad))
        try:
            target = done.archive if path == done.archive else done.folder
            rc, out = _check_verify(target, capsys)
        finally:
            path.write_bytes(raw)
        assert rc == 1, f"flip of bit {bit} in {path.name}: verify exit {rc}\n{out}"
        assert path.name in out, f"flip of bit {bit} in {path.name}: not named\n{out}"
        assert "Traceback" not in out
        named += 1
    print(f"bundle: {named} of {BUNDLE_FLIPS} bit flips over {len(targets)} files named by verify (exit 1)")


def _check_verify(target: Path, capsys) -> tuple[int, str]:
    capsys.readouterr()
    rc = cli.main(["verify", str(target)])
    cap = capsys.readouterr()
    return rc, cap.out + cap.err
