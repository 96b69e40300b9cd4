"""Fault injection: typical slips put into clean published rows (the CRC Handbook table carried by
`chemicals`, see checkkit.crc_rows) must fire the right check on the right species and field."""

from __future__ import annotations

import copy
import functools
import random
import sys
from collections import Counter

import pytest
from checkkit import context, crc_rows

from tablekeeper.checks import Finding, run
from tablekeeper.elements import R, translational_entropy
from tablekeeper.formula import parse

VALUE_CHECKS = ["gibbs-consistency", "third-law", "gas-entropy-floor", "cp-range", "cp-model",
                "cp-continuity", "phase-order", "unit-suspect"]
SEED = 20240611


def _errors(recs: list[dict]) -> list[Finding]:
    return [f for f in run(context(recs), only=VALUE_CHECKS).findings if f.severity == "error"]


@functools.cache
def _clean_ids() -> frozenset[str]:
    recs = [copy.deepcopy(r) for r in crc_rows()[0]]
    bad = {f.species for f in _errors(recs)}
    return frozenset(r["id"] for r in recs if r["id"] not in bad)


def _clean_rows() -> list[dict]:
    """CRC rows on which no value check reports an error (the baseline the faults are measured on)."""
    ids = _clean_ids()
    return [copy.deepcopy(r) for r in crc_rows()[0] if r["id"] in ids]


def _row(cas: str, phase: str) -> dict:
    for r in _clean_rows():
        if r["cas"] == cas and r["phase"] == phase:
            return r
    raise AssertionError(f"no clean CRC row {cas} {phase}")


def _set(rec: dict, fld: str, value: float) -> dict:
    rec = copy.deepcopy(rec)
    rec["properties"].setdefault(fld, {"unit": "kJ/mol" if fld.startswith("df") else "J/(mol*K)"})
    rec["properties"][fld]["value"] = value
    return rec


def _value(rec: dict, fld: str) -> float:
    return rec["properties"][fld]["value"]


def _transpose(value: float, rng: random.Random) -> float | None:
    """Swap two adjacent, different digits of the value as written to one decimal."""
    text = f"{value:.1f}"
    spots = [i for i in range(len(text) - 1) if text[i].isdigit() and text[i + 1].isdigit()
             and text[i] != text[i + 1]]
    if not spots:
        return None
    i = rng.choice(spots)
    return float(text[:i] + text[i + 1] + text[i] + text[i + 2:])


def _jump_model(cp: float, jump: float) -> dict:
    return {"kind": "shomate", "ranges": [
        {"tmin": 298.0, "tmax": 1000.0, "A": cp, "B": 0.0, "C": 0.0, "D": 0.0, "E": 0.0},
        {"tmin": 1000.0, "tmax": 3000.0, "A": cp * (1 + jump), "B": 0.0, "C": 0.0, "D": 0.0, "E": 0.0}]}


#: A fault: the faulty record, the check and field that must fire, the unit-suspect field and factor.
Injected = tuple[dict, str, str, tuple[str, float] | None]


def inject(kind: str, rec: dict, rng: random.Random) -> Injected | None:
    if kind == "kcal-for-kJ dfH298":
        return _set(rec, "dfH298", round(_value(rec, "dfH298") / 4.184, 2)), "gibbs-consistency", "dfG298", \
            ("dfH298", 4.184)
    if kind == "cal-for-J S298":
        return _set(rec, "S298", round(_value(rec, "S298") / 4.184, 2)), "gibbs-consistency", "dfG298", \
            ("S298", 4.184)
    if kind == "J-for-kJ dfG298":
        return _set(rec, "dfG298", _value(rec, "dfG298") * 1000), "gibbs-consistency", "dfG298", \
            ("dfG298", 0.001)
    if kind == "sign flip dfH298":
        return _set(rec, "dfH298", -_value(rec, "dfH298")), "gibbs-consistency", "dfG298", None
    if kind == "transposed digits dfG298":
        v = _transpose(_value(rec, "dfG298"), rng)
        return None if v is None else (_set(rec, "dfG298", v), "gibbs-consistency", "dfG298", None)
    if kind == "gas S298 below its floor":
        if rec["phase"] != "g":
            return None
        floor = float(translational_entropy(parse(rec["formula"]).molar_mass))
        return _set(rec, "S298", round(floor - rng.uniform(1, 20), 1)), "gas-entropy-floor", "S298", None
    if kind == "gas Cp298 below 5/2 R":
        if rec["phase"] != "g":
            return None
        return _set(rec, "Cp298", round(rng.uniform(0.3, 2.4) * R, 1)), "cp-range", "Cp298", None
    if kind == "Cp model jump at its break":
        if rec["phase"] != "g" or "Cp298" not in rec["properties"]:
            return None
        out = copy.deepcopy(rec)
        out["cp_model"] = _jump_model(_value(rec, "Cp298"), rng.choice([-1, 1]) * rng.uniform(0.02, 0.10))
        return out, "cp-continuity", "cp_model", None
    raise AssertionError(kind)


KINDS = ["kcal-for-kJ dfH298", "cal-for-J S298", "J-for-kJ dfG298", "sign flip dfH298",
         "transposed digits dfG298", "gas S298 below its floor", "gas Cp298 below 5/2 R",
         "Cp model jump at its break"]


@pytest.mark.parametrize("kind", KINDS)
def test_each_fault_fires_the_right_check_on_water_vapour(kind: str) -> None:
    # CRC Handbook H2O(g): ΔfH° −241.8, ΔfG° −228.6, S° 188.8, Cp° 33.6.
    base = _row("7732-18-5", "g")
    other = _row("124-38-9", "g")  # CO2(g), untouched: the finding must name only the faulty species
    faulty, check_id, fld, suspect = inject(kind, base, random.Random(1))
    found = _errors([faulty, other])
    assert (check_id, base["id"], fld) in {(f.check, f.species, f.field) for f in found}
    assert all(f.species == base["id"] for f in found)
    slips = [f for f in found if f.check == "unit-suspect"]
    if suspect is None:
        assert kind.startswith("gas Cp") or slips == []
    else:
        assert [(f.field, f.expected / f.observed) for f in slips] == [
            (suspect[0], pytest.approx(suspect[1], rel=1e-9))]
        assert f"{suspect[1] if suspect[1] > 1 else 1 / suspect[1]:g}" in slips[0].suggestion


def test_unit_suspect_suggestion_reads_like_the_fix() -> None:
    base = _row("7732-18-5", "l")  # CRC H2O(l): ΔfH° −285.8
    faulty, *_ = inject("kcal-for-kJ dfH298", base, random.Random(1))
    slip = next(f for f in _errors([faulty]) if f.check == "unit-suspect")
    assert slip.field == "dfH298" and slip.expected == pytest.approx(-285.8, abs=0.03)
    assert slip.suggestion.startswith("-285.8") and "kcal/mol: × 4.184" in slip.suggestion


def test_nasa_polynomial_with_a_jump_fires_cp_continuity() -> None:
    # GRI-Mech 3.0 NASA polynomial of H2O (from memory; reproduces JANAF S° and ΔfH° at 298.15 K), its
    # upper-range a1 raised by 0.1: Cp jumps by 0.1·R = 0.83 J/(mol·K) at 1000 K (2 % of 41.3).
    nasa = {"kind": "nasa7", "ranges": [
        {"tmin": 200.0, "tmax": 1000.0, "a": [4.19864056, -2.03643410e-03, 6.52040211e-06, -5.48797062e-09,
                                              1.77197817e-12, -3.02937267e04, -8.49032208e-01]},
        {"tmin": 1000.0, "tmax": 3500.0, "a": [3.03399249 + 0.1, 2.17691804e-03, -1.64072518e-07,
                                               -9.70419870e-11, 1.68200992e-14, -3.00042971e04, 4.96677010]}]}
    rec = dict(copy.deepcopy(_row("7732-18-5", "g")), cp_model=nasa)
    found = [f for f in _errors([rec]) if f.check == "cp-continuity"]
    assert {f.message.split(" ")[0] for f in found} == {"Cp", "H", "S"}
    assert all(f.species == rec["id"] and f.field == "cp_model" for f in found)


def test_detection_share_and_false_alarms_over_a_seeded_sample() -> None:
    """Each fault kind into up to 60 randomly chosen clean rows (seeded); a fault counts as detected when
    its check fires on its species and field. False alarms: rows of the published table (before the
    baseline filter) with any error from a value check. Both numbers are printed and bounded."""
    rng = random.Random(SEED)
    published = list(crc_rows()[0])
    false_alarm = len({f.species for f in _errors([copy.deepcopy(r) for r in published])}) / len(published)
    clean = _clean_rows()
    detected: Counter = Counter()
    tried: Counter = Counter()
    suspect_ok: Counter = Counter()
    suspect_tried: Counter = Counter()
    for kind in KINDS:
        rows = rng.sample(clean, len(clean))
        for rec in rows:
            if tried[kind] >= 60:
                break
            out = inject(kind, rec, rng)
            if out is None:
                continue
            faulty, check_id, fld, suspect = out
            found = _errors([faulty])
            tried[kind] += 1
            if (check_id, rec["id"], fld) in {(f.check, f.species, f.field) for f in found}:
                detected[kind] += 1
            if suspect is not None:
                suspect_tried[kind] += 1
                slips = [(f.field, round(f.expected / f.observed, 6)) for f in found
                         if f.check == "unit-suspect"]
                if slips == [(suspect[0], round(suspect[1], 6))]:
                    suspect_ok[kind] += 1
    total = sum(detected.values()) / sum(tried.values())
    lines = [f"  {k}: {detected[k]}/{tried[k]} detected"
             + (f", unit-suspect names field and factor in {suspect_ok[k]}/{suspect_tried[k]}"
                if suspect_tried[k] else "") for k in KINDS]
    summary = (f"fault injection (seed {SEED}): {total:.1%} of {sum(tried.values())} faults detected; "
               f"false alarms on the published rows: {false_alarm:.1%}\n" + "\n".join(lines))
    print("\n" + summary)
    assert total >= 0.9, summary
    assert false_alarm <= 0.06, summary
    assert all(tried[k] >= 30 for k in KINDS), summary


def test_detection_and_false_alarms_on_rows_stating_no_uncertainty(monkeypatch: pytest.MonkeyPatch,
                                                                   capsys: pytest.CaptureFixture) -> None:
    """The same measurement on the CRC rows with every uncertainty removed, as an outside table imported
    without uncertainty columns arrives: the checks then use the policy's assumed uncertainties. At
    least 95 % of the injected faults found, errors on fewer than 2 % of the published rows."""
    recs, left_out = crc_rows()
    bare = []
    for r in recs:
        r = copy.deepcopy(r)
        for v in r["properties"].values():
            v.pop("uncertainty", None)
            v.pop("coverage", None)
        bare.append(r)
    monkeypatch.setattr(sys.modules[__name__], "crc_rows", lambda: (tuple(bare), left_out))
    _clean_ids.cache_clear()
    try:
        test_detection_share_and_false_alarms_over_a_seeded_sample()
    finally:
        _clean_ids.cache_clear()
    out = capsys.readouterr().out
    total = float(out.split("% of")[0].rsplit(" ", 1)[-1]) / 100
    false_alarm = float(out.split("published rows: ")[1].split("%")[0]) / 100
    with capsys.disabled():
        print(out)
    assert total >= 0.95, out
    assert false_alarm < 0.02, out
