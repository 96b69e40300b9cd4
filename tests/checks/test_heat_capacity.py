"""cp-range, cp-model and cp-continuity, against published heat capacities and Cp(T) fits."""

from __future__ import annotations

import copy
import itertools
import json
from pathlib import Path

import chemicals
import numpy as np
import pytest
from checkkit import context, findings, record

from tablekeeper.checks.heat_capacity import condensed_cp_bound, gas_cp_classical, gas_cp_lower

R = 8.314462618  # CODATA 2018 (DESIGN section 5)

# NIST Chemistry WebBook Shomate coefficients of CO2(g); A..E as carried by `chemicals`
# (webbook_shomate_coefficients.json, there in T-form), F, G, H from memory.
CO2_SHOMATE = {"kind": "shomate", "ranges": [
    {"tmin": 298.0, "tmax": 1200.0, "A": 24.99735, "B": 55.18696, "C": -33.69137, "D": 7.948387,
     "E": -0.136638, "F": -403.6075, "G": 228.2431, "H": -393.5224},
    {"tmin": 1200.0, "tmax": 6000.0, "A": 58.16639, "B": 2.720074, "C": -0.492289, "D": 0.038844,
     "E": -6.447293, "F": -425.9186, "G": 263.6125, "H": -393.5224}]}

# GRI-Mech 3.0 NASA 7-coefficient polynomials (thermo data file), from memory; they reproduce the
# JANAF values Cp°, S° and ΔfH° of O2 and H2O at 298.15 K, which the tests below use.
O2_NASA = {"kind": "nasa7", "ranges": [
    {"tmin": 200.0, "tmax": 1000.0, "a": [3.78245636e00, -2.99673416e-03, 9.84730201e-06, -9.68129509e-09,
                                          3.24372837e-12, -1.06394356e03, 3.65767573e00]},
    {"tmin": 1000.0, "tmax": 3500.0, "a": [3.28253784e00, 1.48308754e-03, -7.57966669e-07, 2.09470555e-10,
                                           -2.16717794e-14, -1.08845772e03, 5.45323129e00]}]}
H2O_NASA = {"kind": "nasa7", "ranges": [
    {"tmin": 200.0, "tmax": 1000.0, "a": [4.19864056e00, -2.03643410e-03, 6.52040211e-06, -5.48797062e-09,
                                          1.77197817e-12, -3.02937267e04, -8.49032208e-01]},
    {"tmin": 1000.0, "tmax": 3500.0, "a": [3.03399249e00, 2.17691804e-03, -1.64072518e-07, -9.70419870e-11,
                                           1.68200992e-14, -3.00042971e04, 4.96677010e00]}]}


def published_models() -> list[dict]:
    # Record values: CODATA Key Values 1989 (ΔfH°, S°, from memory) and NIST-JANAF 1998 Cp° (from memory).
    return [
        record("co2", "CO2", "g", dfH=-393.51, S=213.785, Cp=37.135, u={"dfH298": 0.13, "S298": 0.010},
               cp_model=CO2_SHOMATE),
        record("o2", "O2", "g", dfH=0.0, dfG=0.0, S=205.152, Cp=29.376, u={"S298": 0.005},
               reference_state=True, cp_model=O2_NASA),
        record("h2o", "H2O", "g", dfH=-241.826, S=188.835, Cp=33.590, u={"dfH298": 0.040, "S298": 0.010},
               cp_model=H2O_NASA),
    ]


# -- cp-range -----------------------------------------------------------------------------------------

def test_bounds_follow_from_r_and_the_atom_count() -> None:
    assert gas_cp_lower() == pytest.approx(2.5 * R)
    # Classical Cp = Cv + R with 3/2 R translation, R (linear) rotation and (3N − 5) R vibration: 7.5 R
    # for a linear triatomic (the larger limit is used for N ≤ 4), (3N − 2) R for N = 5.
    assert gas_cp_classical(np.array([1, 2, 3, 4, 5])) == pytest.approx(
        np.array([2.5, 4.5, 7.5, 10.5, 13.0]) * R)
    assert condensed_cp_bound(np.array([2])) == pytest.approx([1.2 * 6 * R])


def test_published_heat_capacities_pass_cp_range() -> None:
    # NIST-JANAF 1998 Cp°(298.15), from memory: He 20.786, CO2 37.135, H2O(l) 75.351, Cu(cr) 24.47,
    # and NBS 1982 Cl−(aq) −136.4 (negative partial molar Cp, allowed for aq).
    recs = [record("he", "He", "g", Cp=20.786), record("co2", "CO2", "g", Cp=37.135),
            record("water", "H2O", "l", Cp=75.351), record("cu", "Cu", "cr", Cp=24.47),
            record("cl", "Cl-", "aq", Cp=-136.4)]
    assert findings(context(recs), "cp-range") == []


def test_gas_below_translational_heat_capacity_is_an_error() -> None:
    found = findings(context([record("n2", "N2", "g", Cp=8.0)]), "cp-range")
    assert [(f.species, f.field, f.severity) for f in found] == [("n2", "Cp298", "error")]
    assert found[0].expected == pytest.approx(2.5 * R)


def test_gas_above_its_classical_limit_is_a_warning() -> None:
    found = findings(context([record("h2", "H2", "g", Cp=40.0)]), "cp-range")
    assert [(f.species, f.severity) for f in found] == [("h2", "warning")]
    assert found[0].expected == pytest.approx(4.5 * R)


def test_condensed_phase_bounds() -> None:
    recs = [record("neg", "NaCl", "cr", Cp=-1.0), record("big", "Cu", "cr", Cp=100.0),
            record("ok", "NaCl", "cr", form="rocksalt", Cp=50.5)]
    found = {(f.species, f.severity) for f in findings(context(recs), "cp-range")}
    assert found == {("neg", "error"), ("big", "warning")}


# -- cp-model -----------------------------------------------------------------------------------------

def test_published_fits_pass_cp_model_and_cp_continuity() -> None:
    ctx = context(published_models())
    assert findings(ctx, "cp-model") == []
    assert findings(ctx, "cp-continuity") == []


def _with_model(rec: dict, model: dict) -> dict:
    return dict(rec, cp_model=model)


def test_model_disagreeing_with_its_record_is_reported() -> None:
    co2 = published_models()[0]
    bad = copy.deepcopy(co2)
    bad["properties"]["dfH298"]["value"] = -390.0  # the model says −393.53
    bad["properties"]["Cp298"]["value"] = 40.0     # the model says 37.13
    found = findings(context([bad]), "cp-model")
    assert len(found) == 2 and {f.field for f in found} == {"cp_model"}
    assert any("ΔfH°" in f.message and f.observed == pytest.approx(-393.525, abs=0.01) for f in found)
    assert any("Cp(298.15 K)" in f.message and f.expected == 40.0 for f in found)


def test_model_entropy_constant_is_checked() -> None:
    h2o = published_models()[2]
    h2o["properties"]["S298"]["value"] = 190.0
    found = findings(context([h2o]), "cp-model")
    assert len(found) == 1 and "S°" in found[0].message


def test_gap_and_overlap_between_ranges() -> None:
    gap = copy.deepcopy(O2_NASA)
    gap["ranges"][1]["tmin"] = 1100.0
    over = copy.deepcopy(O2_NASA)
    over["ranges"][0]["tmax"] = 1200.0
    o2 = published_models()[1]
    found = findings(context([_with_model(dict(o2, id="a"), gap), _with_model(dict(o2, id="b"), over)]),
                     "cp-model")
    msgs = {f.species: f.message for f in found if "ranges" in f.message}
    assert "gap" in msgs["a"] and "overlap" in msgs["b"]


def test_gas_model_below_five_halves_r_is_an_error() -> None:
    low = {"kind": "tabulated", "points": [[298.15, 20.0], [500.0, 25.0]]}
    found = findings(context([record("x", "N2", "g", cp_model=low)]), "cp-model")
    assert [(f.species, f.severity) for f in found] == [("x", "error")]
    assert "5/2 R" in found[0].message


def test_gas_model_above_its_classical_limit_below_1000_k_is_a_warning() -> None:
    high = {"kind": "tabulated", "points": [[298.15, 30.0], [900.0, 45.0], [3000.0, 45.0]]}
    found = findings(context([record("x", "N2", "g", cp_model=high)]), "cp-model")
    assert [(f.species, f.severity) for f in found] == [("x", "warning")]
    assert found[0].expected == pytest.approx(4.5 * R)


def test_condensed_model_must_stay_positive() -> None:
    neg = {"kind": "shomate", "ranges": [{"tmin": 298.0, "tmax": 1000.0, "A": 10.0, "B": -20.0, "C": 0.0,
                                          "D": 0.0, "E": 0.0}]}
    found = findings(context([record("x", "NaCl", "cr", cp_model=neg)]), "cp-model")
    assert len(found) == 1 and "Cp > 0" in found[0].message and found[0].observed <= 0


@pytest.mark.parametrize("model", [
    {"kind": "nasa7", "ranges": [{"tmin": 200.0, "tmax": 1000.0, "a": [1.0, 2.0]}]},
    {"kind": "shomate", "ranges": [{"tmin": 1000.0, "tmax": 200.0, "A": 1, "B": 0, "C": 0, "D": 0, "E": 0}]},
    {"kind": "tabulated", "points": [[500.0, 30.0], [400.0, 31.0]]},
    {"kind": "spline", "points": []},
    {"kind": "shomate", "ranges": [{"tmin": 298.0, "tmax": 1000.0, "A": "x", "B": 0, "C": 0, "D": 0,
                                    "E": 0}]},
])
def test_malformed_model_is_an_error_finding_not_a_crash(model: dict) -> None:
    ctx = context([record("x", "CO2", "g", Cp=37.1, cp_model=model)])
    for check_id in ("cp-model", "cp-continuity"):
        found = findings(ctx, check_id)
        assert [(f.species, f.field, f.severity) for f in found] == [("x", "cp_model", "error")]


def test_model_outside_298_is_not_compared_with_298_values() -> None:
    # NIST WebBook Shomate of H2O(g) starts at 500 K (A..E as carried by `chemicals`, F, G, H from memory).
    h2o = {"kind": "shomate", "ranges": [
        {"tmin": 500.0, "tmax": 1700.0, "A": 30.092, "B": 6.832514, "C": 6.793435, "D": -2.53448,
         "E": 0.082139, "F": -250.881, "G": 223.3967, "H": -241.8264},
        {"tmin": 1700.0, "tmax": 6000.0, "A": 41.96426, "B": 8.622053, "C": -1.49978, "D": 0.098119,
         "E": -11.15764, "F": -272.1797, "G": 219.7809, "H": -241.8264}]}
    ctx = context([record("w", "H2O", "g", dfH=-241.826, S=188.835, Cp=99.0, cp_model=h2o)])
    assert findings(ctx, "cp-model") == []
    assert findings(ctx, "cp-continuity") == []


# -- cp-continuity --------------------------------------------------------------------------------------

@pytest.mark.parametrize(("index", "delta", "quantity"), [(0, 0.1, "Cp"), (5, 5.0, "H"), (6, 0.05, "S")])
def test_nasa_jump_at_the_break_is_reported(index: int, delta: float, quantity: str) -> None:
    # a1 + 0.1 raises Cp by 0.83 J/(mol·K) at 1000 K (and H, S with it); a6 + 5 raises H by 5R =
    # 0.042 kJ/mol only; a7 + 0.05 raises S by 0.42 J/(mol·K) only.
    bad = copy.deepcopy(O2_NASA)
    bad["ranges"][1]["a"][index] += delta
    found = findings(context([record("o2", "O2", "g", cp_model=bad)]), "cp-continuity")
    jumped = {f.message.split(" ")[0] for f in found}
    assert quantity in jumped
    if quantity != "Cp":
        assert jumped == {quantity}
    assert all(f.species == "o2" and f.severity == "error" for f in found)


def test_nist_shomate_gas_fits_pass_cp_continuity() -> None:
    """The NIST WebBook Shomate fits of gases (the set `chemicals` carries; coefficients there in
    T-form, converted back to t = T/1000) are published without a constraint at their breaks.
    Prints and asserts the share that passes; measured 99 %."""
    path = Path(chemicals.__file__).parent / "Heat Capacity" / "webbook_shomate_coefficients.json"
    data = json.loads(path.read_text())
    recs = []
    for cas, phases in data.items():
        gas = phases[2]
        if not gas or len(gas) < 2:
            continue
        ranges = [{"tmin": r[0], "tmax": r[1], "A": r[2], "B": r[3] * 1e3, "C": r[4] * 1e6, "D": r[5] * 1e9,
                   "E": r[6] * 1e-6} for r in gas]
        if any(a["tmax"] != b["tmin"] for a, b in itertools.pairwise(ranges)):
            continue  # a gap in the carried data is cp-model's business, not continuity's
        recs.append(record(f"s{len(recs)}", "CO2", "g", cp_model={"kind": "shomate", "ranges": ranges})
                    | {"cas": cas})
    found = findings(context(recs), "cp-continuity")
    share = 1 - len({f.species for f in found}) / len(recs)
    print(f"\nNIST Shomate gas fits: {len(recs)} models, {share:.1%} pass cp-continuity")
    assert len(recs) > 300
    assert share >= 0.95, f"{share:.1%}"
