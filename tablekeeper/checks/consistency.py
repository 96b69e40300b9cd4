"""Thermodynamic consistency checks: gibbs-consistency, third-law, gas-entropy-floor, unit-suspect.

Also owns the helpers the other value checks share: the dataset's check policy, the rounding term
(half a unit in the last digit given), the element composition of every species as one long table,
and the element reference entropies (the dataset's own reference species first, else the built-in
table of ``tablekeeper.elements``).

Every check here works on whole columns of ``ctx.frame``; Python loops run only over the findings.
A value that is missing, NaN or not a number is skipped (the schema check reports it).
"""

from __future__ import annotations

import itertools
import re
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from .. import elements as _el
from ..errors import UnitError
from ..units import factor_to_canonical
from . import Context, Finding, check

T_REF = _el.T_REF
R = _el.R
#: Pseudo-element of the electron in the composition table (electron-gas convention for gas ions).
ELECTRON = "e-"

# -- policy ---------------------------------------------------------------------------------------------


def policy(ctx: Context) -> dict:
    meta = ctx.meta if isinstance(ctx.meta, dict) else {}
    pol = meta.get("policy")
    return pol if isinstance(pol, dict) else {}


def _number(v: Any, default: float, lo: float, hi: float) -> float:
    # A policy value of the wrong type or out of range is the schema check's to report; use the default.
    if isinstance(v, int | float) and not isinstance(v, bool) and lo <= v <= hi:
        return float(v)
    return default


#: Standard uncertainties assumed for a value that states none, in canonical units. Evaluated
#: compilations give their values with overall uncertainties of roughly 8 to 80 units of the last
#: digit (NBS tables, 1982, introduction; from memory), i.e. about 0.8 to 8 kJ/mol for values given to
#: 0.1 kJ/mol; 1 kJ/mol and 1 J/(mol·K) sit at the strict end of that range. Without an assumption the
#: tolerance would be the rounding alone and a table without uncertainties would raise an error on
#: about one row in seven of a published handbook table. The `uncertainty` check still warns about each
#: value that states none. A dataset changes these through policy.assumed_uncertainty.
ASSUMED_UNCERTAINTY = {"dfH298": 1.0, "dfG298": 1.0, "S298": 1.0, "Cp298": 1.0}


def assumed_uncertainty(ctx: Context, fld: str) -> float:
    """The standard uncertainty assumed for ``fld`` where a value states none (dataset policy)."""
    pol = policy(ctx).get("assumed_uncertainty")
    given = pol.get(fld) if isinstance(pol, dict) else None
    return _number(given, ASSUMED_UNCERTAINTY[fld], 0.0, 1e6)


def _stated_or_assumed(col: pd.Series, assumed: float) -> np.ndarray:
    u = col.to_numpy(float)
    return np.where(np.isfinite(u), u, assumed)


def coverage_k(ctx: Context) -> float:
    """Coverage factor k for tolerances: dataset policy ``tolerance_k``, default 2 (about 95 %)."""
    return _number(policy(ctx).get("tolerance_k"), 2.0, 1.0, 10.0)


def _cache(ctx: Context, key: str, build):
    # Results shared by several checks of one run, keyed on the frame so a new frame rebuilds them.
    store = ctx.__dict__.setdefault("_tk_cache", {})
    tag = (key, id(ctx.frame))
    if tag not in store:
        store[tag] = build()
    return store[tag]


# -- rounding -------------------------------------------------------------------------------------------


def decimals(x: np.ndarray, max_decimals: int = 9) -> np.ndarray:
    """Number of decimal places of each value as it would be written in shortest form.

    Vectorised: the smallest d with round(x, d) == x (to 1e-9 relative, which absorbs the binary noise
    of a unit conversion). An integral value counts as 0 decimals: a stored float cannot tell "70" from
    "70.0", and reading it as 70 ± 0.5 is the conservative choice (a wider tolerance, no false alarm).
    """
    x = np.asarray(x, dtype=float)
    out = np.full(x.shape, float(max_decimals))
    done = ~np.isfinite(x)
    slack = 1e-9 * np.maximum(1.0, np.abs(np.nan_to_num(x)))
    for d in range(max_decimals + 1):
        with np.errstate(invalid="ignore", over="ignore"):
            ok = ~done & (np.abs(np.round(x, d) - x) <= slack)
        out[ok] = d
        done |= ok
    return out


def _unit_factors(frame: pd.DataFrame, fld: str) -> np.ndarray:
    """Factor from the unit a value was entered in to the canonical unit (1 when not converted)."""
    col = frame[f"entered_unit_{fld}"]
    fac = np.ones(len(frame))
    units = col.dropna()
    if units.empty:
        return fac
    table = {}
    for unit in pd.unique(units):
        try:
            table[unit] = factor_to_canonical(str(unit), fld)
        except UnitError:
            table[unit] = 1.0  # a unit that does not parse is the schema/import's to report
    mapped = col.map(table).to_numpy(dtype=float)
    return np.where(np.isfinite(mapped), mapped, 1.0)


def rounding(frame: pd.DataFrame, fld: str) -> np.ndarray:
    """Half a unit in the last digit given of each value of ``fld``, in the canonical unit.

    When a value was converted on entry, the digits are those of the value as entered (recovered as
    value / factor) and the half unit is converted back. Otherwise the digits are those of the stored
    float's shortest form. Used as a standard-uncertainty term in quadrature, which is conservative
    (the GUM would take a/√3 for a rectangular distribution of half-width a).
    """
    v = frame[fld].to_numpy(dtype=float)
    fac = _unit_factors(frame, fld)
    entered = v / fac
    return 0.5 * 10.0 ** (-decimals(entered)) * np.abs(fac)


# -- composition and element entropies ------------------------------------------------------------------

_ELEMENT_RE = re.compile(r"([A-Z][a-z]?)(\d*)")


def composition(ctx: Context) -> pd.DataFrame:
    """Long table of element counts: columns ``species``, ``element``, ``count`` (from the Hill formula).

    Each distinct Hill formula is split once with a regular expression (the frame already holds the
    parsed, normalised formula); the rows per species are then laid out with array operations.
    """

    def build() -> pd.DataFrame:
        hill = ctx.frame["hill"].dropna().astype(str)
        parts = {h: _ELEMENT_RE.findall(h) for h in pd.unique(hill)}
        els = {h: [e for e, _ in p] for h, p in parts.items()}
        cnt = {h: [float(n) if n else 1.0 for _, n in p] for h, p in parts.items()}
        lengths = hill.map({h: len(p) for h, p in parts.items()}).to_numpy(dtype=int)
        out = pd.DataFrame({
            "species": np.repeat(hill.index.to_numpy(), lengths),
            "element": list(itertools.chain.from_iterable(hill.map(els))),
            "count": np.fromiter(itertools.chain.from_iterable(hill.map(cnt)), dtype=float,
                                 count=int(lengths.sum())),
        })
        # Hill formulas name each element once, so (species, element) is already unique.
        return out

    return _cache(ctx, "composition", build)


@dataclass(frozen=True)
class ElementEntropy:
    S_per_atom: float
    u_per_atom: float
    origin: str          # "species o2-g" or the built-in citation


def element_entropies(ctx: Context) -> dict[str, ElementEntropy]:
    """Reference entropy per atom of each element this dataset can use.

    The dataset's own reference species win (``element_references`` in dataset.json first, then species
    marked ``reference_state``), when they carry a positive S°; otherwise the built-in table. The
    uncertainty per atom never falls below ``elements.ELEMENT_S_FLOOR``.
    """

    def build() -> dict[str, ElementEntropy]:
        out = {el: ElementEntropy(ref.S_per_atom, ref.u_per_atom,
                                  f"the built-in table ({_el.CITATIONS[ref.source]})")
               for el, ref in _el.REFERENCES.items()}
        out[ELECTRON] = ElementEntropy(_el.ELECTRON_S298, 0.0,
                                       "the ideal electron gas (Sackur–Tetrode, g = 2)")
        fr = ctx.frame
        meta = ctx.meta if isinstance(ctx.meta, dict) else {}
        refs = meta.get("element_references")
        refs = refs if isinstance(refs, dict) else {}
        named = fr.index.isin([v for v in refs.values() if isinstance(v, str)])
        ok = ((fr["reference_state"].astype(bool) | named) & fr["hill"].notna() & np.isfinite(fr["S298"])
              & (fr["S298"] > 0) & np.isfinite(fr["atoms"]) & (fr["atoms"] >= 1)
              & (fr["formula_charge"] == 0))
        cand = fr.loc[ok, ["hill", "atoms", "S298", "u_S298", "reference_state"]]
        elem = cand["hill"].astype(str).str.rstrip("0123456789")
        single = elem.str.fullmatch(r"[A-Z][a-z]?")
        chosen: dict[str, str] = {}
        for ident in cand.index[single & cand["reference_state"].astype(bool)]:
            chosen.setdefault(elem[ident], ident)
        for el, ident in refs.items():
            if isinstance(ident, str) and ident in cand.index and single[ident] and elem[ident] == el:
                chosen[el] = ident  # the explicit mapping wins over the reference_state mark
        for el, ident in chosen.items():
            row = cand.loc[ident]
            u = row["u_S298"] / row["atoms"] if np.isfinite(row["u_S298"]) else 0.0
            out[el] = ElementEntropy(row["S298"] / row["atoms"], max(u, _el.ELEMENT_S_FLOOR),
                                     f"species {ident}")
        return out

    return _cache(ctx, "element_entropies", build)


# -- Gibbs consistency ----------------------------------------------------------------------------------


def _electron_gas(ctx: Context) -> bool:
    meta = ctx.meta if isinstance(ctx.meta, dict) else {}
    return meta.get("electron_convention") == "electron-gas"


@dataclass
class GibbsTerms:
    """Everything the Gibbs-consistency test needs, one array per quantity, aligned on ``ids``."""

    ids: pd.Index
    H: np.ndarray
    G: np.ndarray
    S: np.ndarray
    uH: np.ndarray
    uG: np.ndarray
    uS: np.ndarray
    rH: np.ndarray
    rG: np.ndarray
    rS: np.ndarray
    sum_el: np.ndarray      # Σ n·S°(element per atom) incl. the convention terms, J/(mol·K)
    var_el: np.ndarray      # (T/1000)²·Σ (n·u_el)², kJ²/mol²
    k: float
    skipped: dict[str, str]  # species → why it was not checked (info)

    def evaluate(self, H=None, G=None, S=None, uH=None, uG=None, uS=None, rH=None, rG=None, rS=None):
        """(expected ΔfG°, residual, tolerance) in kJ/mol; arguments replace a column (unit-suspect)."""
        H = self.H if H is None else H
        G = self.G if G is None else G
        S = self.S if S is None else S
        uH = self.uH if uH is None else uH
        uG = self.uG if uG is None else uG
        uS = self.uS if uS is None else uS
        rH = self.rH if rH is None else rH
        rG = self.rG if rG is None else rG
        rS = self.rS if rS is None else rS
        with np.errstate(over="ignore", invalid="ignore"):  # absurd magnitudes: the schema's to report
            dfS = S - self.sum_el
            expected = H - T_REF * dfS / 1000.0
            var = (uG**2 + uH**2 + (T_REF * uS / 1000.0) ** 2 + rG**2 + rH**2 + (T_REF * rS / 1000.0) ** 2
                   + self.var_el)
            return expected, G - expected, self.k * np.sqrt(var)


_GAS_ION_SKIP = ("gas-phase ion: ΔfG° is not checked because dataset.json sets no electron_convention "
                 "\"electron-gas\" (a gas ion's ΔfS° depends on the convention for the electron)")


def gibbs_terms(ctx: Context) -> GibbsTerms:
    def build() -> GibbsTerms:
        fr = ctx.frame
        have = (np.isfinite(fr["dfH298"]) & np.isfinite(fr["dfG298"]) & np.isfinite(fr["S298"])
                & fr["hill"].notna())
        sub = fr.loc[have]
        n = len(sub)
        z = sub["formula_charge"].fillna(0.0).to_numpy(float)
        phase = sub["phase"].to_numpy(object)
        gas_ion = (phase == "g") & (z != 0)
        aq_ion = (phase == "aq") & (z != 0)
        electron_gas = _electron_gas(ctx)
        comp = composition(ctx)
        pos = sub.index.get_indexer(comp["species"])
        inside = pos >= 0
        pos = pos[inside]
        el = comp["element"].to_numpy(object)[inside]
        cnt = comp["count"].to_numpy(float)[inside].copy()
        # Conventions as extra "atoms". An aqueous ion gains −z hydrogen atoms (H+(aq) convention:
        # ΔfS° = S° − Σn·S°(el) + (z/2)·S°(H2, g)); the count is netted with the ion's own hydrogen so
        # that the element-entropy uncertainty adds as (n − z)·u, as it should for one shared value.
        if aq_ion.any():
            is_h = (el == "H") & aq_ion[pos]
            cnt[is_h] -= z[pos[is_h]]
            has_h = np.zeros(n, dtype=bool)
            has_h[pos[is_h]] = True
            add = np.flatnonzero(aq_ion & ~has_h)
            pos = np.concatenate([pos, add])
            el = np.concatenate([el, np.full(add.size, "H", dtype=object)])
            cnt = np.concatenate([cnt, -z[add]])
        # Under the electron-gas convention a gas ion's formation releases z electrons into the ideal
        # electron gas: ΔfS° = S° − Σn·S°(el) + z·S°(e−), i.e. −z "atoms" of the electron.
        if electron_gas and gas_ion.any():
            add = np.flatnonzero(gas_ion)
            pos = np.concatenate([pos, add])
            el = np.concatenate([el, np.full(add.size, ELECTRON, dtype=object)])
            cnt = np.concatenate([cnt, -z[add]])
        ent = element_entropies(ctx)
        el_series = pd.Series(el, dtype=object)
        s_el = el_series.map({e: v.S_per_atom for e, v in ent.items()}).to_numpy(float)
        u_el = el_series.map({e: v.u_per_atom for e, v in ent.items()}).to_numpy(float)
        missing = np.isnan(s_el)
        sum_el = np.bincount(pos, weights=np.where(missing, 0.0, cnt * s_el), minlength=n)
        var_el = np.bincount(pos, weights=np.where(missing, 0.0, (cnt * u_el) ** 2), minlength=n)
        # Not in place: np.bincount of an empty array is int64 even with float weights (empty dataset).
        var_el = var_el * (T_REF / 1000.0) ** 2
        skip = np.zeros(n, dtype=bool)
        skipped: dict[str, str] = {}
        if not electron_gas:
            skip |= gas_ion
            skipped.update(dict.fromkeys(sub.index[gas_ion], _GAS_ION_SKIP))
        if missing.any():
            lacking: dict[int, set] = {}
            for p_, e_ in zip(pos[missing], el[missing], strict=True):
                lacking.setdefault(int(p_), set()).add(e_)
            for p_, els in lacking.items():
                skip[p_] = True
                skipped.setdefault(sub.index[p_], "no reference entropy for " + ", ".join(sorted(els))
                                   + " in the dataset or the built-in table, so ΔfS° cannot be formed")
        keep = ~skip
        sub = sub.loc[keep]
        return GibbsTerms(
            ids=sub.index, H=sub["dfH298"].to_numpy(float), G=sub["dfG298"].to_numpy(float),
            S=sub["S298"].to_numpy(float),
            uH=_stated_or_assumed(sub["u_dfH298"], assumed_uncertainty(ctx, "dfH298")),
            uG=_stated_or_assumed(sub["u_dfG298"], assumed_uncertainty(ctx, "dfG298")),
            uS=_stated_or_assumed(sub["u_S298"], assumed_uncertainty(ctx, "S298")),
            rH=rounding(sub, "dfH298"), rG=rounding(sub, "dfG298"), rS=rounding(sub, "S298"),
            sum_el=sum_el[keep], var_el=var_el[keep], k=coverage_k(ctx), skipped=skipped)

    return _cache(ctx, "gibbs", build)


def num(v: float) -> str:
    """A number as text for a message: at most three decimals, no trailing zeros."""
    return f"{round(float(v), 3):g}" if abs(v) < 1e6 else f"{v:.6g}"


def _element_origins(ctx: Context, idents) -> dict[str, str]:
    """For each species of ``idents``: which elements took their reference entropy from where.

    One pass over the composition table for all the species asked about (a filter of the whole table
    per species would cost O(n) each, O(n²) over the findings of a large dataset)."""
    comp = composition(ctx)
    part = comp[comp["species"].isin(list(idents))]
    ent = element_entropies(ctx)
    els_of: dict[str, set] = {}
    for sp, el in zip(part["species"].tolist(), part["element"].tolist(), strict=True):
        els_of.setdefault(sp, set()).add(el)
    out = {}
    for ident in idents:
        by_origin: dict[str, list[str]] = {}
        for el in sorted(els_of.get(ident, ())):
            by_origin.setdefault(ent[el].origin, []).append(el)
        out[ident] = "; ".join(f"{', '.join(v)} from {k}" for k, v in by_origin.items())
    return out


@check("gibbs-consistency", "ΔfG° agrees with ΔfH° − T·ΔfS°, ΔfS° from S° and the element reference "
       "entropies, within the combined uncertainty and the rounding of the digits given")
def gibbs_consistency(ctx: Context) -> Iterator[Finding]:
    gt = gibbs_terms(ctx)
    for ident, why in gt.skipped.items():
        yield Finding("gibbs-consistency", "info", f"not checked: {why}", species=ident, field="dfG298")
    expected, resid, tol = gt.evaluate()
    bad = np.flatnonzero(np.abs(resid) > tol)
    if not bad.size:
        return
    fr = ctx.frame
    k = gt.k
    bad_ids = gt.ids[bad]
    origins = _element_origins(ctx, bad_ids.tolist())
    phases = fr["phase"].reindex(bad_ids).tolist()
    charges = fr["formula_charge"].reindex(bad_ids).tolist()
    for i, ident, phase, z in zip(bad, bad_ids, phases, charges, strict=True):
        conv = ""
        if phase == "aq" and z:
            conv = f"; aqueous ion: H+(aq) convention, + (z/2)·S°(H2, g) with z = {int(z)}"
        elif phase == "g" and z:
            conv = f"; gas ion: electron-gas convention, + z·S°(e−) with z = {int(z)}"
        dfS = gt.S[i] - gt.sum_el[i]
        yield Finding(
            "gibbs-consistency", "error",
            f"ΔfG° = {num(gt.G[i])} kJ/mol, but ΔfH° − T·ΔfS° = {num(expected[i])} kJ/mol at 298.15 K "
            f"(ΔfS° = {num(dfS)} J/(mol·K) from S° = {num(gt.S[i])} and the element entropies: "
            f"{origins[ident]}{conv}); the difference {num(resid[i])} kJ/mol exceeds the "
            f"tolerance {num(tol[i])} kJ/mol = {num(k)} × the combined standard uncertainty of ΔfG°, "
            "ΔfH°, T·S° and the element entropies, with half a unit in the last digit given of each value "
            "(a value stating no uncertainty counts with the policy's assumed one)",
            species=ident, field="dfG298", observed=gt.G[i], expected=expected[i], tolerance=tol[i])


# -- third law and the translational floor --------------------------------------------------------------

_PURE = ("cr", "l", "g", "am")


@check("third-law", "S° > 0 for every cr, l, g, am species at 298.15 K (aqueous ions excepted: "
       "conventional values)")
def third_law(ctx: Context) -> Iterator[Finding]:
    fr = ctx.frame
    # Aqueous species are excepted: their S° is a partial molar entropy on the S°(H+, aq) = 0 scale,
    # which is negative for many ions (OH−: −10.9 J/(mol·K), CODATA 1989).
    bad = fr["phase"].isin(_PURE) & np.isfinite(fr["S298"]) & (fr["S298"] <= 0)
    for ident, s in fr.loc[bad, "S298"].items():
        yield Finding("third-law", "error",
                      f"S° = {num(s)} J/(mol·K) for a {fr.at[ident, 'phase']} species; by the third law the "
                      "entropy of a pure phase at 298.15 K is above zero (S°(0 K) = 0 and Cp > 0)",
                      species=ident, field="S298", observed=s, expected=0.0, tolerance=0.0)


def _floor_terms(ctx: Context):
    fr = ctx.frame
    gas = ((fr["phase"] == "g") & np.isfinite(fr["S298"]) & np.isfinite(fr["molar_mass"])
           & (fr["molar_mass"] > 0))
    sub = fr.loc[gas]
    floor = _el.translational_entropy(sub["molar_mass"].to_numpy(float))
    u = np.nan_to_num(sub["u_S298"].to_numpy(float))
    tol = coverage_k(ctx) * np.sqrt(u**2 + rounding(sub, "S298") ** 2)
    return sub.index, sub["S298"].to_numpy(float), floor, tol


@check("gas-entropy-floor", "an ideal-gas S° is not below its Sackur–Tetrode translational entropy")
def gas_entropy_floor(ctx: Context) -> Iterator[Finding]:
    ids, S, floor, tol = _floor_terms(ctx)
    fr = ctx.frame
    for i in np.flatnonzero(S < floor - tol):
        ident = ids[i]
        yield Finding("gas-entropy-floor", "error",
                      f"S° = {num(S[i])} J/(mol·K) is below the translational (Sackur–Tetrode) entropy "
                      f"{num(floor[i])} J/(mol·K) of an ideal gas of molar mass "
                      f"{num(fr.at[ident, 'molar_mass'])} g/mol at 298.15 K and 1 bar; every gas has at "
                      f"least this much (tolerance {num(tol[i])} = k × uncertainty and rounding of S°)",
                      species=ident, field="S298", observed=S[i], expected=floor[i], tolerance=tol[i])


# -- unit slips -----------------------------------------------------------------------------------------

KCAL = 4.184  # thermochemical calorie, J (NIST SP 811)

#: (factor applied to the stored value, what the slip looks like) per field kind.
_ENERGY_FACTORS = (
    (KCAL, "the value looks like kcal/mol: × 4.184"),
    (1 / KCAL, "the value looks 4.184 times too large, as if converted from kcal/mol twice: ÷ 4.184"),
    (1000.0, "the value looks like MJ/mol: × 1000"),
    (1 / 1000.0, "the value looks like J/mol: ÷ 1000"),
)
_ENTROPY_FACTORS = (
    (KCAL, "the value looks like cal/(mol·K): × 4.184"),
    (1 / KCAL, "the value looks 4.184 times too large, as if converted from cal twice: ÷ 4.184"),
    (1000.0, "the value looks like kJ/(mol·K): × 1000"),
    (1 / 1000.0, "the value looks like mJ/(mol·K): ÷ 1000"),
)
_UNITS = {"dfH298": "kJ/mol", "dfG298": "kJ/mol", "S298": "J/(mol·K)", "Cp298": "J/(mol·K)"}


def factors_for(fld: str):
    return _ENTROPY_FACTORS if fld in ("S298", "Cp298") else _ENERGY_FACTORS


@dataclass(frozen=True)
class UnitSlip:
    species: str
    field: str
    value: float
    factor: float
    why: str
    failed: str        # the check that failed, and how the fix makes it pass


#: A unit slip moves a value by 76 % (a calorie factor) or 99.9 % (a factor 1000), so the failure it
#: causes is gross. A marginal failure that some factor happens to cure is more likely a coincidence
#: (a value near zero moved by a few kJ/mol): only failures beyond this many tolerances are tested.
GROSS = 3.0


def _gibbs_slips(ctx: Context) -> list[UnitSlip]:
    gt = gibbs_terms(ctx)
    _, resid, tol = gt.evaluate()
    fail = np.abs(resid) > GROSS * tol
    if not fail.any():
        return []
    idx = np.flatnonzero(fail)
    part = {name: getattr(gt, name)[idx] for name in ("H", "G", "S", "uH", "uG", "uS", "rH", "rG", "rS")}
    sub = GibbsTerms(gt.ids[idx], **part, sum_el=gt.sum_el[idx], var_el=gt.var_el[idx], k=gt.k, skipped={})
    trials = []
    for fld, col in (("dfH298", "H"), ("dfG298", "G"), ("S298", "S")):
        for fac, why in factors_for(fld):
            # If the value was entered in the wrong unit, so probably were its uncertainty and its last
            # digit: scale all three.
            args = {c: part[c] * fac for c in (col, "u" + col, "r" + col)}
            _, res2, tol2 = sub.evaluate(**args)
            trials.append((fld, fac, why, np.abs(res2) <= tol2, res2, tol2))
    passes = np.vstack([t[3] for t in trials])
    unique = passes.sum(axis=0) == 1
    out = []
    for j in np.flatnonzero(unique):
        t = next(t for t in trials if t[3][j])
        fld, fac, why, _, res2, tol2 = t
        col = {"dfH298": "H", "dfG298": "G", "S298": "S"}[fld]
        out.append(UnitSlip(sub.ids[j], fld, float(part[col][j]), fac, why,
                            f"with this fix ΔfG° − (ΔfH° − T·ΔfS°) = {num(res2[j])} kJ/mol, within the "
                            f"gibbs-consistency tolerance {num(tol2[j])} kJ/mol; as stored it is "
                            f"{num(resid[idx[j]])} kJ/mol"))
    return out


def _floor_slips(ctx: Context) -> list[UnitSlip]:
    # Only the calorie is tested here: any factor of 1000 would clear a floor trivially, so it could
    # never be the single factor that fixes the value. A floor has no upper side, so a value that is
    # merely low would also "pass" after × 4.184: where ΔfG°, ΔfH° and S° are all given, the Gibbs test
    # arbitrates instead (_gibbs_slips), and this rule serves only species it cannot check.
    ids, S, floor, tol = _floor_terms(ctx)
    fixed = S * KCAL
    arbitrated = ids.isin(gibbs_terms(ctx).ids)
    hit = ~arbitrated & (S < floor - tol) & (fixed >= floor - tol * KCAL)
    return [UnitSlip(ids[i], "S298", float(S[i]), KCAL, _ENTROPY_FACTORS[0][1],
                     f"with this fix S° clears the translational floor {num(floor[i])} J/(mol·K), as "
                     "stored it is below it") for i in np.flatnonzero(hit)]


@check("unit-suspect", "a failing value that passes after a factor 4.184 or 1000 is reported as a likely "
       "unit slip, with the fix")
def unit_suspect(ctx: Context) -> Iterator[Finding]:
    from .heat_capacity import cp_slips  # lazy: heat_capacity imports this module

    seen: set[tuple[str, str, float]] = set()
    for slip in [*_gibbs_slips(ctx), *_floor_slips(ctx), *cp_slips(ctx)]:
        key = (slip.species, slip.field, slip.factor)
        if key in seen:
            continue
        seen.add(key)
        corrected = slip.value * slip.factor
        unit = _UNITS[slip.field]
        yield Finding("unit-suspect", "error",
                      f"{slip.field} = {num(slip.value)} {unit} is probably a unit slip ({slip.why}); "
                      f"{slip.failed}",
                      species=slip.species, field=slip.field, observed=slip.value, expected=corrected,
                      suggestion=f"{corrected:.6g} {unit} ({slip.why})")
