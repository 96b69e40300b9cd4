"""Curation checks: phase-order, reaction-closure, uncertainty, flag.

phase-order and uncertainty are computed over whole columns of ``ctx.frame``; reaction-closure and flag
loop over the (few) reaction and flag records, calling tablekeeper.thermo for Hess's law.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from typing import Any

import numpy as np

from ..errors import InputError
from ..model import FIELDS, LABELS
from . import Context, Finding, check
from .consistency import T_REF, _number, coverage_k, decimals, num, policy, rounding

_UNITS = {"dfH298": "kJ/mol", "dfG298": "kJ/mol", "S298": "J/(mol·K)", "Cp298": "J/(mol·K)"}

# -- phase order ----------------------------------------------------------------------------------------

#: Ordered pairs (higher, lower): S and H rise from crystal to liquid to gas. At a transition
#: ΔtrsG = 0 and ΔtrsH = T·ΔtrsS > 0 (the phase stable at higher temperature absorbs heat), and at
#: 298.15 K the gaps keep their sign: vaporisation entropies are about 85–90 J/(mol·K) (Trouton's
#: rule) and fusion entropies several J/(mol·K), far above any Cp-difference correction.
_PAIRS = (("g", "l"), ("l", "cr"), ("g", "cr"))


@check("phase-order", "for one formula, S°(g) > S°(l) > S°(cr) and ΔfH°(g) > ΔfH°(l) > ΔfH°(cr)")
def phase_order(ctx: Context) -> Iterator[Finding]:
    fr = ctx.frame
    k = coverage_k(ctx)
    base = fr[(fr["formula_charge"] == 0) & fr["hill"].notna() & fr["phase"].isin(["g", "l", "cr"])
              & (fr["status"] != "deprecated")]
    cols = ["hill", "form", "phase"]
    for fld in ("S298", "dfH298"):
        base = base.assign(**{f"r_{fld}": rounding(base, fld)})
        cols += [fld, f"u_{fld}", f"r_{fld}"]
    cas = {i: r["cas"] for i, r in ctx.species.items()
           if isinstance(r, dict) and isinstance(r.get("cas"), str)}
    base = base[cols].assign(cas=base.index.map(cas)).reset_index()
    # Records that share formula, phase and form are the duplicate check's finding; which of them to
    # order is unknowable, and pairing them all would grow with the square of the group.
    base = base[~base.duplicated(subset=["hill", "phase", "form"], keep=False)]
    for hi_ph, lo_ph in _PAIRS:
        hi = base[base["phase"] == hi_ph]
        lo = base[base["phase"] == lo_ph]
        if hi.empty or lo.empty:
            continue
        # Every form of one phase against every form of the other (polymorphs each compared).
        m = hi.merge(lo, on="hill", suffixes=("_hi", "_lo"))
        # Isomers share a formula. Two records whose CAS numbers differ are different compounds. A
        # form label on a crystal names a polymorph: each is compared with the unlabelled (or equally
        # labelled) liquid and gas. On a gas or liquid a label can only name an isomer, so those pair
        # only when their labels agree.
        f_hi, f_lo = m["form_hi"], m["form_lo"]
        if lo_ph == "cr":
            same = f_hi.isna() | (f_hi == f_lo)
        else:
            same = (f_hi.isna() & f_lo.isna()) | (f_hi == f_lo)
        same &= ~(m["cas_hi"].notna() & m["cas_lo"].notna() & (m["cas_hi"] != m["cas_lo"]))
        m = m[same.to_numpy()]
        for fld in ("S298", "dfH298"):
            d = (m[f"{fld}_hi"] - m[f"{fld}_lo"]).to_numpy(float)
            var = sum(np.nan_to_num(m[f"{p}{fld}_{s}"].to_numpy(float)) ** 2
                      for p in ("u_", "r_") for s in ("hi", "lo"))
            tol = k * np.sqrt(var)
            # Reversed beyond the uncertainty, or equal to every digit (a copied value: the true gap is
            # many times any rounding).
            with np.errstate(invalid="ignore"):
                bad = np.isfinite(d) & ((d < -tol) | (d == 0))
            label, unit = LABELS[fld], _UNITS[fld]
            what = "entropy" if fld == "S298" else "enthalpy"
            sel = np.flatnonzero(bad)
            cols = zip(m["species_hi"].to_numpy()[sel], m["species_lo"].to_numpy()[sel],
                       m["hill"].to_numpy()[sel], m[f"{fld}_hi"].to_numpy(float)[sel],
                       m[f"{fld}_lo"].to_numpy(float)[sel], tol[sel], strict=True)
            for a, b, hill, v_hi, v_lo, t in cols:
                text = (f"{label}({hi_ph}) should exceed {label}({lo_ph}) for {hill}, but {a} has "
                        f"{num(v_hi)} and {b} has {num(v_lo)} {unit} (tolerance {num(t)} = {num(k)} × "
                        f"combined uncertainty and rounding); the {what} rises from crystal to liquid to gas")
                yield Finding("phase-order", "error", text, species=a, field=fld, observed=v_hi,
                              expected=v_lo, tolerance=t)
                yield Finding("phase-order", "error", text, species=b, field=fld, observed=v_lo,
                              expected=v_hi, tolerance=t)


# -- uncertainty ----------------------------------------------------------------------------------------

#: Largest plausible standard uncertainty of ΔfH° or ΔfG°, kJ/mol. Group-additivity estimates carry
#: standard errors of about 4 to 8 kJ/mol (common practice, no source); a value whose standard
#: uncertainty is five times that no longer constrains an equilibrium (40 kJ/mol is a factor of 10^7
#: in K at 298.15 K) and is more likely a typing slip in the uncertainty.
MAX_ENERGY_UNCERTAINTY = 40.0


@check("uncertainty", "missing, zero or implausible uncertainties, per the dataset policy")
def uncertainty(ctx: Context) -> Iterator[Finding]:
    fr = ctx.frame
    pol = policy(ctx)
    require = pol.get("require_uncertainty", True)
    require = require if isinstance(require, bool) else True
    max_rel = _number(pol.get("max_relative_uncertainty"), 0.5, 1e-12, 10.0)
    required = pol.get("required_fields")
    required = [f for f in required if f in FIELDS] if isinstance(required, list) else []
    live = (fr["status"] != "deprecated").to_numpy()
    ref = fr["reference_state"].astype(bool).to_numpy()
    # H+(aq) is zero in all four fields by convention, exactly.
    proton = ((fr["hill"] == "H+") & (fr["phase"] == "aq")).to_numpy()
    aq = (fr["phase"] == "aq").to_numpy()
    ids = fr.index
    for fld in required:
        for i in np.flatnonzero(live & ~np.isfinite(fr[fld].to_numpy(float))):
            yield Finding("uncertainty", "error", f"{fld} is missing; the dataset policy requires it",
                          species=ids[i], field=fld)
    for fld in FIELDS:
        v = fr[fld].to_numpy(float)
        u = fr[f"u_{fld}"].to_numpy(float)
        present = live & np.isfinite(v)
        exact = proton | (ref & (fld in ("dfH298", "dfG298")))
        unit = _UNITS[fld]
        if require:
            for i in np.flatnonzero(present & ~np.isfinite(u) & ~exact):
                yield Finding("uncertainty", "warning", f"{fld} = {num(v[i])} {unit} has no uncertainty; the "
                              "dataset policy requires one", species=ids[i], field=fld, observed=v[i])
        for i in np.flatnonzero(present & (u == 0) & ~exact):
            yield Finding("uncertainty", "warning",
                          f"{fld} = {num(v[i])} {unit} has an uncertainty of zero; only values fixed by "
                          "definition (an element's reference state, H+(aq)) are exact",
                          species=ids[i], field=fld, observed=0.0)
        with np.errstate(invalid="ignore", divide="ignore"):
            if fld in ("S298", "Cp298"):
                # Relative test; aqueous values are on a conventional scale that may cross zero.
                limit = max_rel * np.abs(v)
                bad = present & ~aq & (np.abs(v) > 0) & (u > limit)
                why = f"more than {num(max_rel)} × |value|, the dataset's max_relative_uncertainty"
            else:
                limit = np.full(v.shape, MAX_ENERGY_UNCERTAINTY)
                bad = present & (u > limit)
                why = (f"more than {num(MAX_ENERGY_UNCERTAINTY)} kJ/mol, about five times the error of a "
                       "group-additivity estimate")
        for i in np.flatnonzero(bad):
            yield Finding("uncertainty", "warning",
                          f"the standard uncertainty {num(u[i])} {unit} of {fld} = {num(v[i])} is "
                          f"implausible: {why}", species=ids[i], field=fld, observed=u[i], expected=limit[i])


# -- flags ----------------------------------------------------------------------------------------------

_NOTE_MAX = 300


@check("flag", "open flags; a blocking flag blocks release")
def flag_check(ctx: Context) -> Iterator[Finding]:
    for ident, rec in ctx.flags.items():
        if not isinstance(rec, dict) or rec.get("status") != "open":
            continue
        species = rec.get("species")
        known = isinstance(species, str) and species in ctx.species
        note = str(rec.get("note", ""))
        if len(note) > _NOTE_MAX:
            note = note[:_NOTE_MAX] + "…"
        blocking = rec.get("blocking") is True
        field = rec.get("field") if isinstance(rec.get("field"), str) else None
        who = f" by {rec['raised_by']}" if isinstance(rec.get("raised_by"), str) else ""
        about = "" if known else f" (about species {species!r}, which does not exist)"
        text = f"open flag {ident}{who} on {field or 'the record'}{about}: {note}"
        if blocking:
            yield Finding("flag", "error", text + " (blocking: blocks release until resolved)",
                          species=species if known else None, field=field)
        else:
            yield Finding("flag", "info", text, species=species if known else None, field=field)


# -- reactions ------------------------------------------------------------------------------------------


def _value_and_u(x: Any) -> tuple[float, float]:
    """(value, standard uncertainty) of a ReactionResult quantity (an `uncertainties` number or a float)."""
    if x is None:
        return math.nan, math.nan
    if hasattr(x, "nominal_value"):
        return float(x.nominal_value), float(x.std_dev)
    if isinstance(x, tuple | list) and len(x) == 2:
        return float(x[0]), float(x[1])
    return float(x), 0.0


def _measured(obj: Any) -> tuple[float, float] | None:
    if not isinstance(obj, dict):
        return None
    v, u = obj.get("value"), obj.get("uncertainty", 0.0)
    if not isinstance(v, int | float) or isinstance(v, bool) or not math.isfinite(v):
        return None
    if not isinstance(u, int | float) or isinstance(u, bool) or not math.isfinite(u) or u < 0:
        u = 0.0
    return float(v), float(u)


_QUANTITIES = (("drH", "drH", "ΔrH°", "kJ/mol"), ("drG", "drG", "ΔrG°", "kJ/mol"),
               ("logK", "log10K", "log10 K", ""))


@check("reaction-closure", "a measured reaction agrees with the species data (Hess's law)")
def reaction_closure(ctx: Context) -> Iterator[Finding]:
    if not ctx.reactions:
        return
    from .. import thermo

    k = coverage_k(ctx)
    for ident, rec in ctx.reactions.items():
        eq = rec.get("equation") if isinstance(rec, dict) else None
        if not isinstance(eq, str):
            continue  # the schema check reports it
        T = rec.get("temperature_K", T_REF)
        if not isinstance(T, int | float) or isinstance(T, bool) or not (math.isfinite(T) and T > 0):
            continue
        try:
            reaction = thermo.parse_equation(eq, ctx.species)
            thermo.balance(reaction, ctx.species)
        except InputError as exc:
            yield Finding("reaction-closure", "error", f"reaction {ident} ({eq}): {exc.reason}",
                          field="equation")
            continue
        try:
            res = thermo.reaction_properties(reaction, ctx.species, float(T))
        except (InputError, ValueError, ArithmeticError) as exc:
            reason = getattr(exc, "reason", None) or str(exc)
            yield Finding("reaction-closure", "warning",
                          f"reaction {ident} ({eq}) cannot be compared with the species data: {reason}",
                          field="equation")
            continue
        for key, attr, label, unit in _QUANTITIES:
            meas = _measured(rec.get(key))
            if meas is None:
                continue
            calc, u_calc = _value_and_u(getattr(res, attr, None))
            if not math.isfinite(calc):
                yield Finding("reaction-closure", "info", f"reaction {ident}: {label} not checked: the "
                              "species data do not give it", field=key, observed=meas[0])
                continue
            half = 0.5 * 10.0 ** (-float(decimals(np.array([meas[0]]))[0]))
            tol = k * math.sqrt(meas[1] ** 2 + (u_calc if math.isfinite(u_calc) else 0.0) ** 2 + half**2)
            if abs(meas[0] - calc) > tol:
                yield Finding("reaction-closure", "error",
                              f"reaction {ident} ({eq}) at {num(T)} K: measured {label} = {num(meas[0])} "
                              f"{unit} but the species data give {num(calc)} {unit} by Hess's law; the "
                              f"difference exceeds {num(tol)} = {num(k)} × combined standard uncertainty "
                              "(measurement, species data, rounding of the digits given)",
                              field=key, observed=meas[0], expected=calc, tolerance=tol)

