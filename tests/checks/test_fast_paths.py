"""The fast paths under the check catalogue give what their plain definitions give.

* ``model.species_frame`` against the row-at-a-time definition it replaced, on hostile records;
* ``formula.parse`` reading plain formulas itself against molmass reading every formula;
* ``validation.errors_many`` (one loop, split over two processes) against ``validation.errors`` per
  document, with the same verdicts as jsonschema;
* ``bulk.split_map`` against a plain call, and when its child process fails;
* ``Dataset.load_all`` against ``Dataset.load`` file by file, damaged files included.
"""

from __future__ import annotations

import os

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tablekeeper import bulk, formula, jsonio, validation
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


@pytest.mark.parametrize("split", [False, True])
def test_errors_many_gives_the_verdicts_of_errors(split: bool, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(bulk, "SPLIT", split)
    monkeypatch.setattr(bulk, "SPLIT_MIN_ITEMS", 10)
    docs = {f"sp{i}": _species(i, bad=i % 7 == 3) for i in range(300)}
    got = validation.errors_many("species", docs)
    want = {k: e for k, d in docs.items() if (e := validation.errors("species", d, fast=False))}
    assert got == want
    assert len(got) == sum(1 for i in range(300) if i % 7 == 3)
    assert list(got) == [k for k in docs if k in got]  # in the order of the documents


def test_errors_many_on_a_kind_with_formats_uses_jsonschema() -> None:
    flags = {"f1": {"id": "f1"}}
    assert validation.errors_many("flags", flags) == {"f1": validation.errors("flags", flags["f1"])}


# -- split_map --------------------------------------------------------------------------------------------


def _pids(part) -> list[tuple[int, int]]:
    return [(i * i, os.getpid()) for i in part]


def test_split_map_equals_a_plain_call_and_uses_a_second_process(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(bulk, "SPLIT_MIN_ITEMS", 10)
    if not bulk._can_fork():
        pytest.skip("this platform or process cannot fork a worker")
    out = bulk.split_map(_pids, range(101))
    assert [v for v, _ in out] == [i * i for i in range(101)]
    assert {p for _, p in out[:50]} == {os.getpid()}
    assert {p for _, p in out[50:]} != {os.getpid()}  # the second half came from the child


def test_split_map_recomputes_what_a_failed_child_did_not_send(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(bulk, "SPLIT_MIN_ITEMS", 10)
    parent = os.getpid()

    def fails_in_the_child(part):
        if os.getpid() != parent:
            raise MemoryError("the child ran out of memory")
        return [i + 1 for i in part]

    assert bulk.split_map(fails_in_the_child, range(40)) == list(range(1, 41))


def test_split_map_below_the_threshold_stays_in_process(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(bulk, "SPLIT_MIN_ITEMS", 1000)
    assert {p for _, p in bulk.split_map(_pids, range(50))} == {os.getpid()}


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
