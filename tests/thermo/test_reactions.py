"""Reactions: parsing, balance, ΔrH°/ΔrS°/ΔrG° with propagated uncertainties, sign-change temperature."""

from __future__ import annotations

import json
import math
from fractions import Fraction

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from tablekeeper.errors import InputError
from tablekeeper.thermo import (
    CAUTION,
    T_REF,
    balance,
    format_uncertain,
    parse_equation,
    reaction_properties,
)

R = 8.314462618  # J/(mol·K), CODATA 2018 (exact product N_A·k)
METHANE = "CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)"


# -- methane combustion against a hand computation ------------------------------------------------------

def test_methane_combustion_matches_the_hand_computation(combustion_species):
    res = reaction_properties(parse_equation(METHANE, combustion_species), combustion_species)
    # Hess's law by hand, CODATA 1989 + JANAF values in conftest (from memory):
    drH = (-393.51) + 2 * (-285.830) - (-74.87) - 2 * 0.0          # = −890.30 kJ/mol
    drS = 213.785 + 2 * 69.95 - 186.25 - 2 * 205.152               # = −242.869 J/(mol·K)
    drG = drH - 298.15 * drS / 1000                                 # = −817.889 kJ/mol
    assert res.drH.nominal_value == pytest.approx(-890.30, abs=1e-9)
    assert res.drH.nominal_value == pytest.approx(drH, abs=1e-12)
    assert res.drS.nominal_value == pytest.approx(-242.869, abs=1e-9)
    assert res.drS.nominal_value == pytest.approx(drS, abs=1e-12)
    assert res.drG.nominal_value == pytest.approx(drG, abs=1e-12)
    assert res.log10K.nominal_value == pytest.approx(-drG * 1000 / (R * 298.15 * math.log(10)), rel=1e-12)
    # Root-sum-square by hand: u = U/k with k = 2; CH4 and the O2 ΔfH° (zero by definition) are exact.
    u_H = math.sqrt((0.13 / 2) ** 2 + (2 * 0.040 / 2) ** 2)                       # 0.07632
    u_S = math.sqrt((0.010 / 2) ** 2 + (2 * 0.03 / 2) ** 2 + (2 * 0.005 / 2) ** 2)  # 0.03082
    u_G = math.sqrt(u_H**2 + (298.15 / 1000 * u_S) ** 2)                           # 0.07687
    u_univ = math.sqrt(u_S**2 + (1000 / 298.15 * u_H) ** 2)                         # 0.2578
    assert res.drH.std_dev == pytest.approx(u_H, rel=1e-9)
    assert res.drS.std_dev == pytest.approx(u_S, rel=1e-9)
    assert res.drG.std_dev == pytest.approx(u_G, rel=1e-9)
    assert res.dS_universe.std_dev == pytest.approx(u_univ, rel=1e-9)
    assert res.drH.std_dev == pytest.approx(0.0763, abs=5e-5)
    # Combustion: strongly spontaneous, heat released into the surroundings, the universe gains entropy.
    assert res.verdict == "spontaneous"
    assert res.dS_surroundings.nominal_value == pytest.approx(890.30 * 1000 / 298.15, rel=1e-12)
    assert res.dS_universe.nominal_value > 0
    assert res.dS_universe.nominal_value == pytest.approx(-drG * 1000 / 298.15, rel=1e-12)
    # The inputs without uncertainty are named.
    assert res.exact_inputs == ("ch4-g dfH298", "ch4-g S298")


def test_methane_gibbs_energy_from_formation_gibbs_energies_agrees(combustion_species):
    # NBS tables (Wagman et al. 1982; from memory) ΔfG°: CO2 −394.359, H2O(l) −237.129, CH4 −50.72.
    res = reaction_properties(parse_equation(METHANE, combustion_species), combustion_species)
    by_hand = -394.359 + 2 * (-237.129) - (-50.72)                   # = −817.897 kJ/mol
    assert res.drG_from_dfG.nominal_value == pytest.approx(by_hand, abs=1e-9)
    # Independent data, same answer within 0.1 kJ/mol: the tables are Gibbs-consistent.
    assert abs(res.drG_from_dfG.nominal_value - res.drG.nominal_value) < 0.1


def test_result_json_carries_every_quantity_with_its_uncertainty(combustion_species):
    res = reaction_properties(parse_equation(METHANE, combustion_species), combustion_species)
    obj = json.loads(json.dumps(res.to_json()))
    assert obj["drH"] == {"value": res.drH.nominal_value, "uncertainty": res.drH.std_dev, "unit": "kJ/mol"}
    assert obj["verdict"] == "spontaneous"
    assert obj["terms"][1] == {"species": "o2-g", "nu": -2.0}
    assert obj["exact_inputs"] == ["ch4-g dfH298", "ch4-g S298"]
    assert "not a safety assessment" in obj["caution"]


# -- sign change ----------------------------------------------------------------------------------------

def _lime(make_record, cp: bool = False):
    # NBS tables (Wagman et al. 1982; from memory): calcite −1206.92 kJ/mol, 92.9 J/(mol·K);
    # CaO(cr) −635.09, 39.75. CO2(g): CODATA 1989 −393.51, 213.785.
    def flat(c: float) -> dict:
        return {"kind": "tabulated", "points": [[250.0, c], [2000.0, c]]}

    recs = [
        make_record("calcite", "CaCO3", "cr", dfH=-1206.92, S=92.9, form="calcite",
                    cp_model=flat(83.5) if cp else None),
        make_record("aragonite", "CaCO3", "cr", dfH=-1207.1, S=88.7, form="aragonite"),
        make_record("cao-cr", "CaO", "cr", dfH=-635.09, S=39.75, cp_model=flat(42.8) if cp else None),
        make_record("co2-g", "CO2", "g", dfH=-393.51, u_dfH=0.13, S=213.785, u_S=0.010, k=2,
                    cp_model=flat(37.1) if cp else None),
    ]
    return {r["id"]: r for r in recs}


def test_limestone_decomposition_turns_spontaneous_near_1100_K(make_record):
    sp = _lime(make_record)
    res = reaction_properties(parse_equation("CaCO3(cr, calcite) = CaO(cr) + CO2(g)", sp), sp)
    drH = -635.09 - 393.51 + 1206.92      # 178.32 kJ/mol
    drS = 39.75 + 213.785 - 92.9          # 160.635 J/(mol·K)
    assert res.verdict == "non-spontaneous"
    assert res.t_sign_change_method == "constant ΔrH and ΔrS"
    assert res.t_sign_change.nominal_value == pytest.approx(drH * 1000 / drS, rel=1e-12)
    # About 1100 K (lime-kiln practice, from memory: calcite decomposes near 900 °C under 1 bar CO2).
    assert 1050 < res.t_sign_change.nominal_value < 1200
    # u(T*) = T*·sqrt((u_H/ΔrH)² + (u_S/ΔrS)²), by hand.
    t = drH * 1000 / drS
    u_t = t * math.sqrt((0.065 / drH) ** 2 + (0.005 / drS) ** 2)
    assert res.t_sign_change.std_dev == pytest.approx(u_t, rel=1e-9)


def test_sign_change_from_models_is_the_root_of_the_closed_form(make_record):
    sp = _lime(make_record, cp=True)
    reaction = parse_equation("calcite = cao-cr + co2-g", sp)
    res = reaction_properties(reaction, sp)
    dH, dS, dCp = 178.32, 160.635, 42.8 + 37.1 - 83.5
    # Constant ΔrCp: ΔrG(T) = ΔH + ΔCp (T − T0) − T (ΔS + ΔCp ln(T/T0)), solved independently.

    def g(t: float) -> float:
        return dH * 1000 + dCp * (t - T_REF) - t * (dS + dCp * math.log(t / T_REF))

    root = brentq(g, 300.0, 2000.0, xtol=1e-12)
    assert res.t_sign_change_method == "models"
    assert res.t_sign_change.nominal_value == pytest.approx(root, abs=1e-5)
    # And at a temperature T the models are used: ΔrH(T) = ΔrH298 + ΔCp (T − T0).
    hot = reaction_properties(reaction, sp, 1000.0)
    assert hot.models_used
    assert hot.drH.nominal_value == pytest.approx(dH + dCp * (1000 - T_REF) / 1000, abs=1e-9)
    assert hot.drS.nominal_value == pytest.approx(dS + dCp * math.log(1000 / T_REF), abs=1e-9)
    assert hot.drG.nominal_value == pytest.approx(g(1000.0) / 1000, abs=1e-9)
    assert hot.verdict == "non-spontaneous"
    assert reaction_properties(reaction, sp, 1300.0).verdict == "spontaneous"


def test_formation_of_co2_at_1000_K_matches_janaf(published, make_record):
    # C(graphite) + O2(g) = CO2(g) at 1000 K through three kinds of model: Shomate (CO2, WebBook),
    # NASA 7 (O2, GRI-Mech 3.0) and tabulated JANAF Cp points for graphite (Chase 1998; from memory).
    # S° at 298.15 K: CODATA 1989 (graphite 5.74, O2 205.152, CO2 213.785; from memory).
    graphite_cp = [[298.15, 8.517], [400, 11.817], [500, 14.623], [600, 16.844], [700, 18.537],
                   [800, 19.827], [900, 20.824], [1000, 21.610], [1100, 22.244]]
    sp = {
        "o2-g": make_record("o2-g", "O2", "g", dfH=0.0, S=205.152, cp_model=published["o2-nasa7"],
                            reference=True),
        "co2-g": make_record("co2-g", "CO2", "g", dfH=-393.51, S=213.785, cp_model=published["co2-shomate"]),
        "c-gr": make_record("c-gr", "C", "cr", dfH=0.0, S=5.74, form="graphite", reference=True,
                            cp_model={"kind": "tabulated", "points": graphite_cp}),
    }
    res = reaction_properties(parse_equation("C(cr, graphite) + O2(g) = CO2(g)", sp), sp, 1000.0)
    # NIST-JANAF CO2(g) at 1000 K (from memory): ΔfH° −394.623 kJ/mol, ΔfG° −395.886 kJ/mol,
    # log Kf 20.679. The straight lines between graphite's Cp points cost a few hundredths of a kJ.
    assert res.drH.nominal_value == pytest.approx(-394.623, abs=0.1)
    assert res.drG.nominal_value == pytest.approx(-395.886, abs=0.1)
    assert res.log10K.nominal_value == pytest.approx(20.679, abs=0.01)
    assert res.models_used


def test_a_species_without_a_model_refuses_other_temperatures(combustion_species):
    reaction = parse_equation(METHANE, combustion_species)
    with pytest.raises(InputError, match=r"record ch4-g, field cp_model: has no Cp\(T\) model, so the "
                                         r"reaction cannot be taken to 500 K"):
        reaction_properties(reaction, combustion_species, 500.0)
    for bad in (0.0, -5.0, math.nan, math.inf):
        with pytest.raises(InputError, match="positive number of kelvin"):
            reaction_properties(reaction, combustion_species, bad)


def test_a_model_that_does_not_reach_T_is_refused(make_record, published):
    sp = {"o2-g": make_record("o2-g", "O2", "g", S=205.152, reference=True, cp_model=published["o2-nasa7"]),
          "o3-g": make_record("o3-g", "O3", "g", dfH=142.7, S=238.9,
                              cp_model={"kind": "tabulated", "points": [[200, 39.2], [1000, 52.0]]})}
    reaction = parse_equation("3 O2(g) = 2 O3(g)", sp)
    with pytest.raises(InputError, match=r"record o3-g.*does not reach both 298\.15 K and 1500 K"):
        reaction_properties(reaction, sp, 1500.0)


def test_missing_values_are_named(make_record):
    sp = {"a": make_record("a", "H2", "g", S=130.68, reference=True),
          "b": make_record("b", "H", "g", dfH=217.998)}
    with pytest.raises(InputError, match=r"record b, field properties.S298: has no S°\(298.15 K\)"):
        reaction_properties(parse_equation("H2(g) = 2 H(g)", sp), sp)


def test_verdict_at_equilibrium_when_zero_is_inside_the_expanded_uncertainty(make_record):
    sp = {"x": make_record("x", "C2H6O", "g", dfH=-10.0, u_dfH=1.0, S=100.0, form="a"),
          "y": make_record("y", "C2H6O", "g", dfH=-10.5, u_dfH=1.0, S=100.0, form="b")}
    res = reaction_properties(parse_equation("x = y", sp), sp)
    assert res.drG.nominal_value == pytest.approx(-0.5)
    assert res.verdict == "at equilibrium"  # |ΔrG°| = 0.5 < 2 u = 2.8 kJ/mol
    assert res.t_sign_change is None and res.t_sign_change_note


# -- parsing ---------------------------------------------------------------------------------------------

def test_terms_by_id_formula_phase_form_and_fractions(combustion_species, make_record):
    sp = dict(combustion_species)
    sp["h2-g"] = make_record("h2-g", "H2", "g", dfH=0.0, S=130.68, reference=True)
    r = parse_equation("h2-g + 1/2 O2(g) → H2O(l)", sp)
    assert r.terms == [(-1.0, "h2-g"), (-0.5, "o2-g"), (1.0, "h2o-l")]
    r = parse_equation("2H2(g)+O2(g)->2 h2o-l", sp)
    assert r.terms == [(-2.0, "h2-g"), (-1.0, "o2-g"), (2.0, "h2o-l")]
    r = parse_equation("0.5 O2(g) + H2(g) = H2O(l)", sp)
    assert r.exact[0] == (Fraction(-1, 2), "o2-g")
    balance(r, sp)
    # A species on both sides keeps its net coefficient.
    r = parse_equation("CH4(g) + 3 O2(g) = CO2(g) + 2 H2O(l) + O2(g)", sp)
    assert dict((s, nu) for nu, s in r.terms)["o2-g"] == -2.0


def test_ions_keep_their_charge_signs(make_record):
    sp = {r["id"]: r for r in [
        make_record("na-aq", "Na+", "aq", dfH=-240.12, S=59.0, charge=1),
        make_record("cl-aq", "Cl-", "aq", dfH=-167.16, S=56.5, charge=-1),
        make_record("nacl-cr", "NaCl", "cr", dfH=-411.15, S=72.13),
        make_record("fe3-aq", "Fe+3", "aq", dfH=-48.5, S=-315.9, charge=3),
    ]}
    r = parse_equation("NaCl(cr) = Na+(aq) + Cl-(aq)", sp)
    assert [s for _, s in r.terms] == ["nacl-cr", "na-aq", "cl-aq"]
    balance(r, sp)
    r = parse_equation("NaCl(cr)=Na+(aq)+Cl-(aq)", sp)
    assert [s for _, s in r.terms] == ["nacl-cr", "na-aq", "cl-aq"]
    sp["fe2-aq"] = make_record("fe2-aq", "Fe+2", "aq", dfH=-89.1, S=-137.7, charge=2)
    with pytest.raises(InputError) as err:
        balance(parse_equation("Fe+2(aq) = Fe+3(aq)", sp), sp)
    assert str(err.value) == "field equation: the charge does not balance: +2 on the left and +3 on the right"


def test_balance_errors_name_the_element(combustion_species):
    with pytest.raises(InputError) as err:
        balance(parse_equation("CH4(g) + O2(g) = CO2(g) + 2 H2O(l)", combustion_species), combustion_species)
    assert str(err.value) == ("field equation: the equation does not balance: O has 2 on the left and 4 "
                              "on the right")
    with pytest.raises(InputError, match="H has 4 on the left and 2 on the right"):
        reaction_properties(parse_equation("CH4(g) + 2 O2(g) = CO2(g) + H2O(l) + O2(g)",
                                           combustion_species), combustion_species)


@pytest.mark.parametrize("text, words", [
    ("", "the equation is empty"),
    ("CH4(g) + 2 O2(g)", "has no '='"),
    ("CH4(g) = CO2(g) = H2O(l)", "exactly one"),
    ("CH4(g) -> CO2(g) = H2O(l)", "exactly one"),
    ("CH4(g) + + O2(g) = CO2(g)", "empty term"),
    (" = CO2(g)", "left side of the equation is empty"),
    ("CH4(s) = CO2(g)", "'s' is not a phase label"),
    ("Xx(g) = CO2(g)", "term 'Xx(g)'"),
    ("NO2(g) = CO2(g)", "no species NO2(g) in the dataset"),
    ("methane = CO2(g)", "term 'methane': no species with that id"),
    ("0 CH4(g) = CO2(g)", "coefficient must be positive"),
    ("1/0 CH4(g) = CO2(g)", "is not a coefficient"),
    ("CO2(g) = CO2(g)", "no net change"),
    ("CO2 = CO2(g)", "neither a species id nor formula(phase)"),
])
def test_bad_equations_name_the_problem(combustion_species, text, words):
    with pytest.raises(InputError) as err:
        parse_equation(text, combustion_species)
    assert words in str(err.value)


def test_an_ambiguous_term_lists_the_candidates(make_record):
    sp = _lime(make_record)
    with pytest.raises(InputError, match=r"ambiguous: it matches aragonite \(form aragonite\), calcite "
                                         r"\(form calcite\); write the id or formula\(phase, form\)"):
        parse_equation("CaCO3(cr) = CaO(cr) + CO2(g)", sp)


# The species fixture is only read, never changed, so sharing it between examples is safe.
_ALPHABET = "CHONaClSFe0123456789()+-=>→/., glaqcrs\t\n−⇌<"


@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.one_of(st.text(max_size=80), st.text(alphabet=_ALPHABET, max_size=60)))
def test_parser_never_raises_anything_but_input_error(combustion_species, text):
    try:
        r = parse_equation(text, combustion_species)
    except InputError:
        return
    # Whatever parses names only species of the dataset, with non-zero coefficients.
    assert r.terms and all(s in combustion_species and nu != 0 for nu, s in r.terms)
    try:
        balance(r, combustion_species)
    except InputError:
        pass


_COEFS = st.sampled_from([(Fraction(1), ""), (Fraction(2), "2 "), (Fraction(2), "2"),
                          (Fraction(1, 2), "1/2 "), (Fraction(1, 2), "0.5 "), (Fraction(3, 2), "3/2"),
                          (Fraction(5, 4), "1.25 ")])
_NAMES = {"ch4-g": ["CH4(g)", "ch4-g", "H4C(g)"], "o2-g": ["O2(g)", "o2-g", "O2( g )"],
          "co2-g": ["CO2(g)", "co2-g"], "h2o-l": ["H2O(l)", "h2o-l", "OH2(l)"]}


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(st.tuples(st.sampled_from(sorted(_NAMES)), _COEFS, st.integers(0, 2)),
                min_size=1, max_size=3, unique_by=lambda t: t[0]),
       st.sampled_from([" = ", "=", " -> ", " → "]), st.sampled_from([" + ", "+"]))
def test_generated_equations_parse_to_their_coefficients(combustion_species, terms, arrow, plus):
    left = terms[: max(1, len(terms) // 2)]
    right = terms[len(left):]
    if not right:
        return
    side = [plus.join(f"{c[1]}{_NAMES[s][k % len(_NAMES[s])]}" for s, c, k in part) for part in (left, right)]
    r = parse_equation(side[0] + arrow + side[1], combustion_species)
    expect = [(-c[0], s) for s, c, _ in left] + [(c[0], s) for s, c, _ in right]
    assert list(r.exact) == expect


def test_format_uncertain_uses_two_significant_digits():
    from uncertainties import ufloat

    assert format_uncertain(ufloat(-890.3, 0.07632), "kJ/mol") == "-890.300 ± 0.076 kJ/mol"
    assert format_uncertain(ufloat(1110.08, 0.41)) == "1110.08 ± 0.41"
    assert format_uncertain(ufloat(12345.0, 150.0)) == "12345 ± 150"
    assert CAUTION.startswith("caution:") and "licensed practice" in CAUTION


def test_a_species_added_between_two_equations_is_seen(make_record):
    sp = _lime(make_record)
    del sp["aragonite"]
    assert parse_equation("CaCO3(cr) = CaO(cr) + CO2(g)", sp).terms[0] == (-1.0, "calcite")
    sp["aragonite"] = make_record("aragonite", "CaCO3", "cr", dfH=-1207.1, S=88.7, form="aragonite")
    with pytest.raises(InputError, match="ambiguous"):
        parse_equation("CaCO3(cr) = CaO(cr) + CO2(g)", sp)
    assert parse_equation("CO3Ca(cr, aragonite) = CaO(cr) + CO2(g)", sp).terms[0] == (-1.0, "aragonite")
