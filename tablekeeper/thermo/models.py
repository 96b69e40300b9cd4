"""Heat-capacity models Cp°(T) and their exact integrals: Shomate, NASA 7-coefficient, tabulated.

Each model turns a species record's ``cp_model`` object into vectorised functions of temperature:
Cp, H − H(298.15) = ∫Cp dT and the entropy increment ∫Cp/T dT, both from the reference temperature
298.15 K. Every integral is closed-form per range (for tabulated points: per interval of the
piecewise-linear interpolant), chained so that the result is continuous at range breaks whatever the
coefficients do there; whether the *published* constants are continuous is a check's business, and
``segment_values`` evaluates one range with its own constants for that purpose.

Units: T in K; Cp and S in J/(mol·K); H in kJ/mol.

Formulas (their published forms):

* Shomate, t = T/1000: Cp = A + B t + C t² + D t³ + E/t²;
  H − H298 = A t + B t²/2 + C t³/3 + D t⁴/4 − E/t + F − H (kJ/mol);
  S = A ln t + B t + C t²/2 + D t³/3 − E/(2t²) + G. The H coefficient is ΔfH°(298.15).
* NASA 7-coefficient: Cp/R = a1 + a2 T + a3 T² + a4 T³ + a5 T⁴;
  H/(RT) = a1 + a2 T/2 + a3 T²/3 + a4 T³/4 + a5 T⁴/5 + a6/T;
  S/R = a1 ln T + a2 T + a3 T²/2 + a4 T³/3 + a5 T⁴/4 + a7.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from ..errors import InputError
from ..units import R

#: Reference temperature of the standard tables, K.
T_REF = 298.15

#: Many published polynomials start at 300 K (a rounded lower limit) and are used at 298.15 K as a
#: matter of routine; over 1.85 K the change in Cp is far below any fit error. The reference point
#: alone (never an arbitrary T) counts as covered when it lies this close outside the range.
#: Common practice, no source.
REF_SLACK_K = 2.0

_SHOMATE_KEYS = ("A", "B", "C", "D", "E")
_SHOMATE_CONSTANTS = ("F", "G", "H")


class ExtrapolationError(InputError):
    """A temperature outside a model's validity range, asked for without ``extrapolate=True``."""


def _is_number(v: Any) -> bool:
    return isinstance(v, int | float) and not isinstance(v, bool) and math.isfinite(v)


def _num(v: Any, what: str, field: str = "cp_model") -> float:
    if not _is_number(v):
        raise InputError(f"{what} must be a finite number, not {str(v)[:40]!r}", field=field)
    return float(v)


def _as_temperature(T: Any) -> tuple[np.ndarray, bool]:
    """T as a float array (and whether it was a scalar); refuse non-finite and non-positive values."""
    try:
        arr = np.asarray(T, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"temperature {str(T)[:40]!r} is not a number") from None
    if arr.size and (not np.all(np.isfinite(arr)) or np.any(arr <= 0)):
        bad = arr[~np.isfinite(arr) | (arr <= 0)].ravel()[0]
        raise InputError(f"temperature {bad!r} K is not a positive finite number")
    return arr, arr.ndim == 0


def _out(values: np.ndarray, scalar: bool) -> np.ndarray:
    # A scalar in gives a numpy float out (a float subclass), an array in gives an array of its shape.
    return np.float64(values) if scalar else values


class CpModel:
    """A Cp(T) model over one or more temperature ranges (segments).

    Subclasses provide per-piece primitives; pieces are the segments for the polynomial models and the
    intervals between points for the tabulated model.
    """

    kind: str = ""

    def __init__(self, segments: Sequence[tuple[float, float]], source: str | None = None) -> None:
        self.segments: list[tuple[float, float]] = [(float(a), float(b)) for a, b in segments]
        self.source = source
        self.tmin = self.segments[0][0]
        self.tmax = self.segments[-1][1]
        # The next range takes over where it starts (ranges that overlap slightly are common).
        self.breaks: list[float] = [self.segments[i + 1][0] for i in range(len(self.segments) - 1)]

    # -- validity ---------------------------------------------------------------------------------------

    def covers(self, T: float) -> bool:
        """Whether one temperature lies inside a segment (the reference point with its slack)."""
        if any(a <= T <= b for a, b in self.segments):
            return True
        return T == T_REF and self.tmin - REF_SLACK_K <= T <= self.tmax

    def covers_reference(self) -> bool:
        return self.covers(T_REF)

    def range_text(self) -> str:
        if len(self.segments) == 1:
            return f"{self.tmin:g} to {self.tmax:g} K"
        return ", ".join(f"{a:g}–{b:g}" for a, b in self.segments) + " K"

    def _check(self, arr: np.ndarray, extrapolate: bool) -> None:
        if extrapolate or arr.size == 0:
            return
        flat = arr.ravel()
        inside = np.zeros(flat.shape, dtype=bool)
        for a, b in self.segments:
            inside |= (flat >= a) & (flat <= b)
        inside |= (flat == T_REF) & (flat >= self.tmin - REF_SLACK_K) & (flat <= self.tmax)
        if not inside.all():
            bad = flat[~inside]
            lo, hi = float(bad.min()), float(bad.max())
            what = f"{lo:g} K is" if lo == hi else f"temperatures from {lo:g} to {hi:g} K are"
            raise ExtrapolationError(
                f"{what} outside the {self.kind} model's validity range ({self.range_text()}); "
                "refusing to extrapolate", field="cp_model")

    # -- pieces (subclasses) -----------------------------------------------------------------------------

    def _piece_bounds(self) -> np.ndarray:
        """Interior boundaries between pieces, increasing."""
        return np.asarray(self.breaks, dtype=float)

    def _npieces(self) -> int:
        return len(self.segments)

    def _cp_piece(self, i: int, T: np.ndarray) -> np.ndarray:
        raise NotImplementedError

    def _h_prim(self, i: int, T: np.ndarray) -> np.ndarray:
        """An antiderivative of Cp on piece i, kJ/mol."""
        raise NotImplementedError

    def _s_prim(self, i: int, T: np.ndarray) -> np.ndarray:
        """An antiderivative of Cp/T on piece i, J/(mol·K)."""
        raise NotImplementedError

    # -- chained integrals -------------------------------------------------------------------------------

    def _piece_index(self, arr: np.ndarray) -> np.ndarray:
        # side="left": a temperature exactly at a break belongs to the lower piece (the usual convention
        # of NASA polynomials, T ≤ Tmid uses the low range); the chained integrals are continuous anyway.
        return np.searchsorted(self._piece_bounds(), arr, side="left")

    def _offsets(self, prim) -> np.ndarray:
        """Constants c_i making prim_i(T) + c_i one continuous antiderivative across the pieces."""
        bounds = self._piece_bounds()
        c = np.zeros(self._npieces())
        for i, b in enumerate(bounds, start=1):
            bb = np.asarray(b)
            c[i] = c[i - 1] + float(prim(i - 1, bb)) - float(prim(i, bb))
        return c

    def _chained(self, which: str, arr: np.ndarray) -> np.ndarray:
        prim = self._h_prim if which == "h" else self._s_prim
        idx = self._piece_index(arr)
        offsets = self._offsets(prim)
        out = np.empty(arr.shape, dtype=float)
        for i in np.unique(idx):
            mask = idx == i
            out[mask] = prim(int(i), arr[mask]) + offsets[i]
        ref = np.asarray(T_REF)
        iref = int(self._piece_index(ref))
        return out - (float(prim(iref, ref)) + offsets[iref])

    def cp(self, T: Any, extrapolate: bool = False) -> np.ndarray:
        """Cp°(T) in J/(mol·K)."""
        arr, scalar = _as_temperature(T)
        self._check(arr, extrapolate)
        idx = self._piece_index(arr)
        out = np.empty(arr.shape, dtype=float)
        for i in np.unique(idx):
            mask = idx == i
            out[mask] = self._cp_piece(int(i), arr[mask])
        return _out(out, scalar)

    def enthalpy_increment(self, T: Any, extrapolate: bool = False) -> np.ndarray:
        """H°(T) − H°(298.15 K) = ∫ Cp dT from 298.15 K, in kJ/mol."""
        arr, scalar = _as_temperature(T)
        self._check(arr, extrapolate)
        self._check_reference(extrapolate)
        return _out(self._chained("h", arr), scalar)

    def entropy_increment(self, T: Any, extrapolate: bool = False) -> np.ndarray:
        """S°(T) − S°(298.15 K) = ∫ Cp/T dT from 298.15 K, in J/(mol·K)."""
        arr, scalar = _as_temperature(T)
        self._check(arr, extrapolate)
        self._check_reference(extrapolate)
        return _out(self._chained("s", arr), scalar)

    def _check_reference(self, extrapolate: bool) -> None:
        if not extrapolate and not self.covers_reference():
            raise ExtrapolationError(
                f"the {self.kind} model's range ({self.range_text()}) does not include 298.15 K, the "
                "point its increments are counted from; refusing to extrapolate", field="cp_model")

    # -- constants -------------------------------------------------------------------------------------

    def segment_values(self, i: int, T: Any) -> tuple[np.ndarray, np.ndarray | None, np.ndarray | None]:
        """(Cp, H, S) from segment i's own coefficients and constants, at any T (no range check)."""
        if not 0 <= i < len(self.segments):
            raise InputError(f"the {self.kind} model has no segment {i}", field="cp_model")
        arr, scalar = _as_temperature(T)
        cp = self._segment_cp(i, arr)
        h, s = self._absolute(i, arr)
        return (_out(cp, scalar), None if h is None else _out(h, scalar),
                None if s is None else _out(s, scalar))

    def _segment_cp(self, i: int, T: np.ndarray) -> np.ndarray:
        return self._cp_piece(i, T)

    def _absolute(self, i: int, T: np.ndarray) -> tuple[np.ndarray | None, np.ndarray | None]:
        return None, None

    def reference_segment(self) -> int:
        """Index of the segment used at 298.15 K."""
        return int(self._piece_index_segment(T_REF))

    def _piece_index_segment(self, T: float) -> int:
        return int(np.searchsorted(np.asarray(self.breaks, dtype=float), T, side="left"))

    def implied_dfH298(self) -> float | None:
        """ΔfH°(298.15 K) in kJ/mol implied by the constants, or None when the model has none."""
        return None

    def implied_S298(self) -> float | None:
        """S°(298.15 K) in J/(mol·K) implied by the constants, or None when the model has none."""
        return None

    def to_json(self) -> dict:
        raise NotImplementedError

    def __repr__(self) -> str:
        return f"<{type(self).__name__} {self.range_text()}>"


class ShomateModel(CpModel):
    """Shomate equation over one or more ranges; coefficients A..E, optional constants F, G, H."""

    kind = "shomate"

    def __init__(self, ranges: Sequence[Mapping[str, Any]], source: str | None = None) -> None:
        self._ranges = [dict(r) for r in ranges]
        super().__init__([(r["tmin"], r["tmax"]) for r in self._ranges], source)
        self._coef = np.array([[float(r[k]) for k in _SHOMATE_KEYS] for r in self._ranges])

    def constants(self, i: int) -> dict[str, float | None]:
        r = self._ranges[i]
        return {k: (float(r[k]) if k in r else None) for k in _SHOMATE_CONSTANTS}

    def coefficients(self, i: int) -> dict[str, float]:
        return dict(zip(_SHOMATE_KEYS, self._coef[i].tolist(), strict=True))

    def _cp_piece(self, i: int, T: np.ndarray) -> np.ndarray:
        A, B, C, D, E = self._coef[i]
        t = T / 1000.0
        return A + B * t + C * t**2 + D * t**3 + E / t**2

    def _h_prim(self, i: int, T: np.ndarray) -> np.ndarray:
        A, B, C, D, E = self._coef[i]
        t = T / 1000.0
        return A * t + B * t**2 / 2 + C * t**3 / 3 + D * t**4 / 4 - E / t

    def _s_prim(self, i: int, T: np.ndarray) -> np.ndarray:
        A, B, C, D, E = self._coef[i]
        t = T / 1000.0
        return A * np.log(t) + B * t + C * t**2 / 2 + D * t**3 / 3 - E / (2 * t**2)

    def _absolute(self, i: int, T: np.ndarray) -> tuple[np.ndarray | None, np.ndarray | None]:
        k = self.constants(i)
        # H(T) = ΔfH°298 + [H − H298] = H + (P + F − H) = P + F.
        h = None if k["F"] is None else self._h_prim(i, T) + k["F"]
        s = None if k["G"] is None else self._s_prim(i, T) + k["G"]
        return h, s

    def implied_dfH298(self) -> float | None:
        i = self.reference_segment()
        k = self.constants(i)
        if k["F"] is not None:
            return float(self._h_prim(i, np.asarray(T_REF)) + k["F"])
        return k["H"]  # no F: the stated H coefficient is all the model says

    def implied_S298(self) -> float | None:
        i = self.reference_segment()
        k = self.constants(i)
        if k["G"] is None:
            return None
        return float(self._s_prim(i, np.asarray(T_REF)) + k["G"])

    def to_json(self) -> dict:
        out: dict[str, Any] = {"kind": "shomate"}
        if self.source:
            out["source"] = self.source
        out["ranges"] = [dict(r) for r in self._ranges]
        return out


class Nasa7Model(CpModel):
    """NASA 7-coefficient polynomial over any number of ranges; Cp/R in a1..a5, constants a6, a7."""

    kind = "nasa7"

    def __init__(self, ranges: Sequence[Mapping[str, Any]], source: str | None = None) -> None:
        self._ranges = [{"tmin": r["tmin"], "tmax": r["tmax"], "a": list(r["a"])} for r in ranges]
        super().__init__([(r["tmin"], r["tmax"]) for r in self._ranges], source)
        self._a = np.array([[float(x) for x in r["a"]] for r in self._ranges])

    def coefficients(self, i: int) -> list[float]:
        return self._a[i].tolist()

    def _cp_piece(self, i: int, T: np.ndarray) -> np.ndarray:
        a1, a2, a3, a4, a5 = self._a[i][:5]
        return R * (a1 + T * (a2 + T * (a3 + T * (a4 + T * a5))))

    def _h_prim(self, i: int, T: np.ndarray) -> np.ndarray:
        a1, a2, a3, a4, a5 = self._a[i][:5]
        return R * T * (a1 + T * (a2 / 2 + T * (a3 / 3 + T * (a4 / 4 + T * a5 / 5)))) / 1000.0

    def _s_prim(self, i: int, T: np.ndarray) -> np.ndarray:
        a1, a2, a3, a4, a5 = self._a[i][:5]
        return R * (a1 * np.log(T) + T * (a2 + T * (a3 / 2 + T * (a4 / 3 + T * a5 / 4))))

    def _absolute(self, i: int, T: np.ndarray) -> tuple[np.ndarray | None, np.ndarray | None]:
        a6, a7 = self._a[i][5], self._a[i][6]
        return self._h_prim(i, T) + R * a6 / 1000.0, self._s_prim(i, T) + R * a7

    def implied_dfH298(self) -> float | None:
        h, _ = self._absolute(self.reference_segment(), np.asarray(T_REF))
        return float(h)

    def implied_S298(self) -> float | None:
        _, s = self._absolute(self.reference_segment(), np.asarray(T_REF))
        return float(s)

    def to_json(self) -> dict:
        out: dict[str, Any] = {"kind": "nasa7"}
        if self.source:
            out["source"] = self.source
        out["ranges"] = [{"tmin": r["tmin"], "tmax": r["tmax"], "a": list(r["a"])} for r in self._ranges]
        return out


class TabulatedModel(CpModel):
    """(T, Cp) points joined by straight lines; one segment from the first to the last point.

    On an interval Cp = a + b·T, so ∫Cp dT = aT + bT²/2 and ∫Cp/T dT = a ln T + bT exactly; no
    quadrature error enters H or S. Beyond the end points (only with extrapolate=True) the end
    intervals' lines continue.
    """

    kind = "tabulated"

    def __init__(self, points: Sequence[Sequence[Any]], source: str | None = None) -> None:
        self._points = [list(p) for p in points]
        arr = np.array([[float(x) for x in p] for p in self._points])
        self.T = arr[:, 0]
        self.values = arr[:, 1]
        super().__init__([(self.T[0], self.T[-1])], source)
        dT = np.diff(self.T)
        self._b = np.diff(self.values) / dT
        self._a = self.values[:-1] - self._b * self.T[:-1]

    def _piece_bounds(self) -> np.ndarray:
        return self.T[1:-1]

    def _npieces(self) -> int:
        return len(self.T) - 1

    def _cp_piece(self, i: int, T: np.ndarray) -> np.ndarray:
        return self._a[i] + self._b[i] * T

    def _h_prim(self, i: int, T: np.ndarray) -> np.ndarray:
        return (self._a[i] * T + self._b[i] * T**2 / 2) / 1000.0

    def _s_prim(self, i: int, T: np.ndarray) -> np.ndarray:
        return self._a[i] * np.log(T) + self._b[i] * T

    # Vectorised over all intervals at once (a table may hold thousands of points).
    def cp(self, T: Any, extrapolate: bool = False) -> np.ndarray:
        arr, scalar = _as_temperature(T)
        self._check(arr, extrapolate)
        idx = self._piece_index(arr)
        return _out(self._a[idx] + self._b[idx] * arr, scalar)

    def _node_cumulative(self) -> tuple[np.ndarray, np.ndarray]:
        """∫Cp dT (kJ/mol) and ∫Cp/T dT from the first point to each point, exact per interval."""
        T0, T1 = self.T[:-1], self.T[1:]
        dh = (self._a * (T1 - T0) + self._b * (T1**2 - T0**2) / 2) / 1000.0
        ds = self._a * np.log(T1 / T0) + self._b * (T1 - T0)
        return np.concatenate([[0.0], np.cumsum(dh)]), np.concatenate([[0.0], np.cumsum(ds)])

    def _chained(self, which: str, arr: np.ndarray) -> np.ndarray:
        hn, sn = self._node_cumulative()
        nodes, prim = (hn, self._h_prim) if which == "h" else (sn, self._s_prim)

        def at(x: np.ndarray) -> np.ndarray:
            idx = self._piece_index(x)
            return nodes[idx] + prim(idx, x) - prim(idx, np.broadcast_to(self.T[idx], x.shape))

        return at(arr) - at(np.asarray(T_REF))

    def _segment_cp(self, i: int, T: np.ndarray) -> np.ndarray:
        idx = self._piece_index(T)
        return self._a[idx] + self._b[idx] * T

    def to_json(self) -> dict:
        out: dict[str, Any] = {"kind": "tabulated"}
        if self.source:
            out["source"] = self.source
        out["points"] = [list(p) for p in self._points]
        return out


# -- reading ------------------------------------------------------------------------------------------

def _ordered_ranges(ranges: Any, kind: str) -> None:
    if not isinstance(ranges, list) or not ranges:
        raise InputError(f"a {kind} model needs a non-empty list of ranges", field="cp_model.ranges")
    prev: tuple[float, float] | None = None
    for n, r in enumerate(ranges):
        where = f"cp_model.ranges[{n}]"
        if not isinstance(r, dict):
            raise InputError("must be an object", field=where)
        lo = _num(r.get("tmin"), "tmin", where)
        hi = _num(r.get("tmax"), "tmax", where)
        if not 0 < lo < hi:
            raise InputError(f"tmin {lo:g} K must be positive and below tmax {hi:g} K", field=where)
        if prev is not None and not (lo > prev[0] and hi > prev[1]):
            raise InputError(f"range {lo:g}–{hi:g} K must come after range {prev[0]:g}–{prev[1]:g} K "
                             "(ranges in increasing temperature)", field=where)
        prev = (lo, hi)


def model_from_json(obj: dict) -> CpModel:
    """Build a model from a record's ``cp_model`` object; InputError with a sentence if malformed."""
    if not isinstance(obj, dict):
        raise InputError("must be an object", field="cp_model")
    kind = obj.get("kind")
    source = obj.get("source")
    if source is not None and not isinstance(source, str):
        raise InputError("source must be an identifier", field="cp_model.source")
    if kind == "shomate":
        ranges = obj.get("ranges")
        _ordered_ranges(ranges, kind)
        for n, r in enumerate(ranges):
            for key in _SHOMATE_KEYS:
                _num(r.get(key), f"coefficient {key}", f"cp_model.ranges[{n}]")
            for key in _SHOMATE_CONSTANTS:
                if key in r:
                    _num(r[key], f"constant {key}", f"cp_model.ranges[{n}]")
        return ShomateModel(ranges, source)
    if kind == "nasa7":
        ranges = obj.get("ranges")
        _ordered_ranges(ranges, kind)
        for n, r in enumerate(ranges):
            a = r.get("a")
            if not isinstance(a, list) or len(a) != 7:
                raise InputError("a must be a list of 7 coefficients a1..a7", field=f"cp_model.ranges[{n}]")
            for j, x in enumerate(a, start=1):
                _num(x, f"coefficient a{j}", f"cp_model.ranges[{n}]")
        return Nasa7Model(ranges, source)
    if kind == "tabulated":
        pts = obj.get("points")
        if not isinstance(pts, list) or len(pts) < 2:
            raise InputError("a tabulated model needs at least two (T, Cp) points", field="cp_model.points")
        prev_t = 0.0
        for n, p in enumerate(pts):
            where = f"cp_model.points[{n}]"
            if not isinstance(p, list | tuple) or len(p) != 2:
                raise InputError("must be a pair [T, Cp]", field=where)
            t = _num(p[0], "T", where)
            _num(p[1], "Cp", where)
            if t <= prev_t:
                raise InputError(f"T {t:g} K must be positive and above the previous point's "
                                 f"{prev_t:g} K (strictly increasing)", field=where)
            prev_t = t
        return TabulatedModel(pts, source)
    raise InputError(f"kind {str(kind)[:40]!r} is not one of shomate, nasa7, tabulated",
                     field="cp_model.kind")
