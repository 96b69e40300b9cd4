"""Build the shipped demo dataset ``datasets/kestrel-works/`` from scratch.

The scenario is invented: Kestrel Ridge Works, a fictional mid-size process-chemistry site whose
thermochemistry group keeps one table for its reactor, combustion and water-treatment models. The
sources, authors, report numbers and people are invented. The numbers are not: they are transcribed,
from memory, from published compilations (CODATA Key Values for Thermodynamics, Cox, Wagman & Medvedev
1989; the NIST-JANAF Thermochemical Tables; the NBS tables of chemical thermodynamic properties, Wagman
et al. 1982; Shomate coefficients of the NIST Chemistry WebBook; NASA polynomials of the GRI-Mech 3.0
thermodynamic file; Maier-Kelley heat-capacity fits), so they are realistic but not authoritative.
A dozen faults are seeded on purpose, each marked ``SEEDED`` below and listed in datasets/README.md
with the check expected to find it.

Everything is written through the store (``Dataset.init``, ``Dataset.save``, ``Dataset.save_meta``)
so every file is in canonical form and the journal holds the build history, each step under the
invented user who would have done it. Every record is validated against its JSON Schema before it
is saved. The dataset is built in a temporary folder beside the target and moved into place at the
end, so an interrupted build never leaves a half-written demo.

Usage::

    python datasets/build_demo.py            # rebuilds datasets/kestrel-works/
    python datasets/build_demo.py --out DIR  # builds into DIR (must not exist)
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from tablekeeper import formula, validation
from tablekeeper.store import LOCK_NAME, Dataset
from tablekeeper.units import canonical_unit, factor_to_canonical, scale

HERE = Path(__file__).resolve().parent
TARGET = HERE / "kestrel-works"
NAME = "kestrel-works"

#: Invented user names. No roles are written to dataset.json (a single-user demo, so that whoever
#: opens it may edit); datasets/README.md shows how to add them.
STEWARD = "mhale"
REVIEWER = "pirwin"
RELEASE = "tokafor"

TITLE = "Kestrel Ridge Works: site thermochemistry table"
DESCRIPTION = (
    "Demo dataset of tablekeeper. Kestrel Ridge Works is a fictional process-chemistry site; its "
    "thermochemistry group, its internal reports, notebooks and people are invented. The values are "
    "realistic: they were transcribed, from memory, from published compilations (CODATA Key Values for "
    "Thermodynamics 1989, the NIST-JANAF tables, the NBS 1982 tables, NIST WebBook Shomate coefficients, "
    "GRI-Mech 3.0 NASA polynomials) and are not authoritative. About a dozen faults are seeded on "
    "purpose so that every check has something to find; datasets/README.md lists them. Do not use these "
    "numbers for design or safety work."
)

KJ = "kJ/mol"
JK = "J/(mol*K)"


# -- sources -------------------------------------------------------------------------------------------

SOURCES: list[dict] = [
    {
        "id": "krw-em-003",
        "title": "Evaluated data memo EM-003: element reference states and key values",
        "authors": ["M. Hale", "S. Lindqvist"],
        "year": 2018,
        "identifier": "KRW-EM-003 rev C",
        "kind": "internal",
        "notes": "Values transcribed from CODATA Key Values for Thermodynamics (Cox, Wagman & Medvedev, "
                 "1989) as recalled; the uncertainties are those given there, used as standard "
                 "uncertainties.",
    },
    {
        "id": "krw-tn-014",
        "title": "Combustion gas properties",
        "authors": ["R. Okonkwo", "M. Hale"],
        "year": 2019,
        "identifier": "KRW-TN-014 rev B (internal technical note)",
        "kind": "internal",
        "notes": "Fuel and flue-gas values transcribed from the NIST-JANAF Thermochemical Tables and the NBS "
                 "tables (Wagman et al., 1982) as recalled; uncertainties assigned by the group. Some "
                 "enthalpies were first typed in kcal/mol from an older handbook and converted with the "
                 "thermochemical calorie (4.184 J).",
    },
    {
        "id": "krw-tn-017",
        "title": "Aqueous species for the water-treatment model",
        "authors": ["A. Demir"],
        "year": 2020,
        "identifier": "KRW-TN-017",
        "kind": "internal",
        "notes": "CODATA 1989 key values for the ions where one exists, the NBS 1982 tables otherwise, as "
                 "recalled. Conventional values: H+(aq) has zero enthalpy, Gibbs energy, entropy and heat "
                 "capacity of formation.",
    },
    {
        "id": "krw-tn-019",
        "title": "Heat-capacity model library",
        "authors": ["S. Lindqvist"],
        "year": 2021,
        "identifier": "KRW-TN-019 rev A",
        "kind": "internal",
        "notes": "Shomate coefficients as recalled from the NIST Chemistry WebBook gas-phase tables; NASA "
                 "7-coefficient polynomials as recalled from the GRI-Mech 3.0 thermodynamic file; tabulated "
                 "solids from the JANAF tables and Maier-Kelley fits, rounded. Upper limits are cut to the "
                 "range the site's models use.",
    },
    {
        "id": "krw-tn-021",
        "title": "Solid phases for the calcination, scaling and corrosion models",
        "authors": ["T. Okafor", "M. Hale"],
        "year": 2020,
        "identifier": "KRW-TN-021",
        "kind": "internal",
        "notes": "NBS 1982 tables as recalled; uncertainties assigned by the group, some as expanded "
                 "uncertainties with coverage factor 2.",
    },
    {
        "id": "krw-ln-2291",
        "title": "Laboratory notebook LN-2291: solution calorimetry and solvent blending",
        "authors": ["P. Irwin"],
        "year": 2022,
        "identifier": "KRW-LN-2291",
        "kind": "internal",
    },
    {
        "id": "krw-ln-0412",
        "title": "Laboratory notebook LN-0412: fuel-gas property estimates",
        "authors": ["J. Varga"],
        "year": 2023,
        "identifier": "KRW-LN-0412",
        "kind": "internal",
    },
    {
        "id": "krw-rx-005",
        "title": "Reaction data for checking the reactor model",
        "authors": ["P. Irwin", "R. Okonkwo"],
        "year": 2022,
        "identifier": "KRW-RX-005",
        "kind": "report",
        "notes": "Reaction enthalpies and equilibrium constants re-evaluated from the literature and the "
                 "site's own calorimetry; kept to test the species table by Hess's law.",
    },
    {
        "id": "krw-legacy-2007",
        "title": "Legacy property spreadsheet of site engineering",
        "year": 2007,
        "identifier": "KRW-XLS-2007-PROPS",
        "kind": "other",
        "notes": "Imported as it was; never reviewed.",
    },
]


# -- value helpers -------------------------------------------------------------------------------------

def val(value: float, u: float | None, source: str, method: str = "evaluated", *, field: str = "dfH298",
        k: float | None = None) -> dict:
    """A property value in its canonical unit; ``u`` is a standard uncertainty unless ``k`` is given."""
    out: dict = {"value": value, "unit": canonical_unit(field), "source": source, "method": method}
    if u is not None:
        out["uncertainty"] = u
    if k is not None:
        out["coverage"] = k
    return out


def entered(value: float, u: float, unit: str, source: str, field: str, method: str = "evaluated") -> dict:
    """A value typed in another unit: converted by the core's factor, the entry kept as typed."""
    f = factor_to_canonical(unit, field)
    return {"value": scale(value, f), "unit": canonical_unit(field), "uncertainty": scale(u, f), "source": source,
            "method": method, "entered": {"value": value, "unit": unit, "uncertainty": u}}


def H(value: float, u: float | None, source: str, method: str = "evaluated", k: float | None = None) -> dict:
    return val(value, u, source, method, field="dfH298", k=k)


def G(value: float, u: float | None, source: str, method: str = "evaluated", k: float | None = None) -> dict:
    return val(value, u, source, method, field="dfG298", k=k)


def S(value: float, u: float | None, source: str, method: str = "evaluated", k: float | None = None) -> dict:
    return val(value, u, source, method, field="S298", k=k)


def C(value: float, u: float | None, source: str, method: str = "evaluated") -> dict:
    return val(value, u, source, method, field="Cp298")


def zero(field: str, source: str) -> dict:
    """A value that is zero by definition (element reference state) or by convention (H+(aq))."""
    return val(0.0, 0.0, source, "evaluated", field=field)


def species(ident: str, formula_text: str, phase: str, name: str, props: dict, *, form: str | None = None,
            reference_state: bool = False, status: str = "reviewed", cas: str | None = None,
            cp_model: dict | None = None, notes: str | None = None) -> dict:
    rec: dict = {"id": ident, "revision": 1, "formula": formula_text, "phase": phase, "name": name,
                 "charge": formula.parse(formula_text).charge, "status": status, "properties": props}
    if form:
        rec["form"] = form
    if reference_state:
        rec["reference_state"] = True
    if cas:
        rec["cas"] = cas
    if cp_model:
        rec["cp_model"] = cp_model
    if notes:
        rec["notes"] = notes
    return rec


def shomate(*ranges: tuple) -> dict:
    """Shomate ranges as (tmin, tmax, A, B, C, D, E, F, G, H)."""
    keys = ("tmin", "tmax", "A", "B", "C", "D", "E", "F", "G", "H")
    return {"kind": "shomate", "source": "krw-tn-019",
            "ranges": [dict(zip(keys, r, strict=True)) for r in ranges]}


def nasa7(tmin: float, tmid: float, tmax: float, low: list[float], high: list[float]) -> dict:
    return {"kind": "nasa7", "source": "krw-tn-019",
            "ranges": [{"tmin": tmin, "tmax": tmid, "a": low}, {"tmin": tmid, "tmax": tmax, "a": high}]}


def tabulated(points: list[tuple[float, float]]) -> dict:
    return {"kind": "tabulated", "source": "krw-tn-019", "points": [list(p) for p in points]}


# -- Cp(T) models ---------------------------------------------------------------------------------------
# Shomate coefficients as recalled from the NIST Chemistry WebBook (A..E; F, G, H as published, H being
# the JANAF ΔfH°). Each reproduces its record's Cp°, ΔfH° and S° at 298.15 K to better than 0.2 %,
# 0.02 kJ/mol and 0.01 J/(mol·K). Upper limits are cut where the ideal-gas Cp would pass its classical
# limit (anharmonic and electronic contributions), which the site's models never reach.

M_N2 = shomate(
    (100, 500, 28.98641, 1.853978, -9.647459, 16.63537, 0.000117, -8.671914, 226.4168, 0.0),
    (500, 2000, 19.50583, 19.88705, -8.598535, 1.369784, 0.527601, -4.935202, 212.3900, 0.0),
    (2000, 3000, 35.51872, 1.128728, -0.196103, 0.014662, -4.553760, -18.97091, 224.9810, 0.0),
)
M_O2 = shomate(
    (100, 700, 31.32234, -20.23531, 57.86644, -36.50624, -0.007374, -8.903471, 246.7945, 0.0),
    (700, 1500, 30.03235, 8.772972, -3.988133, 0.788313, -0.741599, -11.32468, 236.1663, 0.0),
)
M_CO2 = shomate(
    (298, 1200, 24.99735, 55.18696, -33.69137, 7.948387, -0.136638, -403.6075, 228.2431, -393.5224),
    (1200, 3000, 58.16639, 2.720074, -0.492289, 0.038844, -6.447293, -425.9186, 263.6125, -393.5224),
)
# The WebBook gives the lower range of water vapour from 500 K; the same coefficients reproduce the
# JANAF Cp° at 298.15 K to 0.01 J/(mol·K), so the group uses them from 298 K.
M_H2O_G = shomate(
    (298, 1700, 30.09200, 6.832514, 6.793435, -2.534480, 0.082139, -250.8810, 223.3967, -241.8264),
    (1700, 3000, 41.96426, 8.622053, -1.499780, 0.098119, -11.15764, -272.1797, 219.7809, -241.8264),
)
# The published upper range of methane meets the lower one 13 J/mol lower in H and 0.010 J/(mol·K) lower
# in S at 1300 K; the group re-anchored its F (-153.5327) and G (224.4143) so that H and S are continuous.
M_CH4 = shomate(
    (298, 1300, -0.703029, 108.4773, -42.52157, 5.862788, 0.678565, -76.84376, 158.7163, -74.87310),
    (1300, 6000, 85.81217, 11.26467, -2.114146, 0.138190, -26.42221, -153.5198, 224.4243, -74.87310),
)

# NASA 7-coefficient polynomials as recalled from the GRI-Mech 3.0 thermodynamic file (a1..a7 per range).
M_H2 = nasa7(200, 1000, 3000,
             [2.34433112, 7.98052075e-03, -1.94781510e-05, 2.01572094e-08, -7.37611761e-12,
              -917.935173, 0.683010238],
             [3.33727920, -4.94024731e-05, 4.99456778e-07, -1.79566394e-10, 2.00255376e-14,
              -950.158922, -3.20502331])
M_CO = nasa7(200, 1000, 3000,
             [3.57953347, -6.10353680e-04, 1.01681433e-06, 9.07005884e-10, -9.04424499e-13,
              -14344.0860, 3.50840928],
             [2.71518561, 2.06252743e-03, -9.98825771e-07, 2.30053008e-10, -2.03647716e-14,
              -14151.8724, 7.81868772])
M_NH3 = nasa7(200, 1000, 3500,
              [4.28602740, -4.66052300e-03, 2.17185130e-05, -2.28088870e-08, 8.26380460e-12,
               -6741.72850, -0.625372770],
              [2.63445210, 5.66625600e-03, -1.72786760e-06, 2.38671610e-10, -1.25787860e-14,
               -6544.69580, 6.56629280])
# SEEDED (cp-continuity): a1 of the high range typed 3.5606056 for 3.2606056, a jump of 0.3 R in Cp
# (and in H and S) at the 1000 K break.
M_NO = nasa7(200, 1000, 2500,
             [4.21847630, -4.63897600e-03, 1.10410220e-05, -9.33613540e-09, 2.80357700e-12,
              9844.62300, 2.28084640],
             [3.56060560, 1.19110430e-03, -4.29170480e-07, 6.94576690e-11, -4.03360990e-15,
              9920.97460, 6.36930270])

# Tabulated (T / K, Cp / J/(mol·K)). Calcite from the Maier-Kelley fit Cp = 104.52 + 21.92e-3 T
# - 25.94e5/T² (Kelley 1960, as recalled); halite and corundum from the JANAF tables, as recalled.
M_CACO3 = tabulated([(298.15, 81.88), (400, 97.07), (500, 105.10), (600, 110.47), (700, 114.57),
                     (800, 118.00), (900, 121.05), (1000, 123.85), (1100, 126.49), (1200, 129.02)])
# Lime from the Maier-Kelley fit Cp = 49.62 + 4.52e-3 T - 6.945e5/T² above 400 K (Kelley 1960, as
# recalled), joined to the NBS Cp° at 298.15 K, so that the calcination can be computed at kiln heat.
M_CAO = tabulated([(298.15, 42.80), (400, 47.09), (500, 49.10), (600, 50.40), (700, 51.37), (800, 52.15),
                   (900, 52.83), (1000, 53.45), (1100, 54.02), (1200, 54.56)])
M_NACL = tabulated([(298.15, 50.50), (400, 51.97), (500, 53.21), (600, 54.54), (700, 56.04),
                    (800, 57.77)])
M_AL2O3 = tabulated([(298.15, 79.04), (400, 96.09), (500, 106.10), (600, 112.55), (700, 117.00),
                     (800, 120.15), (900, 122.60), (1000, 124.60), (1200, 127.80), (1500, 131.20)])


# -- species --------------------------------------------------------------------------------------------

EM, TN14, TN17, TN19, TN21 = "krw-em-003", "krw-tn-014", "krw-tn-017", "krw-tn-019", "krw-tn-021"


def _element(ident: str, formula_text: str, phase: str, name: str, s: dict, cp: dict, *,
             form: str | None = None, cas: str | None = None, cp_model: dict | None = None,
             source: str = EM, dfH: dict | None = None) -> dict:
    props = {"dfH298": dfH or zero("dfH298", source), "dfG298": zero("dfG298", source), "S298": s,
             "Cp298": cp}
    return species(ident, formula_text, phase, name, props, form=form, reference_state=True, cas=cas,
                   cp_model=cp_model, notes="Element in its reference state: ΔfH° and ΔfG° are zero by "
                   "definition.")


ELEMENTS: list[dict] = [
    _element("h2-g", "H2", "g", "hydrogen", S(130.680, 0.003, EM), C(28.836, 0.002, TN14),
             cas="1333-74-0", cp_model=M_H2),
    _element("o2-g", "O2", "g", "oxygen", S(205.152, 0.005, EM), C(29.376, 0.003, TN14),
             cas="7782-44-7", cp_model=M_O2),
    _element("n2-g", "N2", "g", "nitrogen", S(191.609, 0.004, EM), C(29.124, 0.003, TN14),
             cas="7727-37-9", cp_model=M_N2),
    _element("cl2-g", "Cl2", "g", "chlorine", S(223.081, 0.010, EM), C(33.949, 0.010, TN14),
             cas="7782-50-5"),
    # Cp° of a monatomic ideal gas is 5/2 R = 20.78616 J/(mol·K); tables print 20.786.
    _element("ar-g", "Ar", "g", "argon", S(154.846, 0.003, EM), C(20.786, 0.001, TN14), cas="7440-37-1"),
    _element("he-g", "He", "g", "helium", S(126.153, 0.002, EM), C(20.786, 0.001, TN14), cas="7440-59-7"),
    _element("c-cr-graphite", "C", "cr", "carbon (graphite)", S(5.74, 0.10, EM), C(8.517, 0.020, TN21),
             form="graphite", cas="7782-42-5"),
    _element("s-cr-rhombic", "S", "cr", "sulfur (rhombic)", S(32.054, 0.050, EM), C(22.64, 0.05, TN21),
             form="rhombic", cas="7704-34-9"),
    _element("na-cr", "Na", "cr", "sodium", S(51.30, 0.20, EM), C(28.24, 0.05, TN21), cas="7440-23-5"),
    _element("ca-cr", "Ca", "cr", "calcium", S(41.59, 0.40, EM), C(25.93, 0.10, TN21), cas="7440-70-2"),
    _element("fe-cr-alpha", "Fe", "cr", "iron (alpha)", S(27.28, 0.13, TN21), C(25.10, 0.05, TN21),
             form="alpha", cas="7439-89-6", source=TN21),
    _element("al-cr", "Al", "cr", "aluminium", S(28.30, 0.10, EM), C(24.20, 0.05, TN21), cas="7429-90-5"),
    # SEEDED (element-reference): the ΔfH° of Si(g), 450 kJ/mol, typed over the zero of the crystal's
    # row (its exact-zero uncertainty left as it was).
    _element("si-cr", "Si", "cr", "silicon", S(18.81, 0.08, EM), C(20.00, 0.05, TN21), cas="7440-21-3",
             dfH=H(450.0, 0.0, EM)),
]

GASES: list[dict] = [
    species("co-g", "CO", "g", "carbon monoxide",
            {"dfH298": H(-110.53, 0.17, EM), "S298": S(197.660, 0.004, EM), "dfG298": G(-137.17, 0.17, EM,
             "derived"), "Cp298": C(29.142, 0.005, TN14)}, cas="630-08-0", cp_model=M_CO),
    species("co2-g", "CO2", "g", "carbon dioxide",
            {"dfH298": H(-393.51, 0.13, EM), "S298": S(213.785, 0.010, EM), "dfG298": G(-394.37, 0.13, EM,
             "derived"), "Cp298": C(37.13, 0.02, TN14)}, cas="124-38-9", cp_model=M_CO2),
    species("h2o-g", "H2O", "g", "water vapour",
            {"dfH298": H(-241.826, 0.040, EM), "S298": S(188.835, 0.010, EM),
             "dfG298": G(-228.58, 0.04, EM, "derived"), "Cp298": C(33.59, 0.02, TN14)},
            cas="7732-18-5", cp_model=M_H2O_G),
    species("ch4-g", "CH4", "g", "methane",
            {"dfH298": H(-74.87, 0.34, TN14), "S298": S(186.25, 0.20, TN14), "dfG298": G(-50.77, 0.35, TN14),
             "Cp298": C(35.69, 0.05, TN14)}, cas="74-82-8", cp_model=M_CH4),
    # SEEDED (reference): ΔfH° cites KRW-TN-022, a note that was never filed in sources/.
    species("c2h6-g", "C2H6", "g", "ethane",
            {"dfH298": H(-84.68, 0.40, "krw-tn-022"), "S298": S(229.60, 0.30, TN14),
             "dfG298": G(-32.82, 0.40, TN14), "Cp298": C(52.63, 0.10, TN14)}, cas="74-84-0"),
    # SEEDED (gas-entropy-floor): a group-additivity estimate of S° that lost a contribution; ΔfG° was
    # derived from it, so the record is consistent with itself and only the floor catches it.
    species("c3h8-g", "C3H8", "g", "propane",
            {"dfH298": H(-103.85, 0.50, TN14), "S298": S(127.0, 2.0, "krw-ln-0412", "estimated"),
             "dfG298": G(19.27, 0.80, "krw-ln-0412", "derived"), "Cp298": C(73.6, 0.3, TN14)},
            cas="74-98-6", status="draft", notes="S° estimated by group additivity in LN-0412, p. 31."),
    species("c2h4-g", "C2H4", "g", "ethylene",
            {"dfH298": entered(12.49, 0.10, "kcal/mol", TN14, "dfH298"), "S298": S(219.56, 0.20, TN14),
             "dfG298": G(68.15, 0.45, TN14), "Cp298": C(43.56, 0.10, TN14)}, cas="74-85-1",
            notes="ΔfH° typed in kcal/mol from the older handbook and converted."),
    species("c2h2-g", "C2H2", "g", "acetylene",
            {"dfH298": entered(54.19, 0.20, "kcal/mol", TN14, "dfH298"), "S298": S(200.94, 0.20, TN14),
             "dfG298": G(209.20, 0.85, TN14), "Cp298": C(43.93, 0.10, TN14)}, cas="74-86-2",
            notes="ΔfH° typed in kcal/mol from the older handbook and converted."),
    species("nh3-g", "NH3", "g", "ammonia",
            {"dfH298": H(-45.94, 0.35, EM), "S298": S(192.77, 0.05, EM), "dfG298": G(-16.41, 0.35, EM,
             "derived"), "Cp298": C(35.63, 0.05, TN14)}, cas="7664-41-7", cp_model=M_NH3),
    # SEEDED (cp-continuity) in M_NO. The JANAF values (not the NBS 90.25 kJ/mol) match the polynomial.
    species("no-g", "NO", "g", "nitric oxide",
            {"dfH298": H(91.28, 0.17, TN14), "S298": S(210.76, 0.05, TN14), "dfG298": G(87.59, 0.17, TN14),
             "Cp298": C(29.86, 0.02, TN14)}, cas="10102-43-9", cp_model=M_NO),
    # SEEDED (gibbs-consistency): ΔfG° typed 15.31 for 51.31 kJ/mol.
    species("no2-g", "NO2", "g", "nitrogen dioxide",
            {"dfH298": H(33.18, 0.40, TN14), "S298": S(240.06, 0.10, TN14), "dfG298": G(15.31, 0.40, TN14),
             "Cp298": C(37.20, 0.05, TN14)}, cas="10102-44-0"),
    species("n2o-g", "N2O", "g", "nitrous oxide",
            {"dfH298": entered(19.61, 0.10, "kcal/mol", TN14, "dfH298"), "S298": S(219.85, 0.20, TN14),
             "dfG298": G(104.20, 0.45, TN14), "Cp298": C(38.45, 0.10, TN14)}, cas="10024-97-2",
            notes="ΔfH° typed in kcal/mol from the older handbook and converted."),
    # SEEDED (unit-suspect, gibbs-consistency): ΔfH° typed in kcal/mol (-70.94) into the kJ/mol field.
    species("so2-g", "SO2", "g", "sulfur dioxide",
            {"dfH298": H(-70.94, 0.20, EM), "S298": S(248.223, 0.050, EM), "dfG298": G(-300.10, 0.20, EM,
             "derived"), "Cp298": C(39.87, 0.05, TN14)}, cas="7446-09-5"),
    species("h2s-g", "H2S", "g", "hydrogen sulfide",
            {"dfH298": H(-20.6, 0.5, EM), "S298": S(205.81, 0.05, EM), "dfG298": G(-33.44, 0.50, EM,
             "derived"), "Cp298": C(34.23, 0.05, TN14)}, cas="7783-06-4"),
    # SEEDED (cp-range): Cp° typed 19.14 for 29.14 J/(mol·K), below 5/2 R.
    species("hcl-g", "HCl", "g", "hydrogen chloride",
            {"dfH298": H(-92.31, 0.10, EM), "S298": S(186.902, 0.005, EM), "dfG298": G(-95.30, 0.10, EM,
             "derived"), "Cp298": C(19.14, 0.05, TN14)}, cas="7647-01-0"),
    species("ch3oh-g", "CH3OH", "g", "methanol vapour",
            {"dfH298": H(-200.66, 0.30, TN14), "S298": S(239.81, 0.30, TN14),
             "dfG298": G(-161.96, 0.35, TN14), "Cp298": C(43.89, 0.10, TN14)}, cas="67-56-1"),
    species("c2h5oh-g", "C2H5OH", "g", "ethanol vapour",
            {"dfH298": H(-235.10, 0.40, TN14), "S298": S(282.70, 0.40, TN14),
             "dfG298": G(-168.49, 0.45, TN14), "Cp298": C(65.44, 0.20, TN14)}, cas="64-17-5"),
]

LIQUIDS: list[dict] = [
    species("h2o-l", "H2O", "l", "water",
            {"dfH298": H(-285.830, 0.040, EM), "S298": S(69.95, 0.03, EM), "dfG298": G(-237.14, 0.04, EM,
             "derived"), "Cp298": C(75.29, 0.05, TN14)}, cas="7732-18-5"),
    species("ch3oh-l", "CH3OH", "l", "methanol",
            {"dfH298": H(-238.66, 0.30, TN14), "S298": S(126.8, 0.3, TN14), "dfG298": G(-166.27, 0.35, TN14),
             "Cp298": C(81.6, 0.3, TN14)}, cas="67-56-1"),
    # SEEDED (phase-order): |ΔfS°| (345.4) entered as S° of the liquid, above S° of the vapour; ΔfG°
    # was derived from it in the notebook, so only the phase order shows the slip.
    species("c2h5oh-l", "C2H5OH", "l", "ethanol",
            {"dfH298": H(-277.69, 0.40, TN14), "S298": S(345.4, 0.5, "krw-ln-2291"),
             "dfG298": G(-229.78, 0.45, "krw-ln-2291", "derived"), "Cp298": C(112.3, 0.4, TN14)},
            cas="64-17-5", status="draft"),
]

SOLIDS: list[dict] = [
    species("caco3-cr-calcite", "CaCO3", "cr", "calcium carbonate (calcite)",
            {"dfH298": H(-1206.92, 3.0, TN21, k=2), "S298": S(92.9, 0.4, TN21),
             "dfG298": G(-1128.79, 3.0, TN21, k=2), "Cp298": C(81.88, 0.20, TN21)},
            form="calcite", cas="471-34-1", cp_model=M_CACO3),
    species("cao-cr", "CaO", "cr", "calcium oxide",
            {"dfH298": H(-634.92, 0.90, EM), "S298": S(38.1, 0.4, EM), "dfG298": G(-603.30, 0.95, EM,
             "derived"), "Cp298": C(42.80, 0.10, TN21)}, cas="1305-78-8", cp_model=M_CAO),
    # SEEDED (duplicate): the legacy spreadsheet's CaO row, imported under another id.
    species("quicklime", "CaO", "cr", "quicklime",
            {"dfH298": H(-635.09, 1.0, "krw-legacy-2007"), "S298": S(39.75, 0.5, "krw-legacy-2007"),
             "dfG298": G(-604.03, 1.0, "krw-legacy-2007"), "Cp298": C(42.80, 0.2, "krw-legacy-2007")},
            status="draft"),
    species("caoh2-cr", "Ca(OH)2", "cr", "calcium hydroxide (portlandite)",
            {"dfH298": H(-986.09, 2.6, TN21, k=2), "S298": S(83.39, 0.40, TN21),
             "dfG298": G(-898.49, 2.6, TN21, k=2), "Cp298": C(87.49, 0.20, TN21)}, cas="1305-62-0"),
    # SEEDED (third-law): the sign of S° lost (87.40 J/(mol·K)).
    species("fe2o3-cr-hematite", "Fe2O3", "cr", "iron(III) oxide (hematite)",
            {"dfH298": H(-824.2, 1.3, TN21), "S298": S(-87.40, 0.20, TN21), "dfG298": G(-742.2, 1.3, TN21),
             "Cp298": C(103.85, 0.20, TN21)}, form="hematite", cas="1309-37-1"),
    species("fes2-cr-pyrite", "FeS2", "cr", "iron disulfide (pyrite)",
            {"dfH298": H(-178.2, 3.0, TN21, k=2), "S298": S(52.93, 0.20, TN21),
             "dfG298": G(-166.9, 3.0, TN21, k=2), "Cp298": C(62.17, 0.20, TN21)},
            form="pyrite", cas="1309-36-0"),
    species("nacl-cr", "NaCl", "cr", "sodium chloride (halite)",
            {"dfH298": H(-411.153, 0.20, TN21), "S298": S(72.13, 0.20, TN21),
             "dfG298": G(-384.138, 0.25, TN21), "Cp298": C(50.50, 0.10, TN21)},
            cas="7647-14-5", cp_model=M_NACL),
    species("naoh-cr", "NaOH", "cr", "sodium hydroxide",
            {"dfH298": H(-425.609, 0.30, TN21), "S298": S(64.455, 0.20, TN21),
             "dfG298": G(-379.494, 0.35, TN21), "Cp298": C(59.54, 0.10, TN21)}, cas="1310-73-2"),
    # SEEDED (uncertainty): S° given without an uncertainty.
    species("sio2-cr-quartz", "SiO2", "cr", "silicon dioxide (alpha quartz)",
            {"dfH298": H(-910.7, 1.0, EM), "S298": S(41.46, None, EM), "dfG298": G(-856.29, 1.0, EM,
             "derived"), "Cp298": C(44.43, 0.10, TN21)}, form="quartz", cas="14808-60-7"),
    species("al2o3-cr-corundum", "Al2O3", "cr", "aluminium oxide (corundum)",
            {"dfH298": H(-1675.7, 1.3, EM), "S298": S(50.92, 0.10, EM), "dfG298": G(-1582.26, 1.3, EM,
             "derived"), "Cp298": C(79.04, 0.10, TN21)}, form="corundum", cas="1344-28-1",
            cp_model=M_AL2O3),
    species("caso4-cr-anhydrite", "CaSO4", "cr", "calcium sulfate (anhydrite)",
            {"dfH298": H(-1434.11, 1.0, TN21), "S298": S(106.7, 0.4, TN21), "dfG298": G(-1321.79, 1.0, TN21),
             "Cp298": C(99.66, 0.20, TN21)}, form="anhydrite", cas="7778-18-9"),
    species("cacl2-cr", "CaCl2", "cr", "calcium chloride",
            {"dfH298": H(-795.8, 1.0, TN21), "S298": entered(25.0, 0.1, "cal/(mol*K)", TN21, "S298"),
             "dfG298": G(-748.1, 1.0, TN21), "Cp298": C(72.59, 0.20, TN21)}, cas="10043-52-4",
            notes="S° typed in cal/(mol·K) and converted."),
    species("nh4cl-cr", "NH4Cl", "cr", "ammonium chloride",
            {"dfH298": entered(-75.15, 0.10, "kcal/mol", TN21, "dfH298"), "S298": S(94.6, 0.3, TN21),
             "dfG298": G(-202.87, 0.50, TN21), "Cp298": C(84.1, 0.3, TN21)}, cas="12125-02-9",
            notes="ΔfH° typed in kcal/mol and converted."),
]

AQUEOUS: list[dict] = [
    species("h-plus-aq", "H+", "aq", "hydrogen ion",
            {"dfH298": zero("dfH298", TN17), "S298": zero("S298", TN17), "dfG298": zero("dfG298", TN17),
             "Cp298": zero("Cp298", TN17)},
            notes="All properties zero by convention; not an element reference state."),
    species("na-plus-aq", "Na+", "aq", "sodium ion",
            {"dfH298": H(-240.34, 0.06, TN17), "S298": S(58.45, 0.15, TN17), "dfG298": G(-261.95, 0.08, TN17,
             "derived"), "Cp298": C(46.4, 2.0, TN17)}),
    species("cl-minus-aq", "Cl-", "aq", "chloride ion",
            {"dfH298": H(-167.080, 0.10, TN17), "S298": S(56.60, 0.20, TN17),
             "dfG298": G(-131.22, 0.12, TN17, "derived"), "Cp298": C(-136.4, 2.0, TN17)}),
    species("ca-2plus-aq", "Ca+2", "aq", "calcium ion",
            {"dfH298": H(-543.0, 1.0, TN17), "S298": S(-56.2, 1.0, TN17),
             "dfG298": G(-552.81, 1.05, TN17, "derived")}),
    species("oh-minus-aq", "OH-", "aq", "hydroxide ion",
            {"dfH298": H(-230.015, 0.040, TN17), "S298": S(-10.90, 0.20, TN17),
             "dfG298": G(-157.22, 0.07, TN17, "derived"), "Cp298": C(-148.5, 2.0, TN17)}),
    species("so4-2minus-aq", "SO4-2", "aq", "sulfate ion",
            {"dfH298": H(-909.34, 0.40, TN17), "S298": S(18.50, 0.40, TN17),
             "dfG298": G(-744.00, 0.42, TN17, "derived"), "Cp298": C(-293.0, 5.0, TN17)}),
    species("hco3-minus-aq", "HCO3-", "aq", "hydrogen carbonate ion",
            {"dfH298": H(-689.93, 0.20, TN17), "S298": S(98.4, 0.5, TN17),
             "dfG298": G(-586.85, 0.25, TN17, "derived")}),
    species("co3-2minus-aq", "CO3-2", "aq", "carbonate ion",
            {"dfH298": H(-675.23, 0.25, TN17), "S298": S(-50.0, 1.0, TN17),
             "dfG298": G(-527.90, 0.40, TN17, "derived")}),
    species("nh4-plus-aq", "NH4+", "aq", "ammonium ion",
            {"dfH298": H(-133.26, 0.25, TN17), "S298": S(111.17, 0.40, TN17),
             "dfG298": G(-79.40, 0.27, TN17, "derived"), "Cp298": C(79.9, 2.0, TN17)}),
    species("co2-aq", "CO2", "aq", "carbon dioxide (dissolved)",
            {"dfH298": H(-413.26, 0.20, TN17), "S298": S(119.36, 0.60, TN17),
             "dfG298": G(-385.97, 0.27, TN17, "derived")}),
    species("nh3-aq", "NH3", "aq", "ammonia (dissolved)",
            {"dfH298": H(-80.29, 0.30, TN17), "S298": S(111.3, 0.5, TN17), "dfG298": G(-26.50, 0.35, TN17)}),
]

ALL_SPECIES: list[dict] = ELEMENTS + GASES + LIQUIDS + SOLIDS + AQUEOUS

#: The calcite entropy as first entered (an older compilation), corrected after the review flag below.
CALCITE_FIRST_S = 91.7

ELEMENT_REFERENCES = {rec["formula"].rstrip("0123456789"): rec["id"] for rec in ELEMENTS}


# -- reactions ------------------------------------------------------------------------------------------

REACTIONS: list[dict] = [
    {"id": "methane-combustion", "equation": "CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)",
     "drH": {"value": -890.5, "uncertainty": 0.5}, "source": "krw-rx-005",
     "notes": "Flame calorimetry, products water liquid, reduced to 298.15 K."},
    {"id": "calcite-decomposition", "equation": "CaCO3(cr, calcite) = cao-cr + CO2(g)",
     "drH": {"value": 178.3, "uncertainty": 1.0}, "source": "krw-rx-005",
     "notes": "Calcination enthalpy for the kiln model; CaO named by id because the table holds two CaO "
              "records."},
    {"id": "ammonia-synthesis", "equation": "N2(g) + 3 H2(g) = 2 NH3(g)",
     "logK": {"value": 5.77, "uncertainty": 0.10}, "source": "krw-rx-005",
     "notes": "Equilibrium constant extrapolated to 298.15 K from the converter loop measurements."},
    {"id": "neutralisation", "equation": "H+(aq) + OH-(aq) = H2O(l)",
     "drH": {"value": -55.84, "uncertainty": 0.10}, "source": "krw-ln-2291",
     "notes": "Enthalpy of neutralisation at infinite dilution."},
    # SEEDED (reaction-closure): the enthalpy per mole of water recorded for an equation written for two.
    {"id": "hydrogen-combustion-legacy", "equation": "2 H2(g) + O2(g) = 2 H2O(l)",
     "drH": {"value": -285.83, "uncertainty": 0.05}, "source": "krw-legacy-2007"},
]


# -- flags ----------------------------------------------------------------------------------------------
# Fixed ids and times (the scenario's past) so that a rebuild gives the same flag files.

FLAG_BLOCKING = {
    "id": "flag-20240311-142205-3fa9c1", "species": "h2s-g", "field": "dfH298", "blocking": True,
    "note": "The supplier datasheet for the sour-gas feed gives ΔfH° = -20.2 kJ/mol. Confirm which "
            "value the reactor model should use before the next release.",
    "raised_by": REVIEWER, "raised_at": "2024-03-11T14:22:05Z",
    "comments": [{"by": STEWARD, "at": "2024-03-12T08:40:00Z",
                  "text": "Checking against EM-003 rev C; holding the release until this is settled."}],
}
FLAG_OPEN = {
    "id": "flag-20240402-091030-b71e02", "species": "caso4-cr-anhydrite", "field": "dfH298",
    "blocking": False,
    "note": "Newer mineral compilations give about -1434.5 kJ/mol. Worth a look at the next review; "
            "not urgent for the scaling model.",
    "raised_by": REVIEWER, "raised_at": "2024-04-02T09:10:30Z", "comments": [],
}
FLAG_RESOLVED = {
    "id": "flag-20231120-160512-0c4d8e", "species": "caco3-cr-calcite", "field": "S298", "blocking": False,
    "note": "S° = 91.7 J/(mol·K) looks low against the calciner heat balance.",
    "raised_by": REVIEWER, "raised_at": "2023-11-20T16:05:12Z",
    "comments": [{"by": STEWARD, "at": "2023-11-21T10:15:00Z",
                  "text": "91.7 came from an older compilation; TN-021 cites 92.9."},
                 {"by": REVIEWER, "at": "2023-11-21T11:02:00Z", "text": "Agreed, 92.9 closes the balance."}],
    "resolved_by": STEWARD, "resolved_at": "2023-11-21T11:30:00Z",
    "resolution": "S° set to 92.9 J/(mol·K) from KRW-TN-021; see the journal.",
}


# -- building -------------------------------------------------------------------------------------------

class BuildError(RuntimeError):
    """A record of the demo does not validate: the script's data is wrong."""


@contextmanager
def acting_as(user: str) -> Iterator[None]:
    """Run a step as one of the invented users (the store reads $TABLEKEEPER_USER)."""
    old = os.environ.get("TABLEKEEPER_USER")
    os.environ["TABLEKEEPER_USER"] = user
    try:
        yield
    finally:
        if old is None:
            os.environ.pop("TABLEKEEPER_USER", None)
        else:
            os.environ["TABLEKEEPER_USER"] = old


def _valid(kind: str, rec: dict) -> dict:
    errs = validation.errors(kind, rec)
    if errs:
        pointer, msg = errs[0]
        raise BuildError(f"{kind}/{rec.get('id')}: {pointer or '/'}: {msg}")
    return rec


def _save(root: Path, kind: str, rec: dict, *, expected: int | None = None, reason: str | None = None,
          action: str | None = None) -> dict:
    rec = dict(rec, revision=(expected or 0) + 1)
    _valid(kind, rec)
    return Dataset(root).save(kind, rec, expected_revision=expected, reason=reason, action=action)


def _flag_steps(flag: dict) -> list[tuple[str, dict, str]]:
    """The saves that lead to a flag as it stands: raise, each comment, resolution."""
    later = ("comments", "resolved_by", "resolved_at", "resolution")
    base = {k: v for k, v in flag.items() if k not in later}
    steps = [(flag["raised_by"], dict(base, status="open", comments=[]), "flag")]
    comments: list[dict] = []
    for c in flag.get("comments", []):
        comments = [*comments, c]
        steps.append((c["by"], dict(base, status="open", comments=comments), "comment"))
    if "resolved_by" in flag:
        final = dict(base, status="resolved", comments=comments, resolved_by=flag["resolved_by"],
                     resolved_at=flag["resolved_at"], resolution=flag["resolution"])
        steps.append((flag["resolved_by"], final, "resolve"))
    return steps


def build(out: Path) -> Path:
    """Build the demo dataset into ``out``, which must not exist yet. Returns ``out``."""
    out = Path(out)
    with acting_as(STEWARD):
        Dataset.init(out, NAME, title=TITLE, description=DESCRIPTION)
        for src in SOURCES:
            _save(out, "sources", src, reason="source of the site table")
        for rec in ALL_SPECIES:
            first = rec
            if rec["id"] == "caco3-cr-calcite":
                props = dict(rec["properties"], S298=dict(rec["properties"]["S298"], value=CALCITE_FIRST_S))
                first = dict(rec, properties=props)
            _save(out, "species", first, reason="initial load from the group's notes")
        for rx in REACTIONS:
            _save(out, "reactions", rx, reason="reaction data for Hess's law checks")
        meta = dict(Dataset(out).meta)
        meta.update(
            element_references=dict(sorted(ELEMENT_REFERENCES.items())),
            electron_convention="none",
            policy={"tolerance_k": 2, "required_fields": ["dfH298", "dfG298", "S298"],
                    "require_uncertainty": True, "max_relative_uncertainty": 0.5},
        )
        _valid("dataset", meta)
        Dataset(out).save_meta(meta, reason="element reference states and check policy")

    # The review history: flags raised, commented and one resolved by a correction.
    for flag in (FLAG_RESOLVED, FLAG_BLOCKING, FLAG_OPEN):
        for n, (user, rec, action) in enumerate(_flag_steps(flag)):
            with acting_as(user):
                _save(out, "flags", rec, expected=n or None, action=action,
                      reason=f"flag on {flag['species']} {flag['field']}")
            if flag is FLAG_RESOLVED and action == "comment" and n == 1:
                calcite = next(r for r in ALL_SPECIES if r["id"] == "caco3-cr-calcite")
                with acting_as(STEWARD):
                    _save(out, "species", calcite, expected=1,
                          reason=f"S° corrected after {flag['id']}")
    (out / LOCK_NAME).unlink(missing_ok=True)
    return out


def rebuild(target: Path = TARGET) -> Path:
    """Build into a temporary folder beside ``target`` and move the result into place."""
    target = Path(target)
    work = Path(tempfile.mkdtemp(prefix=".build-", dir=target.parent))
    try:
        fresh = build(work / target.name)
        if target.exists():
            if not (target / "dataset.json").is_file():
                raise BuildError(f"{target} exists and is not a dataset; not replacing it")
            target.rename(work / "previous")
        fresh.rename(target)
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return target


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Build the Kestrel Ridge Works demo dataset.")
    parser.add_argument("--out", type=Path, help="build into this new folder instead of replacing the demo")
    args = parser.parse_args(argv)
    try:
        path = build(args.out) if args.out else rebuild()
    except Exception as exc:  # one line, no traceback: this is a command-line tool
        sys.stderr.write(f"build_demo: {exc}\n")
        return 2
    print(f"built {path} ({len(ALL_SPECIES)} species, {len(REACTIONS)} reactions, 3 flags)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
