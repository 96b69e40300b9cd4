"""The JSON Schemas: valid Draft 2020-12, strict, formats really checked, no spreadsheet formulas."""

from __future__ import annotations

import copy
import json
from importlib import resources

import pytest
from jsonschema import Draft202012Validator

from tablekeeper import validation

KINDS = tuple(validation.SCHEMA_FILES)
#: The kinds of file a dataset folder holds (DESIGN section 3); the suite has a valid document of each.
RECORD_KINDS = ("dataset", "species", "sources", "reactions", "flags", "journal", "releases")


def _invalid(kind: str, doc: object) -> bool:
    """The verdict of plain jsonschema (the reference), with the format checker on."""
    return bool(validation.errors(kind, doc, fast=False))


def test_every_shipped_schema_file_is_registered() -> None:
    shipped = {p.name for p in resources.files("tablekeeper").joinpath("schemas").iterdir()
               if p.name.endswith(".json")}
    assert shipped == set(validation.SCHEMA_FILES.values())


@pytest.mark.parametrize("kind", KINDS)
def test_schema_is_valid_draft_2020_12(kind: str) -> None:
    sch = validation.schema(kind)
    assert sch["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    Draft202012Validator.check_schema(sch)  # raises SchemaError when the schema is malformed


def test_every_record_kind_has_a_schema() -> None:
    assert set(RECORD_KINDS) <= set(KINDS)


@pytest.mark.parametrize("kind", RECORD_KINDS)
def test_valid_document_of_every_kind_is_accepted(kind: str, valid_documents) -> None:
    doc = valid_documents()[kind]
    assert validation.errors(kind, doc) == []
    assert validation.errors(kind, doc, fast=False) == []


# -- strictness: a typo'd key is refused at every level --------------------------------------------------

TYPOS = [
    ("dataset", (), "titel"),
    ("dataset", ("policy",), "tolerance"),
    ("dataset", ("roles",), "stewards"),
    ("species", (), "formla"),
    ("species", ("properties",), "dfH"),
    ("species", ("properties", "dfH298"), "uncertanty"),
    ("sources", (), "auhtors"),
    ("reactions", (), "dHr"),
    ("reactions", ("drH",), "sigma"),
    ("flags", (), "blocked"),
    ("flags", ("comments", 0), "txt"),
    ("journal", (), "who"),
    ("journal", ("changes", 0), "was"),
    ("releases", (), "tag"),
    ("releases", ("summary",), "errors"),
]


@pytest.mark.parametrize(("kind", "where", "typo"), TYPOS)
def test_unknown_key_is_refused(kind: str, where: tuple, typo: str, valid_documents) -> None:
    doc = valid_documents()[kind]
    node = doc
    for step in where:
        node = node[step]
    node[typo] = 1
    assert _invalid(kind, doc)
    assert validation.errors(kind, doc)  # the default (fast) path agrees


@pytest.mark.parametrize("model", [
    {"kind": "shomate", "ranges": [{"tmin": 298, "tmax": 1000, "A": 1, "B": 0, "C": 0, "D": 0, "E": 0,
                                    "Fx": 0}]},
    {"kind": "nasa7", "ranges": [{"tmin": 200, "tmax": 1000, "a": [3.5, 0, 0, 0, 0, 0, 0], "b": 1}]},
    {"kind": "tabulated", "points": [[298.15, 29.1], [500, 29.6]], "pts": []},
])
def test_unknown_key_in_cp_model_is_refused(model: dict, species_record) -> None:
    good = copy.deepcopy(model)
    for node in (good, *(good.get("ranges") or [])):
        for k in ("Fx", "b", "pts"):
            node.pop(k, None)
    assert not _invalid("species", species_record(cp_model=good))
    assert _invalid("species", species_record(cp_model=model))


# -- formats ---------------------------------------------------------------------------------------------

def test_format_checker_really_checks_date_time() -> None:
    # jsonschema skips a format silently when its checker's package (rfc3339-validator) is missing.
    checker = Draft202012Validator.FORMAT_CHECKER
    for fmt in validation.FORMATS_USED:
        assert fmt in checker.checkers, f"jsonschema cannot check format {fmt!r}: install rfc3339-validator"
    assert not checker.conforms("2024-13-45T25:61:00Z", "date-time")
    assert checker.conforms("2024-05-01T12:00:00Z", "date-time")


@pytest.mark.parametrize("bad", ["yesterday", "2024-02-30T10:00:00Z", "2024-05-01 12:00", "2024-05-01",
                                 "2024-05-01T12:00:00", "2024-05-01T25:00:00Z"])
@pytest.mark.parametrize(("kind", "where"), [
    ("flags", ("raised_at",)), ("flags", ("comments", 0, "at")), ("journal", ("time",)),
    ("releases", ("created",)),
])
def test_bad_date_time_is_refused(kind: str, where: tuple, bad: str, valid_documents) -> None:
    doc = valid_documents()[kind]
    node = doc
    for step in where[:-1]:
        node = node[step]
    node[where[-1]] = bad
    assert _invalid(kind, doc)
    assert validation.errors(kind, doc)


def test_schemas_with_a_format_never_take_the_compiled_path() -> None:
    # The compiled validator ignores formats; a kind whose schema uses one must go through jsonschema.
    for kind in KINDS:
        uses = '"format"' in json.dumps(validation.schema(kind))
        assert (validation._fast(kind) is None) == uses, kind


# -- free text may not start like a spreadsheet formula ------------------------------------------------

FREE_TEXT = [
    ("dataset", ("title",)), ("dataset", ("description",)),
    ("species", ("name",)), ("species", ("notes",)),
    ("sources", ("title",)), ("sources", ("authors", 0)), ("sources", ("identifier",)),
    ("sources", ("notes",)),
    ("reactions", ("equation",)), ("reactions", ("notes",)),
    ("flags", ("note",)), ("flags", ("comments", 0, "text")), ("flags", ("resolution",)),
    ("releases", ("note",)),
]


@pytest.mark.parametrize("lead", ["=", "+", "@", "\t", "\r"])
@pytest.mark.parametrize(("kind", "where"), FREE_TEXT)
def test_free_text_starting_like_a_formula_is_refused(kind: str, where: tuple, lead: str,
                                                      valid_documents) -> None:
    doc = valid_documents()[kind]
    node = doc
    for step in where[:-1]:
        node = node[step]
    node[where[-1]] = lead + "SUM(A1:A9)"
    assert _invalid(kind, doc)
    assert validation.errors(kind, doc)
    node[where[-1]] = "SUM(A1:A9) = 4 + 5 @ noon"  # the same characters later in the text are fine
    assert not _invalid(kind, doc)


# -- slugs are whole-string matches ------------------------------------------------------------------------

@pytest.mark.parametrize("value", ["abc\n", "ABC", "-abc", "a" * 65, "a/b", "", "é"])
@pytest.mark.parametrize(("kind", "where"), [
    ("species", ("id",)), ("species", ("form",)), ("species", ("properties", "dfH298", "source")),
    ("sources", ("id",)), ("flags", ("species",)), ("reactions", ("source",)), ("dataset", ("name",)),
])
def test_slug_fields_refuse_anything_but_a_slug(kind: str, where: tuple, value: str, valid_documents) -> None:
    # A trailing newline matters: Python's `$` also matches before a final newline.
    doc = valid_documents()[kind]
    node = doc
    for step in where[:-1]:
        node = node[step]
    node[where[-1]] = value
    assert _invalid(kind, doc)
    assert validation.errors(kind, doc)


def test_schema_error_carries_the_json_pointer(species_record) -> None:
    rec = species_record()
    rec["properties"]["dfH298"]["value"] = "high"
    errs = validation.errors("species", rec)
    assert [p for p, _ in errs] == ["/properties/dfH298/value"]
    assert "'high' is not of type 'number'" in errs[0][1]


def test_the_reference_validator_is_jsonschema_draft_2020_12() -> None:
    v = validation.validator("species")
    assert isinstance(v, Draft202012Validator)
    assert v.format_checker is Draft202012Validator.FORMAT_CHECKER
