"""The built-in element entropies and the Sackur–Tetrode function, against published values."""

from __future__ import annotations

import math
from pathlib import Path

import chemicals
import numpy as np
import pandas as pd
import pytest

from tablekeeper import elements as E
from tablekeeper.formula import parse

# CODATA Key Values for Thermodynamics (Cox, Wagman & Medvedev, 1989), S°(298.15 K, 1 bar) of the
# noble gases in J/(mol·K), from memory. Monatomic gases with a non-degenerate ground state: their
# entropy is purely translational, so Sackur–Tetrode must reproduce it.
CODATA_NOBLE_GAS_S = {"He": 126.153, "Ne": 146.328, "Ar": 154.846, "Kr": 164.085, "Xe": 169.685}


@pytest.mark.parametrize("gas", sorted(CODATA_NOBLE_GAS_S))
def test_sackur_tetrode_reproduces_codata_noble_gas_entropies(gas: str) -> None:
    molar_mass = parse(gas).molar_mass  # IUPAC standard atomic weight through molmass
    s = float(E.translational_entropy(molar_mass))
    assert s == pytest.approx(CODATA_NOBLE_GAS_S[gas], abs=0.01)


def test_translational_entropy_follows_the_standard_state_change_of_the_design() -> None:
    # DESIGN section 5: ideal-gas S° rises by R ln 1.01325 going from 1 atm to 1 bar.
    m = 39.948
    s_bar = float(E.translational_entropy(m, p=1.0e5))
    s_atm = float(E.translational_entropy(m, p=101325.0))
    assert s_bar - s_atm == pytest.approx(E.R * math.log(1.01325), rel=1e-12)


def test_constants_are_codata_2018() -> None:
    # CODATA 2018: R = N_A·k = 8.314462618 J/(mol·K) (DESIGN section 5).
    assert E.R == pytest.approx(8.314462618, abs=1e-9)


def test_electron_gas_entropy_matches_janaf() -> None:
    # NIST-JANAF Thermochemical Tables (Chase 1998), electron gas, S°(298.15 K, 1 bar) =
    # 20.979 J/(mol·K), from memory. The JANAF H+(g) row carried by `chemicals` confirms it below
    # (tests/checks/test_gibbs.py passes the JANAF ions under the electron-gas convention).
    assert E.ELECTRON_S298 == pytest.approx(20.979, abs=0.002)


def test_every_entry_has_a_citation_and_a_plausible_value() -> None:
    assert len(E.REFERENCES) >= 60
    for el, ref in E.REFERENCES.items():
        assert ref.element == el
        assert ref.source in E.CITATIONS
        assert 0 < ref.S_per_atom < 200
        assert ref.u_per_atom >= E.ELEMENT_S_FLOOR
    # Reference species named in the brief are present with the right atoms per molecule.
    atoms = {"H": 2, "O": 2, "N": 2, "F": 2, "Cl": 2, "Br": 2, "I": 2, "C": 1, "P": 1, "Hg": 1}
    for el, n in atoms.items():
        assert E.REFERENCES[el].atoms == n


def _janaf() -> pd.DataFrame:
    path = Path(chemicals.__file__).parent / "Reactions" / "JANAF_1998.tsv"
    return pd.read_csv(path, sep="\t", index_col=0)


def test_builtin_entropies_agree_with_those_implied_by_nist_janaf() -> None:
    """NIST-JANAF 1998 (the table the `chemicals` package carries): for an element whose monatomic gas
    is listed, ΔfG°(g) = ΔfH°(g) − T·(S°(g) − S°(ref)), so S°(ref) = S°(g) − (ΔfH° − ΔfG°)/T.
    Compilations differ by up to about 0.15 J/(mol·K) per atom (Na: CODATA 51.30, JANAF 51.45;
    Cr: NBS 23.77, JANAF 23.62), so 0.2 is the test bound; a slip of memory would exceed it."""
    janaf = _janaf()
    compared = 0
    for _, row in janaf.iterrows():
        el = row["formula"]
        ref = E.REFERENCES.get(el)
        if ref is None or ref.atoms != 1 or not np.isfinite(row["Gfg"]):
            continue
        implied = row["S0g"] - (row["Hfg"] - row["Gfg"]) / 298.15
        assert implied == pytest.approx(ref.S_per_atom, abs=0.2), el
        compared += 1
    assert compared >= 30

