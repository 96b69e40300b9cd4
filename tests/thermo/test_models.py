"""Cp(T) models against published tables, and their integrals against numerical quadrature."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad

from tablekeeper.errors import InputError
from tablekeeper.thermo import (
    T_REF,
    ExtrapolationError,
    default_grid,
    derived_table,
    model_from_json,
)

# -- published values ---------------------------------------------------------------------------------

def test_shomate_co2_reproduces_janaf_at_1000_K(published):
    # NIST-JANAF Thermochemical Tables, 4th ed. (Chase 1998), CO2(g) at 1000 K: Cp 54.308 J/(mol·K),
    # H − H298 = 33.397 kJ/mol, S = 269.299 J/(mol·K) (from memory; the same numbers appear in the
    # Engineers Edge reproduction "Ideal Gas Properties of Carbon Dioxide": 33397 kJ/kmol, 269.299).
    # The WebBook Shomate fit of those tables gives H and S to the two decimals of the rounded table
    # and Cp within its fit error of a few thousandths.
    m = model_from_json(published["co2-shomate"])
    _, _, s_abs = m.segment_values(0, 1000.0)
    assert round(float(m.enthalpy_increment(1000.0)), 2) == round(33.397, 2)
    assert round(float(s_abs), 2) == round(269.299, 2)
    assert float(m.cp(1000.0)) == pytest.approx(54.308, abs=0.005)
    assert float(m.enthalpy_increment(1000.0)) == pytest.approx(33.397, abs=0.006)
    assert float(s_abs) == pytest.approx(269.299, abs=0.005)
    # The same table at 500 K: Cp 44.626, H − H298 8.305, S 234.902 (Engineers Edge gives 8305, 234.902).
    assert float(m.enthalpy_increment(500.0)) == pytest.approx(8.305, abs=0.006)
    assert float(m.segment_values(0, 500.0)[2]) == pytest.approx(234.902, abs=0.005)
    # The H coefficient is ΔfH°(298.15); the constants reproduce CODATA 1989 ΔfH° −393.51 and
    # S° 213.785 (Cox, Wagman & Medvedev, from memory) to the rounding of the fit.
    assert m.implied_dfH298() == pytest.approx(-393.51, abs=0.02)
    assert m.implied_S298() == pytest.approx(213.785, abs=0.01)


def test_shomate_n2_matches_janaf_at_1000_K_across_three_ranges(published):
    # NIST-JANAF (Chase 1998), N2(g) at 1000 K: Cp 32.698, S 228.170, H − H298 21.463 kJ/mol;
    # at 298.15 K: Cp 29.124, S 191.609 (from memory).
    m = model_from_json(published["n2-shomate"])
    assert m.breaks == [500.0, 2000.0]
    assert float(m.cp(1000.0)) == pytest.approx(32.698, abs=0.01)
    assert float(m.enthalpy_increment(1000.0)) == pytest.approx(21.463, abs=0.005)
    assert 191.609 + float(m.entropy_increment(1000.0)) == pytest.approx(228.170, abs=0.01)
    assert float(m.cp(T_REF)) == pytest.approx(29.124, abs=0.01)
    assert m.implied_S298() == pytest.approx(191.609, abs=0.01)
    assert m.implied_dfH298() == pytest.approx(0.0, abs=0.001)


@pytest.mark.parametrize("name, janaf, s_tol", [
    # NIST-JANAF (Chase 1998) at 1000 K, from memory: (Cp, S, H − H298 in kJ/mol), and S°298.
    ("o2-nasa7", (34.870, 243.578, 22.703, 205.147), 0.02),
    ("n2-nasa7", (32.698, 228.170, 21.463, 191.609), 0.12),
])
def test_gri_nasa7_reproduces_janaf_at_1000_K(published, name, janaf, s_tol):
    # GRI-Mech 3.0 polynomials (from memory) are fits with an error of a few tenths of a percent in Cp
    # (common practice, no source); the old N2 entry is known to sit about 0.1 J/(mol·K) low in S.
    m = model_from_json(published[name])
    cp, s, h, s298 = janaf
    assert float(m.cp(1000.0)) == pytest.approx(cp, rel=0.005)
    assert float(m.enthalpy_increment(1000.0)) == pytest.approx(h, rel=0.002)
    _, _, s_abs = m.segment_values(0, 1000.0)
    assert float(s_abs) == pytest.approx(s, abs=s_tol)
    assert m.implied_S298() == pytest.approx(s298, abs=s_tol)
    assert m.implied_dfH298() == pytest.approx(0.0, abs=0.01)  # an element in its reference state


@pytest.mark.parametrize("name", ["o2-nasa7", "n2-nasa7"])
def test_gri_nasa7_is_continuous_at_its_1000_K_break(published, name):
    m = model_from_json(published[name])
    assert m.breaks == [1000.0]
    lo = m.segment_values(0, 1000.0)
    hi = m.segment_values(1, 1000.0)
    assert float(lo[0]) == pytest.approx(float(hi[0]), abs=1e-3)    # Cp, J/(mol·K)
    assert float(lo[1]) == pytest.approx(float(hi[1]), abs=1e-5)    # H, kJ/mol
    assert float(lo[2]) == pytest.approx(float(hi[2]), abs=1e-3)    # S, J/(mol·K)


def test_segment_values_show_a_published_discontinuity_the_chained_integral_hides(published):
    # The WebBook CO2 fit jumps by about 0.035 J/(mol·K) in Cp at its 1200 K break; segment_values must
    # show it (for the continuity check) while H − H298 stays continuous.
    m = model_from_json(published["co2-shomate"])
    below, above = m.segment_values(0, 1200.0), m.segment_values(1, 1200.0)
    assert abs(float(below[0]) - float(above[0])) > 0.01
    h = m.enthalpy_increment(np.array([1200.0 - 1e-7, 1200.0 + 1e-7]))
    assert abs(h[1] - h[0]) < 1e-6


# -- integrals ----------------------------------------------------------------------------------------

@pytest.mark.parametrize("name", ["co2-shomate", "n2-shomate", "o2-nasa7"])
def test_analytic_integrals_agree_with_quadrature(published, name):
    m = model_from_json(published[name])
    # Both sides of 298.15 K, inside every range and across every break.
    temps = [m.tmin + 1.0, T_REF, 777.7, *(b + 13.0 for b in m.breaks), m.tmax - 1.0]
    for T in temps:
        pts = [b for b in m.breaks if min(T, T_REF) < b < max(T, T_REF)] or None
        h_num = quad(lambda x: float(m.cp(x)), T_REF, T, points=pts, epsabs=1e-12, limit=200)[0]
        s_num = quad(lambda x: float(m.cp(x)) / x, T_REF, T, points=pts, epsabs=1e-12, limit=200)[0]
        assert float(m.enthalpy_increment(T)) == pytest.approx(h_num / 1000.0, abs=1e-9), T
        assert float(m.entropy_increment(T)) == pytest.approx(s_num, abs=1e-9), T


def test_tabulated_integrals_are_exact_for_the_piecewise_linear_interpolant():
    pts = [[100.0, 20.0], [250.0, 27.5], [400.0, 31.0], [1000.0, 45.0], [1600.0, 52.5]]
    m = model_from_json({"kind": "tabulated", "points": pts})
    T = np.array([100.0, 180.0, 298.15, 400.0, 999.0, 1600.0])
    interp = [float(np.interp(t, [p[0] for p in pts], [p[1] for p in pts])) for t in T]
    assert np.allclose(m.cp(T), interp, rtol=0, atol=1e-12)
    knots = [p[0] for p in pts]
    for t, h, s in zip(T, m.enthalpy_increment(T), m.entropy_increment(T), strict=True):
        inner = [k for k in knots if min(t, T_REF) < k < max(t, T_REF)] or None

        def cp(x: float) -> float:
            return float(np.interp(x, knots, [p[1] for p in pts]))

        h_num = quad(cp, T_REF, t, points=inner, epsabs=1e-13)[0]
        s_num = quad(lambda x: cp(x) / x, T_REF, t, points=inner, epsabs=1e-13)[0]
        assert h == pytest.approx(h_num / 1000.0, abs=1e-10)
        assert s == pytest.approx(s_num, abs=1e-10)


def test_a_constant_cp_gives_the_textbook_closed_forms():
    # Constant Cp: H − H298 = Cp (T − 298.15), S − S298 = Cp ln(T/298.15).
    m = model_from_json({"kind": "tabulated", "points": [[200, 29.1], [3000, 29.1]]})
    assert float(m.enthalpy_increment(1000)) == pytest.approx(29.1 * (1000 - T_REF) / 1000, rel=1e-13)
    assert float(m.entropy_increment(1000)) == pytest.approx(29.1 * math.log(1000 / T_REF), rel=1e-13)


def test_scalar_in_gives_a_float_out_and_arrays_keep_their_shape(published):
    m = model_from_json(published["co2-shomate"])
    assert isinstance(m.cp(500.0), float)
    assert m.cp(np.full((2, 3), 500.0)).shape == (2, 3)
    assert m.enthalpy_increment(T_REF) == 0.0


# -- validity ------------------------------------------------------------------------------------------

def test_extrapolation_is_refused_with_a_sentence_unless_asked(published):
    m = model_from_json(published["co2-shomate"])
    with pytest.raises(ExtrapolationError) as err:
        m.cp([500.0, 6500.0, 7000.0])
    assert "temperatures from 6500 to 7000 K are outside the shomate model's validity range" in str(err.value)
    assert isinstance(err.value, InputError)
    assert float(m.cp(6500.0, extrapolate=True)) > 0
    with pytest.raises(ExtrapolationError):
        m.enthalpy_increment(250.0)


def test_a_300_K_lower_limit_still_serves_the_reference_point_but_nothing_else_below(published):
    m = model_from_json(published["n2-nasa7"])  # 300 to 5000 K
    assert float(m.enthalpy_increment(T_REF)) == 0.0
    with pytest.raises(ExtrapolationError):
        m.cp(299.0)


@pytest.mark.parametrize("obj, words", [
    ({"kind": "wiggle", "ranges": []}, "is not one of shomate, nasa7, tabulated"),
    ({"kind": "shomate", "ranges": []}, "non-empty list of ranges"),
    ({"kind": "shomate", "ranges": [{"tmin": 500, "tmax": 400, "A": 1, "B": 0, "C": 0, "D": 0, "E": 0}]},
     "must be positive and below tmax"),
    ({"kind": "nasa7", "ranges": [{"tmin": 1000, "tmax": 2000, "a": [1] * 7},
                                  {"tmin": 300, "tmax": 1000, "a": [1] * 7}]}, "increasing temperature"),
    ({"kind": "nasa7", "ranges": [{"tmin": 300, "tmax": 1000, "a": [1] * 6}]}, "list of 7 coefficients"),
    ({"kind": "shomate", "ranges": [{"tmin": 300, "tmax": 1000, "A": "x", "B": 0, "C": 0, "D": 0,
                                     "E": 0}]}, "coefficient A must be a finite number"),
    ({"kind": "tabulated", "points": [[300, 29], [300, 30]]}, "strictly increasing"),
    ({"kind": "tabulated", "points": [[300, 29]]}, "at least two"),
    ({"kind": "tabulated", "points": [[300, 29], [400, True]]}, "Cp must be a finite number"),
    ("shomate", "must be an object"),
])
def test_malformed_models_are_refused_with_a_sentence(obj, words):
    with pytest.raises(InputError) as err:
        model_from_json(obj)
    assert words in str(err.value)


def test_models_round_trip_through_json(published):
    tabulated = {"kind": "tabulated", "source": "src-1", "points": [[300, 29], [400, 30]]}
    for obj in [*published.values(), tabulated]:
        assert model_from_json(obj).to_json() == obj


# -- derived tables ------------------------------------------------------------------------------------

def test_derived_table_columns_and_the_gibbs_identity(published, make_record):
    rec = make_record("co2-g", "CO2", "g", dfH=-393.51, S=213.785, cp_model=published["co2-shomate"])
    m = model_from_json(rec["cp_model"])
    grid = default_grid(m, 100.0, tmax=1500.0)
    df = derived_table(rec, grid)
    assert list(df.columns) == ["T_K", "Cp_J_per_molK", "S_J_per_molK", "H_minus_H298_kJ_per_mol",
                                "G_minus_H298_kJ_per_mol"]
    row = df.iloc[0]
    assert row["T_K"] == T_REF and row["S_J_per_molK"] == 213.785 and row["H_minus_H298_kJ_per_mol"] == 0
    # G − H298 = (H − H298) − T·S.
    expect = df["H_minus_H298_kJ_per_mol"] - df["T_K"] * df["S_J_per_molK"] / 1000
    assert np.allclose(df["G_minus_H298_kJ_per_mol"], expect, rtol=0, atol=1e-12)
    # JANAF CO2 at 1000 K: −(G − H298)/T = 235.901 J/(mol·K) (Chase 1998, from memory).
    g1000 = df.loc[df["T_K"] == 1000.0, "G_minus_H298_kJ_per_mol"].item()
    assert -g1000 * 1000 / 1000.0 == pytest.approx(235.901, abs=0.02)


def test_derived_table_needs_S298_and_a_model_from_298_K(published, make_record):
    with pytest.raises(InputError, match=r"record x, field properties.S298: has no S°\(298.15 K\)"):
        derived_table(make_record("x", "CO2", "g", cp_model=published["co2-shomate"]), [300.0])
    hot = {"kind": "tabulated", "points": [[500, 30], [900, 35]]}
    with pytest.raises(InputError, match=r"does not include 298\.15 K"):
        derived_table(make_record("y", "CO2", "g", S=200.0, cp_model=hot), [600.0])
    with pytest.raises(InputError, match="record z, field cp_model: has no Cp"):
        derived_table(make_record("z", "CO2", "g", S=200.0), [600.0])


def test_default_grid_starts_at_298_15_steps_on_multiples_and_ends_at_tmax(published):
    m = model_from_json(published["co2-shomate"])
    g = default_grid(m, 500.0)
    assert g.tolist() == [298.15, 500.0, 1000.0, 1500.0, 2000.0, 2500.0, 3000.0, 3500.0, 4000.0, 4500.0,
                          5000.0, 5500.0, 6000.0]
    assert default_grid(m, 250.0, tmin=400.0, tmax=900.0).tolist() == [400.0, 500.0, 750.0, 900.0]
    assert default_grid(m, 100.0, tmin=250.0, tmax=320.0).tolist() == [250.0, 298.15, 300.0, 320.0]
    hot = model_from_json({"kind": "tabulated", "points": [[450, 30], [900, 35]]})
    assert default_grid(hot, 200.0).tolist() == [450.0, 600.0, 800.0, 900.0]
    with pytest.raises(InputError, match="step"):
        default_grid(m, 0.0)
    with pytest.raises(InputError, match="more than"):
        default_grid(m, 1e-6)
