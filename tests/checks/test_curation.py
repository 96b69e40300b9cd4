"""phase-order, uncertainty, flag and reaction-closure."""

from __future__ import annotations

import math

import pytest
from checkkit import context, findings, record

# CODATA Key Values for Thermodynamics (Cox, Wagman & Medvedev, 1989), from memory.
H2 = dict(dfH=0.0, dfG=0.0, S=130.680, u={"S298": 0.003}, reference_state=True)
O2 = dict(dfH=0.0, dfG=0.0, S=205.152, u={"S298": 0.005}, reference_state=True)
H2O_L = dict(dfH=-285.830, S=69.95, u={"dfH298": 0.040, "S298": 0.03})
H2O_G = dict(dfH=-241.826, S=188.835, u={"dfH298": 0.040, "S298": 0.010})


def water(**over) -> list[dict]:
    liquid = dict(H2O_L, **over.get("l", {}))
    gas = dict(H2O_G, **over.get("g", {}))
    return [record("h2o-l", "H2O", "l", **liquid), record("h2o-g", "H2O", "g", **gas)]


# -- phase-order ----------------------------------------------------------------------------------------

def test_published_phases_are_in_order() -> None:
    # Plus CODATA S(rhombic) 32.054 and NBS 1982 S(monoclinic) 32.6 (from memory) as two cr forms of S,
    # and the S(g) atom (NIST-JANAF 1998 167.829, ΔfH° 277.17).
    recs = [*water(), record("s-rh", "S", "cr", form="rhombic", dfH=0.0, S=32.054),
            record("s-mono", "S", "cr", form="monoclinic", dfH=0.33, S=32.6),
            record("s-g", "S", "g", dfH=277.17, S=167.829)]
    assert findings(context(recs), "phase-order") == []


def test_inverted_entropy_and_enthalpy_are_errors_on_both_species() -> None:
    recs = water(g={"S": 60.0})
    found = findings(context(recs), "phase-order")
    assert {(f.species, f.field, f.severity) for f in found} == {("h2o-l", "S298", "error"),
                                                                ("h2o-g", "S298", "error")}
    recs = water(l={"dfH": -200.0})
    found = findings(context(recs), "phase-order")
    assert {(f.species, f.field) for f in found} == {("h2o-l", "dfH298"), ("h2o-g", "dfH298")}


def test_each_polymorph_is_compared() -> None:
    recs = [record("s-rh", "S", "cr", form="rhombic", S=32.054),
            record("s-mono", "S", "cr", form="mono", S=170.0), record("s-g", "S", "g", S=167.829)]
    found = findings(context(recs), "phase-order")
    assert {f.species for f in found} == {"s-mono", "s-g"}


def test_isomers_with_different_cas_numbers_are_not_compared() -> None:
    # CRC Handbook (as carried by `chemicals`): acetaldehyde(g) ΔfH° −166.2 and oxirane(l) −78.0 share C2H4O.
    recs = [record("acetaldehyde-g", "C2H4O", "g", dfH=-166.2) | {"cas": "75-07-0"},
            record("oxirane-l", "C2H4O", "l", dfH=-78.0) | {"cas": "75-21-8"}]
    assert findings(context(recs), "phase-order") == []
    for r in recs:
        del r["cas"]
    assert len(findings(context(recs), "phase-order")) == 2


# -- uncertainty ----------------------------------------------------------------------------------------

def test_missing_zero_and_implausible_uncertainties() -> None:
    recs = [record("a", "NaCl", "cr", dfH=-411.2, S=72.1, u={"dfH298": 0.0, "S298": 50.0}),
            record("b", "KCl", "cr", dfH=-436.5, S=82.6, u={"dfH298": 60.0, "S298": 0.2}),
            record("h2", "H2", "g", **H2)]
    found = findings(context(recs), "uncertainty")
    # a: zero u on ΔfH°, and u(S°) = 50 above 0.5 × 72.1 (the default max_relative_uncertainty);
    # b: u(ΔfH°) = 60 above 40 kJ/mol; h2: ΔfH° and ΔfG° of a reference state are exact, S° has its u.
    assert {(f.species, f.field) for f in found} == {("a", "dfH298"), ("a", "S298"), ("b", "dfH298")}
    assert all(f.severity == "warning" for f in found)


def test_missing_uncertainty_follows_the_policy() -> None:
    recs = [record("a", "NaCl", "cr", dfH=-411.2)]
    assert [f.field for f in findings(context(recs), "uncertainty")] == ["dfH298"]
    quiet = context(recs, {"policy": {"require_uncertainty": False}})
    assert findings(quiet, "uncertainty") == []


def test_policy_thresholds_and_required_fields() -> None:
    recs = [record("a", "NaCl", "cr", dfH=-411.2, S=72.1, u={"dfH298": 0.1, "S298": 10.0})]
    policy = {"max_relative_uncertainty": 0.1, "required_fields": ["dfG298", "S298"]}
    strict = context(recs, {"policy": policy})
    found = {(f.field, f.severity) for f in findings(strict, "uncertainty")}
    assert found == {("S298", "warning"), ("dfG298", "error")}


def test_hydrogen_ion_values_are_exact_by_convention() -> None:
    recs = [record("h-aq", "H+", "aq", dfH=0.0, dfG=0.0, S=0.0, Cp=0.0,
                   u={"dfH298": 0.0, "dfG298": 0.0, "S298": 0.0, "Cp298": 0.0})]
    assert findings(context(recs), "uncertainty") == []


# -- flag -----------------------------------------------------------------------------------------------

def _flag(ident: str, species: str, *, blocking: bool, status: str = "open") -> dict:
    return {"id": ident, "revision": 1, "species": species, "field": "dfH298",
            "note": "[bold]looks like kcal", "blocking": blocking, "status": status, "raised_by": "eng",
            "raised_at": "2024-01-01T00:00:00Z"}


def test_open_flags_are_reported_and_blocking_ones_are_errors() -> None:
    flags = {"f1": _flag("f1", "h2o-l", blocking=False), "f2": _flag("f2", "h2o-l", blocking=True),
             "f3": _flag("f3", "h2o-l", blocking=True, status="resolved"),
             "f4": _flag("f4", "ghost", blocking=True)}
    found = findings(context(water(), flags=flags), "flag")
    got = {(f.species, f.severity, "blocks release" in f.message) for f in found}
    assert got == {("h2o-l", "info", False), ("h2o-l", "error", True), (None, "error", True)}
    assert all("[bold]looks like kcal" in f.message for f in found)  # the note, literally


# -- reaction-closure -----------------------------------------------------------------------------------

def _water_set() -> list[dict]:
    return [record("h2-g", "H2", "g", **H2), record("o2-g", "O2", "g", **O2), *water()]


def _reaction(equation: str, **values) -> dict:
    return {"id": "r1", "revision": 1, "equation": equation, **values}


def test_measured_reaction_consistent_with_species_passes() -> None:
    # The formation of H2O(l) measured as −285.83 ± 0.04 kJ/mol (CODATA 1989), and its ΔrG° and log K
    # from the NBS 1982 ΔfG° −237.129 (from memory): log10 K = 237129 / (R T ln 10).
    log_k = 237129 / (8.314462618 * 298.15 * math.log(10))
    rx = {"r1": _reaction("H2(g) + 1/2 O2(g) = H2O(l)", drH={"value": -285.83, "uncertainty": 0.04},
                          drG={"value": -237.129, "uncertainty": 0.05},
                          logK={"value": round(log_k, 3), "uncertainty": 0.01})}
    assert findings(context(_water_set(), reactions=rx), "reaction-closure") == []


def test_measured_reaction_disagreeing_is_an_error_with_numbers() -> None:
    rx = {"r1": _reaction("h2-g + 0.5 o2-g -> h2o-l", drH={"value": -290.0, "uncertainty": 0.5})}
    found = findings(context(_water_set(), reactions=rx), "reaction-closure")
    assert [(f.field, f.severity) for f in found] == [("drH", "error")]
    f = found[0]
    assert f.observed == -290.0 and f.expected == pytest.approx(-285.83, abs=1e-9)
    assert abs(f.observed - f.expected) > f.tolerance > 1.0


@pytest.mark.parametrize(("equation", "words"), [
    ("H2(g) + O2(g) = H2O(l)", "balance"),
    ("H2(g) + 1/2 O2(g) = H2O2(l)", "H2O2"),
    ("H2(g) + 1/2 O2(g)", "="),
])
def test_bad_equation_is_an_error_with_the_reason(equation: str, words: str) -> None:
    rx = {"r1": _reaction(equation, drH={"value": -285.83})}
    found = findings(context(_water_set(), reactions=rx), "reaction-closure")
    assert [(f.field, f.severity) for f in found] == [("equation", "error")]
    assert words in found[0].message and "r1" in found[0].message
