"""third-law and gas-entropy-floor."""

from __future__ import annotations

import pytest
from checkkit import context, findings, record

# CODATA Key Values for Thermodynamics (Cox, Wagman & Medvedev, 1989), from memory: S° and its ± in
# J/(mol·K) at 298.15 K and 1 bar.
NOBLE = {"He": (126.153, 0.002), "Ne": (146.328, 0.003), "Ar": (154.846, 0.003), "Kr": (164.085, 0.003),
         "Xe": (169.685, 0.003)}


def noble_records(delta: float = 0.0) -> list[dict]:
    return [record(el.lower(), el, "g", dfH=0.0, dfG=0.0, S=s + delta, u={"S298": u}, reference_state=True)
            for el, (s, u) in NOBLE.items()]


def test_published_noble_gas_entropies_pass_the_floor() -> None:
    assert findings(context(noble_records()), "gas-entropy-floor") == []


def test_noble_gas_one_unit_below_publication_fires_the_floor() -> None:
    found = findings(context(noble_records(-1.0)), "gas-entropy-floor")
    assert sorted((f.species, f.field, f.severity) for f in found) == sorted(
        (el.lower(), "S298", "error") for el in NOBLE)
    for f in found:
        assert f.expected == pytest.approx(NOBLE[f.species.capitalize()][0], abs=0.01)
        assert f.tolerance < 0.05


def test_polyatomic_gas_exceeds_its_floor_and_a_cal_entropy_does_not() -> None:
    # CODATA 1989: S°(CO2, g) = 213.785 J/(mol·K), from memory; the floor for M = 44.01 is about 155.
    ok = record("co2", "CO2", "g", S=213.785, u={"S298": 0.01})
    cal = record("co2-cal", "CO2", "g", S=round(213.785 / 4.184, 3), u={"S298": 0.01})
    assert [f.species for f in findings(context([ok, cal]), "gas-entropy-floor")] == ["co2-cal"]


def test_floor_applies_to_gases_only() -> None:
    # Graphite's S° (5.74, CODATA 1989) is far below any gas floor and is correct for a crystal.
    recs = [record("graphite", "C", "cr", form="graphite", S=5.74, u={"S298": 0.1}, reference_state=True)]
    assert findings(context(recs), "gas-entropy-floor") == []


@pytest.mark.parametrize("phase", ["cr", "l", "g", "am"])
@pytest.mark.parametrize("s", [0.0, -3.2])
def test_third_law_fires_on_non_positive_entropy_of_pure_phases(phase: str, s: float) -> None:
    found = findings(context([record("x", "NaCl", phase, S=s)]), "third-law")
    assert [(f.species, f.field, f.severity, f.observed) for f in found] == [("x", "S298", "error", s)]


def test_third_law_excepts_aqueous_ions() -> None:
    # OH−(aq): S° = −10.90 J/(mol·K) (CODATA 1989, from memory), conventional and correct.
    recs = [record("oh", "OH-", "aq", S=-10.90), record("h2o", "H2O", "l", S=69.95)]
    assert findings(context(recs), "third-law") == []
