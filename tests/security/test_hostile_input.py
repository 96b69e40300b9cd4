"""Hostile JSON and CSV input through the command line: duplicate keys, NaN and Infinity, 1e400, a
5000-digit integer, 10^5 nested brackets, a 50 MB file, invalid UTF-8 and a byte-order mark.

``check`` must name the file with a specific sentence (a schema finding, exit 1) and ``import`` must
refuse with one sentence (exit 2); never a traceback. Times are printed, not asserted. Finally, every
``format`` keyword the shipped schemas use must be really checked: jsonschema skips a format it has
no checker for, silently.
"""

from __future__ import annotations

import contextlib
import io
import json
import subprocess
import sys
import time
from importlib import resources

import pytest
from jsonschema import Draft202012Validator

from tablekeeper import cli, validation

_RECORD = (
    b'{"charge": 0, "formula": "He", "id": "bad", "phase": "g", "properties": {}, "revision": 1, '
    b'"status": "draft"%s}'
)

#: case -> (bytes of species/bad.json, the words the refusal must contain)
JSON_CASES = {
    "duplicate key": (_RECORD % b', "charge": 1', "the key 'charge' appears twice"),
    "NaN": (_RECORD % b', "notes": NaN', "NaN is not a number JSON allows"),
    "Infinity": (_RECORD % b', "notes": Infinity', "Infinity is not a number JSON allows"),
    "-Infinity": (_RECORD % b', "notes": -Infinity', "-Infinity is not a number JSON allows"),
    "1e400": (_RECORD % b', "notes": 1e400', "number is infinity when parsed as double"),
    "5000-digit integer": (
        _RECORD % (b', "notes": ' + b"7" * 5000),
        "number is infinity when parsed as double",
    ),
    "10^5 brackets": (b"[" * 100_000 + b"]" * 100_000, "depth limit exceeded"),
    "10^5 objects": (b'{"a":' * 100_000 + b"1" + b"}" * 100_000, "depth limit exceeded"),
    "50 MB": (_RECORD % (b', "notes": "' + b"x" * (50 << 20) + b'"'), "larger than the 1048576 bytes"),
    "invalid UTF-8": (_RECORD % b', "notes": "caf\xe9"', "not valid UTF-8 at byte"),
    "byte-order mark": (b"\xef\xbb\xbf" + _RECORD % b"", "byte order mark"),
    "lone surrogate": (_RECORD % b', "notes": "\\ud800"', "no low surrogate"),
}

_HEAD = "id,formula,phase,dfH298,charge,name\n"
#: case -> (bytes of the CSV, the words the refusal must contain)
CSV_CASES = {
    "duplicate column": (b"id,formula,phase,name,name\nx,He,g,a,b\n", "has a column name twice"),
    "NaN": ((_HEAD + "x,He,g,NaN,0,a\n").encode(), "'NaN' is not a finite number"),
    "Infinity": ((_HEAD + "x,He,g,Infinity,0,a\n").encode(), "'Infinity' is not a finite number"),
    "-inf": ((_HEAD + "x,He,g,-inf,0,a\n").encode(), "'-inf' is not a finite number"),
    "1e400": ((_HEAD + "x,He,g,1e400,0,a\n").encode(), "'1e400' is not a finite number"),
    "5000-digit value": ((_HEAD + "x,He,g," + "7" * 5000 + ",0,a\n").encode(), "is not a finite number"),
    "5000-digit charge": ((_HEAD + "x,He,g,1," + "7" * 5000 + ",a\n").encode(), "is not a whole number"),
    "10^5 brackets": ((_HEAD + "x,He,g,1,0," + "[" * 100_000 + "\n").encode(), "is too long"),
    "50 MB": ((_HEAD + "x,He,g,1,0," + "a" * (50 << 20) + "\n").encode(), "larger than the 33554432 bytes"),
    "invalid UTF-8": ((_HEAD + "x,He,g,1,0,caf").encode() + b"\xe9\n", "is not valid UTF-8"),
    "byte-order mark": (b"\xef\xbb\xbf" + _HEAD.encode() + b"x,He,g,1,0,a\n", "byte-order mark"),
    "NUL byte": ((_HEAD + "x,He,g,1,0,a\x00b\n").encode(), "contains a NUL byte"),
    "formula in a cell": (
        (_HEAD + 'x,He,g,1,0,"=HYPERLINK(""http://x"")"\n').encode(),
        "may not begin with =, +, @, tab or carriage return",
    ),
}


def _cli(args: list[str]) -> tuple[int, str, float]:
    out, err = io.StringIO(), io.StringIO()
    t = time.perf_counter()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        rc = cli.main(args)
    return rc, out.getvalue() + err.getvalue(), time.perf_counter() - t


@pytest.mark.timeout(180)
def test_check_names_each_hostile_record_file(clean_dataset):
    root = clean_dataset.root
    bad = root / "species" / "bad.json"
    _cli(["check", str(root)])  # warm the imports, so that the times below are the work itself
    times = []
    for case, (raw, words) in JSON_CASES.items():
        bad.write_bytes(raw)
        rc, out, secs = _cli(["check", str(root)])
        times.append(f"{case} {secs:.2f} s")
        assert rc == 1, f"{case}: exit {rc}\n{out[-1500:]}"
        lines = [ln for ln in out.splitlines() if "species/bad.json" in ln]
        assert lines, f"{case}: the file is not named\n{out[-1500:]}"
        assert any(words in ln for ln in lines), f"{case}: expected {words!r} in\n{lines}"
        assert "Traceback" not in out and len(lines[0]) < 400, lines[0][:600]
    bad.unlink()
    print(f"check refused {len(JSON_CASES)} of {len(JSON_CASES)} hostile record files: " + "; ".join(times))


@pytest.mark.timeout(180)
def test_a_hostile_dataset_json_is_refused_with_exit_2(clean_dataset):
    meta = clean_dataset.root / "dataset.json"
    times = []
    for case, (raw, words) in JSON_CASES.items():
        meta.write_bytes(raw)
        rc, out, secs = _cli(["check", str(clean_dataset.root)])
        times.append(f"{case} {secs:.2f} s")
        assert rc == 2, f"{case}: exit {rc}\n{out[-800:]}"
        assert "dataset.json" in out and (words in out or "must hold a JSON object" in out), out[-800:]
        assert "Traceback" not in out and len(out.strip().splitlines()) == 1, out[-800:]
    print("dataset.json refused with exit 2: " + "; ".join(times))


@pytest.mark.timeout(180)
def test_import_refuses_each_hostile_csv_in_one_sentence(clean_dataset, tmp_path):
    root = clean_dataset.root
    before = sorted(p.name for p in (root / "species").iterdir())
    journal = (root / "journal.jsonl").read_bytes()
    warm = tmp_path / "warm.csv"
    warm.write_bytes(b"id\n")
    _cli(["import", str(root), str(warm)])  # warm the imports, so that the times below are the work itself
    times = []
    for case, (raw, words) in CSV_CASES.items():
        f = tmp_path / "in.csv"
        f.write_bytes(raw)
        rc, out, secs = _cli(["import", str(root), str(f)])
        times.append(f"{case} {secs:.2f} s")
        assert rc == 2, f"{case}: exit {rc}\n{out[-800:]}"
        assert words in out, f"{case}: expected {words!r} in {out[-800:]!r}"
        assert "Traceback" not in out and len(out.strip().splitlines()) == 1, out[-800:]
        assert str(f) in out, f"{case}: the file is not named: {out[:300]}"
    assert sorted(p.name for p in (root / "species").iterdir()) == before
    assert (root / "journal.jsonl").read_bytes() == journal, "a refused import changed the journal"
    print(
        f"import refused {len(CSV_CASES)} of {len(CSV_CASES)} hostile CSV files (exit 2, nothing written): "
        + "; ".join(times)
    )


@pytest.mark.timeout(120)
def test_hostile_files_through_the_installed_command(clean_dataset, tmp_path):
    """Two cases as whole processes: what a user sees, with the interpreter's start-up included."""
    root = clean_dataset.root
    (root / "species" / "bad.json").write_bytes(JSON_CASES["NaN"][0])
    t = time.perf_counter()
    r = subprocess.run(
        [sys.executable, "-m", "tablekeeper.cli", "check", str(root)],
        capture_output=True,
        text=True,
        timeout=120,
    )
    t_check = time.perf_counter() - t
    assert r.returncode == 1 and "NaN is not a number JSON allows" in r.stdout, (
        r.returncode,
        r.stdout[-500:],
    )
    f = tmp_path / "in.csv"
    f.write_bytes(CSV_CASES["byte-order mark"][0])
    t = time.perf_counter()
    r = subprocess.run(
        [sys.executable, "-m", "tablekeeper.cli", "import", str(root), str(f)],
        capture_output=True,
        text=True,
        timeout=120,
    )
    t_import = time.perf_counter() - t
    assert r.returncode == 2 and "byte-order mark" in r.stderr and "Traceback" not in r.stderr, r.stderr
    print(f"as processes: check {t_check:.2f} s, import {t_import:.2f} s (interpreter start-up included)")


#: One value a format must refuse and one it must accept, for every format our schemas may use.
FORMAT_EXAMPLES = {
    "date-time": ("2024-13-45T25:61:00Z", "2024-03-11T14:22:05Z"),
    "date": ("2024-02-30", "2024-02-29"),
    "uri": ("not a uri", "https://doi.org/10.1000/182"),
    "email": ("no-at-sign", "steward@example.org"),
}


def _formats(node: object) -> set[str]:
    if isinstance(node, dict):
        own = {node["format"]} if isinstance(node.get("format"), str) else set()
        return own.union(*(_formats(v) for v in node.values()))
    if isinstance(node, list):
        return set().union(*(_formats(v) for v in node))
    return set()


def test_every_format_the_schemas_use_is_really_checked():
    used: set[str] = set()
    files = sorted(
        p for p in resources.files("tablekeeper").joinpath("schemas").iterdir() if p.name.endswith(".json")
    )
    for f in files:
        used |= _formats(json.loads(f.read_text("utf-8")))
    assert used, "no format keyword found: the walk is broken"
    checker = Draft202012Validator.FORMAT_CHECKER
    for fmt in sorted(used):
        assert fmt in FORMAT_EXAMPLES, f"format {fmt!r} is used; add a refused and an accepted example here"
        assert fmt in checker.checkers, f"jsonschema has no checker for {fmt!r}: it would be skipped silently"
        bad, good = FORMAT_EXAMPLES[fmt]
        v = Draft202012Validator({"type": "string", "format": fmt}, format_checker=checker)
        assert list(v.iter_errors(bad)), f"format {fmt!r} accepted {bad!r}: its checker does nothing"
        assert not list(v.iter_errors(good)), f"format {fmt!r} refused {good!r}"
    assert set(validation.FORMATS_USED) == used, (validation.FORMATS_USED, used)
    # And through the validator the product uses, on a real document kind.
    flag = {
        "id": "f1",
        "revision": 1,
        "species": "x",
        "field": "dfH298",
        "note": "n",
        "blocking": False,
        "status": "open",
        "raised_by": "u",
        "raised_at": FORMAT_EXAMPLES["date-time"][0],
    }
    assert validation.errors("flags", flag), "a flag with an impossible date-time passed validation"
    print(f"formats used by {len(files)} schemas: {sorted(used)}; each refuses a bad value")
