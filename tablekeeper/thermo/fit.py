"""Least-squares fits of a Shomate equation or a single-range NASA 7-coefficient polynomial to (T, Cp).

The Cp coefficients (Shomate A..E, NASA a1..a5) come from ``numpy.linalg.lstsq`` on column-scaled
basis functions (T⁴ at 1000 K is 10¹²; without scaling the normal matrix loses most of its digits).
An anchor ``Cp298`` pins Cp(298.15 K) exactly: the equality-constrained problem is solved in the null
space of the constraint (x = x_p + N z, then an ordinary least squares in z). Anchors ``dfH298`` and
``S298`` do not touch Cp; they fix the integration constants (Shomate F, G, H; NASA a6, a7) so that the
model reproduces them at 298.15 K.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import InputError
from ..units import R
from .models import REF_SLACK_K, T_REF, CpModel, Nasa7Model, ShomateModel

_KINDS = ("shomate", "nasa7")
_ANCHORS = ("Cp298", "dfH298", "S298")


@dataclass(frozen=True)
class FitResult:
    """A fitted model with its residuals (fitted − given Cp, J/(mol·K)) over the points used."""

    model: CpModel
    residuals: np.ndarray
    rms: float
    max_abs: float
    n: int
    notes: tuple[str, ...] = field(default=())


def _basis(kind: str, T: np.ndarray) -> np.ndarray:
    """Cp basis functions, one column per free coefficient, in J/(mol·K) per unit coefficient."""
    if kind == "shomate":
        t = T / 1000.0
        return np.column_stack([np.ones_like(t), t, t**2, t**3, 1.0 / t**2])
    return R * np.column_stack([np.ones_like(T), T, T**2, T**3, T**4])


def _points(points: Any) -> np.ndarray:
    try:
        arr = np.asarray(points, dtype=float)
    except (TypeError, ValueError):
        raise InputError("fit points must be (T, Cp) pairs of numbers") from None
    if arr.ndim != 2 or arr.shape[1] != 2:
        raise InputError("fit points must be (T, Cp) pairs of numbers")
    if not np.all(np.isfinite(arr)) or np.any(arr[:, 0] <= 0):
        raise InputError("fit points must be finite, with positive temperatures")
    return arr


def _constrained_lstsq(A: np.ndarray, b: np.ndarray, C: np.ndarray, d: np.ndarray) -> np.ndarray:
    """min ‖Ax − b‖ subject to Cx = d (C of full row rank), by elimination in the null space of C."""
    x_p = np.linalg.lstsq(C, d, rcond=None)[0]
    _, _, vt = np.linalg.svd(C)
    null = vt[C.shape[0]:].T
    z = np.linalg.lstsq(A @ null, b - A @ x_p, rcond=None)[0]
    return x_p + null @ z


def _anchor(anchors: Mapping[str, Any], key: str) -> float | None:
    if key not in anchors or anchors[key] is None:
        return None
    v = anchors[key]
    if isinstance(v, Mapping):  # a record's property object
        v = v.get("value")
    if not isinstance(v, int | float) or isinstance(v, bool) or not math.isfinite(v):
        raise InputError(f"anchor {key} must be a finite number", field=key)
    return float(v)


def fit(points: Iterable[Any], kind: str, *, tmin: float | None = None, tmax: float | None = None,
        anchors: dict | None = None) -> FitResult:
    """Fit a one-range Shomate or NASA 7 model to (T, Cp) points (Cp in J/(mol·K)).

    Only points inside [tmin, tmax] are used; the model's validity range is [tmin, tmax], by default
    the span of the points. ``anchors`` may hold ``Cp298`` (pins Cp(298.15 K)), ``dfH298`` (kJ/mol) and
    ``S298`` (J/(mol·K)), as numbers or as a record's property objects.
    """
    if kind not in _KINDS:
        raise InputError(f"cannot fit a {str(kind)[:40]!r} model: choose shomate or nasa7")
    anchors = dict(anchors or {})
    unknown = sorted(set(anchors) - set(_ANCHORS))
    if unknown:
        raise InputError(f"unknown anchor {unknown[0]!r}: use Cp298, dfH298 or S298")
    pts = _points(list(points) if not isinstance(points, np.ndarray) else points)
    pts = pts[np.argsort(pts[:, 0], kind="stable")]
    lo = float(pts[0, 0]) if tmin is None else float(tmin)
    hi = float(pts[-1, 0]) if tmax is None else float(tmax)
    if not (math.isfinite(lo) and math.isfinite(hi) and 0 < lo < hi):
        raise InputError(f"the fit range {lo:g} to {hi:g} K is empty or not positive")
    used = pts[(pts[:, 0] >= lo) & (pts[:, 0] <= hi)]
    cp298 = _anchor(anchors, "Cp298")
    dfh = _anchor(anchors, "dfH298")
    s298 = _anchor(anchors, "S298")
    free = 5 - (cp298 is not None)
    if len(used) < free or len(np.unique(used[:, 0])) < free:
        raise InputError(f"a {kind} fit needs at least {free} points at distinct temperatures in "
                         f"{lo:g} to {hi:g} K; {len(np.unique(used[:, 0]))} given")
    covers_ref = lo - REF_SLACK_K <= T_REF <= hi
    if not covers_ref and any(v is not None for v in (cp298, dfh, s298)):
        raise InputError(f"anchors at 298.15 K need a fit range that includes it; the range is "
                         f"{lo:g} to {hi:g} K")

    T, cp = used[:, 0], used[:, 1]
    A = _basis(kind, T)
    scale = np.max(np.abs(A), axis=0)
    scale[scale == 0] = 1.0
    As = A / scale
    if cp298 is None:
        xs = np.linalg.lstsq(As, cp, rcond=None)[0]
    else:
        C = _basis(kind, np.array([T_REF])) / scale
        xs = _constrained_lstsq(As, cp, C, np.array([cp298]))
    coef = xs / scale
    residuals = A @ coef - cp
    notes: list[str] = []
    model = _build(kind, coef, lo, hi, dfh, s298, notes)
    rms = float(np.sqrt(np.mean(residuals**2)))
    return FitResult(model=model, residuals=residuals, rms=rms, max_abs=float(np.max(np.abs(residuals))),
                     n=len(used), notes=tuple(notes))


def _build(kind: str, coef: np.ndarray, lo: float, hi: float, dfh: float | None, s298: float | None,
           notes: list[str]) -> CpModel:
    c = [float(x) for x in coef]
    if kind == "shomate":
        rng: dict[str, Any] = {"tmin": lo, "tmax": hi, **dict(zip("ABCDE", c, strict=True))}
        bare = ShomateModel([rng])
        ref = np.asarray(T_REF)
        if dfh is not None:
            rng["F"] = dfh - float(bare._h_prim(0, ref))
            rng["H"] = dfh
        if s298 is not None:
            rng["G"] = s298 - float(bare._s_prim(0, ref))
        return ShomateModel([rng])
    a = [*c, 0.0, 0.0]
    bare = Nasa7Model([{"tmin": lo, "tmax": hi, "a": a}])
    ref = np.asarray(T_REF)
    if dfh is not None:
        a[5] = (dfh - float(bare._h_prim(0, ref))) * 1000.0 / R
    else:
        notes.append("a6 set to 0: no dfH298 anchor, so the model's enthalpy constant means nothing")
    if s298 is not None:
        a[6] = (s298 - float(bare._s_prim(0, ref))) / R
    else:
        notes.append("a7 set to 0: no S298 anchor, so the model's entropy constant means nothing")
    return Nasa7Model([{"tmin": lo, "tmax": hi, "a": a}])
