"""Derived thermodynamic tables of one species on a temperature grid: Cp, S, H − H298, G − H298.

S(T) = S°(298.15) of the record + ∫Cp/T dT; H − H298 = ∫Cp dT; G − H(298.15) = (H − H298) − T·S.
The integrals come from the species' Cp model (models.py), in closed form.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd

from ..errors import InputError
from ..units import to_canonical
from .models import T_REF, CpModel, model_from_json

#: Column names of a derived table (our own names, canonical units). Never ``T``: it is DataFrame.T.
TABLE_COLUMNS = ("T_K", "Cp_J_per_molK", "S_J_per_molK", "H_minus_H298_kJ_per_mol",
                 "G_minus_H298_kJ_per_mol")

#: Largest grid a table may ask for; a typo in --step should not fill the memory.
MAX_GRID_POINTS = 100_000


def record_model(record: dict) -> CpModel:
    """The Cp model of a species record; InputError naming the record when absent or malformed."""
    ident = record.get("id") if isinstance(record, dict) else None
    obj = record.get("cp_model") if isinstance(record, dict) else None
    if obj is None:
        raise InputError("has no Cp(T) model", record=ident, field="cp_model")
    try:
        return model_from_json(obj)
    except InputError as exc:
        raise type(exc)(exc.reason, record=ident, field=exc.field) from None


def property_value(record: dict, field: str) -> tuple[float, float | None] | None:
    """(value in the canonical unit, standard uncertainty or None) of a property, or None if absent."""
    props = record.get("properties")
    pv = props.get(field) if isinstance(props, dict) else None
    if not isinstance(pv, dict):
        return None
    v = pv.get("value")
    if not isinstance(v, int | float) or isinstance(v, bool) or not math.isfinite(v):
        raise InputError("value must be a finite number", record=record.get("id"),
                         field=f"properties.{field}")
    unit = pv.get("unit")
    factor = 1.0 if not isinstance(unit, str) else to_canonical(1.0, unit, field)
    u = pv.get("uncertainty")
    k = pv.get("coverage", 1.0)
    if u is None:
        return float(v) * factor, None
    if (not isinstance(u, int | float) or isinstance(u, bool) or not math.isfinite(u) or u < 0
            or not isinstance(k, int | float) or isinstance(k, bool) or not k > 0):
        raise InputError("uncertainty must be a non-negative number with a positive coverage factor",
                         record=record.get("id"), field=f"properties.{field}")
    return float(v) * factor, float(u) * abs(factor) / float(k)


def derived_table(record: dict, temperatures: Any, *, extrapolate: bool = False) -> pd.DataFrame:
    """Cp, S, H − H298 and G − H298 of a species on the given temperatures (K)."""
    ident = record.get("id") if isinstance(record, dict) else None
    model = record_model(record)
    if not model.covers_reference() and not extrapolate:
        raise InputError(f"its Cp model covers {model.range_text()}, which does not include 298.15 K, "
                         "where the table starts from S°(298.15 K)", record=ident, field="cp_model")
    s298 = property_value(record, "S298")
    if s298 is None:
        raise InputError("has no S°(298.15 K), which the table's entropies start from", record=ident,
                         field="properties.S298")
    T = np.atleast_1d(np.asarray(temperatures, dtype=float))
    try:
        cp = np.atleast_1d(model.cp(T, extrapolate=extrapolate))
        dh = np.atleast_1d(model.enthalpy_increment(T, extrapolate=extrapolate))
        ds = np.atleast_1d(model.entropy_increment(T, extrapolate=extrapolate))
    except InputError as exc:
        raise type(exc)(exc.reason, record=ident, field=exc.field) from None
    S = s298[0] + ds
    G = dh - T * S / 1000.0
    return pd.DataFrame(dict(zip(TABLE_COLUMNS, (T, cp, S, dh, G), strict=True)))


def default_grid(model: CpModel, step: float = 100.0, *, tmin: float | None = None,
                 tmax: float | None = None) -> np.ndarray:
    """298.15 K, then the multiples of ``step`` inside the range, then the range's upper end.

    ``tmin``/``tmax`` narrow the grid (the first and last rows are then exactly those). Without
    ``tmin``, a model that does not cover 298.15 K starts at its own lower end. Never outside
    [tmin, tmax] of the call, which defaults to the model's range.
    """
    if not isinstance(step, int | float) or isinstance(step, bool) or not math.isfinite(step) or step <= 0:
        raise InputError(f"the step must be a positive number of kelvin, not {step!r}", field="step")
    if tmin is None:
        lo = T_REF if model.covers_reference() else model.tmin
    else:
        lo = float(tmin)
    hi = model.tmax if tmax is None else float(tmax)
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo <= 0 or hi < lo:
        raise InputError(f"the temperature range {lo:g} to {hi:g} K is empty or not positive", field="tmin")
    k_lo = math.floor(lo / step) + 1
    k_hi = math.ceil(hi / step) - 1
    if k_hi - k_lo + 3 > MAX_GRID_POINTS:
        raise InputError(f"a step of {step:g} K from {lo:g} to {hi:g} K gives more than "
                         f"{MAX_GRID_POINTS} rows; choose a larger step", field="step")
    inner = np.arange(k_lo, k_hi + 1, dtype=float) * step
    inner = inner[(inner > lo) & (inner < hi)]
    pts = [lo, *inner.tolist(), hi]
    if lo < T_REF < hi:
        pts.append(T_REF)
    return np.unique(np.asarray(pts, dtype=float))
