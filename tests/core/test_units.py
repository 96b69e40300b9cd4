"""Units: the thermochemical calorie, chemists' spellings, per-particle energies, refusals."""

from __future__ import annotations

from fractions import Fraction

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tablekeeper import units
from tablekeeper.errors import InputError, UnitError

# NIST Special Publication 811 (2008), Appendix B.8/B.9: calorie (thermochemical) = 4.184 J exactly.
CAL_TH_IN_J = 4.184
# CODATA 2018 (Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021)): Faraday constant
# F = 96 485.332 12... C/mol, so 1 eV per particle × N_A = 96.485 332 12 kJ/mol.
EV_IN_KJ_PER_MOL = 96.48533212
# CODATA 2018, exact since the 2019 SI: N_A = 6.022 140 76e23 /mol, R = 8.314 462 618 J/(mol K).
AVOGADRO = 6.02214076e23
R = 8.314462618


def test_the_calorie_is_the_thermochemical_calorie() -> None:
    # NIST SP 811: 1 cal_th = 4.184 J exactly (the international-table calorie, 4.1868 J, is not ours).
    assert units.ureg.Quantity(1, "cal").to("J").magnitude == pytest.approx(CAL_TH_IN_J, rel=1e-15)
    assert units.factor_to_canonical("cal/mol", "dfH298") == CAL_TH_IN_J / 1000
    assert units.factor_to_canonical("cal/(mol K)", "S298") == CAL_TH_IN_J


def test_kcal_per_mol_converts_by_exactly_4_184() -> None:
    assert units.factor_to_canonical("kcal/mol", "dfH298") == 4.184  # not 4.184000000000001


@given(st.floats(-1e6, 1e6, allow_nan=False))
@settings(max_examples=100, deadline=None)
def test_a_kcal_value_is_stored_as_value_times_4_184_bit_for_bit(x: float) -> None:
    # The exact decimal product of the number as written and 4.184, rounded once to a double
    # (fractions.Fraction is exact; its float() rounds correctly).
    exact = float(Fraction(repr(x)) * Fraction("4.184"))
    assert units.to_canonical(x, "kcal/mol", "dfH298") == exact
    value, unit, entered = units.parse_quantity(f"{x!r} kcal/mol", "dfH298")
    assert (value, unit, entered) == (exact, "kcal/mol", x)


def test_a_typed_kcal_value_converts_without_binary_noise() -> None:
    # 12.49 × 4.184 = 52.25816 exactly; a binary product would store 52.258160000000004.
    assert repr(units.to_canonical(12.49, "kcal/mol", "dfH298")) == "52.25816"
    assert repr(units.to_canonical(-68.3, "kcal/mol", "dfH298")) == "-285.7672"


@pytest.mark.parametrize("spelling", ["kJ/mol", "kJ mol-1", "kJ mol^-1", "kJ·mol⁻¹", "kJ mol−1", "kJ*mol**-1",
                                      "kJ⋅mol-1"])
def test_chemists_spellings_of_kj_per_mol(spelling: str) -> None:
    assert units.factor_to_canonical(spelling, "dfH298") == 1.0
    assert units.factor_to_canonical(spelling, "dfG298") == 1.0


@pytest.mark.parametrize(("spelling", "factor"), [
    ("J/mol/K", 1.0), ("J K-1 mol-1", 1.0), ("J mol-1 K-1", 1.0), ("J/(mol*K)", 1.0), ("J/(mol K)", 1.0),
    ("J·mol⁻¹·K⁻¹", 1.0), ("cal/(mol K)", CAL_TH_IN_J), ("cal mol-1 K-1", CAL_TH_IN_J),
    ("kJ/(mol K)", 1000.0),
])
def test_spellings_of_molar_entropy(spelling: str, factor: float) -> None:
    assert units.factor_to_canonical(spelling, "S298") == factor
    assert units.factor_to_canonical(spelling, "Cp298") == factor


@pytest.mark.parametrize(("spelling", "factor"), [("J/mol", 1e-3), ("MJ/mol", 1e3), ("kcal mol-1", 4.184),
                                                  ("cal/mol", 4.184e-3)])
def test_other_molar_energies(spelling: str, factor: float) -> None:
    assert units.factor_to_canonical(spelling, "dfH298") == factor


def test_electronvolt_per_particle_is_molar_after_avogadro() -> None:
    # CODATA 2018: e·N_A = F = 96 485.332 12 C/mol → 1 eV = 96.485 332 12 kJ/mol.
    assert units.factor_to_canonical("eV", "dfH298") == pytest.approx(EV_IN_KJ_PER_MOL, rel=1e-9)
    # A per-particle entropy (J/K per molecule) times N_A is a molar entropy: k_B·N_A = R.
    k_b = 1.380649e-23  # Boltzmann constant, exact since the 2019 SI (CODATA 2018)
    # CODATA quotes R = 8.314 462 618... J/(mol K), truncated from the exact product N_A·k_B.
    assert units.to_canonical(k_b, "J/K", "S298") == pytest.approx(R, rel=1e-10)
    assert AVOGADRO == units.AVOGADRO and units.R == R


@pytest.mark.parametrize(("unit", "field", "give"), [
    ("J/(mol K)", "dfH298", "energy per amount (like kJ/mol)"),
    ("K", "dfH298", "energy per amount (like kJ/mol)"),
    ("kJ/mol", "S298", "energy per amount per kelvin (like J/(mol·K))"),
    ("kg", "Cp298", "energy per amount per kelvin (like J/(mol·K))"),
])
def test_wrong_dimension_is_refused_with_a_sentence(unit: str, field: str, give: str) -> None:
    with pytest.raises(UnitError) as info:
        units.factor_to_canonical(unit, field)
    err = info.value
    assert isinstance(err, InputError) and isinstance(err, ValueError)
    assert err.field == field
    assert str(err) == f"field {field}: {unit!r} does not fit {field}, which is a " \
                       f"{units.FIELD_KINDS[field].name}: give {give}"


@pytest.mark.parametrize("text", ["", "   ", "furlong", "kJ/", "kJ mol-", "1/0", "__import__('os')", "mol)",
                                  "dB", "Np", "2 kJ/mol", "kJ/mol*0", "degC/mol"])
def test_nonsense_units_are_refused(text: str) -> None:
    with pytest.raises(UnitError) as info:
        units.factor_to_canonical(text, "dfH298")
    assert info.value.field == "dfH298"


def test_a_field_without_a_unit_is_refused() -> None:
    with pytest.raises(UnitError, match="'charge' is not a field with a unit"):
        units.factor_to_canonical("kJ/mol", "charge")
    with pytest.raises(UnitError):
        units.canonical_unit("formula")


@pytest.mark.parametrize(("text", "expected"), [
    ("-285.83", (-285.83, "kJ/mol", -285.83)),
    ("-68.315 kcal/mol", (-285.82996, "kcal/mol", -68.315)),
    ("  −1.5e2 kJ mol-1 ", (-150.0, "kJ mol-1", -150.0)),
    ("+0.5 eV", (0.5 * units.factor_to_canonical("eV", "dfH298"), "eV", 0.5)),
    (".5", (0.5, "kJ/mol", 0.5)),
])
def test_parse_quantity(text: str, expected: tuple) -> None:
    assert units.parse_quantity(text, "dfH298") == expected


def test_parse_quantity_takes_a_bare_number_in_the_canonical_unit_of_the_field() -> None:
    assert units.parse_quantity("69.95", "S298") == (69.95, "J/(mol*K)", 69.95)


@pytest.mark.parametrize("text", ["", "kJ/mol", "abc", "1..2 kJ/mol", "- 5", "1e kJ/mol", "5 kJ/mol/K",
                                  "1e400", "nan", "inf kJ/mol", "1e308 kcal/mol"])
def test_parse_quantity_refuses_what_is_not_a_quantity(text: str) -> None:
    with pytest.raises(UnitError):
        units.parse_quantity(text, "dfH298")


@given(st.text(max_size=40), st.sampled_from(["dfH298", "dfG298", "S298", "Cp298"]))
@settings(max_examples=300, deadline=None)
def test_fuzzed_unit_text_raises_only_unit_error(text: str, field: str) -> None:
    try:
        f = units.factor_to_canonical(text, field)
    except UnitError:
        return
    assert isinstance(f, float) and f == f and f not in (float("inf"), float("-inf"))


@given(st.one_of(st.text(max_size=40),
                 st.builds(lambda n, u: f"{n} {u}", st.floats(allow_nan=False).map(repr),
                           st.text(alphabet="kJcalmolK/()-1^*· eVMg", max_size=15))),
       st.sampled_from(["dfH298", "S298"]))
@settings(max_examples=300, deadline=None)
def test_fuzzed_quantity_text_raises_only_unit_error(text: str, field: str) -> None:
    try:
        value, unit, entered = units.parse_quantity(text, field)
    except UnitError:
        return
    assert isinstance(value, float) and isinstance(entered, float) and unit
