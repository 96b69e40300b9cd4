"""A small dataset that passes every check, for the damage and hostile-input tests.

Values: CODATA Key Values for Thermodynamics (Cox, Wagman & Medvedev 1989), recalled from memory
(from memory); ΔfG° computed from ΔfH° and the entropies, as that compilation does, then rounded to
the digits given. Cp°(298.15 K) from the same tables (from memory).
"""

from __future__ import annotations

from pathlib import Path

from tablekeeper.store import Dataset

SOURCE = {
    "id": "codata-1989",
    "title": "CODATA Key Values for Thermodynamics",
    "year": 1989,
    "authors": ["J. D. Cox", "D. D. Wagman", "V. A. Medvedev"],
    "kind": "compilation",
}

# id: (formula, phase, form, reference, dfH (u), S (u), Cp)
ROWS = {
    "o2-g": ("O2", "g", None, True, (0.0, 0.0), (205.152, 0.005), 29.378),
    "h2-g": ("H2", "g", None, True, (0.0, 0.0), (130.680, 0.003), 28.836),
    "n2-g": ("N2", "g", None, True, (0.0, 0.0), (191.609, 0.004), 29.124),
    "c-cr-graphite": ("C", "cr", "graphite", True, (0.0, 0.0), (5.74, 0.10), 8.517),
    "h2o-l": ("H2O", "l", None, False, (-285.830, 0.040), (69.95, 0.03), 75.351),
    "h2o-g": ("H2O", "g", None, False, (-241.826, 0.040), (188.835, 0.010), 33.584),
    "co2-g": ("CO2", "g", None, False, (-393.51, 0.13), (213.785, 0.010), 37.12),
}
ELEMENT_S = {"O": 205.152 / 2, "H": 130.680 / 2, "N": 191.609 / 2, "C": 5.74}
ATOMS = {
    "O2": {"O": 2},
    "H2": {"H": 2},
    "N2": {"N": 2},
    "C": {"C": 1},
    "H2O": {"H": 2, "O": 1},
    "CO2": {"C": 1, "O": 2},
}


def _pv(value: float, u: float) -> dict:
    return {
        "value": value,
        "unit": "kJ/mol",
        "uncertainty": u,
        "source": "codata-1989",
        "method": "evaluated",
    }


def records() -> dict[str, dict]:
    out = {}
    for ident, (formula, phase, form, ref, (h, uh), (s, us), cp) in ROWS.items():
        ds_f = s - sum(n * ELEMENT_S[el] for el, n in ATOMS[formula].items())
        g = round(h - 298.15 * ds_f / 1000.0, 3) if not ref else 0.0
        props = {
            "dfH298": _pv(h, uh),
            "dfG298": _pv(g, uh),
            "S298": dict(_pv(s, us), unit="J/(mol*K)"),
            "Cp298": dict(_pv(cp, 0.01), unit="J/(mol*K)"),
        }
        rec = {
            "id": ident,
            "name": ident,
            "formula": formula,
            "phase": phase,
            "charge": 0,
            "status": "reviewed",
            "properties": props,
        }
        if form:
            rec["form"] = form
        if ref:
            rec["reference_state"] = True
        out[ident] = rec
    return out


def build(root: Path) -> Dataset:
    """A dataset folder at ``root`` holding the records above, saved through the store."""
    ds = Dataset.init(root, "clean", title="CODATA key species")
    ds.save("sources", dict(SOURCE), expected_revision=None)
    meta = dict(ds.meta, element_references={"O": "o2-g", "H": "h2-g", "N": "n2-g", "C": "c-cr-graphite"})
    ds.save_meta(meta)
    for rec in records().values():
        ds.save("species", rec, expected_revision=None)
    return ds
