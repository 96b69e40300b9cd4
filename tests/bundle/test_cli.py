"""The release, diff and verify commands: output, exit codes, no tracebacks."""

from __future__ import annotations

import json

import pytest

from tablekeeper.cli import main
from tablekeeper.store import Dataset


@pytest.fixture
def released(clean_dataset, tmp_path, fixed_time, capsys):
    out = tmp_path / "out"
    assert main(["release", str(clean_dataset.root), "--version", "1.0.0", "--out", str(out)]) == 0
    capsys.readouterr()
    return clean_dataset, out


def test_release_prints_what_it_wrote(clean_dataset, tmp_path, fixed_time, capsys):
    out = tmp_path / "out"
    code = main(["release", str(clean_dataset.root), "--version", "1.0.0", "--out", str(out),
                 "--note", "first"])
    text = capsys.readouterr().out
    assert code == 0
    assert "released keyvalues-1.0.0: 8 species, 32 values" in text
    assert "sha256:" in text
    assert (out / "keyvalues-1.0.0.tar.gz").is_file()


def test_release_defaults_to_the_current_folder(clean_dataset, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(["release", str(clean_dataset.root), "--version", "0.1.0"]) == 0
    assert (tmp_path / "keyvalues-0.1.0").is_dir() and (tmp_path / "keyvalues-0.1.0.tar.gz").is_file()


def test_gate_refusal_exits_1_with_every_reason(clean_dataset, tmp_path, capsys):
    rec = clean_dataset.load("species", "h2o-g")
    rec["properties"]["S298"]["value"] = -1.0
    clean_dataset.save("species", rec, expected_revision=rec["revision"])
    code = main(["release", str(clean_dataset.root), "--version", "1.0.0", "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 1
    assert err.startswith("tablekeeper: release refused:")
    assert "third-law h2o-g S298" in err
    assert "Traceback" not in err


def test_version_rule_is_bad_usage_exit_2(released, capsys):
    ds, out = released
    for version in ("1.0.0", "0.9.0", "one"):
        code = main(["release", str(ds.root), "--version", version, "--out", str(out)])
        err = capsys.readouterr().err
        assert code == 2
        assert err.count("\n") == 1 and err.startswith("tablekeeper: ")


def test_verify_exit_codes(released, tmp_path, capsys):
    _, out = released
    assert main(["verify", str(out / "keyvalues-1.0.0")]) == 0
    assert "intact" in capsys.readouterr().out
    assert main(["verify", str(out / "keyvalues-1.0.0.tar.gz")]) == 0
    capsys.readouterr()
    path = out / "keyvalues-1.0.0" / "sources.csv"
    path.write_bytes(path.read_bytes().replace(b"1989", b"1988"))
    assert main(["verify", str(out / "keyvalues-1.0.0")]) == 1
    text = capsys.readouterr().out
    assert "DAMAGED" in text and "sources.csv: its sha256 does not match" in text
    (tmp_path / "plain.txt").write_text("x")
    assert main(["verify", str(tmp_path / "plain.txt")]) == 2
    assert main(["verify", str(tmp_path / "missing.tar.gz")]) == 2


def test_diff_text_and_json(released, capsys):
    ds, out = released
    rec = ds.load("species", "co-g")
    rec["name"] = "carbon monoxide \x1b[31mred\x1b[0m"
    ds.save("species", rec, expected_revision=rec["revision"])
    assert main(["diff", str(out / "keyvalues-1.0.0.tar.gz"), str(ds.root)]) == 0
    text = capsys.readouterr().out
    assert "~ co-g CO(g)" in text
    assert "\x1b" not in text and "\\x1b[31m" in text  # data text shown literally, never as a control code
    assert "suggested bump: patch (values or other fields corrected); next version 1.0.1" in text
    assert main(["diff", str(out / "keyvalues-1.0.0"), str(ds.root), "--format", "json"]) == 0
    obj = json.loads(capsys.readouterr().out)
    assert obj["bump"] == "patch" and obj["suggested_version"] == "1.0.1"
    assert obj["changed"][0]["changes"][0] == {"kind": "attribute", "field": "name", "old": "carbon monoxide",
                                               "new": "carbon monoxide \x1b[31mred\x1b[0m"}


def test_diff_bad_operand_exit_2(released, tmp_path, capsys):
    ds, _ = released
    assert main(["diff", str(tmp_path / "nowhere"), str(ds.root)]) == 2
    assert "does not exist" in capsys.readouterr().err
    (tmp_path / "file.txt").write_text("x")
    assert main(["diff", str(tmp_path / "file.txt"), str(ds.root)]) == 2


def test_release_allow_warnings_flag(clean_dataset, tmp_path, capsys):
    rec = clean_dataset.load("species", "co-g")
    del rec["properties"]["Cp298"]["uncertainty"]
    clean_dataset.save("species", rec, expected_revision=rec["revision"])
    args = ["release", str(clean_dataset.root), "--version", "1.0.0", "--out", str(tmp_path / "out")]
    assert main(args) == 1
    assert "--allow-warnings" in capsys.readouterr().err
    assert main([*args, "--allow-warnings"]) == 0
    assert Dataset(clean_dataset.root).ids("releases") == ["1.0.0"]
