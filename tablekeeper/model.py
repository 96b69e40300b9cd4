"""Plain typed data: property fields, species values, and the species table as one DataFrame.

Records live on disk as JSON objects (see schemas/species.schema.json). The checks and the faces work
on ``species_frame``: one row per species, one column per scalar, built once per load, so that a check
over 100k species is a handful of array operations rather than a Python loop.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from . import formula as _formula
from .bulk import paused_gc
from .errors import FormulaError
from .units import FIELD_KINDS

#: The property fields of a species, in display order.
FIELDS: tuple[str, ...] = ("dfH298", "S298", "dfG298", "Cp298")
PHASES: tuple[str, ...] = ("g", "l", "cr", "am", "aq")
METHODS: tuple[str, ...] = ("measured", "evaluated", "estimated", "derived")
STATUSES: tuple[str, ...] = ("draft", "reviewed", "deprecated")
LABELS = {
    "dfH298": "ΔfH°",
    "S298": "S°",
    "dfG298": "ΔfG°",
    "Cp298": "Cp°",
}


@dataclass(frozen=True)
class PropertyValue:
    """One property value in its canonical unit with its GUM uncertainty."""

    field: str
    value: float
    unit: str
    uncertainty: float | None = None
    coverage: float = 1.0
    source: str | None = None
    method: str | None = None
    entered_value: float | None = None
    entered_unit: str | None = None

    def __post_init__(self) -> None:
        if self.field not in FIELD_KINDS:
            raise ValueError(f"{self.field!r} is not a property field")
        if not math.isfinite(self.value):
            raise ValueError(f"{self.field}: value must be finite")
        if self.uncertainty is not None and not (self.uncertainty >= 0):
            raise ValueError(f"{self.field}: uncertainty must be zero or positive")
        if not self.coverage > 0:
            raise ValueError(f"{self.field}: coverage factor must be positive")

    @property
    def standard_uncertainty(self) -> float | None:
        """u = U / k (GUM)."""
        return None if self.uncertainty is None else self.uncertainty / self.coverage

    @classmethod
    def from_json(cls, name: str, obj: Mapping) -> PropertyValue:
        ent = obj.get("entered") or {}
        return cls(field=name, value=float(obj["value"]), unit=obj["unit"],
                   uncertainty=obj.get("uncertainty"), coverage=float(obj.get("coverage", 1.0)),
                   source=obj.get("source"), method=obj.get("method"),
                   entered_value=ent.get("value"), entered_unit=ent.get("unit"))

    def to_json(self) -> dict:
        out: dict = {"value": self.value, "unit": self.unit}
        if self.uncertainty is not None:
            out["uncertainty"] = self.uncertainty
        if self.coverage != 1.0:
            out["coverage"] = self.coverage
        if self.source:
            out["source"] = self.source
        if self.method:
            out["method"] = self.method
        if self.entered_unit is not None and self.entered_value is not None:
            out["entered"] = {"value": self.entered_value, "unit": self.entered_unit}
        return out


def property_values(record: Mapping) -> dict[str, PropertyValue]:
    props = record.get("properties") or {}
    return {k: PropertyValue.from_json(k, v) for k, v in props.items() if k in FIELD_KINDS}


def display_name(record: Mapping) -> str:
    """``H2O(l)`` or ``C(cr, graphite)``."""
    phase = record.get("phase", "?")
    form = record.get("form")
    return f"{record.get('formula', '?')}({phase}{', ' + form if form else ''})"


# -- the species table -------------------------------------------------------------------------------

FRAME_COLUMNS = (
    ["id", "name", "formula", "phase", "form", "charge", "reference_state", "status", "cp_kind",
     "hill", "atoms", "molar_mass", "formula_charge", "formula_error"]
    + [c for f in FIELDS for c in (f, f"u_{f}", f"src_{f}", f"method_{f}", f"entered_unit_{f}")]
)


def _get(d: object, key: str):
    return d.get(key) if isinstance(d, dict) else None


def _num(v: object) -> float:
    return float(v) if isinstance(v, int | float) and not isinstance(v, bool) else np.nan


def _std_u(u: object, k: object) -> float:
    """Standard uncertainty U/k; ``k`` as stored (absent, zero or null mean 1), NaN when unusable."""
    k = k or 1.0
    ok = (isinstance(u, int | float) and not isinstance(u, bool) and isinstance(k, int | float)
          and not isinstance(k, bool) and k > 0)
    return float(u) / float(k) if ok else np.nan


def _formula_columns(text: object) -> tuple:
    """(hill, atoms, molar mass, charge, error) from the formula parser (cached per formula)."""
    try:
        f = _formula.parse(text)
        return (f.hill, f.atoms, f.molar_mass, f.charge, None)
    except (FormulaError, TypeError) as exc:
        return (None, np.nan, np.nan, np.nan, str(getattr(exc, "reason", exc)))


_EMPTY: dict = {}
_NUMERIC_COLUMNS = ("charge", "atoms", "molar_mass", "formula_charge", *FIELDS, *(f"u_{f}" for f in FIELDS))


def species_frame(records: Mapping[str, Mapping]) -> pd.DataFrame:
    """One row per species, indexed by id. Numbers are float64 (NaN where missing); uncertainties are
    standard uncertainties (U/k). Formula-derived columns come from the formula parser (cached).

    Built column by column with one comprehension per column (a row at a time costs several function
    calls per value, which at 100k species is seconds); tests/checks/test_fast_paths.py holds the
    row-at-a-time definition and compares the two on hostile records.
    """
    ids = sorted(records)
    with paused_gc():
        recs = [records[i] for i in ids]
        cols: dict[str, list] = {"id": ids}
        for c in ("name", "formula", "phase", "form", "status"):
            cols[c] = [r.get(c) for r in recs]
        cols["charge"] = [c if type(c) is int else (c if isinstance(c, int) and not isinstance(c, bool)
                                                     else np.nan)
                          for c in (r.get("charge") for r in recs)]
        cols["reference_state"] = [r.get("reference_state") is True for r in recs]
        cols["cp_kind"] = [_get(r.get("cp_model"), "kind") for r in recs]
        parsed: dict = {}
        formula_rows = []
        for text in cols["formula"]:
            try:
                row = parsed.get(text)
                if row is None:
                    row = parsed[text] = _formula_columns(text)
            except TypeError:  # an unhashable "formula" (a list): the parser's error, uncached
                row = _formula_columns(text)
            formula_rows.append(row)
        for j, c in enumerate(("hill", "atoms", "molar_mass", "formula_charge", "formula_error")):
            cols[c] = [row[j] for row in formula_rows]
        props = [p if isinstance(p, dict) else _EMPTY for p in (r.get("properties") for r in recs)]
        for fld in FIELDS:
            pvs = [p.get(fld) for p in props]
            pvs = [pv if isinstance(pv, dict) else _EMPTY for pv in pvs]
            cols[fld] = [v if type(v) is float else _num(v) for v in (pv.get("value") for pv in pvs)]
            cols[f"u_{fld}"] = [_std_u(pv.get("uncertainty"), pv.get("coverage", 1.0)) for pv in pvs]
            cols[f"src_{fld}"] = [pv.get("source") for pv in pvs]
            cols[f"method_{fld}"] = [pv.get("method") for pv in pvs]
            cols[f"entered_unit_{fld}"] = [e.get("unit") if isinstance(e, dict) else None
                                           for e in (pv.get("entered") for pv in pvs)]
        frame = pd.DataFrame(cols, columns=FRAME_COLUMNS)
        for c in _NUMERIC_COLUMNS:
            frame[c] = pd.to_numeric(frame[c], errors="coerce").astype("float64")
        frame["reference_state"] = frame["reference_state"].astype(bool)
        frame.index = pd.Index(ids, name="species")
    return frame
