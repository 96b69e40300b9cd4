"""Property-based fuzzing of every parser that reads user or file input.

Each parser may return a result or raise its documented input error (FormulaError, UnitError,
DamagedFileError, InputError); any other exception escaping is a crash. Results are checked for the
properties their callers rely on (finite numbers, a canonical Hill formula that parses to itself).
The atheris script ``benchmarks/fuzz_atheris.py`` drives the same targets with coverage guidance.
"""

from __future__ import annotations

import math
import shutil
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from tablekeeper import formula, jsonio, units
from tablekeeper.errors import DamagedFileError, FormulaError, InputError, UnitError
from tablekeeper.importers import plan_import
from tablekeeper.model import FIELDS
from tablekeeper.store import Dataset

FUZZ = settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
chem_text = st.text(
    st.sampled_from("HCONSClFeNaKMgCa()[]{}.·*0123456789+- ^eE") | st.characters(), max_size=60
)
unit_text = st.text(st.sampled_from("kJcalmolKgeVs/*^()-·⁻¹ 0123456789.eE_+") | st.characters(), max_size=40)


@FUZZ
@given(chem_text)
@example("Na+" + "9" * 190)
@example("((((((((((((((((((((((((((((((((((((((((((((((((H)))))))))))))))))))))))))))))))))))))))))))))))")
@example("H" + "9" * 150)
@example("e-")
def test_formula_parse_returns_or_refuses(text: str) -> None:
    try:
        f = formula.parse(text)
    except FormulaError:
        return
    assert f.elements and all(n > 0 for _, n in f.elements)
    assert math.isfinite(f.molar_mass)
    assert formula.parse(f.hill).elements == f.elements, f.hill


@FUZZ
@given(unit_text, st.sampled_from(FIELDS))
@example("kJ^99999999999", "dfH298")
@example("mol**-99999", "S298")
@example("degC/mol", "dfH298")
@example("kJ/mol*0", "dfH298")
@example("1e400 kJ/mol", "dfH298")
@example("kcal mol-1", "dfH298")
@example("Np2", "dfG298")  # found by atheris: a logarithmic unit has no dimensionality (AttributeError)
@example("dB/mol", "dfH298")
@example("kJ**99/kJ**98/mol", "dfH298")
def test_unit_factor_returns_a_finite_number_or_refuses(unit: str, field: str) -> None:
    try:
        f = units.factor_to_canonical(unit, field)
    except UnitError:
        return
    assert math.isfinite(f) and f != 0, (unit, f)


@FUZZ
@given(
    st.text(max_size=40)
    | st.from_regex(r"\A[-+−]?\d{1,400}(\.\d*)?([eE][-+]?\d{1,4})?\s*(kJ/mol|kcal/mol|J/mol/K)?\Z"),
    st.sampled_from(FIELDS),
)
@example("1e400 kJ/mol", "dfH298")
@example("9" * 400, "S298")
@example("-1e-400 kJ/mol", "dfH298")
def test_parse_quantity_returns_finite_values_or_refuses(text: str, field: str) -> None:
    try:
        value, _, entered = units.parse_quantity(text, field)
    except UnitError:
        return
    assert math.isfinite(value) and math.isfinite(entered), (text, value)


json_bytes = st.binary(max_size=300) | st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats() | st.text(max_size=10),
    lambda kids: st.lists(kids, max_size=4) | st.dictionaries(st.text(max_size=5), kids, max_size=4),
    max_leaves=20,
).map(lambda o: repr(o).replace("'", '"').replace("None", "null").encode())


@FUZZ
@given(json_bytes)
@example(b'{"a": 1, "a": 2}')
@example(b"[" * 5000)
@example(b'"\\ud800"')
@example(b"\xef\xbb\xbf{}")
@example(b"1" * 5000)
def test_jsonio_loads_returns_or_refuses(raw: bytes) -> None:
    try:
        jsonio.loads(raw, file="fuzz.json")
    except DamagedFileError as exc:
        assert str(exc).startswith("fuzz.json: ") and "\n" not in str(exc)


@pytest.fixture(scope="module")
def scratch():
    base = Path(tempfile.mkdtemp(prefix="tk-fuzz-"))
    ds = Dataset.init(base / "ds", "fuzz")
    ds.save(
        "species",
        {"id": "water", "formula": "H2O", "phase": "l", "charge": 0, "status": "draft", "properties": {}},
        expected_revision=None,
    )
    yield ds
    shutil.rmtree(base, ignore_errors=True)


@FUZZ
@given(st.lists(st.binary(max_size=80), max_size=8))
def test_journal_reader_reports_every_bad_line_and_never_raises(scratch: Dataset, lines: list[bytes]) -> None:
    raw = b"\n".join(lines)
    (scratch.root / "journal.jsonl").write_bytes(raw)
    entries, problems = scratch.journal()
    nonempty = [ln for ln in raw.split(b"\n") if ln]
    assert len(entries) + len(problems) == len(nonempty)
    assert all(isinstance(e, dict) for e in entries)


csv_cell = st.text(max_size=12) | st.sampled_from(["H2O", "g", "l", "aq", "-285.83", "1e400", "nan", "x", ""])
csv_header = st.lists(
    st.sampled_from(
        ["id", "formula", "phase", "form", "charge", "name", "dfH298", "S298", "u_dfH298", "status", "junk"]
    ),
    min_size=1,
    max_size=7,
)


@FUZZ
@given(csv_header, st.lists(st.lists(csv_cell, max_size=8), max_size=5), st.booleans())
def test_csv_import_plans_or_refuses(
    scratch: Dataset, header: list[str], rows: list[list[str]], update: bool
) -> None:
    import csv
    import io

    buf = io.StringIO()
    w = csv.writer(buf)
    w.writerow(header)
    w.writerows(rows)
    path = scratch.root.parent / "fuzz.csv"
    path.write_text(buf.getvalue(), encoding="utf-8", errors="surrogatepass")
    try:
        plan = plan_import(scratch, path, update=update)
    except InputError as exc:
        assert "\n" not in str(exc).rstrip() or "record" in str(exc)
        return
    for rec in plan.create + [r for r, _ in plan.update]:
        for f in FIELDS:
            if f in rec["properties"]:
                assert math.isfinite(rec["properties"][f]["value"])


@FUZZ
@given(st.binary(max_size=400))
def test_csv_import_of_raw_bytes_plans_or_refuses(scratch: Dataset, raw: bytes) -> None:
    path = scratch.root.parent / "fuzz-raw.csv"
    path.write_bytes(raw)
    try:
        plan_import(scratch, path)
    except InputError:
        pass


def _thermo_species() -> dict[str, dict]:
    def sp(ident, formula, phase, charge=0):
        return {
            "id": ident,
            "formula": formula,
            "phase": phase,
            "charge": charge,
            "status": "draft",
            "properties": {"dfH298": {"value": -1.0, "unit": "kJ/mol"}},
        }

    return {
        s["id"]: s
        for s in (
            sp("h2-g", "H2", "g"),
            sp("o2-g", "O2", "g"),
            sp("h2o-l", "H2O", "l"),
            sp("h2o-g", "H2O", "g"),
            sp("h-aq", "H+", "aq", 1),
            sp("oh-aq", "OH-", "aq", -1),
        )
    }


_EQ_PARTS = [
    *"HO2()+=-> →glaq.1/3½ ",
    "h2-g",
    "o2-g",
    "h2o-l",
    "H2O(l)",
    "OH-(aq)",
    "H+(aq)",
    "2 ",
    " = ",
    " + ",
]
eq_text = st.lists(st.sampled_from(_EQ_PARTS), max_size=20).map("".join)


@FUZZ
@given(eq_text | st.text(max_size=60))
@example("2 H2(g) + O2(g) = 2 H2O(l)")
@example("H2O(l) = H+(aq) + OH-(aq)")
@example("1/0 H2(g) = H2(g)")
@example("99999999999999999999999 H2(g) + O2(g) = H2O(l)")
def test_reaction_equation_parses_or_refuses(text: str) -> None:
    thermo = pytest.importorskip("tablekeeper.thermo")
    try:
        thermo.parse_equation(text, _thermo_species())
    except InputError:
        pass


def test_a_logarithmic_unit_on_the_command_line_is_refused_without_traceback(tmp_path):
    """Regression (atheris): ``--unit dfH298=Np2`` escaped as an AttributeError from pint."""
    import contextlib
    import io

    from tablekeeper import cli

    ds = Dataset.init(tmp_path / "ds", "units")
    f = tmp_path / "in.csv"
    f.write_text("id,formula,phase,dfH298\nx,He,g,1\n")
    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        rc = cli.main(["import", str(ds.root), str(f), "--unit", "dfH298=Np2"])
    assert rc == 2 and "'Np2' is not a unit tablekeeper understands" in err.getvalue(), err.getvalue()


@pytest.mark.timeout(30)
@pytest.mark.parametrize("unit", ["A1U1A1A9999999911U91AA11A1A9999999^999999991", "9**99**99", "kJ^999999999",
                                  "(kJ/mol)**(9**99)", "J" * 200])
def test_a_unit_with_a_huge_power_is_refused_at_once(unit: str) -> None:
    """Regression (atheris, timeout): pint evaluates ``9999999^999999991`` exactly and ran for hours, so
    a unit typed into the app or given to ``--unit`` froze the program. The pytest-timeout bound makes
    a regression fail instead of hang."""
    with pytest.raises(UnitError, match=r"power too large|too long"):
        units.factor_to_canonical(unit, "S298")
