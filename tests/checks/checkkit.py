"""Builders of in-memory species records and check contexts for the value checks' tests."""

from __future__ import annotations

import functools
from collections.abc import Iterable
from pathlib import Path

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



# -- the CRC Handbook table carried by `chemicals` ------------------------------------------------------

#: The CRC table prints ΔfH°, ΔfG° to 0.1 kJ/mol and S° to 0.1 J/(mol·K). The NBS tables it draws on
#: give each value with "between 8 and 80 units of the last digit" of overall uncertainty (NBS 1982
#: introduction, from memory); the lower end, 8 units, is taken as an expanded uncertainty (k = 2).
CRC_EXPANDED_U = 0.8

#: Tables of the same package that carry a formula per CAS number. The CRC table itself has no formula
#: column, and the package's CAS → formula identifier database is not used: it gives wrong formulas
#: for many inorganic rows (stibine as Sb, pentaborane(9) as B5, calcium carbide as C13H16O5).
_FORMULA_TABLES = (("Phase Change", "CRC Handbook Heat of Fusion.tsv", "Formula"),
                   ("Phase Change", "CRC Handbook Heat of Vaporization.tsv", "Formula"),
                   ("Reactions", "JANAF_1998.tsv", "formula"),
                   ("Reactions", "ATcT 1.112 (g).tsv", "Formula"),
                   ("Reactions", "ATcT 1.112 (l).tsv", "Formula"))


def _crc_formulas() -> dict[str, str]:
    import chemicals
    import pandas as pd

    from tablekeeper.errors import FormulaError

    base = Path(chemicals.__file__).parent
    found: dict[str, set[str]] = {}
    text: dict[str, str] = {}
    for folder, name, col in _FORMULA_TABLES:
        table = pd.read_csv(base / folder / name, sep="\t", index_col=0)
        for cas, f in table[col].dropna().astype(str).items():
            f = f.replace(" (g)", "").replace(" (l)", "").strip()
            try:
                hill = _formula.parse(f).hill
            except FormulaError:
                continue
            found.setdefault(str(cas), set()).add(hill)
            text.setdefault(str(cas), hill)
    # A CAS number the tables disagree about is left out.
    return {cas: text[cas] for cas, hills in found.items() if len(hills) == 1}


@functools.cache
def crc_rows() -> tuple[tuple[dict, ...], dict[str, int]]:
    """Records (one per CRC row and phase with ΔfH°, ΔfG° and S°) and counts of what was left out."""
    import numpy as np
    from chemicals.heat_capacity import CRC_standard_data as crc

    formulas = _crc_formulas()
    recs: list[dict] = []
    left_out = {"no formula in a formula-bearing table": 0}
    for cas, row in crc.iterrows():
        for col, phase in (("s", "cr"), ("l", "l"), ("g", "g")):
            h, g, s, cp = (row[f"{q}{col}"] for q in ("Hf", "Gf", "S0", "Cp"))
            if not (np.isfinite(h) and np.isfinite(g) and np.isfinite(s)):
                continue
            if str(cas) not in formulas:
                left_out["no formula in a formula-bearing table"] += 1
                continue
            u = {"dfH298": CRC_EXPANDED_U, "dfG298": CRC_EXPANDED_U, "S298": CRC_EXPANDED_U}
            rec = record(f"crc-{len(recs):04d}", formulas[str(cas)], phase, dfH=round(h / 1000, 1),
                         dfG=round(g / 1000, 1), S=s, Cp=float(cp) if np.isfinite(cp) else None, u=u)
            for fld in u:
                rec["properties"][fld]["coverage"] = 2.0
            rec["cas"] = str(cas)
            rec["name"] = str(row["Chemical"])
            recs.append(rec)
    return tuple(recs), left_out
