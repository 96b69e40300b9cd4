"""The fast paths under the check catalogue give what their plain definitions give.

* ``model.species_frame`` against the row-at-a-time definition it replaced, on hostile records;
* ``formula.parse`` reading plain formulas itself against molmass reading every formula;
* ``validation.errors_many`` (one loop) against ``validation.errors`` per document, and the compiled
  accept-only schema predicate against jsonschema (never accepting what jsonschema refuses, refusing
  only what it refuses);
* ``Dataset.load_all`` against ``Dataset.load`` file by file, damaged files included.
"""

from __future__ import annotations

import os

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tablekeeper import formula, jsonio, validation
from tablekeeper.errors import DamagedFileError, FormulaError
from tablekeeper.model import FIELDS, FRAME_COLUMNS, species_frame
from tablekeeper.store import Dataset

# -- species_frame --------------------------------------------------------------------------------------


def _num(v: object) -> float:
    return float(v) if isinstance(v, int | float) and not isinstance(v, bool) else np.nan


def reference_frame(records: dict) -> pd.DataFrame:
    """The species table by its definition, one record and one value at a time (the implementation
    species_frame had before it was made faster)."""
    ids = sorted(records)
    rows = []
    for ident in ids:
        rec = records[ident]
        props = rec.get("properties")
        if not isinstance(props, dict):
            props = {}
        ch = rec.get("charge")
        model = rec.get("cp_model")
        row = [ident, rec.get("name"), rec.get("formula"), rec.get("phase"), rec.get("form"),
               ch if isinstance(ch, int) and not isinstance(ch, bool) else np.nan,
               rec.get("reference_state") is True, rec.get("status"),
               model.get("kind") if isinstance(model, dict) else None]
        try:
            f = formula.parse(rec.get("formula"))
            row += [f.hill, f.atoms, f.molar_mass, f.charge, None]
        except (FormulaError, TypeError) as exc:
            row += [None, np.nan, np.nan, np.nan, str(getattr(exc, "reason", exc))]
        for fld in FIELDS:
            pv = props.get(fld)
            if not isinstance(pv, dict):
                row += [np.nan, np.nan, None, None, None]
                continue
            u = pv.get("uncertainty")
            k = pv.get("coverage", 1.0) or 1.0
            ok = (isinstance(u, int | float) and not isinstance(u, bool) and isinstance(k, int | float)
                  and not isinstance(k, bool) and k > 0)
            ent = pv.get("entered")
            row += [_num(pv.get("value")), float(u) / float(k) if ok else np.nan, pv.get("source"),
                    pv.get("method"), ent.get("unit") if isinstance(ent, dict) else None]
        rows.append(row)
    frame = (pd.DataFrame.from_records(rows, columns=list(FRAME_COLUMNS)) if rows
             else pd.DataFrame(columns=list(FRAME_COLUMNS)))
    for c in ["charge", "atoms", "molar_mass", "formula_charge", *FIELDS, *(f"u_{f}" for f in FIELDS)]:
        frame[c] = pd.to_numeric(frame[c], errors="coerce").astype("float64")
    frame["reference_state"] = frame["reference_state"].astype(bool)
    frame.index = pd.Index(ids, name="species")
    return frame


anything = st.one_of(st.none(), st.booleans(), st.integers(-5, 5), st.floats(allow_nan=True),
                     st.text(max_size=6), st.lists(st.integers(), max_size=2),
                     st.dictionaries(st.sampled_from(["unit", "value"]), st.text(max_size=3), max_size=2))
numberish = st.one_of(st.floats(-1e6, 1e6), st.integers(-10**6, 10**6), st.booleans(), st.none(),
                      st.just("1.5"), st.just(float("nan")), st.just(0), st.just(0.0))


@st.composite
def property_objects(draw: st.DrawFn) -> object:
    if draw(st.integers(0, 9)) == 0:
        return draw(anything)
    pv: dict = {"value": draw(numberish), "unit": "kJ/mol"}
    for key, strat in (("uncertainty", numberish), ("coverage", numberish),
                       ("source", st.one_of(st.text(max_size=5), st.none(), st.integers())),
                       ("method", st.sampled_from(["measured", "estimated", 3])),
                       ("entered", st.one_of(st.fixed_dictionaries({"unit": st.text(max_size=4),
                                                                     "value": numberish}), anything))):
        if draw(st.booleans()):
            pv[key] = draw(strat)
    return pv


formulas = st.one_of(st.sampled_from(["H2O", "CO2", "C6H6", "Fe+3", "SO4-2", "Ca(OH)2", "CuSO4.5H2O", "Xx",
                                      "", "C0", "D2O", "Me", "HCN", "NaCl"]),
                     st.text(alphabet="CHONSClNa0123()+-", max_size=8), anything)


@st.composite
def records(draw: st.DrawFn) -> dict:
    ids = draw(st.lists(st.from_regex(r"\A[a-z][a-z0-9]{0,5}\Z"), min_size=0, max_size=8, unique=True))
    out = {}
    for ident in ids:
        rec: dict = {"id": ident}
        for key, strat in (("name", anything), ("formula", formulas),
                           ("phase", st.sampled_from(["g", "cr", 1])), ("form", anything),
                           ("charge", st.one_of(st.integers(-3, 3), anything)),
                           ("reference_state", anything), ("status", anything),
                           ("cp_model", st.one_of(st.fixed_dictionaries({"kind": anything}), anything))):
            if draw(st.booleans()):
                rec[key] = draw(strat)
        if draw(st.integers(0, 5)):
            rec["properties"] = {f: draw(property_objects()) for f in FIELDS if draw(st.booleans())}
        else:
            rec["properties"] = draw(anything)
        out[ident] = rec
    return out


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(recs=records())
def test_species_frame_equals_its_definition(recs: dict) -> None:
    pd.testing.assert_frame_equal(species_frame(recs), reference_frame(recs))


def test_species_frame_of_the_demo_shapes() -> None:
    recs = {
        "h2o-l": {"id": "h2o-l", "formula": "H2O", "phase": "l", "charge": 0, "properties": {
            "dfH298": {"value": -285.83, "unit": "kJ/mol", "uncertainty": 0.08, "coverage": 2.0},
            "S298": {"value": 16.71, "unit": "J/(mol*K)", "uncertainty": 0.01,
                     "entered": {"value": 16.71 / 4.184, "unit": "cal/(mol*K)"}}}},
        "co2-g": {"id": "co2-g", "formula": "CO2", "phase": "g", "charge": 0, "properties": {
            "Cp298": {"value": 37.135, "unit": "J/(mol*K)", "uncertainty": 0.002, "source": "s1"}}},
    }
    frame = species_frame(recs)
    pd.testing.assert_frame_equal(frame, reference_frame(recs))
    assert frame.at["h2o-l", "u_dfH298"] == 0.04  # U / k
    assert frame.at["h2o-l", "entered_unit_S298"] == "cal/(mol*K)"


# -- formulas --------------------------------------------------------------------------------------------

SYMBOLS = ["C", "H", "O", "N", "S", "Cl", "Na", "Fe", "U", "B", "P", "K", "I", "W", "V", "Y", "F",
           "Co", "Cu", "Ca", "Cd", "Cs", "Ac", "Bu", "Me", "Et", "Ph", "Cp", "D", "T", "Xx", "Hx"]


@st.composite
def plainish_formulas(draw: st.DrawFn) -> str:
    """Formulas of element symbols and counts, with group abbreviations, D, T, unknown symbols, zero
    counts, charges and the odd bracket mixed in: every case the fast reader must hand to molmass."""
    parts = []
    for _ in range(draw(st.integers(1, 5))):
        sym = draw(st.sampled_from(SYMBOLS))
        count = draw(st.one_of(st.just(""), st.integers(0, 120).map(str), st.just("01")))
        parts.append(sym + count)
    text = "".join(parts)
    text = draw(st.sampled_from(["", "(", "["])) + text if draw(st.integers(0, 9)) == 0 else text
    return text + draw(st.sampled_from(["", "", "", "+", "-", "-2", "+3", " 2-", ".5H2O"]))


@settings(max_examples=400, deadline=None)
@given(text=st.one_of(plainish_formulas(), st.text(alphabet="ACDGHIKLMNOPRSTUVWY0123456789", max_size=6)))
def test_plain_formula_reader_agrees_with_molmass(text: str) -> None:
    def outcome(fast: bool):
        formula.FAST_PLAIN = fast
        formula.parse.cache_clear()
        try:
            return formula.parse(text)
        except FormulaError as exc:
            return str(exc)
        finally:
            formula.FAST_PLAIN = True
            formula.parse.cache_clear()

    fast, slow = outcome(True), outcome(False)
    assert fast == slow
    if isinstance(fast, formula.Formula):
        assert fast.molar_mass == slow.molar_mass  # the same float, not merely close


def test_plain_formulas_take_the_fast_reader(monkeypatch: pytest.MonkeyPatch) -> None:
    """A plain formula never reaches molmass (else the fast path would be dead code)."""
    def refuse(*a: object, **k: object) -> None:
        raise AssertionError("molmass was called")

    monkeypatch.setattr(formula, "_molmass", refuse)
    formula.parse.cache_clear()
    try:
        # IUPAC 2021 standard atomic weights (conventional values) via molmass: C 12.011, H 1.008, O 15.999.
        assert formula.parse("C2H6O").molar_mass == pytest.approx(46.069, abs=1e-3)
        assert formula.parse("Cl-").charge == -1
    finally:
        formula.parse.cache_clear()


# -- the schema pass --------------------------------------------------------------------------------------


def _species(i: int, bad: bool) -> dict:
    rec = {"id": f"sp{i}", "revision": 1, "formula": "CH4", "phase": "g", "charge": 0, "status": "draft",
           "properties": {"dfH298": {"value": -74.6 + i * 1e-3, "unit": "kJ/mol", "uncertainty": 0.3}}}
    if bad:
        kind = i % 4
        if kind == 0:
            rec["properties"]["dfH298"]["value"] = "high"
        elif kind == 1:
            rec["extra"] = 1
        elif kind == 2:
            del rec["status"]
        else:
            rec["cp_model"] = {"kind": "nasa7", "ranges": [{"tmin": 300, "tmax": 1000, "a": [1, 2]}]}
    return rec


def test_errors_many_gives_the_verdicts_of_errors() -> None:
    docs = {f"sp{i}": _species(i, bad=i % 7 == 3) for i in range(300)}
    got = validation.errors_many("species", docs)
    want = {k: e for k, d in docs.items() if (e := validation.errors("species", d, fast=False))}
    assert got == want
    assert len(got) == sum(1 for i in range(300) if i % 7 == 3)
    assert list(got) == [k for k in docs if k in got]  # in the order of the documents


def test_errors_many_on_a_kind_with_formats_uses_jsonschema() -> None:
    flags = {"f1": {"id": "f1"}}
    assert validation.errors_many("flags", flags) == {"f1": validation.errors("flags", flags["f1"])}


# -- load_all ---------------------------------------------------------------------------------------------


def test_load_all_matches_load_file_by_file(tmp_path) -> None:
    ds = Dataset.init(tmp_path / "d", "d")
    folder = tmp_path / "d" / "species"
    good = {"id": "ch4-g", "revision": 1, "formula": "CH4", "phase": "g", "charge": 0, "status": "draft",
            "properties": {}}
    (folder / "ch4-g.json").write_bytes(jsonio.dumps(good))
    (folder / "wrong-id.json").write_bytes(jsonio.dumps(dict(good, id="other")))
    (folder / "list.json").write_bytes(b"[1, 2]\n")
    (folder / "broken.json").write_bytes(b'{"id": "broken",')
    (folder / "dup-key.json").write_bytes(b'{"id": "dup-key", "id": "dup-key"}')
    (folder / "big.json").write_bytes(b" " * (jsonio.MAX_FILE_BYTES + 1))
    (folder / "Bad Name.json").write_bytes(jsonio.dumps(good))
    (folder / "nan.json").write_bytes(b'{"id": "nan", "v": NaN}')
    report = ds.load_all("species")
    assert report.records == {"ch4-g": good}
    damaged = {os.path.basename(e.file): str(e) for e in report.damaged}
    for name in ("wrong-id", "list", "broken", "dup-key", "big", "nan"):
        with pytest.raises(DamagedFileError) as one:
            ds.load("species", name)
        assert damaged[f"{name}.json"] == str(one.value)
    assert "not a valid identifier" in damaged["Bad Name.json"]
    assert len(report.damaged) == 7


def test_read_refuses_a_large_file_without_reading_it_whole(tmp_path) -> None:
    path = tmp_path / "big.json"
    path.write_bytes(b"{}" + b" " * (3 * jsonio.MAX_FILE_BYTES))
    with pytest.raises(DamagedFileError, match="larger than"):
        jsonio.read(str(path))


# -- the compiled schema predicate -----------------------------------------------------------------------

VALID = {
    "species": {"id": "co2-g", "revision": 3, "formula": "CO2", "phase": "g", "charge": 0, "status": "reviewed",
                "name": "carbon dioxide", "form": "alpha", "reference_state": False, "cas": "124-38-9",
                "notes": "CODATA key value", "properties": {
                    "dfH298": {"value": -393.51, "unit": "kJ/mol", "uncertainty": 0.13, "coverage": 1,
                               "source": "codata-1989", "method": "evaluated",
                               "entered": {"value": -94.051, "unit": "kcal/mol", "uncertainty": 0.03}},
                    "S298": {"value": 213.785, "unit": "J/(mol*K)"}},
                "cp_model": {"kind": "shomate", "source": "nist", "ranges": [
                    {"tmin": 298, "tmax": 1200, "A": 24.99735, "B": 55.18696, "C": -33.69137, "D": 7.948387,
                     "E": -0.136638, "F": -403.6075, "G": 228.2431, "H": -393.5224}]}},
    "sources": {"id": "codata-1989", "revision": 1, "title": "CODATA Key Values for Thermodynamics",
                "year": 1989, "kind": "compilation"},
}
VALID_MODELS = [
    {"kind": "nasa7", "ranges": [{"tmin": 200, "tmax": 1000, "a": [3.5, 0, 0, 0, 0, -1000, 3.2]}]},
    {"kind": "tabulated", "points": [[298.15, 29.1], [500, 29.6]]},
]
# Replacements by the kind of value replaced (each just inside or outside some limit of the schemas),
# and a pool of anything.
NUMBERS = [True, 0, 1, -1, 1.0, 1.5, -0.0, 1e12, 1e13, -1e13, 1e9, 1e9 + 1, 10, 10.5, 20, 21, -21, 100000,
           100001, 2.0**53, float("nan"), float("inf"), "1.5"]
TEXTS = ["", "x", "=SUM(A1)", "+1", "@x", "\tx", "ok = fine", "g", "l", "aq", "gas", "kJ/mol", "J/(mol*K)",
         "kcal/mol", "shomate", "nasa7", "tabulated", "draft", "reviewed", "estimated", "a" * 4000, "a" * 4001,
         "co2-g\n", "Co2", "-co2", "a" * 64, "a" * 65, "CO2", "C O2", "Fe+3", "C\u00e9", "124-38-9", "12-3-4", 7]
LISTS = [[], [1.0], [1.0, 2.0], [1, 2, 3, 4, 5, 6, 7], [1, 2, 3, 4, 5, 6, True], [[300, 1]],
         [[300, 1], [200, 2]], [[300, 1, 2], [400, 2]], [{"tmin": 300}], "[]"]
ANYTHING = [None, {}, {"value": 1, "unit": "kJ/mol"}, True, "x", 1, []]


def _paths(doc, prefix=()):
    yield prefix
    if isinstance(doc, dict):
        for k, v in doc.items():
            yield from _paths(v, (*prefix, k))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            yield from _paths(v, (*prefix, i))


def _has_nan(doc) -> bool:
    if isinstance(doc, float):
        return doc != doc
    if isinstance(doc, dict):
        return any(_has_nan(v) for v in doc.values())
    if isinstance(doc, list):
        return any(_has_nan(v) for v in doc)
    return False


@st.composite
def mutated(draw: st.DrawFn) -> tuple[str, object]:
    import copy

    kind = draw(st.sampled_from(sorted(VALID)))
    doc = copy.deepcopy(VALID[kind])
    if kind == "species" and draw(st.booleans()):
        doc["cp_model"] = copy.deepcopy(draw(st.sampled_from(VALID_MODELS)))
    for _ in range(draw(st.integers(0, 3))):
        paths = [p for p in _paths(doc) if p]
        path = draw(st.sampled_from(paths))
        parent = doc
        for step in path[:-1]:
            parent = parent[step]
        how = draw(st.sampled_from(["replace", "replace", "replace", "delete", "add"]))
        old = parent[path[-1]]
        pool = (NUMBERS if isinstance(old, int | float) else TEXTS if isinstance(old, str)
                else LISTS if isinstance(old, list) else ANYTHING)
        if how == "replace":
            parent[path[-1]] = copy.deepcopy(draw(st.sampled_from(pool if draw(st.integers(0, 4)) else ANYTHING)))
        elif how == "delete" and isinstance(parent, dict):
            del parent[path[-1]]
        elif isinstance(parent, dict):
            parent[draw(st.sampled_from(["extra", "kind", "unit", "a", "points", "G"]))] = \
                copy.deepcopy(draw(st.sampled_from(ANYTHING + NUMBERS)))
    return kind, doc


@settings(max_examples=1500, deadline=None)
@given(case=mutated())
def test_compiled_predicate_agrees_with_jsonschema(case: tuple[str, object]) -> None:
    kind, doc = case
    accept = validation.accepts(kind)
    valid = validation.validator(kind).is_valid(doc)
    if accept(doc):
        assert valid  # never accepts what jsonschema refuses
    elif not _has_nan(doc):
        assert not valid  # and refuses only what jsonschema refuses (NaN aside: it defers those)


def test_species_schema_is_compiled() -> None:
    """The species kind uses the compiled predicate (if the schema grew a keyword it lacks, this says so)."""
    assert validation.accepts("species").__qualname__.startswith("compile_predicate")
    for doc in (VALID["species"], dict(VALID["species"], cp_model=VALID_MODELS[0]),
                dict(VALID["species"], cp_model=VALID_MODELS[1])):
        assert validation.accepts("species")(doc)
        assert validation.validator("species").is_valid(doc)


def _single_mutations():
    import copy

    bases = [("species", VALID["species"]), ("sources", VALID["sources"])]
    bases += [("species", dict(VALID["species"], cp_model=m)) for m in VALID_MODELS]
    for kind, base in bases:
        for path in _paths(base):
            target = copy.deepcopy(base)
            node = target
            for step in path:
                node = node[step]
            if isinstance(node, dict):  # a key no schema names
                node["extra"] = 1
                yield kind, target
            if not path:
                continue
            for value in [*NUMBERS, *TEXTS, *LISTS, *ANYTHING, "<deleted>"]:
                doc = copy.deepcopy(base)
                parent = doc
                for step in path[:-1]:
                    parent = parent[step]
                if value == "<deleted>":
                    if not isinstance(parent, dict):
                        continue
                    del parent[path[-1]]
                else:
                    parent[path[-1]] = copy.deepcopy(value)
                yield kind, doc


def test_compiled_predicate_agrees_with_jsonschema_on_every_single_change() -> None:
    """Every value of valid records replaced by each value of the pools, or deleted, and every object given
    an unknown key, one change at a time."""
    n_valid = n = 0
    for kind, doc in _single_mutations():
        accepted = validation.accepts(kind)(doc)
        valid = validation.validator(kind).is_valid(doc)
        assert not accepted or valid, doc
        assert accepted or not valid or _has_nan(doc), doc
        n += 1
        n_valid += valid
    assert 0 < n_valid < n  # both verdicts occur
