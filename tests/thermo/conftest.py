"""Record builders shared by the thermochemistry tests (species records in the on-disk shape)."""

from __future__ import annotations

from collections.abc import Callable

import pytest

# NIST Chemistry WebBook, CO2 gas-phase Shomate coefficients (Chase 1998, NIST-JANAF 4th ed. fit);
# from memory.
CO2_SHOMATE = {"kind": "shomate", "ranges": [
    {"tmin": 298, "tmax": 1200, "A": 24.99735, "B": 55.18696, "C": -33.69137, "D": 7.948387,
     "E": -0.136638, "F": -403.6075, "G": 228.2431, "H": -393.5224},
    {"tmin": 1200, "tmax": 6000, "A": 58.16639, "B": 2.720074, "C": -0.492289, "D": 0.038844,
     "E": -6.447293, "F": -425.9186, "G": 263.6125, "H": -393.5224},
]}

# NIST Chemistry WebBook, N2 gas-phase Shomate coefficients (Chase 1998); from memory.
N2_SHOMATE = {"kind": "shomate", "ranges": [
    {"tmin": 100, "tmax": 500, "A": 28.98641, "B": 1.853978, "C": -9.647459, "D": 16.63537,
     "E": 0.000117, "F": -8.671914, "G": 226.4168, "H": 0.0},
    {"tmin": 500, "tmax": 2000, "A": 19.50583, "B": 19.88705, "C": -8.598535, "D": 1.369784,
     "E": 0.527601, "F": -4.935202, "G": 212.3900, "H": 0.0},
    {"tmin": 2000, "tmax": 6000, "A": 35.51872, "B": 1.128728, "C": -0.196103, "D": 0.014662,
     "E": -4.553760, "F": -18.97091, "G": 224.9810, "H": 0.0},
]}

# GRI-Mech 3.0 thermo data (Smith et al., therm.dat), NASA 7-coefficient polynomials; from memory.
O2_NASA7 = {"kind": "nasa7", "ranges": [
    {"tmin": 200, "tmax": 1000, "a": [3.78245636e00, -2.99673416e-03, 9.84730201e-06, -9.68129509e-09,
                                      3.24372837e-12, -1.06394356e03, 3.65767573e00]},
    {"tmin": 1000, "tmax": 3500, "a": [3.28253784e00, 1.48308754e-03, -7.57966669e-07, 2.09470555e-10,
                                       -2.16717794e-14, -1.08845772e03, 5.45323129e00]},
]}
N2_NASA7 = {"kind": "nasa7", "ranges": [
    {"tmin": 300, "tmax": 1000, "a": [3.298677e00, 1.4082404e-03, -3.963222e-06, 5.641515e-09,
                                      -2.444854e-12, -1.0208999e03, 3.950372e00]},
    {"tmin": 1000, "tmax": 5000, "a": [2.92664e00, 1.4879768e-03, -5.68476e-07, 1.0097038e-10,
                                       -6.753351e-15, -9.227977e02, 5.980528e00]},
]}


def _prop(value: float, unit: str, u: float | None, k: float) -> dict:
    out: dict = {"value": value, "unit": unit}
    if u is not None:
        out["uncertainty"] = u
        if k != 1:
            out["coverage"] = k
    return out


def species_record(ident: str, formula: str, phase: str, *, dfH: float | None = None,
                   S: float | None = None, dfG: float | None = None, u_dfH: float | None = None,
                   u_S: float | None = None, u_dfG: float | None = None, k: float = 1,
                   charge: int = 0, form: str | None = None, reference: bool = False,
                   cp_model: dict | None = None, name: str | None = None) -> dict:
    props: dict = {}
    if dfH is not None:
        props["dfH298"] = _prop(dfH, "kJ/mol", u_dfH, k)
    if S is not None:
        props["S298"] = _prop(S, "J/(mol*K)", u_S, k)
    if dfG is not None:
        props["dfG298"] = _prop(dfG, "kJ/mol", u_dfG, k)
    rec: dict = {"id": ident, "formula": formula, "phase": phase, "charge": charge, "status": "draft",
                 "properties": props}
    if form:
        rec["form"] = form
    if reference:
        rec["reference_state"] = True
    if cp_model is not None:
        rec["cp_model"] = cp_model
    if name:
        rec["name"] = name
    return rec


@pytest.fixture
def make_record() -> Callable[..., dict]:
    return species_record


@pytest.fixture
def combustion_species() -> dict[str, dict]:
    """CH4 + O2 → CO2 + H2O(l). CODATA Key Values for Thermodynamics (Cox, Wagman & Medvedev 1989) for
    CO2(g), H2O(l) and O2(g), their ± taken as expanded uncertainties with k = 2 (from memory: CODATA
    quotes about two standard deviations); CH4(g) from NIST-JANAF (Chase 1998) without an uncertainty,
    so that it counts as exact. ΔfG° values: NBS tables (Wagman et al. 1982). All from memory."""
    recs = [
        species_record("ch4-g", "CH4", "g", dfH=-74.87, S=186.25, dfG=-50.72),
        species_record("o2-g", "O2", "g", dfH=0.0, S=205.152, u_S=0.005, k=2, dfG=0.0, reference=True),
        species_record("co2-g", "CO2", "g", dfH=-393.51, u_dfH=0.13, S=213.785, u_S=0.010, k=2,
                       dfG=-394.359),
        species_record("h2o-l", "H2O", "l", dfH=-285.830, u_dfH=0.040, S=69.95, u_S=0.03, k=2,
                       dfG=-237.129),
    ]
    return {r["id"]: r for r in recs}


@pytest.fixture
def published() -> dict[str, dict]:
    """The published Cp models above, fresh copies per test."""
    import copy

    return copy.deepcopy({"co2-shomate": CO2_SHOMATE, "n2-shomate": N2_SHOMATE, "o2-nasa7": O2_NASA7,
                          "n2-nasa7": N2_NASA7})
