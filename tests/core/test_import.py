"""CSV import through the command line and the core: units, mapping, sources, bad rows, updates, fuzz."""

from __future__ import annotations

import csv
import io
import struct
from pathlib import Path

from fractions import Fraction

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tablekeeper import cli, importers, validation
from tablekeeper.errors import InputError
from tablekeeper.store import Dataset

# NIST SP 811 (2008), Appendix B: 1 cal_th = 4.184 J exactly, so 1 kcal/mol = 4.184 kJ/mol.
KCAL_TO_KJ = 4.184


def _csv(path: Path, header: list[str], *rows: list[str]) -> Path:
    buf = io.StringIO(newline="")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    w.writerows(rows)
    path.write_text(buf.getvalue(), encoding="utf-8")
    return path


def _bits(x: float) -> bytes:
    return struct.pack("<d", x)


# -- through the command line, in a subprocess ---------------------------------------------------------

def test_import_in_kcal_stores_exactly_value_times_4_184_and_keeps_what_was_entered(
        dataset: Dataset, tmp_path: Path, run_cli) -> None:
    # CODATA 1989 key values (Cox, Wagman & Medvedev), from memory: ΔfH°(H2O, l) = −285.830 kJ/mol,
    # ΔfH°(CO2, g) = −393.51 kJ/mol; expressed here in kcal/mol as an old table would give them.
    entered = {"water-l": -68.3150, "co2-g": -94.0510}
    uncertainty = {"water-l": 0.0096, "co2-g": 0.0311}
    f = _csv(tmp_path / "old-table.csv", ["id", "formula", "phase", "dfH298", "u_dfH298"],
             ["water-l", "H2O", "l", "-68.3150", "0.0096"], ["co2-g", "CO2", "g", "-94.0510", "0.0311"])
    r = run_cli("import", dataset.root, f, "--unit", "dfH298=kcal/mol", "--source", "codata-1989")
    assert r.returncode == 0, r.stderr
    assert "imported 2 new" in r.stdout
    ds = Dataset(dataset.root)
    for ident, kcal in entered.items():
        pv = ds.load("species", ident)["properties"]["dfH298"]
        # The exact decimal product, rounded once to a double (Fraction is exact).
        assert _bits(pv["value"]) == _bits(float(Fraction(repr(kcal)) * Fraction(repr(KCAL_TO_KJ))))
        assert _bits(pv["uncertainty"]) == _bits(float(Fraction(repr(uncertainty[ident])) * Fraction("4.184")))
        assert pv["unit"] == "kJ/mol"
        assert pv["entered"] == {"value": kcal, "unit": "kcal/mol", "uncertainty": uncertainty[ident]}
        assert pv["source"] == "codata-1989"
    assert ds.load("species", "water-l")["properties"]["dfH298"]["value"] == pytest.approx(-285.83, abs=1e-3)
    entries, _ = ds.journal()
    assert [e["target"] for e in entries if e["action"] == "import"] == ["species/water-l", "species/co2-g"]


def test_map_renames_columns(dataset: Dataset, tmp_path: Path, run_cli) -> None:
    f = _csv(tmp_path / "t.csv", ["Species", "Formula", "State", "Hf (kJ/mol)", "S (J/mol/K)"],
             ["water-l", "H2O", "l", "-285.83", "69.95"])
    r = run_cli("import", dataset.root, f, "--map", "Species=id", "--map", "Formula=formula",
                "--map", "State=phase", "--map", "Hf (kJ/mol)=dfH298", "--map", "S (J/mol/K)=S298")
    assert r.returncode == 0, r.stderr
    rec = Dataset(dataset.root).load("species", "water-l")
    assert (rec["formula"], rec["phase"]) == ("H2O", "l")
    assert rec["properties"]["dfH298"] == {"value": -285.83, "unit": "kJ/mol"}
    assert rec["properties"]["S298"] == {"value": 69.95, "unit": "J/(mol*K)"}


def test_an_unknown_source_is_refused_and_nothing_changes(dataset: Dataset, tmp_path: Path, run_cli,
                                                          folder_digest) -> None:
    f = _csv(tmp_path / "t.csv", ["id", "formula", "phase", "dfH298"], ["water-l", "H2O", "l", "-285.83"])
    before = folder_digest(dataset.root)
    r = run_cli("import", dataset.root, f, "--source", "nobody-2020")
    assert r.returncode == 2
    assert r.stderr.count("\n") == 1 and "nobody-2020" in r.stderr and "Traceback" not in r.stderr
    assert folder_digest(dataset.root) == before


def test_a_bad_row_in_a_subprocess_is_one_line_exit_2_and_nothing_changes(dataset: Dataset, tmp_path: Path,
                                                                          run_cli, folder_digest) -> None:
    f = _csv(tmp_path / "t.csv", ["id", "formula", "phase", "dfH298"],
             ["water-l", "H2O", "l", "-285.83"], ["co2-g", "CO2", "g", "minus 393"])
    before = folder_digest(dataset.root)
    r = run_cli("import", dataset.root, f)
    assert r.returncode == 2
    assert "Traceback" not in r.stderr
    [line] = r.stderr.splitlines()
    assert line == f"tablekeeper: {f}, record row 3 (co2-g), field dfH298: 'minus 393' is not a number"
    assert r.stdout == ""
    assert folder_digest(dataset.root) == before  # all or nothing: the good first row was not saved


# -- bad rows, in process (same code path as the command line) -------------------------------------------

BAD_ROWS = [
    # (row, column named in the message, words of the reason)
    (["co2-g", "CO2", "g", "abc", "", ""], "dfH298", "is not a number"),
    (["co2-g", "CO2", "g", "nan", "", ""], "dfH298", "is not a finite number"),
    (["co2-g", "CO2", "g", "1e999", "", ""], "dfH298", "is not a finite number"),
    (["co2-g", "CO2", "gas", "-393.51", "", ""], "phase", "is not a phase"),
    (["co2-g", "CO2", "", "-393.51", "", ""], "phase", "is not a phase"),
    (["co2-g", "Xy2", "g", "-393.51", "", ""], "formula", "does not parse"),
    (["co2-g", "C)O2", "g", "-393.51", "", ""], "formula", "does not parse"),
    (["co2-g", "CO2;", "g", "-393.51", "", ""], "formula", "is not a formula"),
    (["CO2-g", "CO2", "g", "-393.51", "", ""], "id", "is not a valid id"),
    (["../co2", "CO2", "g", "-393.51", "", ""], "id", "is not a valid id"),
    (["co2-g", "CO2", "g", "-393.51", "=HYPERLINK(\"x\")", ""], "name", "may not begin with"),
    (["co2-g", "CO2", "g", "-393.51", "@SUM(A1)", ""], "name", "may not begin with"),
    (["co2-g", "CO2", "g", "-393.51", "carbon dioxide", "-1"], "u_dfH298", "cannot be negative"),
    (["co2-g", "CO2", "g", "", "", "0.1"], "u_dfH298", "gives an uncertainty but no"),
    (["co2-g", "CO2", "g", "1e13", "", ""], "properties.dfH298.value", "is greater than the maximum"),
]


@pytest.mark.parametrize(("row", "column", "reason"), BAD_ROWS)
def test_a_bad_row_names_file_row_and_column_in_one_line(row: list[str], column: str, reason: str,
                                                         dataset: Dataset, tmp_path: Path, folder_digest,
                                                         capsys: pytest.CaptureFixture[str]) -> None:
    f = _csv(tmp_path / "bad.csv", ["id", "formula", "phase", "dfH298", "name", "u_dfH298"],
             ["water-l", "H2O", "l", "-285.83", "water", ""], row)
    before = folder_digest(dataset.root)
    code = cli.main(["import", str(dataset.root), str(f)])
    out, err = capsys.readouterr()
    assert code == 2
    assert out == ""
    [line] = err.splitlines()
    assert line.startswith(f"tablekeeper: {f}, record row 3")
    assert f"field {column}:" in line
    assert reason in line
    assert folder_digest(dataset.root) == before


@pytest.mark.parametrize(("content", "reason"), [
    (b"\xef\xbb\xbfid,formula,phase\nx,H2O,l\n", "byte-order mark"),
    (b"id,formula,phase\nx,H2O,l,extra\n", "more cells than the header"),
    (b"id,formula\nx,H2O\n", "has no 'phase' column"),
    (b"id,formula,phase,colour\nx,H2O,l,blue\n", "column 'colour' is not a field"),
    (b"id,id,phase\nx,x,l\n", "column name twice"),
    (b"id,formula,phase\nx,H\xff2O,l\n", "not valid UTF-8"),
    (b"", "has no header row"),
    (b"id,formula,phase\nx,H2O,l\nx,H2O,g\n", "repeats an id"),
])
def test_a_bad_file_is_one_line_exit_2(content: bytes, reason: str, dataset: Dataset, tmp_path: Path,
                                       folder_digest, capsys: pytest.CaptureFixture[str]) -> None:
    f = tmp_path / "bad.csv"
    f.write_bytes(content)
    before = folder_digest(dataset.root)
    assert cli.main(["import", str(dataset.root), str(f)]) == 2
    [line] = capsys.readouterr().err.splitlines()
    assert str(f) in line and reason in line
    assert folder_digest(dataset.root) == before


def test_a_unit_of_the_wrong_dimension_is_refused_before_any_row(dataset: Dataset, tmp_path: Path,
                                                                 capsys: pytest.CaptureFixture[str]) -> None:
    f = _csv(tmp_path / "t.csv", ["id", "formula", "phase", "S298"], ["water-l", "H2O", "l", "16.7"])
    assert cli.main(["import", str(dataset.root), str(f), "--unit", "S298=kcal/mol"]) == 2
    [line] = capsys.readouterr().err.splitlines()
    assert "'kcal/mol' does not fit S298" in line and "give energy per amount per kelvin" in line
    assert Dataset(dataset.root).ids("species") == []


# -- existing ids and --update ---------------------------------------------------------------------------

def test_an_existing_id_is_refused_without_update(dataset: Dataset, tmp_path: Path, folder_digest,
                                                  capsys: pytest.CaptureFixture[str]) -> None:
    f = _csv(tmp_path / "t.csv", ["id", "formula", "phase", "dfH298"], ["water-l", "H2O", "l", "-285.83"])
    assert cli.main(["import", str(dataset.root), str(f)]) == 0
    before = folder_digest(dataset.root)
    capsys.readouterr()
    assert cli.main(["import", str(dataset.root), str(f)]) == 2
    [line] = capsys.readouterr().err.splitlines()
    assert "row 2 (water-l), field id: already exists; use --update" in line
    assert folder_digest(dataset.root) == before


def test_update_changes_only_differing_fields_raises_revision_and_journals(
        dataset: Dataset, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    first = _csv(tmp_path / "a.csv", ["id", "formula", "phase", "name", "dfH298", "S298"],
                 ["water-l", "H2O", "l", "water", "-285.83", "69.95"],
                 ["co2-g", "CO2", "g", "carbon dioxide", "-393.51", "213.785"])
    assert cli.main(["import", str(dataset.root), str(first), "--source", "codata-1989"]) == 0
    co2_before = (dataset.root / "species" / "co2-g.json").read_bytes()
    journal_before = len(Dataset(dataset.root).journal()[0])
    second = _csv(tmp_path / "b.csv", ["id", "formula", "phase", "name", "dfH298", "S298"],
                  ["water-l", "H2O", "l", "water", "-285.83", "69.91"],
                  ["co2-g", "CO2", "g", "carbon dioxide", "-393.51", "213.785"])
    assert cli.main(["import", str(dataset.root), str(second), "--update", "--source", "codata-1989",
                     "--reason", "entropy corrected"]) == 0
    assert "0 new and 1 updated species (1 unchanged)" in capsys.readouterr().out
    ds = Dataset(dataset.root)
    water = ds.load("species", "water-l")
    assert water["revision"] == 2
    assert water["properties"]["S298"]["value"] == 69.91
    assert water["properties"]["dfH298"] == {"value": -285.83, "unit": "kJ/mol", "source": "codata-1989"}
    assert (dataset.root / "species" / "co2-g.json").read_bytes() == co2_before  # unchanged, not rewritten
    new = ds.journal()[0][journal_before:]
    assert len(new) == 1
    assert (new[0]["action"], new[0]["target"], new[0]["revision"], new[0]["reason"]) == \
        ("update", "species/water-l", 2, "entropy corrected")
    assert new[0]["changes"] == [{"field": "properties.S298.value", "old": 69.95, "new": 69.91}]


def test_update_keeps_fields_the_file_does_not_give(dataset: Dataset, tmp_path: Path) -> None:
    first = _csv(tmp_path / "a.csv", ["id", "formula", "phase", "name", "dfH298"],
                 ["water-l", "H2O", "l", "water", "-285.83"])
    assert cli.main(["import", str(dataset.root), str(first)]) == 0
    second = _csv(tmp_path / "b.csv", ["id", "S298"], ["water-l", "69.95"])
    assert cli.main(["import", str(dataset.root), str(second), "--update"]) == 0
    rec = Dataset(dataset.root).load("species", "water-l")
    assert (rec["name"], rec["formula"], rec["properties"]["dfH298"]["value"]) == ("water", "H2O", -285.83)
    assert rec["properties"]["S298"]["value"] == 69.95


# -- fuzz ------------------------------------------------------------------------------------------------

CELL = st.one_of(st.sampled_from(["", "H2O", "l", "g", "aq", "x", "water-l", "-285.83", "1e400", "nan", "=1",
                                  "+1", "@a", "\t", "0", "-1", "CO2", "Cl-", "draft", "é", "a,b", '"', "\r"]),
                 st.text(max_size=8))
HEADER = st.lists(st.sampled_from(["id", "formula", "phase", "form", "charge", "name", "status", "dfH298",
                                   "S298", "dfG298", "Cp298", "u_dfH298", "u_S298", "other", ""]),
                  min_size=1, max_size=7)


@st.composite
def csv_files(draw: st.DrawFn) -> bytes:
    if draw(st.integers(0, 9)) == 0:
        return draw(st.binary(max_size=60))
    header = draw(HEADER)
    rows = draw(st.lists(st.lists(CELL, min_size=len(header) - 1, max_size=len(header) + 1), max_size=4))
    buf = io.StringIO(newline="")
    w = csv.writer(buf, lineterminator=draw(st.sampled_from(["\n", "\r\n"])))
    w.writerow(header)
    w.writerows(rows)
    return buf.getvalue().encode("utf-8")


@pytest.fixture(scope="module")
def fuzz_dataset(tmp_path_factory: pytest.TempPathFactory) -> Dataset:
    ds = Dataset.init(tmp_path_factory.mktemp("fuzz") / "ds", "fuzz")
    ds.save("species", {"id": "water-l", "revision": 1, "formula": "H2O", "phase": "l", "charge": 0,
                        "status": "draft", "properties": {}}, expected_revision=None)
    return ds


@given(content=csv_files(), update=st.booleans(),
       units=st.sampled_from([{}, {"dfH298": "kcal/mol"}, {"S298": "cal/(mol K)"}]))
@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
def test_fuzzed_csv_raises_only_input_error(content: bytes, update: bool, units: dict, fuzz_dataset: Dataset,
                                            tmp_path: Path) -> None:
    f = tmp_path / "fuzz.csv"
    f.write_bytes(content)
    try:
        plan = importers.plan_import(fuzz_dataset, f, units=units, update=update)
    except InputError as exc:
        assert "\n" not in str(exc)  # one line, whatever the file holds
        return
    for rec in plan.create + [r for r, _ in plan.update]:
        assert validation.errors("species", rec, fast=False) == []
