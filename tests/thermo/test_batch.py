"""tablekeeper.thermo.batch against the per-model classes of models.py, the reference.

The batch path must accept exactly the models that model_from_json accepts (except the tables it
leaves to the per-model path by size), and give the same Cp, H and S per range, the same Cp at
298.15 K, the same implied ΔfH° and S° and the same coverage, to 1e-9 relative.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tablekeeper.errors import InputError
from tablekeeper.thermo import batch, model_from_json
from tablekeeper.thermo.models import T_REF

# NIST Chemistry WebBook, CO2 gas-phase Shomate coefficients (Chase 1998, NIST-JANAF 4th ed.); from memory.
CO2_SHOMATE = {"kind": "shomate", "ranges": [
    {"tmin": 298, "tmax": 1200, "A": 24.99735, "B": 55.18696, "C": -33.69137, "D": 7.948387,
     "E": -0.136638, "F": -403.6075, "G": 228.2431, "H": -393.5224},
    {"tmin": 1200, "tmax": 6000, "A": 58.16639, "B": 2.720074, "C": -0.492289, "D": 0.038844,
     "E": -6.447293, "F": -425.9186, "G": 263.6125, "H": -393.5224}]}
# GRI-Mech 3.0 thermo data, O2 NASA 7-coefficient polynomials; from memory.
O2_NASA7 = {"kind": "nasa7", "ranges": [
    {"tmin": 200, "tmax": 1000, "a": [3.78245636e00, -2.99673416e-03, 9.84730201e-06, -9.68129509e-09,
                                      3.24372837e-12, -1.06394356e03, 3.65767573e00]},
    {"tmin": 1000, "tmax": 3500, "a": [3.28253784e00, 1.48308754e-03, -7.57966669e-07, 2.09470555e-10,
                                       -2.16717794e-14, -1.08845772e03, 5.45323129e00]}]}
PUBLISHED = [CO2_SHOMATE, O2_NASA7]

RTOL = 1e-9


def _close(batch_value: np.ndarray, reference: np.ndarray | float | None) -> None:
    ref = np.nan if reference is None else np.asarray(reference, dtype=float)
    # Absolute slack for values that cancel to near zero (H = P(t) + F): a few units in the last place
    # of the terms, far below any tolerance a check applies.
    np.testing.assert_allclose(batch_value, ref, rtol=RTOL, atol=1e-9, equal_nan=True)


# -- strategies: valid models mostly, and every way of being malformed ------------------------------------

bad_number = st.sampled_from([None, "12.5", True, float("nan"), float("inf"), [1.0]])
moderate = st.floats(-1e3, 1e3, allow_nan=False)


@st.composite
def temperature_ranges(draw: st.DrawFn) -> list[tuple[float, float]]:
    n = draw(st.integers(1, 3))
    edges = sorted(draw(st.lists(st.floats(50, 6000), min_size=n + 1, max_size=n + 1, unique=True)))
    out = []
    for i in range(n):
        lo, hi = edges[i], edges[i + 1]
        # Shift a boundary now and then: a gap or an overlap between neighbouring ranges.
        if i and draw(st.booleans()):
            lo += draw(st.sampled_from([-30.0, 25.0, 1e-9]))
        out.append((lo, hi))
    return out


@st.composite
def shomate(draw: st.DrawFn) -> dict:
    ranges = []
    for lo, hi in draw(temperature_ranges()):
        r = {"tmin": lo, "tmax": hi, **{k: draw(moderate) for k in "ABCDE"}}
        for k in "FGH":
            if draw(st.booleans()):
                r[k] = draw(moderate)
        ranges.append(r)
    return {"kind": "shomate", "ranges": ranges}


@st.composite
def nasa7(draw: st.DrawFn) -> dict:
    scales = (10.0, 1e-2, 1e-5, 1e-8, 1e-12, 1e5, 50.0)
    ranges = [{"tmin": lo, "tmax": hi, "a": [draw(st.floats(-1, 1)) * s for s in scales]}
              for lo, hi in draw(temperature_ranges())]
    return {"kind": "nasa7", "ranges": ranges}


@st.composite
def tabulated(draw: st.DrawFn) -> dict:
    n = draw(st.integers(2, 12))
    ts = sorted(draw(st.lists(st.floats(10, 5000), min_size=n, max_size=n, unique=True)))
    return {"kind": "tabulated", "points": [[t, draw(st.floats(-50, 500))] for t in ts]}


@st.composite
def damaged(draw: st.DrawFn, model: dict) -> dict:
    """A copy of a model with one thing wrong (or, now and then, made extreme but still valid)."""
    import copy

    m = copy.deepcopy(model)
    how = draw(st.sampled_from(["number", "kind", "source", "order", "before", "extreme", "shape", "int"]))
    if how == "kind":
        m["kind"] = draw(st.sampled_from(["Shomate", "nasa9", None, 7]))
    elif how == "source":
        m["source"] = draw(st.sampled_from([3, ["a"], "src-1"]))
    elif m["kind"] == "tabulated":
        pts = m["points"]
        i = draw(st.integers(0, len(pts) - 1))
        if how == "number":
            pts[i][draw(st.integers(0, 1))] = draw(bad_number)
        elif how == "order":
            pts.append(list(pts[0]))
        elif how == "shape":
            pts[i] = draw(st.sampled_from([[1.0], [300.0, 1.0, 2.0], "300 K", (400.0, 30.0)]))
        elif how == "int":
            pts[i][1] = int(pts[i][1])
        else:
            # Valid but too long to batch.
            m["points"] = [[float(t), 30.0 + t / 100] for t in range(100, 100 + 80 * 10, 10)]
    else:
        r = m["ranges"][draw(st.integers(0, len(m["ranges"]) - 1))]
        keys = ["tmin", "tmax"] + (list("ABCDEFGH") if m["kind"] == "shomate" else [])
        if how == "number":
            key = draw(st.sampled_from(keys + (["a"] if m["kind"] == "nasa7" else [])))
            if key == "a":
                r["a"][draw(st.integers(0, 6))] = draw(bad_number)
            else:
                r[key] = draw(bad_number)
        elif how == "order":
            r["tmin"], r["tmax"] = r["tmax"], r["tmin"]
        elif how == "before" and len(m["ranges"]) > 1:
            # A later range that starts (or ends) no later than the one before it.
            first, second = m["ranges"][0], m["ranges"][1]
            key = draw(st.sampled_from(["tmin", "tmax"]))
            second[key] = first[key] - draw(st.sampled_from([0.0, 1.0]))
        elif how == "shape":
            if m["kind"] == "nasa7":
                r["a"] = r["a"][:6]
            else:
                del r["A"]
        elif how == "int":
            r["tmin"] = int(r["tmin"]) + 1 if int(r["tmin"]) + 1 < r["tmax"] else r["tmin"]
        else:
            key = "a" if m["kind"] == "nasa7" else "D"
            if key == "a":
                r["a"][4] = 1e300
            else:
                r["D"] = 1e300
    return m


any_model = st.one_of(shomate(), nasa7(), tabulated()).flatmap(
    lambda m: st.one_of(st.just(m), damaged(m)))


def _reference(obj: object):
    try:
        return model_from_json(obj)
    except InputError:
        return None


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(models=st.lists(any_model, min_size=1, max_size=10))
def test_batch_accepts_what_the_per_model_path_accepts(models: list[dict]) -> None:
    mb = batch.read_models(models)
    batched = [int(p) for g in mb.groups for p in g.members]
    assert sorted(batched + mb.unbatched) == list(range(len(models)))  # each position exactly once
    for pos in batched:
        assert _reference(models[pos]) is not None
    for pos in mb.unbatched:
        m = models[pos]
        long_table = (isinstance(m, dict) and isinstance(m.get("points"), list)
                      and len(m["points"]) > batch.MAX_BATCH_POINTS)
        assert _reference(m) is None or long_table


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(models=st.lists(any_model, min_size=1, max_size=10))
def test_batch_numbers_equal_the_per_model_numbers(models: list[dict]) -> None:
    _compare(models)


def test_published_models_evaluate_alike() -> None:
    assert len(batch.read_models(PUBLISHED).groups) == 2
    _compare(PUBLISHED)


def _compare(models: list[dict]) -> None:
    mb = batch.read_models(models)
    with np.errstate(all="ignore"):
        for group in mb.groups:
            grid = batch.sample_grid(group, 9)
            cp, h, s = batch.segment_values(group, grid)
            at_ref = batch.cp_at(group, T_REF)
            covered = batch.covers(group, T_REF)
            implied_h, implied_s = batch.implied_298(group)
            for r, pos in enumerate(group.members):
                model = model_from_json(models[pos])
                assert group.nseg == len(model.segments)
                for j, (a, b) in enumerate(model.segments):
                    T = np.linspace(a, b, 9)
                    np.testing.assert_array_equal(grid[r, j], T)
                    ref = model.segment_values(j, T)
                    _close(cp[r, j], ref[0])
                    if h is None:
                        assert ref[1] is None and ref[2] is None
                    else:
                        _close(h[r, j], ref[1])
                        _close(s[r, j], ref[2])
                assert bool(covered[r]) == model.covers(T_REF)
                if model.covers(T_REF):
                    _close(at_ref[r], model.cp(T_REF))
                _close(implied_h[r], model.implied_dfH298())
                _close(implied_s[r], model.implied_S298())
                # The break values the continuity check compares: each range's own constants there.
                for i, tb in enumerate(model.breaks):
                    for side in (i, i + 1):
                        got = batch.segment_values(group, np.array([[tb]] * group.size),
                                                   seg=np.full(group.size, side))
                        ref = model.segment_values(side, tb)
                        _close(got[0][r, 0], ref[0])
                        if got[1] is not None:
                            _close(got[1][r, 0], ref[1])
                            _close(got[2][r, 0], ref[2])


@pytest.mark.parametrize("bad", [
    {"kind": "nasa7", "ranges": [{"tmin": 300, "tmax": 1000, "a": [1, 2, 3, 4, 5, 6, 10**400]}]},
    {"kind": "shomate", "ranges": [{"tmin": 300, "tmax": 200, "A": 1, "B": 0, "C": 0, "D": 0, "E": 0}]},
    {"kind": "tabulated", "points": [[300, 1], [300, 2]]},
    {"kind": "nasa7", "ranges": [{"tmin": 300, "tmax": 1000, "a": [1, 0, 0, 0, 0, 0, 0]},
                                 {"tmin": 250, "tmax": 2000, "a": [1, 0, 0, 0, 0, 0, 0]}]},
    {"kind": "nasa7", "ranges": [{"tmin": 300, "tmax": 1000, "a": [1, 0, 0, 0, 0, 0, 0]},
                                 {"tmin": 900, "tmax": 1000, "a": [1, 0, 0, 0, 0, 0, 0]}]},
    "not a model",
])
def test_malformed_models_are_left_to_the_per_model_path(bad: object) -> None:
    mb = batch.read_models([CO2_SHOMATE, bad])
    assert mb.unbatched == [1]
    assert [int(p) for g in mb.groups for p in g.members] == [0]


def test_python_and_numpy_agree_on_the_shomate_reference_entropy() -> None:
    # NIST WebBook: S°(298.15 K) of CO2 is 213.79 J/(mol·K); the constants reproduce it (from memory).
    mb = batch.read_models([CO2_SHOMATE])
    _, s = batch.implied_298(mb.groups[0])
    assert math.isclose(float(s[0]), 213.79, abs_tol=0.01)
