"""The edit logic both faces use (tablekeeper.editing): texts in, a would-be record and problems out."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tablekeeper.editing import (
    RecordEdit,
    apply_unit_fix,
    build,
    build_source,
    conflict_rows,
    diff,
    field_path,
    field_text,
    number_text,
    save_edit,
    save_source,
    slip_unit,
    unit_fix,
)
from tablekeeper.errors import ConflictError, InputError, PermissionDenied
from tablekeeper.store import Dataset

# The thermochemical calorie is exactly 4.184 J (NIST SP 811, appendix B.8).
CAL_TH = 4.184

WATER = {
    "id": "h2o-l", "revision": 1, "formula": "H2O", "phase": "l", "charge": 0, "status": "reviewed",
    # CODATA Key Values for Thermodynamics (Cox, Wagman & Medvedev, 1989): ΔfH° = -285.830 ± 0.040 kJ/mol,
    # S° = 69.95 ± 0.03 J/(mol·K).
    "properties": {"dfH298": {"value": -285.83, "unit": "kJ/mol", "uncertainty": 0.04,
                              "source": "codata-1989"},
                   "S298": {"value": 69.95, "unit": "J/(mol*K)", "uncertainty": 0.03}},
}


def test_a_value_typed_in_kcal_per_mol_is_converted_and_the_entered_value_kept() -> None:
    edit = RecordEdit(WATER)
    edit.set_text("properties.dfH298.value", "-68.3 kcal/mol")
    res = edit.result()
    assert res.ok
    prop = res.record["properties"]["dfH298"]
    assert prop["value"] == -285.7672  # -68.3 × 4.184, every digit exact in decimal
    assert math.isclose(prop["value"], -68.3 * CAL_TH, rel_tol=1e-15)
    assert prop["entered"] == {"value": -68.3, "unit": "kcal/mol"}
    assert prop["unit"] == "kJ/mol"
    assert "-285.7672 kJ/mol" in res.notes["properties.dfH298.value"]


def test_a_chemists_unit_spelling_in_the_canonical_unit_is_no_conversion() -> None:
    edit = RecordEdit(WATER)
    edit.set_text("properties.S298.value", "69.91 J K-1 mol-1")
    prop = edit.result().record["properties"]["S298"]
    assert prop["value"] == 69.91
    assert "entered" not in prop


def test_a_bare_number_replaces_a_converted_value_and_drops_the_entered_one() -> None:
    rec = build(WATER, {"properties.dfH298.value": "-68.3 kcal/mol"}).record
    again = build(rec, {"properties.dfH298.value": "-285.8"}).record["properties"]["dfH298"]
    assert again["value"] == -285.8
    assert "entered" not in again


def test_an_unparsable_value_gives_one_sentence_naming_record_and_field() -> None:
    res = build(WATER, {"properties.dfH298.value": "-68.3 flibbles"})
    assert not res.ok
    assert res.problems["properties.dfH298.value"].startswith("'flibbles' is not a unit")
    assert res.sentences()[0].startswith("record h2o-l, field properties.dfH298.value: ")


def test_a_unit_of_the_wrong_dimension_is_refused() -> None:
    res = build(WATER, {"properties.S298.value": "70 kJ/mol"})
    assert "does not fit S298" in res.problems["properties.S298.value"]


def test_schema_errors_of_the_would_be_record_land_on_their_field() -> None:
    res = build(WATER, {"name": "=HYPERLINK(1)"})
    assert "name" in res.problems


def test_untouched_texts_leave_the_record_exactly_as_loaded() -> None:
    rec = build(WATER, {"properties.dfH298.value": "-68.3 kcal/mol"}).record
    edit = RecordEdit(rec)
    for path in ("properties.dfH298.value", "properties.dfH298.uncertainty", "name", "charge"):
        edit.set_text(path, field_text(rec, path))
    assert edit.dirty == []
    assert edit.result().record == rec


def test_undo_of_one_field_and_of_all() -> None:
    edit = RecordEdit(WATER)
    edit.set_text("properties.dfH298.value", "-285.8")
    edit.set_text("name", "water")
    assert edit.dirty == ["name", "properties.dfH298.value"]
    edit.undo_field("name")
    assert edit.dirty == ["properties.dfH298.value"]
    edit.undo_all()
    assert edit.result().record == WATER


def test_an_empty_value_removes_the_property_and_other_parts_then_need_a_value() -> None:
    res = build(WATER, {"properties.S298.value": "", "properties.S298.uncertainty": "0.1"})
    assert "S298" not in res.record["properties"]
    assert "value first" in res.problems["properties.S298.uncertainty"]


def test_an_uncertainty_with_a_unit_converts_and_a_negative_one_is_refused() -> None:
    res = build(WATER, {"properties.dfH298.uncertainty": "0.01 kcal/mol"})
    assert res.record["properties"]["dfH298"]["uncertainty"] == 0.04184
    assert "negative" in build(WATER, {"properties.dfH298.uncertainty": "-1"}).problems[
        "properties.dfH298.uncertainty"]


@settings(max_examples=200, deadline=None)
@given(st.floats(allow_nan=False, allow_infinity=False, min_value=-1e12, max_value=1e12))
def test_what_is_shown_reads_back_as_the_stored_number(x: float) -> None:
    text = number_text(x)
    assert float(text) == x
    rec = build(WATER, {"properties.dfH298.value": text}).record
    assert rec["properties"]["dfH298"]["value"] == x
    assert field_text(rec, "properties.dfH298.value") == text


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=30))
def test_any_typed_text_gives_a_record_or_a_problem_never_an_exception(text: str) -> None:
    res = build(WATER, {"properties.dfH298.value": text, "charge": text, "phase": text})
    assert res.ok or res.problems


def test_number_text_never_rounds_to_fixed_decimals() -> None:
    assert number_text(-241.826) == "-241.826"
    assert number_text(0.1 + 0.2) == "0.30000000000000004"
    assert number_text(5.74) == "5.74"


def test_field_paths_of_findings() -> None:
    assert field_path("dfH298") == "properties.dfH298.value"
    assert field_path("/properties/S298/uncertainty") == "properties.S298.uncertainty"
    assert field_path("/name") == "name"
    assert field_path("charge") == "charge"
    assert field_path("cp_model") is None
    assert field_path(None) is None


def test_diff_and_conflict_rows_show_both_sides() -> None:
    mine = build(WATER, {"properties.dfH298.value": "-285.8"}).record
    theirs = build(WATER, {"properties.S298.value": "69.9", "properties.dfH298.value": "-285.9"}).record
    changed = {c.field for c in diff(WATER, mine)}
    assert changed == {"properties.dfH298.value"}
    rows = {r.field: r for r in conflict_rows(WATER, mine, theirs)}
    assert rows["properties.dfH298.value"].clash
    assert (rows["properties.dfH298.value"].mine, rows["properties.dfH298.value"].theirs) == (-285.8, -285.9)
    assert not rows["properties.S298.value"].mine_changed and rows["properties.S298.value"].theirs_changed


def test_rebase_keeps_my_texts_over_their_version() -> None:
    edit = RecordEdit(WATER)
    edit.set_text("properties.dfH298.value", "-285.8")
    theirs = dict(build(WATER, {"properties.S298.value": "69.9"}).record, revision=2)
    edit.rebase(theirs)
    rec = edit.result().record
    assert edit.revision == 2
    assert rec["properties"]["S298"]["value"] == 69.9
    assert rec["properties"]["dfH298"]["value"] == -285.8


# -- saving --------------------------------------------------------------------------------------------

@pytest.fixture
def water_ds(empty_dataset: Dataset) -> Dataset:
    empty_dataset.save("sources", {"id": "codata-1989", "revision": 1, "title": "CODATA Key Values"},
                       expected_revision=None)
    empty_dataset.save("species", dict(WATER), expected_revision=None)
    return empty_dataset


def test_save_journals_the_change_with_the_reason(water_ds: Dataset) -> None:
    edit = RecordEdit(water_ds.load("species", "h2o-l"))
    edit.set_text("properties.dfH298.value", "-68.3 kcal/mol")
    saved = save_edit(water_ds, edit, "typed from the 1989 table")
    assert saved["revision"] == 2
    entries, _ = water_ds.journal()
    last = entries[-1]
    assert last["target"] == "species/h2o-l" and last["reason"] == "typed from the 1989 table"
    changes = {c["field"]: c for c in last["changes"]}
    assert changes["properties.dfH298.value"] == {"field": "properties.dfH298.value", "old": -285.83,
                                                  "new": -285.7672}
    assert changes["properties.dfH298.entered.unit"]["new"] == "kcal/mol"


def test_save_refuses_no_reason_an_invalid_record_and_nothing_to_save(water_ds: Dataset) -> None:
    edit = RecordEdit(water_ds.load("species", "h2o-l"))
    with pytest.raises(InputError, match="needs a reason"):
        save_edit(water_ds, edit, "  ")
    with pytest.raises(InputError, match="nothing to save"):
        save_edit(water_ds, edit, "why")
    edit.set_text("phase", "plasma")
    with pytest.raises(InputError, match="field phase"):
        save_edit(water_ds, edit, "why")
    assert water_ds.load("species", "h2o-l")["revision"] == 1


def test_save_after_someone_else_saved_is_a_conflict_carrying_both(water_ds: Dataset) -> None:
    edit = RecordEdit(water_ds.load("species", "h2o-l"))
    other = RecordEdit(water_ds.load("species", "h2o-l"))
    other.set_text("properties.S298.value", "69.9")
    save_edit(water_ds, other, "theirs")
    edit.set_text("properties.dfH298.value", "-285.8")
    with pytest.raises(ConflictError) as info:
        save_edit(water_ds, edit, "mine")
    assert info.value.theirs["properties"]["S298"]["value"] == 69.9
    assert info.value.mine["properties"]["dfH298"]["value"] == -285.8


def test_a_reviewer_may_not_save(tmp_path, water_ds: Dataset) -> None:
    from tablekeeper import jsonio
    from tablekeeper.store import atomic_write

    meta = dict(water_ds.meta, roles={"steward": ["sam"], "reviewer": ["rita"]})
    atomic_write(water_ds.root / "dataset.json", jsonio.dumps(meta))
    ds = Dataset(water_ds.root, user="rita")
    edit = RecordEdit(ds.load("species", "h2o-l"))
    edit.set_text("properties.dfH298.value", "-285.8")
    with pytest.raises(PermissionDenied):
        save_edit(ds, edit, "why")


class _Finding:
    def __init__(self, species: str, field: str, observed: float, expected: float,
                 check: str = "unit-suspect") -> None:
        self.check, self.species, self.field = check, species, field
        self.observed, self.expected = observed, expected


def test_unit_fix_sets_the_expected_value_and_keeps_the_slip_as_entered() -> None:
    rec = build(WATER, {"properties.dfH298.value": "-68.315"}).record
    # -68.315 kcal/mol is the CODATA 1989 value -285.830 kJ/mol / 4.184 (rounded as typed).
    fixed = unit_fix(rec, _Finding("h2o-l", "dfH298", -68.315, -68.315 * CAL_TH))
    prop = fixed["properties"]["dfH298"]
    assert prop["value"] == -68.315 * CAL_TH
    assert prop["entered"] == {"value": -68.315, "unit": "kcal/mol"}
    assert prop["uncertainty"] == 0.04


def test_unit_fix_names_the_unit_of_a_factor_1000_slip() -> None:
    assert slip_unit("dfH298", -285830.0, -285.83) == "J/mol"
    assert slip_unit("S298", 0.06995, 69.95) == "kJ/(mol*K)"
    assert slip_unit("S298", 16.718, 16.718 * CAL_TH) == "cal/(mol*K)"
    assert slip_unit("S298", 1.0, 3.0) is None


def test_unit_fix_refuses_a_stale_finding_or_another_check() -> None:
    with pytest.raises(InputError, match="run the checks again"):
        unit_fix(WATER, _Finding("h2o-l", "dfH298", -68.3, -285.77))
    with pytest.raises(InputError, match="only a unit-suspect"):
        unit_fix(WATER, _Finding("h2o-l", "dfH298", -285.83, 1.0, check="duplicate"))


def test_apply_unit_fix_saves_and_journals(water_ds: Dataset) -> None:
    rec = water_ds.load("species", "h2o-l")
    rec["properties"]["dfH298"]["value"] = -68.315
    water_ds.save("species", rec, expected_revision=1)
    saved = apply_unit_fix(water_ds, _Finding("h2o-l", "dfH298", -68.315, -68.315 * CAL_TH))
    assert water_ds.load("species", "h2o-l")["properties"]["dfH298"]["value"] == -68.315 * CAL_TH
    assert saved["revision"] == 3
    last = water_ds.journal()[0][-1]
    assert last["reason"].startswith("unit-suspect fix of dfH298")


def test_sources_are_built_from_texts_and_saved(water_ds: Dataset) -> None:
    res = build_source(None, {"id": "wagman-1982", "title": "The NBS tables",
                              "authors": "Wagman, D. D.; Evans", "year": "1982", "kind": "compilation"})
    assert res.ok and res.record["authors"] == ["Wagman, D. D.", "Evans"]
    assert "year" in build_source(None, {"id": "x", "title": "t", "year": "soon"}).problems
    assert "kind" in build_source(None, {"id": "x", "title": "t", "kind": "rumour"}).problems
    saved = save_source(water_ds, None, {"id": "wagman-1982", "title": "The NBS tables"})
    assert saved["revision"] == 1
    with pytest.raises(InputError, match="exists already"):
        save_source(water_ds, None, {"id": "wagman-1982", "title": "again"})
    edited = save_source(water_ds, saved, {"title": "The NBS tables of chemical thermodynamic properties"})
    assert edited["revision"] == 2
    assert water_ds.journal()[0][-1]["reason"] == "source wagman-1982 edited"
