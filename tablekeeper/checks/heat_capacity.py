"""Heat-capacity checks: cp-range (Cp°(298.15) bounds), cp-model (the Cp(T) model), cp-continuity.

The bounds come from statistical mechanics and are computed from R and the atom count, never typed in:

* every pure phase has Cp > 0 (thermal stability); an aqueous species' Cp° is a partial molar
  quantity on the H+(aq) scale and may be negative, so aq is not bounded;
* an ideal gas has at least its translational Cv = 3/2 R, so Cp = Cv + R ≥ 5/2 R;
* its classical limit, with every mode fully excited: Cv = 3/2 R (translation) + R (rotation, linear)
  or 3/2 R (non-linear) + R per vibration, (3N − 5) linear or (3N − 6) non-linear. Hence
  Cp = (3N − 3/2) R linear, (3N − 2) R non-linear, 5/2 R for an atom. Linearity cannot be read from a
  formula; for 2 ≤ N ≤ 4 atoms, where a linear molecule is common (CO2, HCN, C2H2), the larger, linear
  limit is used. For N ≥ 5 the non-linear limit is used: the few linear ones (C4H2, HC3N, C3O2) have
  Cp° far below either limit at 298.15 K. Exceeding the limit is a warning, not an error, because
  low-lying electronic states add to it (O, F and Cl atoms do);
* a condensed phase of n atoms per formula unit within 3nR (Dulong–Petit) plus 20 %: that margin is
  common practice, no source; real solids exceed 3nR through anharmonicity and electronic or magnetic
  terms, and liquids may exceed it (water: 75.3 against 3·3R = 74.8 J/(mol·K)), hence a warning.

The two model checks call tablekeeper.thermo once per species that has a model; everything else is
computed over whole columns.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..units import R
from . import Context, Finding, check
from .consistency import _ENTROPY_FACTORS, UnitSlip, _cache, coverage_k, num, rounding

T_REF = 298.15
#: Common-practice margin over Dulong–Petit (no source): solids reach about 1.2 × 3nR near melting.
DULONG_PETIT_MARGIN = 1.2

_CONDENSED = ("cr", "l", "am")


def gas_cp_lower() -> float:
    """5/2 R: translation only."""
    return 2.5 * R


def gas_cp_classical(atoms: np.ndarray) -> np.ndarray:
    """Classical Cp limit of an ideal gas of N atoms (linear for N ≤ 4, non-linear above), J/(mol·K)."""
    n = np.asarray(atoms, dtype=float)
    return np.where(n <= 1, 2.5 * R, np.where(n <= 4, (3 * n - 1.5) * R, (3 * n - 2.0) * R))


def condensed_cp_bound(atoms: np.ndarray) -> np.ndarray:
    """Dulong–Petit 3nR times the common-practice margin, J/(mol·K)."""
    return DULONG_PETIT_MARGIN * 3.0 * np.asarray(atoms, dtype=float) * R


def _cp_columns(ctx: Context):
    fr = ctx.frame
    have = np.isfinite(fr["Cp298"]) & fr["phase"].isin(("g", *_CONDENSED))
    sub = fr.loc[have]
    cp = sub["Cp298"].to_numpy(float)
    u = np.nan_to_num(sub["u_Cp298"].to_numpy(float))
    tol = coverage_k(ctx) * np.sqrt(u**2 + rounding(sub, "Cp298") ** 2)
    return sub, cp, tol


def _atoms_text(n: float) -> str:
    return f"{int(n)} atom" + ("s" if int(n) != 1 else "")


@check("cp-range", "Cp° > 0 for pure phases; ideal gas Cp° ≥ 5/2 R and not above its classical limit; "
       "condensed phases within a Dulong–Petit-based bound")
def cp_range(ctx: Context) -> Iterator[Finding]:
    sub, cp, tol = _cp_columns(ctx)
    phase = sub["phase"].to_numpy()
    atoms = sub["atoms"].to_numpy(float)
    gas = phase == "g"
    cond = ~gas
    ids = sub.index
    lo = gas_cp_lower()
    for i in np.flatnonzero(gas & (cp < lo - tol)):
        yield Finding("cp-range", "error",
                      f"an ideal gas has Cp° ≥ 5/2 R = {num(lo)} J/(mol·K) (translation alone); Cp° = "
                      f"{num(cp[i])} J/(mol·K) (tolerance {num(tol[i])} = k × uncertainty and rounding)",
                      species=ids[i], field="Cp298", observed=cp[i], expected=lo, tolerance=tol[i])
    have_n = np.isfinite(atoms) & (atoms >= 1)
    hi = gas_cp_classical(np.where(have_n, atoms, 1))
    for i in np.flatnonzero(gas & have_n & (cp > hi + tol)):
        shape = ("an atom" if atoms[i] == 1
                 else "linear, the larger limit" if atoms[i] <= 4 else "non-linear")
        yield Finding("cp-range", "warning",
                      f"Cp° = {num(cp[i])} J/(mol·K) is above the classical limit {num(hi[i])} J/(mol·K) "
                      f"of a gas of {_atoms_text(atoms[i])} ({shape}; all modes excited); low-lying "
                      f"electronic states can exceed it, else the value is suspect (tolerance {num(tol[i])})",
                      species=ids[i], field="Cp298", observed=cp[i], expected=hi[i], tolerance=tol[i])
    for i in np.flatnonzero(cond & (cp <= 0)):
        yield Finding("cp-range", "error",
                      f"Cp° = {num(cp[i])} J/(mol·K) for a {phase[i]} phase; a pure phase has Cp° > 0 "
                      "(thermal stability)", species=ids[i], field="Cp298", observed=cp[i], expected=0.0,
                      tolerance=0.0)
    bound = condensed_cp_bound(np.where(have_n, atoms, np.nan))
    with np.errstate(invalid="ignore"):
        over = cond & have_n & (cp > bound + tol)
    for i in np.flatnonzero(over):
        extra = " (liquids may exceed it)" if phase[i] == "l" else ""
        yield Finding("cp-range", "warning",
                      f"Cp° = {num(cp[i])} J/(mol·K) is above 1.2 × 3nR = {num(bound[i])} J/(mol·K) for "
                      f"{_atoms_text(atoms[i])} per formula unit (Dulong–Petit plus a 20 % margin, common "
                      f"practice){extra}", species=ids[i], field="Cp298", observed=cp[i], expected=bound[i],
                      tolerance=tol[i])


def cp_slips(ctx: Context) -> list[UnitSlip]:
    """Gas Cp° outside [5/2 R, classical limit] that exactly one unit factor brings inside.

    Only gases: their window is bounded on both sides, so a factor of 4.184 and one of 1000 cannot both
    fix a value. A condensed phase has only an upper bound, under which every shrinking factor lands.
    """
    sub, cp, tol = _cp_columns(ctx)
    atoms = sub["atoms"].to_numpy(float)
    gas = (sub["phase"].to_numpy() == "g") & np.isfinite(atoms) & (atoms >= 1)
    lo = gas_cp_lower()
    hi = gas_cp_classical(np.where(gas, atoms, 1))
    outside = gas & ((cp < lo - tol) | (cp > hi + tol))
    if not outside.any():
        return []
    passes = []
    for fac, why in _ENTROPY_FACTORS:
        with np.errstate(over="ignore", invalid="ignore"):
            v, t = cp * fac, tol * fac
            passes.append((fac, why, outside & (v >= lo - t) & (v <= hi + t)))
    count = np.sum([p[2] for p in passes], axis=0)
    out = []
    for i in np.flatnonzero(count == 1):
        fac, why, _ = next(p for p in passes if p[2][i])
        out.append(UnitSlip(sub.index[i], "Cp298", float(cp[i]), fac, why,
                            f"with this fix Cp° lies within [5/2 R, classical limit] = [{num(lo)}, "
                            f"{num(hi[i])}] J/(mol·K); as stored it does not"))
    return out


# -- models ---------------------------------------------------------------------------------------------

#: Fit allowance for a model against the bounds (J/(mol·K)): published NASA and Shomate fits of a
#: monatomic gas sit on 5/2 R to about 0.01; 0.1 leaves room for coefficients printed to few digits.
MODEL_CP_SLACK = 0.1
#: The classical limit bounds a model only up to this temperature (K). Above it anharmonicity,
#: centrifugal stretching and electronic excitation carry real gases past the harmonic value: the
#: NIST Shomate fit of CO2 reaches 65.0 J/(mol·K) at 6000 K against 7.5 R = 62.4, the GRI-Mech O2
#: polynomial 41 at 3500 K against 4.5 R = 37.4. Below it the bound still catches a wild fit.
MODEL_CLASSICAL_TMAX = 1000.0
#: Relative standard uncertainty allowed for a fit against its own Cp°(298.15): published fits
#: reproduce their tables to a few tenths of a per cent (common practice, no source); 0.5 % as u.
MODEL_CP_REL = 0.005
#: Standard uncertainty allowed for a model's constants against ΔfH° (kJ/mol) and S° (J/(mol·K)):
#: NASA a6/a7 and Shomate F, G, H are printed to reproduce ΔfH° and S° at 298.15 K to about 0.01
#: (the NIST Shomate CO2 constants give S°(298.15) = 213.787 against 213.79 tabulated).
MODEL_H_TERM = 0.01
MODEL_S_TERM = 0.02
#: Points sampled per segment for the bounds test.
GRID_POINTS = 41
#: Two ranges meet when their ends differ by less than this (K).
RANGE_SLACK = 1e-6

#: Continuity at a break, with the values of both neighbours at the break temperature. NASA fits are
#: constrained to join with equal Cp, H and S (GRI-Mech O2 and H2O join to 1e-7); the NIST WebBook
#: Shomate fits are not. Cp: the larger of 1 % and 0.1 J/(mol·K). Measured over the 399 gas-phase
#: breaks of the NIST Shomate set that the `chemicals` package carries: median jump 0.07, 95th
#: percentile 0.33 J/(mol·K); 99 % join within 1 %, while 0.5 % would fail 7 % of those published
#: fits (tests/checks/test_heat_capacity.py measures it again). H within 0.01 kJ/mol and S within
#: 0.02 J/(mol·K): the NIST CO2 and H2O fits join to 0.003 kJ/mol and 0.005 J/(mol·K), and a step of
#: that size moves ΔrG°(T) by under 0.03 kJ/mol at 1000 K, below the uncertainty of any ΔfH°; a
#: larger step means a wrong constant (a6/a7 or F/G/H) or a misplaced segment.
CONT_CP_REL = 0.01
CONT_CP_ABS = 0.1
CONT_H = 0.01
CONT_S = 0.02

#: Errors a malformed model may raise inside the engine; reported as findings, never as a crash.
_MODEL_ERRORS = (InputError, ValueError, TypeError, KeyError, IndexError, ArithmeticError)


_ROW_COLUMNS = ("phase", "atoms", "Cp298", "u_Cp298", "dfH298", "u_dfH298", "S298", "u_S298")

#: Evaluate the models in stacked arrays (tablekeeper.thermo.batch). False forces the per-model path
#: through the public model classes, the reference that tests/checks/test_batch_equivalence.py compares
#: the batch path with.
BATCH = True


@dataclass
class _ModelTable:
    """The species that carry a model, in frame order, with the scalars the model checks need."""

    ids: list[str]
    objs: list[dict]
    cols: dict[str, np.ndarray]
    values: dict[str, list]   # the same columns as plain Python values, for the per-model path

    def row(self, pos: int) -> dict:
        return {c: v[pos] for c, v in self.values.items()}


def _model_table(ctx: Context) -> _ModelTable:
    def build() -> _ModelTable:
        fr = ctx.frame
        has = fr["cp_kind"].notna().to_numpy()
        sub = fr.loc[has]
        keep, ids, objs = [], [], []
        for i, ident in enumerate(sub.index):
            rec = ctx.species.get(ident)
            model = rec.get("cp_model") if isinstance(rec, dict) else None
            if isinstance(model, dict):
                keep.append(i)
                ids.append(ident)
                objs.append(model)
        sub = sub.iloc[keep]
        cols = {c: sub[c].to_numpy(float) for c in _ROW_COLUMNS if c != "phase"}
        cols["phase"] = sub["phase"].to_numpy(object)
        for fld in ("Cp298", "dfH298", "S298"):
            cols[f"r_{fld}"] = rounding(sub, fld)
        # Plain Python scalars per row: a pandas row lookup per model would cost more than the model.
        values = {c: sub[c].tolist() for c in _ROW_COLUMNS}
        values.update({f"r_{fld}": cols[f"r_{fld}"].tolist() for fld in ("Cp298", "dfH298", "S298")})
        return _ModelTable(ids, objs, cols, values)

    return _cache(ctx, "cp_model_table", build)


def _models(ctx: Context) -> Iterator[tuple[str, dict, dict]]:
    """(id, cp_model object, the scalars the model checks need) for each species with a model."""
    table = _model_table(ctx)
    for pos, (ident, obj) in enumerate(zip(table.ids, table.objs, strict=True)):
        yield ident, obj, table.row(pos)


def _batch(ctx: Context):
    from ..thermo import batch

    return _cache(ctx, "cp_model_batch", lambda: batch.read_models(_model_table(ctx).objs))


def _load_model(ident: str, obj: dict, check_id: str):
    from .. import thermo

    try:
        return thermo.model_from_json(obj), None
    except _MODEL_ERRORS as exc:
        reason = getattr(exc, "reason", None) or str(exc) or type(exc).__name__
        return None, Finding(check_id, "error", f"the Cp(T) model cannot be read: {reason}",
                             species=ident, field="cp_model")


def _in_range(model, T: float) -> bool:
    # The engine decides what it covers (it lets a range that starts at 300 K serve 298.15 K).
    covers = getattr(model, "covers", None)
    if callable(covers):
        return bool(covers(T))
    return model.tmin - RANGE_SLACK <= T <= model.tmax + RANGE_SLACK


@check("cp-model", "the model is positive and within bounds over its range; its ranges do not gap or "
       "overlap; it agrees with Cp°(298.15) and reproduces ΔfH° and S° at 298.15 K")
def cp_model(ctx: Context) -> Iterator[Finding]:
    k = coverage_k(ctx)
    if not BATCH:
        for ident, obj, row in _models(ctx):
            yield from _one_cp_model(ident, obj, row, k)
        return
    table = _model_table(ctx)
    mb = _batch(ctx)
    per_model: list[list[Finding]] = [[] for _ in table.ids]
    for pos in mb.unbatched:
        per_model[pos] = _one_cp_model(table.ids[pos], table.objs[pos], table.row(pos), k)
    with np.errstate(all="ignore"):
        for group in mb.groups:
            _group_model_findings(group, table, k, per_model)
    for found in per_model:
        yield from found


def _one_cp_model(ident: str, obj: dict, row: dict, k: float) -> list[Finding]:
    """The cp-model findings of one species through the per-model API (the reference path)."""
    model, failure = _load_model(ident, obj, "cp-model")
    if failure is not None:
        return [failure]
    try:
        # A model with absurd coefficients overflows; that shows as a non-finite Cp finding.
        with np.errstate(all="ignore"):
            return list(_model_findings(ident, model, row, k))
    except _MODEL_ERRORS as exc:
        reason = getattr(exc, "reason", None) or str(exc) or type(exc).__name__
        return [Finding("cp-model", "error", f"the Cp(T) model cannot be evaluated: {reason}",
                        species=ident, field="cp_model")]


def _finite(v: float) -> float:
    return v if isinstance(v, float) and math.isfinite(v) else 0.0


def _model_findings(ident: str, model, row: dict, k: float) -> Iterator[Finding]:
    segs = list(model.segments)
    for (_, b0), (a1, _) in itertools.pairwise(segs):
        if a1 > b0 + RANGE_SLACK:
            yield Finding("cp-model", "error", f"the ranges leave a gap from {num(b0)} K to {num(a1)} K, "
                          "where the model gives no Cp", species=ident, field="cp_model", observed=a1,
                          expected=b0)
        elif a1 < b0 - RANGE_SLACK:
            yield Finding("cp-model", "error", f"the ranges overlap from {num(a1)} K to {num(b0)} K, where "
                          "two sets of coefficients claim the same temperatures", species=ident,
                          field="cp_model", observed=a1, expected=b0)
    phase = row["phase"]
    atoms = row["atoms"]
    for i, (a, b) in enumerate(segs):
        T = np.linspace(a, b, GRID_POINTS)
        cp = np.asarray(model.segment_values(i, T)[0], dtype=float)
        where = f"range {i + 1} ({num(a)}–{num(b)} K)"
        if not np.all(np.isfinite(cp)):
            j = int(np.flatnonzero(~np.isfinite(cp))[0])
            yield Finding("cp-model", "error", f"the model gives no finite Cp at {num(T[j])} K in {where}",
                          species=ident, field="cp_model")
            continue
        j = int(np.argmin(cp))
        if phase == "g":
            lo = gas_cp_lower()
            if cp[j] < lo - MODEL_CP_SLACK:
                yield Finding("cp-model", "error",
                              f"the model gives Cp = {num(cp[j])} J/(mol·K) at {num(T[j])} K in {where}, "
                              f"below 5/2 R = {num(lo)} J/(mol·K), the least any ideal gas has "
                              f"(slack {MODEL_CP_SLACK} for fitting)", species=ident, field="cp_model",
                              observed=cp[j], expected=lo, tolerance=MODEL_CP_SLACK)
            low_t = T <= MODEL_CLASSICAL_TMAX
            if np.isfinite(atoms) and atoms >= 1 and low_t.any():
                hi = float(gas_cp_classical(atoms))
                m = int(np.argmax(np.where(low_t, cp, -np.inf)))
                if cp[m] > hi + MODEL_CP_SLACK:
                    yield Finding("cp-model", "warning",
                                  f"the model gives Cp = {num(cp[m])} J/(mol·K) at {num(T[m])} K in {where}, "
                                  f"above the classical limit {num(hi)} J/(mol·K) for {_atoms_text(atoms)}; "
                                  "electronic states can exceed it", species=ident, field="cp_model",
                                  observed=cp[m], expected=hi, tolerance=MODEL_CP_SLACK)
        elif phase in _CONDENSED and cp[j] <= 0:
            # Condensed models get only the positivity test: at high temperature real solids and
            # liquids exceed 3nR (anharmonicity, vacancies, magnetic peaks such as iron at 1043 K).
            yield Finding("cp-model", "error",
                          f"the model gives Cp = {num(cp[j])} J/(mol·K) at {num(T[j])} K in {where}; a pure "
                          "phase has Cp > 0", species=ident, field="cp_model", observed=cp[j], expected=0.0)
    if not _in_range(model, T_REF):
        return
    cp298 = row["Cp298"]
    if math.isfinite(cp298):
        got = float(np.asarray(model.cp(T_REF)))
        u = _finite(row["u_Cp298"])
        tol = k * math.sqrt(u**2 + row["r_Cp298"] ** 2 + (MODEL_CP_REL * cp298) ** 2)
        if abs(got - cp298) > tol:
            yield Finding("cp-model", "error",
                          f"the model gives Cp(298.15 K) = {num(got)} J/(mol·K) but Cp° is {num(cp298)}; the "
                          f"difference exceeds {num(tol)} = {num(k)} × (uncertainty, rounding and "
                          f"{MODEL_CP_REL:.1%} for the fit)", species=ident, field="cp_model",
                          observed=got, expected=cp298, tolerance=tol)
    for getter, fld, label, unit, term in (
            ("implied_dfH298", "dfH298", "ΔfH°", "kJ/mol", MODEL_H_TERM),
            ("implied_S298", "S298", "S°", "J/(mol·K)", MODEL_S_TERM)):
        implied = getattr(model, getter)()
        value = row[fld]
        if implied is None or not math.isfinite(value):
            continue
        implied = float(implied)
        u = _finite(row[f"u_{fld}"])
        tol = k * math.sqrt(u**2 + row[f"r_{fld}"] ** 2 + term**2)
        if abs(implied - value) > tol:
            yield Finding("cp-model", "error",
                          f"the model's constants give {label}(298.15 K) = {num(implied)} {unit} but the "
                          f"record has {num(value)}; the difference exceeds {num(tol)} = {num(k)} × "
                          f"(uncertainty, rounding and {term} for the constants)", species=ident,
                          field="cp_model", observed=implied, expected=value, tolerance=tol)


@check("cp-continuity", "Cp, H and S are continuous at range breaks")
def cp_continuity(ctx: Context) -> Iterator[Finding]:
    if not BATCH:
        for ident, obj, _row in _models(ctx):
            yield from _one_continuity(ident, obj)
        return
    table = _model_table(ctx)
    mb = _batch(ctx)
    per_model: list[list[Finding]] = [[] for _ in table.ids]
    for pos in mb.unbatched:
        per_model[pos] = _one_continuity(table.ids[pos], table.objs[pos])
    with np.errstate(all="ignore"):
        for group in mb.groups:
            _group_continuity_findings(group, table, per_model)
    for found in per_model:
        yield from found


def _one_continuity(ident: str, obj: dict) -> list[Finding]:
    """The cp-continuity findings of one species through the per-model API (the reference path)."""
    model, failure = _load_model(ident, obj, "cp-continuity")
    if failure is not None:
        return [failure]
    try:
        with np.errstate(all="ignore"):
            return list(_continuity_findings(ident, model))
    except _MODEL_ERRORS as exc:
        reason = getattr(exc, "reason", None) or str(exc) or type(exc).__name__
        return [Finding("cp-continuity", "error", f"the Cp(T) model cannot be evaluated at its breaks: "
                        f"{reason}", species=ident, field="cp_model")]


def _continuity_findings(ident: str, model) -> Iterator[Finding]:
    for i, tb in enumerate(model.breaks):
        left = model.segment_values(i, tb)
        right = model.segment_values(i + 1, tb)
        cp_l, cp_r = float(np.asarray(left[0])), float(np.asarray(right[0]))
        tol = max(CONT_CP_REL * max(abs(cp_l), abs(cp_r)), CONT_CP_ABS)
        where = f"at the break {num(tb)} K between ranges {i + 1} and {i + 2}"
        if not abs(cp_l - cp_r) <= tol:
            yield Finding("cp-continuity", "error",
                          f"Cp jumps {where}: {num(cp_l)} below, {num(cp_r)} J/(mol·K) above (tolerance "
                          f"{num(tol)}: the larger of {CONT_CP_REL:.0%} and {CONT_CP_ABS} J/(mol·K))",
                          species=ident, field="cp_model", observed=cp_r, expected=cp_l, tolerance=tol)
        for pos, label, unit, tol_q in ((1, "H", "kJ/mol", CONT_H), (2, "S", "J/(mol·K)", CONT_S)):
            a, b = left[pos], right[pos]
            if a is None or b is None:
                continue  # a segment without H/S constants (e.g. Shomate without F, G, H)
            a, b = float(np.asarray(a)), float(np.asarray(b))
            if not abs(a - b) <= tol_q:
                yield Finding("cp-continuity", "error",
                              f"{label} jumps {where}: {num(a)} below, {num(b)} {unit} above (tolerance "
                              f"{tol_q} {unit}); the integration constants of the two ranges disagree",
                              species=ident, field="cp_model", observed=b, expected=a, tolerance=tol_q)


# -- the batch path ----------------------------------------------------------------------------------------
# The same tests as _model_findings and _continuity_findings, over a group of models stacked by
# tablekeeper.thermo.batch. Each finding goes to its model's list in the order the per-model path
# yields it (ranges in order; within a range the low test before the high one), so that both paths
# give the same report.


def _group_model_findings(group, table: _ModelTable, k: float, out: list[list[Finding]]) -> None:
    from ..thermo import batch

    mem = group.members
    ids = [table.ids[p] for p in mem]
    lo, hi = group.lo, group.hi
    gap = lo[:, 1:] > hi[:, :-1] + RANGE_SLACK
    overlap = lo[:, 1:] < hi[:, :-1] - RANGE_SLACK
    for r, j in zip(*np.nonzero(gap | overlap), strict=True):
        b0, a1 = float(hi[r, j]), float(lo[r, j + 1])
        if gap[r, j]:
            text = f"the ranges leave a gap from {num(b0)} K to {num(a1)} K, where the model gives no Cp"
        else:
            text = (f"the ranges overlap from {num(a1)} K to {num(b0)} K, where two sets of coefficients "
                    "claim the same temperatures")
        out[mem[r]].append(Finding("cp-model", "error", text, species=ids[r], field="cp_model",
                                   observed=a1, expected=b0))
    phase = table.cols["phase"][mem]
    atoms = table.cols["atoms"][mem]
    gas = phase == "g"
    condensed = np.isin(phase, _CONDENSED)
    have_n = np.isfinite(atoms) & (atoms >= 1)
    hi_cl = gas_cp_classical(np.where(have_n, atoms, 1))
    lo_gas = gas_cp_lower()
    grid = batch.sample_grid(group, GRID_POINTS)
    cp_all = batch.segment_values(group, grid)[0]
    rows = np.arange(group.size)
    for j in range(group.nseg):
        T, cp = grid[:, j, :], cp_all[:, j, :]
        bad = ~np.isfinite(cp)
        nonfinite = bad.any(axis=1)
        first_bad = np.argmax(bad, axis=1)
        jmin = np.argmin(np.where(bad, np.inf, cp), axis=1)
        cmin, tmin = cp[rows, jmin], T[rows, jmin]
        low_t = T <= MODEL_CLASSICAL_TMAX
        jmax = np.argmax(np.where(low_t, cp, -np.inf), axis=1)
        cmax, tmax = cp[rows, jmax], T[rows, jmax]
        ok = ~nonfinite
        too_low = ok & gas & (cmin < lo_gas - MODEL_CP_SLACK)
        too_high = ok & gas & have_n & low_t.any(axis=1) & (cmax > hi_cl + MODEL_CP_SLACK)
        not_pos = ok & condensed & (cmin <= 0)
        hits = np.flatnonzero(nonfinite | too_low | too_high | not_pos)
        for r in hits:
            a, b = float(lo[r, j]), float(hi[r, j])
            where = f"range {j + 1} ({num(a)}–{num(b)} K)"
            found = out[mem[r]]
            if nonfinite[r]:
                found.append(Finding("cp-model", "error", f"the model gives no finite Cp at "
                                     f"{num(T[r, first_bad[r]])} K in {where}", species=ids[r],
                                     field="cp_model"))
                continue
            if too_low[r]:
                found.append(Finding(
                    "cp-model", "error",
                    f"the model gives Cp = {num(cmin[r])} J/(mol·K) at {num(tmin[r])} K in {where}, "
                    f"below 5/2 R = {num(lo_gas)} J/(mol·K), the least any ideal gas has "
                    f"(slack {MODEL_CP_SLACK} for fitting)", species=ids[r], field="cp_model",
                    observed=cmin[r], expected=lo_gas, tolerance=MODEL_CP_SLACK))
            if too_high[r]:
                found.append(Finding(
                    "cp-model", "warning",
                    f"the model gives Cp = {num(cmax[r])} J/(mol·K) at {num(tmax[r])} K in {where}, "
                    f"above the classical limit {num(hi_cl[r])} J/(mol·K) for {_atoms_text(atoms[r])}; "
                    "electronic states can exceed it", species=ids[r], field="cp_model",
                    observed=cmax[r], expected=float(hi_cl[r]), tolerance=MODEL_CP_SLACK))
            if not_pos[r]:
                found.append(Finding(
                    "cp-model", "error",
                    f"the model gives Cp = {num(cmin[r])} J/(mol·K) at {num(tmin[r])} K in {where}; a pure "
                    "phase has Cp > 0", species=ids[r], field="cp_model", observed=cmin[r], expected=0.0))
    # Agreement with the record's values at 298.15 K, for the models that cover it.
    inside = batch.covers(group, T_REF)
    cols = {c: v[mem] for c, v in table.cols.items()}
    cp298 = cols["Cp298"]
    got = batch.cp_at(group, T_REF)
    u = np.where(np.isfinite(cols["u_Cp298"]), cols["u_Cp298"], 0.0)
    tol_cp = k * np.sqrt(u**2 + cols["r_Cp298"] ** 2 + (MODEL_CP_REL * cp298) ** 2)
    bad_cp = inside & np.isfinite(cp298) & (np.abs(got - cp298) > tol_cp)
    implied_h, implied_s = batch.implied_298(group)
    checks = []
    for implied, fld, label, unit, term in ((implied_h, "dfH298", "ΔfH°", "kJ/mol", MODEL_H_TERM),
                                            (implied_s, "S298", "S°", "J/(mol·K)", MODEL_S_TERM)):
        value = cols[fld]
        u = np.where(np.isfinite(cols[f"u_{fld}"]), cols[f"u_{fld}"], 0.0)
        tol = k * np.sqrt(u**2 + cols[f"r_{fld}"] ** 2 + term**2)
        # NaN stands for "no such constant" (None in the per-model API); a NaN that the constants
        # produce fails no comparison there either.
        bad = inside & ~np.isnan(implied) & np.isfinite(value) & (np.abs(implied - value) > tol)
        checks.append((bad, implied, value, tol, label, unit, term))
    for r in np.flatnonzero(bad_cp | checks[0][0] | checks[1][0]):
        found = out[mem[r]]
        if bad_cp[r]:
            g, c, t = float(got[r]), float(cp298[r]), float(tol_cp[r])
            found.append(Finding(
                "cp-model", "error",
                f"the model gives Cp(298.15 K) = {num(g)} J/(mol·K) but Cp° is {num(c)}; the "
                f"difference exceeds {num(t)} = {num(k)} × (uncertainty, rounding and "
                f"{MODEL_CP_REL:.1%} for the fit)", species=ids[r], field="cp_model",
                observed=g, expected=c, tolerance=t))
        for bad, implied, value, tol, label, unit, term in checks:
            if bad[r]:
                im, v, t = float(implied[r]), float(value[r]), float(tol[r])
                found.append(Finding(
                    "cp-model", "error",
                    f"the model's constants give {label}(298.15 K) = {num(im)} {unit} but the "
                    f"record has {num(v)}; the difference exceeds {num(t)} = {num(k)} × "
                    f"(uncertainty, rounding and {term} for the constants)", species=ids[r],
                    field="cp_model", observed=im, expected=v, tolerance=t))


def _py_max(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Python's max(a, b) elementwise, NaN included: b only when b > a."""
    return np.where(b > a, b, a)


def _group_continuity_findings(group, table: _ModelTable, out: list[list[Finding]]) -> None:
    from ..thermo import batch

    if group.nseg < 2:
        return
    mem = group.members
    n = group.size
    for i in range(group.nseg - 1):
        tb = group.lo[:, i + 1]
        T = tb[:, None]
        cp_l, h_l, s_l = (x[:, 0] for x in batch.segment_values(group, T, seg=np.full(n, i)))
        cp_r, h_r, s_r = (x[:, 0] for x in batch.segment_values(group, T, seg=np.full(n, i + 1)))
        tol_cp = _py_max(CONT_CP_REL * _py_max(np.abs(cp_l), np.abs(cp_r)), np.full(n, CONT_CP_ABS))
        jump_cp = ~(np.abs(cp_l - cp_r) <= tol_cp)
        if group.kind == "shomate":  # a range without F (G) has no absolute H (S)
            has_h = ~np.isnan(group.c_h[:, i]) & ~np.isnan(group.c_h[:, i + 1])
            has_s = ~np.isnan(group.c_s[:, i]) & ~np.isnan(group.c_s[:, i + 1])
        else:
            has_h = has_s = np.ones(n, dtype=bool)
        jump_h = has_h & ~(np.abs(h_l - h_r) <= CONT_H)
        jump_s = has_s & ~(np.abs(s_l - s_r) <= CONT_S)
        for r in np.flatnonzero(jump_cp | jump_h | jump_s):
            ident = table.ids[mem[r]]
            found = out[mem[r]]
            where = f"at the break {num(tb[r])} K between ranges {i + 1} and {i + 2}"
            if jump_cp[r]:
                a, b, t = float(cp_l[r]), float(cp_r[r]), float(tol_cp[r])
                found.append(Finding(
                    "cp-continuity", "error",
                    f"Cp jumps {where}: {num(a)} below, {num(b)} J/(mol·K) above (tolerance "
                    f"{num(t)}: the larger of {CONT_CP_REL:.0%} and {CONT_CP_ABS} J/(mol·K))",
                    species=ident, field="cp_model", observed=b, expected=a, tolerance=t))
            for jump, left, right, label, unit, tol_q in ((jump_h, h_l, h_r, "H", "kJ/mol", CONT_H),
                                                          (jump_s, s_l, s_r, "S", "J/(mol·K)", CONT_S)):
                if jump[r]:
                    a, b = float(left[r]), float(right[r])
                    found.append(Finding(
                        "cp-continuity", "error",
                        f"{label} jumps {where}: {num(a)} below, {num(b)} {unit} above (tolerance "
                        f"{tol_q} {unit}); the integration constants of the two ranges disagree",
                        species=ident, field="cp_model", observed=b, expected=a, tolerance=tol_q))
