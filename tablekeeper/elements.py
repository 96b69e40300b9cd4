"""Element reference states: their standard entropies, and the translational entropy of an ideal gas.

This module owns the built-in table of S°(298.15 K, p° = 1 bar) of the elements in their reference
states, which the Gibbs-consistency check uses to turn S° into ΔfS° when a dataset does not carry its
own reference species. Each entry gives the reference species, its atoms per molecule, S° per mole
of that species, the standard uncertainty where the compilation gives one, and its citation.

Values are **from memory** of the compilations named below (not copied from a file); a dataset that
carries its own reference species overrides them. The sources:

* ``CODATA-1989``: J. D. Cox, D. D. Wagman, V. A. Medvedev, *CODATA Key Values for Thermodynamics*,
  Hemisphere, New York, 1989 (p° = 1 bar). The ± values are used as standard uncertainties; CODATA
  quotes them as its estimate of the overall uncertainty, so this is the conservative reading.
  CODATA lists white phosphorus as the reference state of P, and so does this table.
* ``NBS-1982``: D. D. Wagman et al., *The NBS tables of chemical thermodynamic properties*,
  J. Phys. Chem. Ref. Data 11, Suppl. 2 (1982) (p° = 1 bar), for elements CODATA does not cover.
  NBS gives no uncertainties; the floor ``ELEMENT_S_FLOOR`` applies to them.
* ``JANAF-1998``: M. W. Chase, *NIST-JANAF Thermochemical Tables*, 4th ed., J. Phys. Chem. Ref. Data
  Monograph 9 (1998), for Sr and Ba, where the NBS values recalled (52.3 and 62.8) disagree with
  the later evaluations that current tables use. These two are not from memory: they are implied by
  the M(g) rows of the JANAF table that the ``chemicals`` package carries, S°(cr) = S°(g) − (ΔfH° −
  ΔfG°)/T (tests/checks/test_elements.py recomputes them).

It also owns ``translational_entropy`` (Sackur–Tetrode), computed from the CODATA 2018 constants and
never typed in as numbers per gas, and the entropy of the ideal electron gas that follows from it,
used for gas-phase ions under the electron-gas convention.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

# -- CODATA 2018 constants (SI 2019: h, k_B and N_A are exact) -----------------------------------------
PLANCK = 6.62607015e-34          # h, J·s
BOLTZMANN = 1.380649e-23         # k_B, J/K
AVOGADRO = 6.02214076e23         # N_A, 1/mol
ATOMIC_MASS_CONSTANT = 1.66053906660e-27  # u = m(12C)/12, kg (CODATA 2018)
R = AVOGADRO * BOLTZMANN         # 8.314462618... J/(mol·K)
ELECTRON_MOLAR_MASS = 5.48579909065e-4  # g/mol, electron relative atomic mass (CODATA 2018)

T_REF = 298.15          # K
P_STANDARD = 1.0e5      # Pa (p° = 1 bar, IUPAC)

#: Floor of the standard uncertainty of an element's reference entropy, per atom, J/(mol·K).
#: Compilations disagree on element entropies by about this much per atom (e.g. O2: CODATA 205.152,
#: NBS 1982 205.138; S(rhombic): 32.054 against 31.80, H2 130.680 against 130.684), and most tables
#: print element entropies to 0.1 or 0.01 J/(mol·K): half a unit of 0.1 is 0.05. Applied to every
#: element whatever its source, so that data built on a sister compilation is not failed for that.
ELEMENT_S_FLOOR = 0.05


def translational_entropy(molar_mass: float | np.ndarray, T: float = T_REF, p: float = P_STANDARD,
                          degeneracy: float = 1.0) -> np.ndarray:
    """Sackur–Tetrode molar entropy of an ideal gas of particles of ``molar_mass`` g/mol, J/(mol·K).

    S = R·[ln((2π m k_B T / h²)^{3/2} · k_B T / p) + 5/2] + R ln g, with m = M_r·u. A monatomic gas
    with a non-degenerate ground state has exactly this entropy; every other gas has more (rotation,
    vibration, electronic states). ``degeneracy`` g adds R ln g (2 for the electron's spin).
    """
    m = np.asarray(molar_mass, dtype=float) * ATOMIC_MASS_CONSTANT
    with np.errstate(divide="ignore", invalid="ignore"):
        q = (2.0 * np.pi * m * BOLTZMANN * T / PLANCK**2) ** 1.5 * BOLTZMANN * T / p
        return R * (np.log(q) + 2.5 + np.log(degeneracy))


#: S°(e−, g, 298.15 K, 1 bar) of the ideal electron gas (spin degeneracy 2): 20.979 J/(mol·K).
#: (At p = 1 atm the same formula gives 20.869; tables quoting 20.87 use the old 1 atm state.)
ELECTRON_S298 = float(translational_entropy(ELECTRON_MOLAR_MASS, degeneracy=2.0))


@dataclass(frozen=True)
class ElementReference:
    """The reference state of one element and its standard entropy."""

    element: str
    species: str            # formula(phase[, form]) of the reference species
    atoms: int              # atoms per molecule of the reference species
    S298: float             # J/(mol·K) per mole of the reference species
    u_S298: float | None    # standard uncertainty, J/(mol·K) per mole of the species; None: not given
    source: str             # key into CITATIONS

    def __post_init__(self) -> None:
        if self.atoms < 1 or not self.S298 > 0:
            raise ValueError(f"{self.element}: atoms and S298 must be positive")

    @property
    def S_per_atom(self) -> float:
        return self.S298 / self.atoms

    @property
    def u_per_atom(self) -> float:
        """Standard uncertainty per atom, never below ``ELEMENT_S_FLOOR``."""
        u = 0.0 if self.u_S298 is None else self.u_S298 / self.atoms
        return max(u, ELEMENT_S_FLOOR)


CITATIONS: dict[str, str] = {
    "CODATA-1989": "CODATA Key Values for Thermodynamics (Cox, Wagman & Medvedev, 1989), from memory",
    "NBS-1982": "NBS tables of chemical thermodynamic properties (Wagman et al., J. Phys. Chem. Ref. "
                "Data 11, Suppl. 2, 1982), from memory",
    "JANAF-1998": "NIST-JANAF Thermochemical Tables, 4th ed. (Chase, 1998), as implied by its M(g) rows",
}

_C, _N, _J = "CODATA-1989", "NBS-1982", "JANAF-1998"

# element, reference species, atoms per molecule, S° J/(mol·K), u, source  (from memory, see above)
_TABLE: tuple[tuple[str, str, int, float, float | None, str], ...] = (
    ("H", "H2(g)", 2, 130.680, 0.003, _C),
    ("O", "O2(g)", 2, 205.152, 0.005, _C),
    ("N", "N2(g)", 2, 191.609, 0.004, _C),
    ("F", "F2(g)", 2, 202.791, 0.005, _C),
    ("Cl", "Cl2(g)", 2, 223.081, 0.010, _C),
    ("Br", "Br2(l)", 2, 152.210, 0.30, _C),
    ("I", "I2(cr)", 2, 116.14, 0.30, _C),
    ("He", "He(g)", 1, 126.153, 0.002, _C),
    ("Ne", "Ne(g)", 1, 146.328, 0.003, _C),
    ("Ar", "Ar(g)", 1, 154.846, 0.003, _C),
    ("Kr", "Kr(g)", 1, 164.085, 0.003, _C),
    ("Xe", "Xe(g)", 1, 169.685, 0.003, _C),
    ("C", "C(cr, graphite)", 1, 5.74, 0.10, _C),
    ("S", "S(cr, rhombic)", 1, 32.054, 0.050, _C),
    ("P", "P(cr, white)", 1, 41.09, 0.25, _C),
    ("Si", "Si(cr)", 1, 18.81, 0.08, _C),
    ("Ge", "Ge(cr)", 1, 31.09, 0.15, _C),
    ("Sn", "Sn(cr, white)", 1, 51.18, 0.08, _C),
    ("Pb", "Pb(cr)", 1, 64.80, 0.30, _C),
    ("B", "B(cr, beta)", 1, 5.90, 0.08, _C),
    ("Al", "Al(cr)", 1, 28.30, 0.10, _C),
    ("Zn", "Zn(cr)", 1, 41.63, 0.15, _C),
    ("Cd", "Cd(cr)", 1, 51.80, 0.15, _C),
    ("Hg", "Hg(l)", 1, 75.90, 0.12, _C),
    ("Cu", "Cu(cr)", 1, 33.15, 0.08, _C),
    ("Ag", "Ag(cr)", 1, 42.55, 0.20, _C),
    ("Ti", "Ti(cr)", 1, 30.72, 0.10, _C),
    ("U", "U(cr)", 1, 50.20, 0.20, _C),
    ("Th", "Th(cr)", 1, 51.8, 0.5, _C),
    ("Be", "Be(cr)", 1, 9.50, 0.08, _C),
    ("Mg", "Mg(cr)", 1, 32.67, 0.10, _C),
    ("Ca", "Ca(cr)", 1, 41.59, 0.40, _C),
    ("Li", "Li(cr)", 1, 29.12, 0.20, _C),
    ("Na", "Na(cr)", 1, 51.30, 0.20, _C),
    ("K", "K(cr)", 1, 64.68, 0.20, _C),
    ("Rb", "Rb(cr)", 1, 76.78, 0.30, _C),
    ("Cs", "Cs(cr)", 1, 85.23, 0.40, _C),
    # Elements CODATA 1989 does not cover: NBS 1982.
    ("Fe", "Fe(cr, alpha)", 1, 27.28, None, _N),
    ("Ni", "Ni(cr)", 1, 29.87, None, _N),
    ("Cr", "Cr(cr)", 1, 23.77, None, _N),
    ("Mn", "Mn(cr, alpha)", 1, 32.01, None, _N),
    ("Co", "Co(cr)", 1, 30.04, None, _N),
    ("Ba", "Ba(cr)", 1, 62.48, None, _J),
    ("Sr", "Sr(cr)", 1, 55.69, None, _J),
    ("V", "V(cr)", 1, 28.91, None, _N),
    ("Mo", "Mo(cr)", 1, 28.66, None, _N),
    ("W", "W(cr)", 1, 32.64, None, _N),
    ("Zr", "Zr(cr)", 1, 38.99, None, _N),
    ("Nb", "Nb(cr)", 1, 36.40, None, _N),
    ("Ta", "Ta(cr)", 1, 41.51, None, _N),
    ("Hf", "Hf(cr)", 1, 43.56, None, _N),
    ("Au", "Au(cr)", 1, 47.40, None, _N),
    ("Pt", "Pt(cr)", 1, 41.63, None, _N),
    ("Pd", "Pd(cr)", 1, 37.57, None, _N),
    ("Rh", "Rh(cr)", 1, 31.51, None, _N),
    ("Ru", "Ru(cr)", 1, 28.53, None, _N),
    ("Ir", "Ir(cr)", 1, 35.48, None, _N),
    ("Re", "Re(cr)", 1, 36.86, None, _N),
    ("Sb", "Sb(cr)", 1, 45.69, None, _N),
    ("Bi", "Bi(cr)", 1, 56.74, None, _N),
    ("As", "As(cr, gray)", 1, 35.1, None, _N),
    ("Se", "Se(cr, black)", 1, 42.442, None, _N),
    ("Te", "Te(cr)", 1, 49.71, None, _N),
    ("Ga", "Ga(cr)", 1, 40.88, None, _N),
    ("In", "In(cr)", 1, 57.82, None, _N),
    ("Tl", "Tl(cr)", 1, 64.18, None, _N),
    ("Sc", "Sc(cr)", 1, 34.64, None, _N),
    ("Y", "Y(cr)", 1, 44.43, None, _N),
    ("La", "La(cr)", 1, 56.9, None, _N),
    ("Ce", "Ce(cr)", 1, 72.0, None, _N),
)

#: Element symbol → its built-in reference entry.
REFERENCES: dict[str, ElementReference] = {
    el: ElementReference(el, sp, n, s, u, src) for el, sp, n, s, u, src in _TABLE
}


def reference(element: str) -> ElementReference | None:
    """The built-in reference entry of an element, or None when the table does not cover it."""
    return REFERENCES.get(element)


def citation(element: str) -> str | None:
    ref = REFERENCES.get(element)
    return None if ref is None else CITATIONS[ref.source]
