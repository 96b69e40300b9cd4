"""Formulas: notation, Hill order, element counts, charge and molar mass against IUPAC atomic weights."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tablekeeper import formula
from tablekeeper.errors import FormulaError, InputError

# IUPAC CIAAW, Standard atomic weights 2021 (Prohaska et al., Pure Appl. Chem. 94, 573 (2022)),
# conventional / abridged values. molmass carries its own table (interval midpoints, older abridged
# values such as Cl 35.453), so masses are compared within 0.01 g/mol.
IUPAC_2021 = {"H": 1.008, "C": 12.011, "N": 14.007, "O": 15.999, "Na": 22.990, "Cl": 35.45, "Ca": 40.078,
              "S": 32.06, "Cu": 63.546}
TOLERANCE = 0.01  # g/mol


def _mass(counts: dict[str, int]) -> float:
    return sum(IUPAC_2021[el] * n for el, n in counts.items())


@pytest.mark.parametrize(("text", "counts"), [
    ("H2O", {"H": 2, "O": 1}),
    ("CH3OH", {"C": 1, "H": 4, "O": 1}),
    ("Ca(OH)2", {"Ca": 1, "O": 2, "H": 2}),
    ("Ca[OH]2", {"Ca": 1, "O": 2, "H": 2}),
    ("Cu(NH3)4SO4", {"Cu": 1, "N": 4, "H": 12, "S": 1, "O": 4}),
    ("CuSO4.5H2O", {"Cu": 1, "S": 1, "O": 9, "H": 10}),
    ("CuSO4·5H2O", {"Cu": 1, "S": 1, "O": 9, "H": 10}),
    ("CuSO4*5H2O", {"Cu": 1, "S": 1, "O": 9, "H": 10}),
    ("CaCl2.2H2O", {"Ca": 1, "Cl": 2, "H": 4, "O": 2}),
    ("Na2CO3", {"Na": 2, "C": 1, "O": 3}),
    ("NaCl", {"Na": 1, "Cl": 1}),
])
def test_element_counts_and_molar_mass(text: str, counts: dict[str, int]) -> None:
    f = formula.parse(text)
    assert f.counts == counts
    assert f.charge == 0
    assert f.atoms == sum(counts.values())
    assert f.molar_mass == pytest.approx(_mass(counts), abs=TOLERANCE)


@pytest.mark.parametrize(("text", "counts", "charge"), [
    ("Cl-", {"Cl": 1}, -1),
    ("Na+", {"Na": 1}, 1),
    ("SO4-2", {"S": 1, "O": 4}, -2),
    ("SO4 2-", {"S": 1, "O": 4}, -2),
    ("Fe+3", {"Fe": 1}, 3),
    ("NH4+", {"N": 1, "H": 4}, 1),
    ("HCO3-", {"H": 1, "C": 1, "O": 3}, -1),
    ("Cu(NH3)4+2", {"Cu": 1, "N": 4, "H": 12}, 2),
])
def test_charges(text: str, counts: dict[str, int], charge: int) -> None:
    f = formula.parse(text)
    assert (f.counts, f.charge) == (counts, charge)


@pytest.mark.parametrize("text", ["Cl-", "Na+", "SO4-2", "NH4+"])
def test_an_ion_weighs_its_neutral_formula_less_its_electrons(text: str) -> None:
    f = formula.parse(text)
    electron = 5.48579909065e-4  # g/mol, CODATA 2018 electron molar mass
    neutral = sum(formula.parse(el).molar_mass * n for el, n in f.elements)
    assert f.molar_mass == pytest.approx(neutral - f.charge * electron, abs=1e-9)
    assert f.molar_mass == pytest.approx(_mass(f.counts), abs=TOLERANCE)


@pytest.mark.parametrize(("text", "hill"), [
    ("CH3OH", "CH4O"),          # methanol: C first, then H, then the rest alphabetically
    ("C2H5OH", "C2H6O"),
    ("CHCl3", "CHCl3"),
    ("CCl4", "CCl4"),           # carbon without hydrogen: C, then alphabetical
    ("OC(NH2)2", "CH4N2O"),     # urea
    ("H2SO4", "H2O4S"),         # no carbon: strictly alphabetical, H included
    ("NaCl", "ClNa"),
    ("HCl", "ClH"),
    ("NH4+", "H4N+"),
    ("SO4 2-", "O4S-2"),
    ("CuSO4.5H2O", "CuH10O9S"),
])
def test_hill_order(text: str, hill: str) -> None:
    assert formula.parse(text).hill == hill


def test_hill_order_is_a_tuple_in_order() -> None:
    assert formula.parse("CH3OH").elements == (("C", 1), ("H", 4), ("O", 1))
    assert [el for el, _ in formula.parse("H2SO4").elements] == ["H", "O", "S"]


@pytest.mark.parametrize(("text", "mass"), [
    ("H2O", 2 * 1.008 + 15.999),
    ("CH3OH", 12.011 + 4 * 1.008 + 15.999),
    ("NaCl", 22.990 + 35.45),
    ("CaCO3", 40.078 + 12.011 + 3 * 15.999),
    ("CuSO4.5H2O", 63.546 + 32.06 + 9 * 15.999 + 10 * 1.008),
    ("N2", 2 * 14.007),
])
def test_molar_mass_against_iupac_2021(text: str, mass: float) -> None:
    # IUPAC CIAAW 2021 conventional atomic weights (see IUPAC_2021 above).
    assert formula.parse(text).molar_mass == pytest.approx(mass, abs=TOLERANCE)


@pytest.mark.parametrize("text", ["", "   ", "h2o", "Xx2", "H2O)", "(H2O", "=H2O", "H2O; rm -rf", "H$", "123",
                                  "H2O\x00", "C" * 201, "Fe<3>", None, 42])
def test_bad_formulas_are_refused_with_formula_error(text: object) -> None:
    with pytest.raises(FormulaError) as info:
        formula.parse(text)  # type: ignore[arg-type]
    assert isinstance(info.value, InputError)
    assert info.value.field == "formula"


def test_the_error_names_the_formula() -> None:
    with pytest.raises(FormulaError, match="'Xx2'"):
        formula.parse("Xx2")


@given(st.text(max_size=30))
@settings(max_examples=400, deadline=None)
def test_fuzzed_text_raises_only_formula_error(text: str) -> None:
    try:
        f = formula.parse(text)
    except FormulaError:
        return
    assert f.counts and all(n > 0 for n in f.counts.values())
    assert f.molar_mass > 0


@given(st.text(alphabet="CHONSClNaFe()[]0123456789.·+- ", max_size=20))
@settings(max_examples=400, deadline=None)
def test_fuzzed_formula_like_text_raises_only_formula_error(text: str) -> None:
    try:
        f = formula.parse(text)
    except FormulaError:
        return
    # Whatever parses has a consistent Hill string: it parses again to the same counts and charge.
    again = formula.parse(f.hill)
    assert (again.counts, again.charge) == (f.counts, f.charge)


@pytest.mark.parametrize("text", ["D2O", "1HC", "[13C]O2", "2H2O"])
def test_isotope_labelled_formula_is_refused_with_a_sentence(text: str) -> None:
    # molmass reads D and a leading mass number as an isotope; the checks know natural elements only,
    # so such a formula is refused rather than silently checked against the wrong element.
    with pytest.raises(FormulaError, match="only natural elements are supported"):
        formula.parse(text)
