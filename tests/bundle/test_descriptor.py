"""datapackage.json: a valid Data Package (checked with the general-purpose ``frictionless`` validator,
a test-only dependency) carrying the hashes, the Table Schemas, the standard state and the cautions."""

from __future__ import annotations

import hashlib
import json
import shutil

import pytest

from tablekeeper import jsonio
from tablekeeper.bundle import release
from tablekeeper.bundle.descriptor import descriptor_hash, schema_errors

frictionless = pytest.importorskip("frictionless", reason="test-only dependency: pip install frictionless")


@pytest.fixture
def bundle(clean_dataset, tmp_path, fixed_time):
    return release(clean_dataset, "1.0.0", out=tmp_path / "out", note="first publication")


def test_frictionless_finds_the_package_valid(bundle):
    report = frictionless.validate(str(bundle.folder / "datapackage.json"))
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])


def test_frictionless_catches_a_broken_foreign_key(bundle, tmp_path):
    # The same bundle with a value row pointing at a species that is not there, hashes made to match:
    # the validator must object, which shows that the foreign keys above are really declared.
    bad = tmp_path / "bad"
    shutil.copytree(bundle.folder, bad)
    values = bad / "values.csv"
    values.write_text(values.read_text().replace("\nco-g,dfH298,", "\nzz-g,dfH298,"))
    desc = json.loads((bad / "datapackage.json").read_text())
    for res in desc["resources"]:
        data = (bad / res["path"]).read_bytes()
        res["hash"], res["bytes"] = "sha256:" + hashlib.sha256(data).hexdigest(), len(data)
    (bad / "datapackage.json").write_text(json.dumps(desc))
    report = frictionless.validate(str(bad / "datapackage.json"))
    assert not report.valid
    assert "foreign-key" in {e.type for task in report.tasks for e in task.errors}


def test_descriptor_content(bundle, fixed_time):
    desc = jsonio.read(bundle.folder / "datapackage.json")
    assert schema_errors(desc) == []
    assert desc["name"] == "keyvalues" and desc["version"] == "1.0.0" and desc["created"] == fixed_time
    assert desc["tablekeeper:previous_version"] is None
    assert desc["tablekeeper:standard_state"] == {"pressure_bar": 1, "temperature_K": 298.15}
    assert desc["tablekeeper:check_summary"] == {"error": 0, "warning": 0, "info": 0}
    assert desc["tablekeeper:note"] == "first publication"
    cautions = " ".join(desc["tablekeeper:cautions"])
    assert "proves" in cautions and "not prove that they are correct" in cautions
    assert "local codes and licensed engineering practice" in cautions
    assert desc["tablekeeper:descriptor_hash"] == descriptor_hash(desc)
    by_name = {r["name"]: r for r in desc["resources"]}
    assert list(by_name) == ["species", "values", "cp_models", "thermo_table", "sources", "findings",
                             "changes"]
    for res in desc["resources"]:
        data = (bundle.folder / res["path"]).read_bytes()
        assert res["hash"] == "sha256:" + hashlib.sha256(data).hexdigest()
        assert res["bytes"] == len(data)
        assert res["encoding"] == "utf-8"
    assert by_name["species"]["schema"]["primaryKey"] == ["id"]
    assert by_name["values"]["schema"]["primaryKey"] == ["species", "property"]
    fks = {(tuple(fk["fields"]), fk["reference"]["resource"]) for r in desc["resources"]
           for fk in r.get("schema", {}).get("foreignKeys", [])}
    assert {(("species",), "species"), (("source",), "sources")} <= fks
    assert (("species",), "species") in {(tuple(fk["fields"]), fk["reference"]["resource"])
                                         for fk in by_name["thermo_table"]["schema"]["foreignKeys"]}
    # Units live in the column names and the field descriptions.
    fields = {f["name"]: f for f in by_name["species"]["schema"]["fields"]}
    assert "kJ/mol" in fields["dfH298_kJ_per_mol"]["description"]
    assert "J/(mol·K)" in fields["S298_J_per_molK"]["description"]
    assert fields["charge"]["type"] == "integer" and fields["reference_state"]["type"] == "boolean"
    # The CSV headers are the schema's fields, in order.
    for name in ("species", "values", "cp_models", "thermo_table", "sources", "findings"):
        header = (bundle.folder / f"{name}.csv").read_text().split("\n", 1)[0].split(",")
        assert header == [f["name"] for f in by_name[name]["schema"]["fields"]]


def test_values_columns_are_the_fixed_long_form(bundle):
    header = (bundle.folder / "values.csv").read_text().split("\n", 1)[0].split(",")
    assert header[:8] == ["species", "property", "value", "unit", "uncertainty", "coverage", "source",
                          "method"]
