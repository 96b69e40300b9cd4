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


def _property_columns(pv: object) -> tuple:
    """(value, standard uncertainty, source, method, entered unit) of one property object."""
    if not isinstance(pv, dict):
        return (np.nan, np.nan, None, None, None)
    u = pv.get("uncertainty")
    k = pv.get("coverage", 1.0) or 1.0
    ok = (isinstance(u, int | float) and not isinstance(u, bool) and isinstance(k, int | float)
          and not isinstance(k, bool) and k > 0)
    ent = pv.get("entered")
    return (_num(pv.get("value")), float(u) / float(k) if ok else np.nan, pv.get("source"), pv.get("method"),
            ent.get("unit") if isinstance(ent, dict) else None)


def _formula_columns(text: object) -> tuple:
    """(hill, atoms, molar mass, charge, error) from the formula parser (cached per formula)."""
    try:
        f = _formula.parse(text)
        return (f.hill, f.atoms, f.molar_mass, f.charge, None)
    except (FormulaError, TypeError) as exc:
        return (None, np.nan, np.nan, np.nan, str(getattr(exc, "reason", exc)))


_NUMERIC_COLUMNS = ("charge", "atoms", "molar_mass", "formula_charge", *FIELDS, *(f"u_{f}" for f in FIELDS))


def species_frame(records: Mapping[str, Mapping]) -> pd.DataFrame:
    """One row per species, indexed by id. Numbers are float64 (NaN where missing); uncertainties are
    standard uncertainties (U/k). Formula-derived columns come from the formula parser (cached).

    Row by row (each record is touched once, while it is in the processor's cache), with the common
    shape of a property (numbers as floats, no coverage factor, no entered value) read inline and every
    other shape through ``_property_columns``; the columns are then formed by one transpose.
    tests/checks/test_fast_paths.py compares the result with a plain definition on hostile records.
    """
    ids = sorted(records)
    if not ids:
        return _typed(pd.DataFrame(columns=FRAME_COLUMNS), ids)
    parsed: dict = {}
    rows = []
    with paused_gc():
        for ident in ids:
            rec = records[ident]
            text = rec.get("formula")
            try:
                fcols = parsed.get(text)
                if fcols is None:
                    fcols = parsed[text] = _formula_columns(text)
            except TypeError:  # an unhashable "formula" (a list): the parser's error, not cached
                fcols = _formula_columns(text)
            ch = rec.get("charge")
            model = rec.get("cp_model")
            row = [ident, rec.get("name"), text, rec.get("phase"), rec.get("form"),
                   ch if type(ch) is int or (isinstance(ch, int) and not isinstance(ch, bool)) else np.nan,
                   rec.get("reference_state") is True, rec.get("status"),
                   model.get("kind") if isinstance(model, dict) else None, *fcols]
            props = rec.get("properties")
            if not isinstance(props, dict):
                props = {}
            for fld in FIELDS:
                pv = props.get(fld)
                if type(pv) is dict and "coverage" not in pv and "entered" not in pv:
                    v, u = pv.get("value"), pv.get("uncertainty")
                    if type(v) is float and type(u) is float:  # u / 1.0 is u
                        row += (v, u, pv.get("source"), pv.get("method"), None)
                        continue
                row += _property_columns(pv)
            rows.append(row)
        columns = zip(*rows, strict=True)  # every row has one value per column
        frame = pd.DataFrame(dict(zip(FRAME_COLUMNS, columns, strict=True)), columns=FRAME_COLUMNS)
    return _typed(frame, ids)


def _typed(frame: pd.DataFrame, ids: list[str]) -> pd.DataFrame:
    for c in _NUMERIC_COLUMNS:
        frame[c] = pd.to_numeric(frame[c], errors="coerce").astype("float64")
    frame["reference_state"] = frame["reference_state"].astype(bool)
    frame.index = pd.Index(ids, name="species")
    return frame
