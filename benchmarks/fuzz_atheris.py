"""Coverage-guided fuzzing of tablekeeper's input parsers with atheris (libFuzzer for Python).

Usage::

    python benchmarks/fuzz_atheris.py TARGET [libFuzzer options, e.g. -max_total_time=60]
    python benchmarks/fuzz_atheris.py all -max_total_time=30      # each target in turn, in a child

TARGET is one of: formula, unit, quantity, json, journal, csv, equation. A target may return or raise
its documented input error (FormulaError, UnitError, DamagedFileError, InputError); any other
exception is a crash, which libFuzzer reports with the input that caused it (saved as crash-*). Each
crash found becomes a regression test in tests/security/test_fuzz_parsers.py.
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
from pathlib import Path

import atheris

with atheris.instrument_imports(include=["tablekeeper", "molmass", "pint"]):
    from tablekeeper import formula, jsonio, units
    from tablekeeper.errors import DamagedFileError, FormulaError, InputError, UnitError
    from tablekeeper.importers import plan_import
    from tablekeeper.model import FIELDS
    from tablekeeper.store import Dataset
    from tablekeeper.thermo import parse_equation

_TMP = Path(tempfile.mkdtemp(prefix="tk-atheris-"))
_DS: Dataset | None = None


def _dataset() -> Dataset:
    global _DS
    if _DS is None:
        _DS = Dataset.init(_TMP / "ds", "fuzz")
        _DS.save(
            "species",
            {"id": "water", "formula": "H2O", "phase": "l", "charge": 0, "status": "draft", "properties": {}},
            expected_revision=None,
        )
    return _DS


def t_formula(data: bytes) -> None:
    text = atheris.FuzzedDataProvider(data).ConsumeUnicodeNoSurrogates(200)
    try:
        f = formula.parse(text)
        formula.parse(f.hill)
    except FormulaError:
        pass


def t_unit(data: bytes) -> None:
    fdp = atheris.FuzzedDataProvider(data)
    field = FIELDS[fdp.ConsumeIntInRange(0, len(FIELDS) - 1)]
    try:
        units.factor_to_canonical(fdp.ConsumeUnicodeNoSurrogates(60), field)
    except UnitError:
        pass


def t_quantity(data: bytes) -> None:
    fdp = atheris.FuzzedDataProvider(data)
    field = FIELDS[fdp.ConsumeIntInRange(0, len(FIELDS) - 1)]
    try:
        units.parse_quantity(fdp.ConsumeUnicodeNoSurrogates(80), field)
    except UnitError:
        pass


def t_json(data: bytes) -> None:
    try:
        jsonio.loads(data, file="fuzz.json")
    except DamagedFileError:
        pass


def t_journal(data: bytes) -> None:
    ds = _dataset()
    (ds.root / "journal.jsonl").write_bytes(data)
    ds.journal()


def t_csv(data: bytes) -> None:
    path = _TMP / "in.csv"
    path.write_bytes(data)
    try:
        plan_import(_dataset(), path, update=bool(data[:1]) and data[0] & 1 == 1)
    except InputError:
        pass


_SPECIES = {
    i: {"id": i, "formula": f, "phase": p, "charge": c, "status": "draft", "properties": {}}
    for i, f, p, c in (
        ("h2-g", "H2", "g", 0),
        ("o2-g", "O2", "g", 0),
        ("h2o-l", "H2O", "l", 0),
        ("h-aq", "H+", "aq", 1),
        ("oh-aq", "OH-", "aq", -1),
    )
}


def t_equation(data: bytes) -> None:
    try:
        parse_equation(atheris.FuzzedDataProvider(data).ConsumeUnicodeNoSurrogates(200), _SPECIES)
    except InputError:
        pass


TARGETS = {
    "formula": t_formula,
    "unit": t_unit,
    "quantity": t_quantity,
    "json": t_json,
    "journal": t_journal,
    "csv": t_csv,
    "equation": t_equation,
}


def main() -> None:
    if len(sys.argv) < 2 or sys.argv[1] not in (*TARGETS, "all"):
        raise SystemExit(f"usage: {sys.argv[0]} {{{','.join(TARGETS)},all}} [libFuzzer options]")
    name, rest = sys.argv[1], sys.argv[2:]
    if name == "all":
        failed = []
        for t in TARGETS:
            print(f"== {t}", flush=True)
            r = subprocess.run([sys.executable, __file__, t, *rest])
            if r.returncode != 0:
                failed.append(t)
        print("crashes in: " + (", ".join(failed) if failed else "none"))
        raise SystemExit(1 if failed else 0)
    atheris.Setup([sys.argv[0], *rest], TARGETS[name])
    atheris.Fuzz()


if __name__ == "__main__":
    main()
