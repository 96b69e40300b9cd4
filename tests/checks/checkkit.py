"""Builders of in-memory species records and check contexts for the value checks' tests."""

from __future__ import annotations

from collections.abc import Callable, Iterable

from tablekeeper import formula as _formula
from tablekeeper.checks import Context, Finding, run

_UNITS = {"dfH298": "kJ/mol", "dfG298": "kJ/mol", "S298": "J/(mol*K)", "Cp298": "J/(mol*K)"}


def record(ident: str, formula: str, phase: str, *, dfH: float | None = None, S: float | None = None,
           dfG: float | None = None, Cp: float | None = None, u: dict | None = None, form: str | None = None,
           reference_state: bool = False, cp_model: dict | None = None, status: str = "reviewed") -> dict:
    """One species record in the on-disk shape (uncertainties as standard uncertainties)."""
    props = {}
    for fld, v in (("dfH298", dfH), ("S298", S), ("dfG298", dfG), ("Cp298", Cp)):
        if v is None:
            continue
        obj = {"value": v, "unit": _UNITS[fld]}
        if u and u.get(fld) is not None:
            obj["uncertainty"] = u[fld]
        props[fld] = obj
    rec = {"id": ident, "revision": 1, "formula": formula, "phase": phase,
           "charge": _formula.parse(formula).charge, "status": status, "properties": props}
    if form:
        rec["form"] = form
    if reference_state:
        rec["reference_state"] = True
    if cp_model is not None:
        rec["cp_model"] = cp_model
    return rec


def context(records: Iterable[dict], meta: dict | None = None, **kw) -> Context:
    meta = {"name": "t", "title": "t", "standard_pressure_bar": 1, "reference_temperature_K": 298.15,
            **(meta or {})}
    return Context.from_records(meta, {r["id"]: r for r in records}, **kw)


def findings(ctx: Context, check_id: str) -> list[Finding]:
    return run(ctx, only=[check_id]).findings

