"""Batch evaluation of many Cp(T) models at once, for the checks over a whole dataset.

The per-model classes of models.py stay the reference and the public API. This module reads the
``cp_model`` objects of many species into stacked arrays, one group per model kind and shape (number
of ranges for Shomate and NASA 7, number of points for a tabulated model), and evaluates Cp and the
absolute H and S of each range with the same formulas and the same order of floating-point operations
as models.py, so that a check over 30 000 models is a few array expressions instead of 30 000 object
constructions and a hundred thousand small numpy calls.

Only well-formed models are batched. ``read_models`` applies the acceptance rules of
``models.model_from_json`` in a cheap form; a model that fails any of them, or that is too large to
batch (a table of many points), is returned as *not batched*, and the caller evaluates it through the
per-model API, which gives the reason as a sentence. tests/thermo/test_batch.py shows that the two
paths give the same numbers on varied and malformed models.

Array shapes: ``n`` models in a group, ``s`` ranges per model, ``m`` temperatures per range.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..units import R
from .models import _SHOMATE_CONSTANTS, _SHOMATE_KEYS, REF_SLACK_K, T_REF

#: Largest tabulated model batched. A group costs n × m × points comparisons to locate each sampled
#: temperature's interval; a longer table goes through TabulatedModel, which is vectorised per model.
MAX_BATCH_POINTS = 64


@dataclass
class ModelGroup:
    """Models of one kind and shape, stacked.

    ``lo``/``hi`` (n, s): each range's tmin and tmax (a tabulated model: its first and last point).
    Polynomials: ``coef`` (n, s, 5), A..E (Shomate) or a1..a5 (NASA 7); ``c_h``/``c_s`` (n, s): the
    constants of H and S (Shomate F and G, NaN where absent; NASA a6 and a7); ``stated_h`` (n, s): the
    Shomate H coefficient (NaN where absent). Tabulated: ``T``/``V`` (n, points).
    """

    kind: str
    members: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    coef: np.ndarray | None = None
    c_h: np.ndarray | None = None
    c_s: np.ndarray | None = None
    stated_h: np.ndarray | None = None
    T: np.ndarray | None = None
    V: np.ndarray | None = None

    @property
    def size(self) -> int:
        return len(self.members)

    @property
    def nseg(self) -> int:
        return self.lo.shape[1]

    @property
    def has_constants(self) -> bool:
        return self.kind != "tabulated"


@dataclass
class ModelBatch:
    """The batched groups of a list of model objects, and the positions that were not batched."""

    groups: list[ModelGroup]
    unbatched: list[int]


# -- reading ----------------------------------------------------------------------------------------------


_NUMBER_TYPES = {float, int}
_PAIR_TYPES = {list, tuple}
_ABSENT = object()


def _numbers(seq: Sequence[Any]) -> bool:
    # Types only (bool is not int here: type(True) is bool); finiteness is tested on the stacked arrays.
    return set(map(type, seq)) <= _NUMBER_TYPES


def _finite_number(v: Any) -> bool:
    return type(v) in _NUMBER_TYPES and math.isfinite(v)


def _ranges(obj: dict) -> list | None:
    ranges = obj.get("ranges")
    if type(ranges) is not list or not ranges or set(map(type, ranges)) != {dict}:
        return None
    return ranges


def _shomate_row(obj: dict) -> tuple | None:
    ranges = _ranges(obj)
    if ranges is None:
        return None
    lo, hi, coef, consts = [], [], [], []
    for r in ranges:
        c = [r.get(k) for k in _SHOMATE_KEYS]
        k = [r.get(key, _ABSENT) for key in _SHOMATE_CONSTANTS]
        if not _numbers(c) or not all(x is _ABSENT or _finite_number(x) for x in k):
            return None
        lo.append(r.get("tmin"))
        hi.append(r.get("tmax"))
        coef.append(c)
        consts.append([math.nan if x is _ABSENT else x for x in k])
    if not (_numbers(lo) and _numbers(hi)):
        return None
    return lo, hi, coef, consts


def _nasa_row(obj: dict) -> tuple | None:
    ranges = _ranges(obj)
    if ranges is None:
        return None
    lo, hi, coef = [], [], []
    for r in ranges:
        a = r.get("a")
        if type(a) is not list or len(a) != 7 or not _numbers(a):
            return None
        lo.append(r.get("tmin"))
        hi.append(r.get("tmax"))
        coef.append(a)
    if not (_numbers(lo) and _numbers(hi)):
        return None
    return lo, hi, coef


def _table_row(obj: dict) -> tuple | None:
    pts = obj.get("points")
    if (type(pts) is not list or not 2 <= len(pts) <= MAX_BATCH_POINTS
            or not set(map(type, pts)) <= _PAIR_TYPES or set(map(len, pts)) != {2}):
        return None
    ts = [p[0] for p in pts]
    vs = [p[1] for p in pts]
    if not (_numbers(ts) and _numbers(vs)):
        return None
    return ts, vs


_READERS = {"shomate": _shomate_row, "nasa7": _nasa_row, "tabulated": _table_row}


def read_models(objs: Sequence[Any]) -> ModelBatch:
    """Group the well-formed models of ``objs`` (cp_model objects) by kind and shape.

    Positions refer to ``objs``; every position is either in exactly one group or in ``unbatched``.
    A model is batched only when ``models.model_from_json`` would accept it: the structure is checked
    here per model, the numbers (finite, ranges positive, ordered, tables strictly increasing) on the
    stacked arrays.
    """
    rows: dict[tuple, list] = {}
    unbatched: list[int] = []
    for pos, obj in enumerate(objs):
        row = kind = None
        if type(obj) is dict:
            source = obj.get("source")
            kind = obj.get("kind")
            if source is None or isinstance(source, str):
                reader = _READERS.get(kind) if isinstance(kind, str) else None
                row = reader(obj) if reader is not None else None
        if row is None:
            unbatched.append(pos)
            continue
        rows.setdefault((kind, len(row[0])), []).append((pos, row))
    groups = []
    for (kind, _), items in sorted(rows.items()):
        try:
            group, rejected = _stack(kind, items)
        except (TypeError, ValueError, ArithmeticError):
            # An integer too large for a float, say: leave the whole group to the per-model path.
            group, rejected = None, [pos for pos, _ in items]
        unbatched.extend(rejected)
        if group is not None:
            groups.append(group)
    unbatched.sort()
    return ModelBatch(groups, unbatched)


def _stack(kind: str, items: list) -> tuple[ModelGroup | None, list[int]]:
    """One group of the rows of ``items``, and the positions whose numbers model_from_json refuses."""
    members = np.array([pos for pos, _ in items], dtype=np.intp)
    if kind == "tabulated":
        T = np.array([row[0] for _, row in items], dtype=float)
        V = np.array([row[1] for _, row in items], dtype=float)
        ok = (np.isfinite(T).all(axis=1) & np.isfinite(V).all(axis=1) & (T[:, 0] > 0)
              & (np.diff(T, axis=1) > 0).all(axis=1))
        T, V = T[ok], V[ok]
        group = ModelGroup(kind, members[ok], lo=T[:, :1].copy(), hi=T[:, -1:].copy(), T=T, V=V)
    else:
        lo = np.array([row[0] for _, row in items], dtype=float)
        hi = np.array([row[1] for _, row in items], dtype=float)
        coef = np.array([row[2] for _, row in items], dtype=float)
        ok = (np.isfinite(lo).all(axis=1) & np.isfinite(hi).all(axis=1)
              & np.isfinite(coef).all(axis=(1, 2)) & (lo > 0).all(axis=1) & (lo < hi).all(axis=1)
              & (lo[:, 1:] > lo[:, :-1]).all(axis=1) & (hi[:, 1:] > hi[:, :-1]).all(axis=1))
        lo, hi, coef = lo[ok], hi[ok], coef[ok]
        if kind == "nasa7":
            group = ModelGroup(kind, members[ok], lo, hi, coef=coef[:, :, :5], c_h=coef[:, :, 5],
                               c_s=coef[:, :, 6])
        else:
            consts = np.array([row[3] for _, row in items], dtype=float)[ok]
            group = ModelGroup(kind, members[ok], lo, hi, coef=coef, c_h=consts[:, :, 0],
                               c_s=consts[:, :, 1], stated_h=consts[:, :, 2])
    rejected = members[~ok].tolist()
    return (group if ok.any() else None), rejected


# -- evaluation ---------------------------------------------------------------------------------------------
# The expressions below repeat those of models.py operation for operation (same association, same
# powers), so that both paths round alike.


def _shomate_cp(c: np.ndarray, T: np.ndarray) -> np.ndarray:
    A, B, C, D, E = (c[..., j] for j in range(5))
    t = T / 1000.0
    return A + B * t + C * t**2 + D * t**3 + E / t**2


def _shomate_h(c: np.ndarray, T: np.ndarray) -> np.ndarray:
    A, B, C, D, E = (c[..., j] for j in range(5))
    t = T / 1000.0
    return A * t + B * t**2 / 2 + C * t**3 / 3 + D * t**4 / 4 - E / t


def _shomate_s(c: np.ndarray, T: np.ndarray) -> np.ndarray:
    A, B, C, D, E = (c[..., j] for j in range(5))
    t = T / 1000.0
    return A * np.log(t) + B * t + C * t**2 / 2 + D * t**3 / 3 - E / (2 * t**2)


def _nasa_cp(c: np.ndarray, T: np.ndarray) -> np.ndarray:
    a1, a2, a3, a4, a5 = (c[..., j] for j in range(5))
    return R * (a1 + T * (a2 + T * (a3 + T * (a4 + T * a5))))


def _nasa_h(c: np.ndarray, T: np.ndarray) -> np.ndarray:
    a1, a2, a3, a4, a5 = (c[..., j] for j in range(5))
    return R * T * (a1 + T * (a2 / 2 + T * (a3 / 3 + T * (a4 / 4 + T * a5 / 5)))) / 1000.0


def _nasa_s(c: np.ndarray, T: np.ndarray) -> np.ndarray:
    a1, a2, a3, a4, a5 = (c[..., j] for j in range(5))
    return R * (a1 * np.log(T) + T * (a2 + T * (a3 / 2 + T * (a4 / 3 + T * a5 / 4))))


def _table_cp(Tp: np.ndarray, Vp: np.ndarray, T: np.ndarray) -> np.ndarray:
    """Piecewise-linear Cp of tables ``Tp``/``Vp`` (n, points) at T (n, ...), as TabulatedModel does:
    b = ΔCp/ΔT and a = Cp0 − b·T0 per interval, the interval found as searchsorted(T[1:-1], side=left),
    i.e. the number of interior points strictly below T (the end intervals' lines continue outside)."""
    b = np.diff(Vp, axis=1) / np.diff(Tp, axis=1)
    a = Vp[:, :-1] - b * Tp[:, :-1]
    n = Tp.shape[0]
    flat = T.reshape(n, -1)
    inner = Tp[:, 1:-1]
    idx = (inner[:, None, :] < flat[:, :, None]).sum(axis=2)
    rows = np.arange(n)[:, None]
    return (a[rows, idx] + b[rows, idx] * flat).reshape(T.shape)


def _pick(arr: np.ndarray, seg: np.ndarray) -> np.ndarray:
    """arr[k, seg[k], ...] for each model k: the coefficients of one chosen range per model."""
    return arr[np.arange(arr.shape[0]), seg]


def segment_values(group: ModelGroup, T: np.ndarray, seg: np.ndarray | None = None
                   ) -> tuple[np.ndarray, np.ndarray | None, np.ndarray | None]:
    """(Cp, H, S) from each range's own coefficients and constants, at any T (no range check).

    Without ``seg``: T has shape (n, s, m) and range j is evaluated on T[:, j]. With ``seg`` (n,): T
    has shape (n, m) and model k uses its range seg[k]. Units as models.py: Cp and S in J/(mol·K), H in
    kJ/mol, absolute (H = ΔfH°(298.15) + [H − H298]). H and S are NaN where a Shomate range lacks F or
    G, and None for a tabulated model, which has no constants.
    """
    T = np.asarray(T, dtype=float)
    if group.kind == "tabulated":
        return _table_cp(group.T, group.V, T), None, None
    if seg is None:
        coef, c_h, c_s = group.coef[:, :, None, :], group.c_h[:, :, None], group.c_s[:, :, None]
    else:
        coef, c_h, c_s = _pick(group.coef, seg)[:, None, :], _pick(group.c_h, seg)[:, None], \
            _pick(group.c_s, seg)[:, None]
    if group.kind == "nasa7":
        return (_nasa_cp(coef, T), _nasa_h(coef, T) + R * c_h / 1000.0, _nasa_s(coef, T) + R * c_s)
    # Shomate: H(T) = ΔfH°298 + [H − H298] = P(t) + F; NaN constants propagate to NaN (absent).
    return _shomate_cp(coef, T), _shomate_h(coef, T) + c_h, _shomate_s(coef, T) + c_s


def sample_grid(group: ModelGroup, points: int) -> np.ndarray:
    """``points`` evenly spaced temperatures from tmin to tmax of every range: shape (n, s, points),
    the same values as np.linspace(tmin, tmax, points) per range."""
    return np.linspace(group.lo, group.hi, points, axis=-1)


def piece_at(group: ModelGroup, T: float) -> np.ndarray:
    """Index of the range (polynomials) or interval (tables) that ``CpModel.cp`` uses at T: the number
    of interior boundaries strictly below T, as searchsorted(side="left")."""
    bounds = group.T[:, 1:-1] if group.kind == "tabulated" else group.lo[:, 1:]
    return (bounds < T).sum(axis=1)


def covers(group: ModelGroup, T: float) -> np.ndarray:
    """``CpModel.covers(T)`` per model: T inside a range, or T is 298.15 K within the reference slack."""
    inside = ((group.lo <= T) & (T <= group.hi)).any(axis=1)
    if T == T_REF:
        tmin, tmax = group.lo[:, 0], group.hi[:, -1]
        inside |= (tmin - REF_SLACK_K <= T) & (T <= tmax)
    return inside


def cp_at(group: ModelGroup, T: float) -> np.ndarray:
    """``CpModel.cp(T)`` per model (without its range check: ask ``covers`` first)."""
    n = group.size
    Ts = np.full((n, 1), float(T))
    if group.kind == "tabulated":
        return _table_cp(group.T, group.V, Ts)[:, 0]
    cp, _, _ = segment_values(group, Ts, seg=piece_at(group, T))
    return cp[:, 0]


def implied_298(group: ModelGroup) -> tuple[np.ndarray, np.ndarray]:
    """(ΔfH° in kJ/mol, S° in J/(mol·K)) at 298.15 K implied by each model's constants, from the range
    used at 298.15 K; NaN where the model carries no such constant (``implied_dfH298``/``implied_S298``
    return None). A Shomate range without F falls back to its stated H coefficient, as models.py does."""
    n = group.size
    if group.kind == "tabulated":
        return np.full(n, np.nan), np.full(n, np.nan)
    seg = piece_at(group, T_REF)
    _, h, s = segment_values(group, np.full((n, 1), T_REF), seg=seg)
    h, s = h[:, 0], s[:, 0]
    if group.kind == "shomate":
        h = np.where(np.isnan(_pick(group.c_h, seg)), _pick(group.stated_h, seg), h)
    return h, s


# -- derived tables -----------------------------------------------------------------------------------------
# derived_table (integrate.py) of many species at once, for the largest table of a release. The chained
# integrals repeat CpModel._chained and TabulatedModel._chained operation for operation: the offsets that
# join the ranges, then the value at T minus the value at 298.15 K, so that every float is the one the
# per-species function gives (tests/thermo/test_batch_tables.py compares them exactly).


@dataclass
class SpeciesTable:
    """The derived table of one species: its model's tmin and tmax (K) and ``values`` (rows, 5), the
    columns of integrate.TABLE_COLUMNS (T, Cp, S, H − H298, G − H298)."""

    tmin: float
    tmax: float
    values: np.ndarray


@dataclass
class _Span:
    """What default_grid reads of a model (its range, and whether it covers 298.15 K), without building
    the model object."""

    tmin: float
    tmax: float
    reference: bool

    def covers_reference(self) -> bool:
        return self.reference


_PRIMS = {"shomate": (_shomate_cp, _shomate_h, _shomate_s), "nasa7": (_nasa_cp, _nasa_h, _nasa_s)}


def _polynomial_increments(group: ModelGroup, T: np.ndarray, row: np.ndarray
                           ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cp, H − H298 and S − S298 at T (N,), element k belonging to model row[k] of the group."""
    cp_f, h_f, s_f = _PRIMS[group.kind]
    n, s = group.size, group.nseg
    idx = (group.lo[row, 1:] < T[:, None]).sum(axis=1)  # searchsorted(breaks, T, side="left")
    c = group.coef[row, idx]
    cp = cp_f(c, T)
    at_ref = piece_at(group, T_REF)
    ref = np.full(n, T_REF)
    out = []
    for prim in (h_f, s_f):
        offsets = np.zeros((n, s))
        for i in range(1, s):
            b = group.lo[:, i]
            offsets[:, i] = offsets[:, i - 1] + prim(group.coef[:, i - 1], b) - prim(group.coef[:, i], b)
        base = prim(_pick(group.coef, at_ref), ref) + _pick(offsets, at_ref)
        out.append(prim(c, T) + offsets[row, idx] - base[row])
    return cp, out[0], out[1]


def _table_increments(group: ModelGroup, T: np.ndarray, row: np.ndarray
                      ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """As _polynomial_increments for tabulated models (TabulatedModel.cp and _chained)."""
    Tp, Vp = group.T, group.V
    b = np.diff(Vp, axis=1) / np.diff(Tp, axis=1)
    a = Vp[:, :-1] - b * Tp[:, :-1]
    T0, T1 = Tp[:, :-1], Tp[:, 1:]
    dh = (a * (T1 - T0) + b * (T1**2 - T0**2) / 2) / 1000.0
    ds = a * np.log(T1 / T0) + b * (T1 - T0)
    zero = np.zeros((group.size, 1))
    hn = np.concatenate([zero, np.cumsum(dh, axis=1)], axis=1)
    sn = np.concatenate([zero, np.cumsum(ds, axis=1)], axis=1)
    inner = Tp[:, 1:-1]

    def at(x: np.ndarray, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        idx = (inner[rows] < x[:, None]).sum(axis=1)
        ak, bk, tk = a[rows, idx], b[rows, idx], Tp[rows, idx]
        h = hn[rows, idx] + (ak * x + bk * x**2 / 2) / 1000.0 - (ak * tk + bk * tk**2 / 2) / 1000.0
        s = sn[rows, idx] + (ak * np.log(x) + bk * x) - (ak * np.log(tk) + bk * tk)
        return ak + bk * x, h, s

    cp, h, s = at(T, row)
    all_rows = np.arange(group.size)
    _, h_ref, s_ref = at(np.full(group.size, T_REF), all_rows)
    return cp, h - h_ref[row], s - s_ref[row]


def _inside(group: ModelGroup, T: np.ndarray, row: np.ndarray) -> np.ndarray:
    """Per element, whether CpModel._check accepts T (inside a range, or 298.15 K within the slack)."""
    lo, hi = group.lo[row], group.hi[row]
    ok = ((lo <= T[:, None]) & (T[:, None] <= hi)).any(axis=1)
    return ok | ((T == T_REF) & (T >= lo[:, 0] - REF_SLACK_K) & (T <= hi[:, -1]))


def derived_tables(records: Sequence[Any], step: float = 100.0) -> list[SpeciesTable | None]:
    """``derived_table(record, default_grid(model, step))`` of every record, as arrays, in one pass per
    group of models; None where that call (or building the model, or the grid) raises InputError.

    The same floats as the per-species functions; models that are not batched (malformed, or a table of
    many points) go through them one by one.
    """
    from ..errors import InputError
    from .integrate import TABLE_COLUMNS, default_grid, derived_table, property_value, record_model

    out: list[SpeciesTable | None] = [None] * len(records)
    objs = [r.get("cp_model") if isinstance(r, dict) else None for r in records]
    batch = read_models(objs)
    for pos in batch.unbatched:
        try:
            model = record_model(records[pos])
            frame = derived_table(records[pos], default_grid(model, step))
        except InputError:
            continue
        values = frame.loc[:, list(TABLE_COLUMNS)].to_numpy(dtype="float64")
        out[pos] = SpeciesTable(model.tmin, model.tmax, values)
    grids: dict[float, np.ndarray] = {}  # grids depend only on tmax once 298.15 K is covered
    for group in batch.groups:
        tmin, tmax = group.lo[:, 0], group.hi[:, -1]
        reference = covers(group, T_REF)
        keep, Ts, s298 = [], [], []
        for k, pos in enumerate(group.members.tolist()):
            if not reference[k]:
                continue  # derived_table refuses a model whose range leaves out 298.15 K
            try:
                s = property_value(records[pos], "S298")
                top = float(tmax[k])
                grid = grids.get(top)
                if grid is None:
                    grid = grids[top] = default_grid(_Span(float(tmin[k]), top, True), step)  # type: ignore[arg-type]
            except InputError:
                continue
            if s is None:
                continue
            keep.append(k)
            Ts.append(grid)
            s298.append(s[0])
        if not keep:
            continue
        rows = np.array(keep, dtype=np.intp)
        lengths = np.array([len(g) for g in Ts])
        row = np.repeat(rows, lengths)
        T = np.concatenate(Ts)
        if group.kind == "tabulated":
            cp, dh, ds = _table_increments(group, T, row)
            bad = np.zeros(len(group.members), dtype=bool)
        else:
            cp, dh, ds = _polynomial_increments(group, T, row)
            bad = np.bincount(row, weights=~_inside(group, T, row), minlength=group.size) > 0
        S = np.repeat(np.array(s298), lengths) + ds
        G = dh - T * S / 1000.0
        block = np.stack([T, cp, S, dh, G])  # (5, N): each species' rows are a column slice
        ends = np.cumsum(lengths)
        for k, a, b in zip(keep, (ends - lengths).tolist(), ends.tolist(), strict=True):
            if not bad[k]:
                out[int(group.members[k])] = SpeciesTable(float(tmin[k]), float(tmax[k]), block[:, a:b].T)
    return out
