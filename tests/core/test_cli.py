"""The command line: init, check's JSON contract, exit codes, one-line errors without a traceback."""

from __future__ import annotations

import json
from collections import Counter
from pathlib import Path

import pytest

from tablekeeper import cli, flags
from tablekeeper.store import Dataset

FINDING_KEYS = {"check", "severity", "species", "field", "message", "observed", "expected", "tolerance",
                "suggestion"}


def _check_json(root: Path, capsys: pytest.CaptureFixture[str], *extra: str) -> tuple[int, dict]:
    code = cli.main(["check", str(root), "--format", "json", *extra])
    return code, json.loads(capsys.readouterr().out)


def _assert_contract(report: dict, name: str) -> None:
    assert set(report) == {"dataset", "summary", "findings"}
    assert report["dataset"] == name
    assert set(report["summary"]) == {"error", "warning", "info"}
    for f in report["findings"]:
        assert set(f) == FINDING_KEYS
        assert f["severity"] in ("error", "warning", "info")
        assert isinstance(f["check"], str) and isinstance(f["message"], str) and f["message"]
        for key in ("observed", "expected", "tolerance"):
            assert f[key] is None or isinstance(f[key], int | float)
        for key in ("species", "field", "suggestion"):
            assert f[key] is None or isinstance(f[key], str)
    counted = Counter(f["severity"] for f in report["findings"])
    assert report["summary"] == {s: counted.get(s, 0) for s in ("error", "warning", "info")}


def test_init_then_check_json_prints_the_contract_shape(tmp_path: Path, run_cli) -> None:
    root = tmp_path / "fresh"
    r = run_cli("init", root, "--name", "fresh", "--title", "Fresh set")
    assert r.returncode == 0, r.stderr
    assert (root / "dataset.json").is_file()
    r = run_cli("check", root, "--format", "json")
    assert r.returncode == 0, r.stderr
    report = json.loads(r.stdout)
    _assert_contract(report, "fresh")
    assert report["summary"] == {"error": 0, "warning": 0, "info": 0} and report["findings"] == []


@pytest.fixture
def flawed(dataset: Dataset, species_record) -> Dataset:
    """Two records of one formula and phase (a duplicate) and a value citing a source that is absent."""
    dataset.save("species", species_record("water-l"), expected_revision=None)
    dataset.save("species", species_record("water-liquid", name="water again"), expected_revision=None)
    co2 = species_record("co2-g", formula="CO2", phase="g", name="carbon dioxide")
    co2["properties"] = {"dfH298": {"value": -393.51, "unit": "kJ/mol", "uncertainty": 0.13,
                                    "source": "ghost-1999"}}
    dataset.save("species", co2, expected_revision=None)
    return dataset


def test_check_finds_a_seeded_duplicate_and_a_missing_source(flawed: Dataset,
                                                             capsys: pytest.CaptureFixture[str]) -> None:
    code, report = _check_json(flawed.root, capsys)
    assert code == 1  # errors exist and --fail-on defaults to error
    _assert_contract(report, "coreset")
    found = {(f["check"], f["species"], f["field"]) for f in report["findings"] if f["severity"] == "error"}
    assert {("duplicate", "water-l", "formula"), ("duplicate", "water-liquid", "formula"),
            ("reference", "co2-g", "dfH298")} <= found
    [ref] = [f for f in report["findings"] if f["check"] == "reference" and f["species"] == "co2-g"]
    assert "ghost-1999" in ref["message"] and ref["suggestion"]
    assert not any(f["check"] == "duplicate" and f["species"] == "co2-g" for f in report["findings"])


def test_check_text_lists_the_same_findings(flawed: Dataset, capsys: pytest.CaptureFixture[str]) -> None:
    _, report = _check_json(flawed.root, capsys, "--fail-on", "never")
    assert cli.main(["check", str(flawed.root)]) == 1
    text = capsys.readouterr().out
    s = report["summary"]
    assert text.splitlines()[0] == f"coreset: {s['error']} errors, {s['warning']} warnings, {s['info']} infos"
    assert "duplicate" in text and "ghost-1999" in text


def test_exit_codes_follow_fail_on(flawed: Dataset, capsys: pytest.CaptureFixture[str]) -> None:
    assert _check_json(flawed.root, capsys, "--fail-on", "error")[0] == 1
    assert _check_json(flawed.root, capsys, "--fail-on", "warning")[0] == 1
    assert _check_json(flawed.root, capsys, "--fail-on", "never")[0] == 0


def test_a_clean_dataset_exits_0_whatever_fail_on_says(dataset: Dataset,
                                                        capsys: pytest.CaptureFixture[str]) -> None:
    for fail_on in ("error", "warning", "never"):
        code, report = _check_json(dataset.root, capsys, "--fail-on", fail_on)
        assert report["summary"] == {"error": 0, "warning": 0, "info": 0}
        assert code == 0


def test_only_warnings_fail_only_with_fail_on_warning(dataset: Dataset, species_record,
                                                       capsys: pytest.CaptureFixture[str]) -> None:
    # A flag left behind by a deleted species is a warning of the reference check, not an error.
    rec = dataset.save("species", species_record(), expected_revision=None)
    flags.raise_flag(dataset, "water-l", "dfH298", "Looks high.")
    dataset.delete("species", "water-l", expected_revision=rec["revision"], reason="withdrawn")
    code, report = _check_json(dataset.root, capsys)
    assert report["summary"]["error"] == 0 and report["summary"]["warning"] >= 1, report
    assert code == 0
    assert _check_json(dataset.root, capsys, "--fail-on", "warning")[0] == 1
    assert _check_json(dataset.root, capsys, "--fail-on", "never")[0] == 0


def test_a_damaged_record_is_a_schema_finding_not_a_crash(dataset: Dataset, species_record,
                                                          capsys: pytest.CaptureFixture[str]) -> None:
    dataset.save("species", species_record(), expected_revision=None)
    bad = dataset.root / "species" / "broken.json"
    bad.write_bytes(b'{"id": "broken", "id": "broken"}')
    code, report = _check_json(dataset.root, capsys)
    assert code == 1
    [finding] = [f for f in report["findings"] if f["check"] == "schema"]
    assert str(bad) in finding["message"] and "twice" in finding["message"]


def test_missing_dataset_folder_is_exit_2_one_line_no_traceback(tmp_path: Path, run_cli) -> None:
    missing = tmp_path / "no-such-folder"
    r = run_cli("check", missing, "--format", "json")
    assert r.returncode == 2
    assert r.stdout == ""
    assert "Traceback" not in r.stderr
    [line] = r.stderr.splitlines()
    assert line.startswith("tablekeeper: ") and str(missing) in line


@pytest.mark.parametrize("argv", [
    ["check", "{root}", "--format", "xml"],
    ["check", "{root}", "--fail-on", "sometimes"],
    ["init"],
    ["import", "{root}", "{root}/none.csv"],
    ["import", "{root}", "{root}/dataset.json", "--map", "no-equals-sign"],
    ["init", "{root}", "--name", "Bad Name"],
    ["flag", "{root}", "nothing", "dfH298", "--note", "x"],
])
def test_bad_usage_and_unreadable_input_exit_2_with_one_line(argv: list[str], dataset: Dataset,
                                                             capsys: pytest.CaptureFixture[str]) -> None:
    argv = [a.replace("{root}", str(dataset.root)) for a in argv]
    try:
        code = cli.main(argv)
    except SystemExit as exc:  # argparse's own refusals leave through SystemExit
        code = exc.code
    assert code == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert len(captured.err.splitlines()) == 1 and "Traceback" not in captured.err


def test_control_characters_from_data_are_printed_as_escapes(dataset: Dataset, species_record,
                                                             capsys: pytest.CaptureFixture[str]) -> None:
    # A source id is a slug, but a source named in a record on disk can be anything: show it literally.
    rec = species_record()
    rec["properties"]["dfH298"]["source"] = "evil\x1b[31mred"
    (dataset.root / "species" / "water-l.json").write_text(json.dumps(rec))
    cli.main(["check", str(dataset.root)])
    out = capsys.readouterr().out
    assert "\x1b" not in out and "\\x1b" in out
