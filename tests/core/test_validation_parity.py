"""The compiled validator (fastjsonschema) gives the same verdicts as jsonschema, the reference.

Valid species records are generated, then mutated at any depth (wrong types, bool for a number, 1.0
for an integer, missing required keys, extra keys, bad enums and patterns, huge numbers, every Cp
model variant). For each document the default path of ``validation.errors`` must agree with plain
jsonschema (``fast=False``).
"""

from __future__ import annotations

import copy
import string
from collections.abc import Iterator
from typing import Any

import pytest
from hypothesis import HealthCheck, Phase, find, given, settings
from hypothesis import strategies as st

from tablekeeper import validation

SETTINGS = settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])

slug = st.from_regex(r"\A[a-z0-9][a-z0-9._-]{0,20}\Z")
safe_text = st.text(min_size=1, max_size=30).filter(lambda s: s[0] not in "=+@\t\r")
number = st.one_of(st.integers(-10**12, 10**12),
                   st.floats(-1e12, 1e12, allow_nan=False, allow_infinity=False))
positive_t = st.floats(1e-3, 1e5, allow_nan=False)


@st.composite
def value_objects(draw: st.DrawFn) -> dict:
    out: dict = {"value": draw(number), "unit": draw(st.sampled_from(["kJ/mol", "J/(mol*K)"]))}
    if draw(st.booleans()):
        out["uncertainty"] = draw(st.floats(0, 1e9, allow_nan=False))
    if draw(st.booleans()):
        out["coverage"] = draw(st.floats(0.01, 10))
    if draw(st.booleans()):
        out["source"] = draw(slug)
    if draw(st.booleans()):
        out["method"] = draw(st.sampled_from(["measured", "evaluated", "estimated", "derived"]))
    if draw(st.booleans()):
        unit = draw(st.sampled_from(["kcal/mol", "cal/(mol K)", "eV"]))
        out["entered"] = {"value": draw(number), "unit": unit}
        if draw(st.booleans()):
            out["entered"]["uncertainty"] = draw(st.floats(0, 1e9))
    return out


@st.composite
def cp_models(draw: st.DrawFn) -> dict:
    kind = draw(st.sampled_from(["shomate", "nasa7", "tabulated"]))
    model: dict = {"kind": kind}
    if kind == "shomate":
        model["ranges"] = [
            {"tmin": draw(positive_t), "tmax": draw(positive_t),
             **{c: draw(number) for c in "ABCDE"},
             **{c: draw(number) for c in draw(st.sets(st.sampled_from("FGH")))}}
            for _ in range(draw(st.integers(1, 3)))]
    elif kind == "nasa7":
        model["ranges"] = [{"tmin": draw(positive_t), "tmax": draw(positive_t),
                            "a": draw(st.lists(number, min_size=7, max_size=7))}
                           for _ in range(draw(st.integers(1, 3)))]
    else:
        model["points"] = draw(st.lists(st.lists(number, min_size=2, max_size=2), min_size=2, max_size=5))
    if draw(st.booleans()):
        model["source"] = draw(slug)
    return model


@st.composite
def species_records(draw: st.DrawFn) -> dict:
    rec: dict = {
        "id": draw(slug),
        "revision": draw(st.integers(1, 10**9)),
        "formula": draw(st.sampled_from(["H2O", "CH4O", "Cl-", "SO4-2", "CuSO4·5H2O", "K4[Fe(CN)6]",
                                         "Fe+3"])),
        "phase": draw(st.sampled_from(["g", "l", "cr", "am", "aq"])),
        "charge": draw(st.integers(-20, 20)),
        "status": draw(st.sampled_from(["draft", "reviewed", "deprecated"])),
        "properties": {f: draw(value_objects())
                       for f in draw(st.sets(st.sampled_from(["dfH298", "dfG298", "S298", "Cp298"])))},
    }
    cas = st.from_regex(r"\A[0-9]{2,7}-[0-9]{2}-[0-9]\Z")
    for key, strat in (("name", safe_text), ("notes", safe_text), ("form", slug),
                       ("reference_state", st.booleans()), ("cas", cas), ("cp_model", cp_models())):
        if draw(st.booleans()):
            rec[key] = draw(strat)
    return rec


def _paths(node: Any, prefix: tuple = ()) -> list[tuple]:
    """Every path into a document (containers and leaves), the root excluded."""
    out: list[tuple] = []
    items = node.items() if isinstance(node, dict) else enumerate(node) if isinstance(node, list) else ()
    for k, v in items:
        out.append((*prefix, k))
        out.extend(_paths(v, (*prefix, k)))
    return out


NUMBERS = [0, 1, 1.0, 2.0, 1.5, -1, -0.0, 7, 21, -21, 1e-300, 10**12 + 1, -10**12 - 1, 1e12, 1e13, 1e300,
           -1e308, 2**63, 2**64 + 1, 10**30, 10**400, 1e9, 1e9 + 1, 100001, 0.5, 10, 10.5, 1599, 2201]
STRINGS = ["text", "", "=cmd", "+1", "@x", "\tx", "\rx", "UPPER", "abc\n", "a" * 70, "x" * 5000, "-abc",
           "shomate", "nasa7", "tabulated", "g", "aq", "gas", "kJ/mol", "J/(mol*K)", "kcal/mol", "measured",
           "guessed", "draft", "final", "H2O", "H2O$", "7732-18-5", "7732-18-55", "sha256:" + "0" * 64]
OTHERS = [True, False, None, [], [1, 2], [[1, 2], [3, 4]], [1.0] * 7, [1.0] * 8, {}, {"value": 1},
          {"value": 1, "unit": "kJ/mol"}, {"kind": "tabulated", "points": [[1, 2], [3, 4]]}]
REPLACEMENTS = NUMBERS + STRINGS + OTHERS
HOWS = ["replace-same-type", "replace-any", "delete", "extra", "bool-for-number", "float-for-int",
        "string-for-number", "wrap", "list-append", "list-pop"]


def _is_number(v: Any) -> bool:
    return isinstance(v, int | float) and not isinstance(v, bool)


def _places(doc: Any, how: str) -> list[tuple]:
    paths = _paths(doc)
    if how == "extra":
        return [(), *(p for p in paths if isinstance(_at(doc, p), dict))]
    if how in ("bool-for-number", "string-for-number"):
        return [p for p in paths if _is_number(_at(doc, p))]
    if how == "float-for-int":
        return [p for p in paths if _is_number(_at(doc, p)) and isinstance(_at(doc, p), int)
                and abs(_at(doc, p)) < 2**53]
    if how in ("list-append", "list-pop"):
        return [p for p in paths if isinstance(_at(doc, p), list) and (how == "list-append" or _at(doc, p))]
    if how == "replace-same-type":
        return [p for p in paths if isinstance(_at(doc, p), str) or _is_number(_at(doc, p))]
    return paths


@st.composite
def mutated(draw: st.DrawFn, base: st.SearchStrategy[dict], hows: tuple[str, ...] = tuple(HOWS)) -> dict:
    """A document with one or two mutations; the kind of mutation is drawn first, then a place where it
    applies, so that rare places (an object to give an extra key) are hit often enough."""
    doc = copy.deepcopy(draw(base))
    for _ in range(draw(st.integers(1, 2))):
        how = draw(st.sampled_from(hows))
        places = _places(doc, how)
        if not places:
            continue
        path = draw(st.sampled_from(places))
        # Deep copies: a later mutation must never change the shared lists of replacements.
        if how == "extra":
            key = draw(st.sampled_from(["extra", "valeu", "unit ", "Value", "ranges", "kind"]))
            _at(doc, path)[key] = copy.deepcopy(draw(st.sampled_from(REPLACEMENTS)))
            continue
        parent = _at(doc, path[:-1])
        key = path[-1]
        old = parent[key]
        if how == "delete":
            del parent[key]
        elif how == "bool-for-number":
            parent[key] = bool(old)
        elif how == "float-for-int":
            parent[key] = float(old)
        elif how == "string-for-number":
            parent[key] = repr(old)
        elif how == "wrap":
            parent[key] = [old]
        elif how == "list-append":
            old.append(copy.deepcopy(old[-1]) if old and draw(st.booleans())
                       else copy.deepcopy(draw(st.sampled_from(REPLACEMENTS))))
        elif how == "list-pop":
            old.pop(draw(st.integers(0, len(old) - 1)))
        elif how == "replace-same-type":
            pool = STRINGS if isinstance(old, str) else NUMBERS
            other = st.text(alphabet=string.printable, max_size=8) if isinstance(old, str) else st.floats(
                allow_nan=False)
            parent[key] = draw(st.one_of(st.sampled_from(pool), other))
        else:
            parent[key] = copy.deepcopy(draw(st.sampled_from(REPLACEMENTS)))
    return doc


def _at(doc: Any, path: tuple) -> Any:
    for step in path:
        doc = doc[step]
    return doc


def _same_verdict(kind: str, doc: Any) -> None:
    fast = validation.errors(kind, doc)
    reference = validation.errors(kind, doc, fast=False)
    assert bool(fast) == bool(reference), (doc, reference)
    if fast:  # a rejected document is always reported with jsonschema's own pointers and messages
        assert fast == reference


def test_the_compiled_path_is_really_in_use_for_species() -> None:
    # Without it the parity tests below would compare jsonschema with itself.
    assert validation._fast("species") is not None


@SETTINGS
@given(species_records())
def test_valid_species_records_are_accepted_by_both(rec: dict) -> None:
    assert validation.errors("species", rec) == []
    assert validation.errors("species", rec, fast=False) == []


@pytest.mark.parametrize("how", HOWS)
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.data())
def test_mutated_species_records_get_the_same_verdict(how: str, data: st.DataObject) -> None:
    # One test per kind of mutation, so that each kind gets its share of examples.
    doc = data.draw(mutated(species_records(), (how, *HOWS)))
    _same_verdict("species", doc)


def test_the_mutations_reach_both_verdicts_and_the_cp_model() -> None:
    # Guards the two tests above against a generator that only ever makes one kind of document.
    gen = mutated(species_records())
    find_settings = settings(max_examples=2000, database=None, phases=[Phase.generate])
    assert validation.errors("species", find(gen, lambda d: not validation.errors("species", d),
                                             settings=find_settings)) == []
    bad = find(gen, lambda d: any(p.startswith("/cp_model") for p, _ in validation.errors("species", d)),
               settings=find_settings)
    assert validation.errors("species", bad, fast=False)


@pytest.mark.parametrize("kind", ["dataset", "sources", "reactions"])
@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_other_compiled_kinds_get_the_same_verdict(kind: str, data: st.DataObject, valid_documents) -> None:
    doc = data.draw(mutated(st.just(valid_documents()[kind])))
    _same_verdict(kind, doc)


FULL_MODELS = [
    {"kind": "shomate", "source": "nist-webbook",
     "ranges": [{"tmin": 298, "tmax": 1000, "A": 30.09, "B": 6.83, "C": 6.79, "D": -2.53, "E": 0.08,
                 "F": -250.9, "G": 223.4, "H": -241.8}]},
    {"kind": "nasa7", "source": "nist-webbook",
     "ranges": [{"tmin": 200, "tmax": 1000, "a": [4.2, -2.0e-3, 6.5e-6, -5.5e-9, 1.8e-12, -30293.7, -0.85]}]},
    {"kind": "tabulated", "points": [[298.15, 75.3], [350, 75.9]]},
]


#: Small pools for the exhaustive test: each value breaks (or, like 1.0 for an integer, keeps) a rule.
EDGE_NUMBERS = [True, 1.0, 1.5, -1, 10**13, -1e308, "1"]
EDGE_STRINGS = ["", "=x", "abc\n", "UPPER", "gas", 1, None]
EDGE_OTHERS = [None, [], {}]


def _single_mutations(base: dict, inside: tuple = ()) -> Iterator[dict]:
    """Every document that differs from ``base`` by one mutation at or below the path ``inside``."""
    for how in HOWS:
        for path in _places(base, how):
            if path[:len(inside)] != inside:
                continue
            if how == "replace-same-type":
                values = EDGE_STRINGS if isinstance(_at(base, path), str) else EDGE_NUMBERS
            elif how == "replace-any":
                values = EDGE_OTHERS
            else:
                values = [None]
            for value in values:
                doc = copy.deepcopy(base)
                parent, key = (_at(doc, path[:-1]), path[-1]) if path else (None, None)
                if how == "delete":
                    del parent[key]
                elif how == "extra":
                    _at(doc, path)["extra"] = 1
                elif how == "bool-for-number":
                    parent[key] = bool(parent[key])
                elif how == "float-for-int":
                    parent[key] = float(parent[key])
                elif how == "string-for-number":
                    parent[key] = repr(parent[key])
                elif how == "wrap":
                    parent[key] = [parent[key]]
                elif how == "list-append":
                    lst = _at(doc, path)
                    lst.append(copy.deepcopy(lst[-1]) if lst else 1)
                elif how == "list-pop":
                    _at(doc, path).pop()
                else:
                    parent[key] = copy.deepcopy(value)
                yield doc


@pytest.mark.parametrize("model", FULL_MODELS, ids=lambda m: m["kind"])
def test_every_single_mutation_of_a_full_record_gets_the_same_verdict(model: dict, species_record) -> None:
    """Exhaustive and deterministic: every place of a record that uses every optional field, every kind
    of mutation, small pools of rule-breaking values. Places outside the Cp model are visited once."""
    base = species_record(form="alpha", reference_state=False, cas="7732-18-5", notes="Key value.",
                          cp_model=model)
    base["properties"]["dfH298"].update(coverage=2, method="evaluated",
                                        entered={"value": -68.315, "unit": "kcal/mol", "uncertainty": 0.01})
    assert validation.errors("species", base, fast=False) == []
    inside = () if model is FULL_MODELS[0] else ("cp_model",)
    verdicts = []
    for doc in _single_mutations(base, inside):
        _same_verdict("species", doc)
        verdicts.append(bool(validation.errors("species", doc)))
    assert len(verdicts) > 50 and any(verdicts) and not all(verdicts)


@pytest.mark.parametrize("doc", [None, [], "species", 1, True, {}, {"id": "x"}])
def test_documents_that_are_not_records_get_the_same_verdict(doc: Any) -> None:
    _same_verdict("species", doc)
    assert validation.errors("species", doc)


@pytest.mark.parametrize(("path", "value", "valid"), [
    (("revision",), 1.0, True),          # 2020-12: an integer is any number with a zero fraction
    (("revision",), 1.5, False),
    (("revision",), True, False),        # a boolean is never a number
    (("charge",), False, False),
    (("properties", "dfH298", "value"), True, False),
    (("properties", "dfH298", "value"), 10**13, False),
    (("properties", "dfH298", "value"), -1e12, True),
    (("properties", "dfH298", "coverage"), 0, False),
    (("properties", "dfH298", "unit"), "kcal/mol", False),
    (("phase",), "gas", False),
    (("cas",), "7732-18-5", True),
    (("cas",), "7732185", False),
])
def test_named_edge_cases(path: tuple, value: Any, valid: bool, species_record) -> None:
    rec = species_record()
    node = rec
    for step in path[:-1]:
        node = node[step]
    node[path[-1]] = value
    _same_verdict("species", rec)
    assert (validation.errors("species", rec) == []) is valid
