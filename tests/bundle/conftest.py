"""A small clean dataset built with the store API, and helpers to release it.

Values: CODATA Key Values for Thermodynamics (Cox, Wagman & Medvedev, 1989) for ΔfH° and S°, their ±
stored as expanded uncertainties with k = 2; Cp°(298.15 K) from the NIST-JANAF Thermochemical Tables
(Chase, 4th ed. 1998) with an uncertainty of 0.02 J/(mol·K) assumed for these tests (common practice,
no source); ΔfG° derived as ΔfH° − T·ΔfS° from those values. All recalled from memory. The Shomate
coefficients are those of the NIST Chemistry WebBook (Chase 1998 fits), also from memory.
"""

from __future__ import annotations

import shutil
from collections.abc import Callable
from pathlib import Path

import pytest

from tablekeeper.store import Dataset

KJ, JK = "kJ/mol", "J/(mol*K)"

SOURCES = {
    "codata-1989": {"title": "CODATA Key Values for Thermodynamics",
                    "authors": ["Cox, J. D.", "Wagman, D. D.", "Medvedev, V. A."], "year": 1989,
                    "kind": "compilation"},
    "janaf-1998": {"title": "NIST-JANAF Thermochemical Tables, 4th edition", "authors": ["Chase, M. W."],
                   "year": 1998, "kind": "compilation", "identifier": "J. Phys. Chem. Ref. Data Monograph 9"},
}

CO2_SHOMATE = {"kind": "shomate", "source": "janaf-1998", "ranges": [
    {"tmin": 298.0, "tmax": 1200.0, "A": 24.99735, "B": 55.18696, "C": -33.69137, "D": 7.948387,
     "E": -0.136638, "F": -403.6075, "G": 228.2431, "H": -393.5224},
]}
N2_SHOMATE = {"kind": "shomate", "source": "janaf-1998", "ranges": [
    {"tmin": 100.0, "tmax": 500.0, "A": 28.98641, "B": 1.853978, "C": -9.647459, "D": 16.63537,
     "E": 0.000117, "F": -8.671914, "G": 226.4168, "H": 0.0},
    {"tmin": 500.0, "tmax": 2000.0, "A": 19.50583, "B": 19.88705, "C": -8.598535, "D": 1.369784,
     "E": 0.527601, "F": -4.935202, "G": 212.39, "H": 0.0},
]}


def prop(value: float, unit: str, u: float | None, k: float = 2.0, source: str = "codata-1989",
         method: str = "evaluated") -> dict:
    out: dict = {"value": value, "unit": unit, "source": source, "method": method}
    if u is not None:
        out["uncertainty"] = u
        if k != 1:
            out["coverage"] = k
    return out


def cp(value: float) -> dict:
    return prop(value, JK, 0.02, k=1, source="janaf-1998")


def species_records() -> list[dict]:
    ref = {"dfH298": prop(0.0, KJ, None, source="codata-1989", method="evaluated"),
           "dfG298": prop(0.0, KJ, None, source="codata-1989", method="evaluated")}
    return [
        {"id": "o2-g", "formula": "O2", "phase": "g", "charge": 0, "status": "reviewed", "name": "oxygen",
         "reference_state": True,
         "properties": {**ref, "S298": prop(205.152, JK, 0.005), "Cp298": cp(29.376)}},
        {"id": "h2-g", "formula": "H2", "phase": "g", "charge": 0, "status": "reviewed", "name": "hydrogen",
         "reference_state": True,
         "properties": {**ref, "S298": prop(130.68, JK, 0.003), "Cp298": cp(28.836)}},
        {"id": "c-cr-graphite", "formula": "C", "phase": "cr", "form": "graphite", "charge": 0,
         "status": "reviewed", "name": "graphite", "reference_state": True,
         "properties": {**ref, "S298": prop(5.74, JK, 0.1), "Cp298": cp(8.517)}},
        {"id": "n2-g", "formula": "N2", "phase": "g", "charge": 0, "status": "reviewed", "name": "nitrogen",
         "reference_state": True, "cp_model": N2_SHOMATE,
         "properties": {**ref, "S298": prop(191.609, JK, 0.004), "Cp298": cp(29.124)}},
        {"id": "h2o-l", "formula": "H2O", "phase": "l", "charge": 0, "status": "reviewed", "name": "water",
         "properties": {"dfH298": prop(-285.83, KJ, 0.04), "S298": prop(69.95, JK, 0.03),
                        "dfG298": prop(-237.14, KJ, 0.04, method="derived"), "Cp298": cp(75.351)}},
        {"id": "h2o-g", "formula": "H2O", "phase": "g", "charge": 0, "status": "reviewed",
         "name": "water vapour",
         "properties": {"dfH298": prop(-241.826, KJ, 0.04), "S298": prop(188.835, JK, 0.01),
                        "dfG298": prop(-228.582, KJ, 0.04, method="derived"), "Cp298": cp(33.59)}},
        {"id": "co2-g", "formula": "CO2", "phase": "g", "charge": 0, "status": "reviewed",
         "name": "carbon dioxide", "cp_model": CO2_SHOMATE,
         "properties": {"dfH298": prop(-393.51, KJ, 0.13), "S298": prop(213.785, JK, 0.01),
                        "dfG298": prop(-394.373, KJ, 0.13, method="derived"), "Cp298": cp(37.135)}},
        {"id": "co-g", "formula": "CO", "phase": "g", "charge": 0, "status": "reviewed",
         "name": "carbon monoxide",
         "properties": {"dfH298": prop(-110.53, KJ, 0.17), "S298": prop(197.66, JK, 0.004),
                        "dfG298": prop(-137.168, KJ, 0.17, method="derived"), "Cp298": cp(29.142)}},
    ]


def build_dataset(root: Path, name: str = "keyvalues") -> Dataset:
    ds = Dataset.init(root, name, title="Key values")
    for ident, src in SOURCES.items():
        ds.save("sources", {"id": ident, **src}, expected_revision=None)
    meta = dict(ds.meta, element_references={"O": "o2-g", "H": "h2-g", "C": "c-cr-graphite", "N": "n2-g"})
    ds.save_meta(meta)
    ds.save_many("species", [(rec, None) for rec in species_records()], reason="key values")
    return ds


@pytest.fixture
def clean_dataset(tmp_path: Path) -> Dataset:
    return build_dataset(tmp_path / "keyvalues")


@pytest.fixture
def fixed_time(monkeypatch: pytest.MonkeyPatch) -> str:
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")
    return "2023-11-14T22:13:20Z"


@pytest.fixture
def copy_dataset(tmp_path: Path) -> Callable[[Dataset, str], Dataset]:
    def copy(ds: Dataset, name: str) -> Dataset:
        dst = tmp_path / name
        shutil.copytree(ds.root, dst)
        return Dataset(dst)

    return copy
