"""Least-squares fits of Shomate and NASA 7 models: recovery of a known model, pinned anchors."""

from __future__ import annotations

import numpy as np
import pytest

from tablekeeper.errors import InputError
from tablekeeper.thermo import T_REF, fit, model_from_json


def _co2_low(published):
    # NIST WebBook CO2 Shomate, 298–1200 K range (Chase 1998; from memory), as one-range model.
    rng = published["co2-shomate"]["ranges"][0]
    return model_from_json({"kind": "shomate", "ranges": [rng]}), rng


def test_shomate_fit_recovers_the_model_it_was_sampled_from(published):
    model, rng = _co2_low(published)
    T = np.linspace(298.0, 1200.0, 60)
    res = fit(np.column_stack([T, model.cp(T)]), "shomate")
    got = res.model.coefficients(0)
    for key in "ABCDE":
        assert got[key] == pytest.approx(rng[key], rel=1e-7, abs=1e-7), key
    assert res.n == 60
    assert res.rms < 1e-9 and res.max_abs < 1e-8
    assert res.model.tmin == 298.0 and res.model.tmax == 1200.0
    assert np.allclose(res.residuals, res.model.cp(T) - model.cp(T), rtol=0, atol=1e-12)


def test_nasa7_fit_recovers_gri_o2_and_its_constants_from_the_anchors(published):
    # GRI-Mech 3.0 O2, low range 200–1000 K (from memory). With ΔfH° = 0 and S° from the polynomial
    # itself as anchors, a6 and a7 come back as published.
    low = published["o2-nasa7"]["ranges"][0]
    model = model_from_json({"kind": "nasa7", "ranges": [low]})
    T = np.linspace(200.0, 1000.0, 81)
    res = fit([(t, c) for t, c in zip(T, model.cp(T), strict=True)], "nasa7",
              anchors={"dfH298": model.implied_dfH298(), "S298": model.implied_S298()})
    a = res.model.coefficients(0)
    assert a[:5] == pytest.approx(low["a"][:5], rel=1e-5)
    assert a[5] == pytest.approx(low["a"][5], abs=1e-4)
    assert a[6] == pytest.approx(low["a"][6], abs=1e-7)
    assert res.rms < 1e-8
    assert res.notes == ()


def test_pinned_fit_honours_the_anchors_exactly(published):
    model, _ = _co2_low(published)
    rng = np.random.default_rng(7)
    T = np.linspace(298.15, 1200.0, 40)
    noisy = model.cp(T) + rng.normal(0.0, 0.3, T.size)
    # CODATA 1989 (Cox, Wagman & Medvedev; from memory): CO2(g) Cp° 37.135, ΔfH° −393.51, S° 213.785.
    anchors = {"Cp298": 37.135, "dfH298": -393.51, "S298": {"value": 213.785, "unit": "J/(mol*K)"}}
    res = fit(np.column_stack([T, noisy]), "shomate", anchors=anchors)
    assert float(res.model.cp(T_REF)) == pytest.approx(37.135, abs=1e-10)
    assert res.model.implied_dfH298() == pytest.approx(-393.51, abs=1e-10)
    assert res.model.implied_S298() == pytest.approx(213.785, abs=1e-10)
    assert res.model.constants(0)["H"] == -393.51
    free = fit(np.column_stack([T, noisy]), "shomate")
    assert float(free.model.cp(T_REF)) != pytest.approx(37.135, abs=1e-6)  # the pin did something
    # The constraint costs a little fit quality, never improves it.
    assert res.rms >= free.rms
    assert res.rms < 0.5


def test_fit_uses_only_points_in_the_range_and_reports_that_range(published):
    model, _ = _co2_low(published)
    T = np.linspace(300.0, 1200.0, 31)
    pts = np.column_stack([T, model.cp(T)])
    pts[-1, 1] = 1e6  # an outlier outside the asked range must not matter
    res = fit(pts, "shomate", tmin=300.0, tmax=1150.0)
    assert res.n == 29 and res.rms < 1e-8  # 300, 330, ..., 1140 K
    assert (res.model.tmin, res.model.tmax) == (300.0, 1150.0)


def test_nasa7_fit_without_anchors_says_its_constants_mean_nothing(published):
    model = model_from_json({"kind": "nasa7", "ranges": [published["o2-nasa7"]["ranges"][0]]})
    T = np.linspace(300.0, 1000.0, 20)
    res = fit(np.column_stack([T, model.cp(T)]), "nasa7")
    assert res.model.coefficients(0)[5:] == [0.0, 0.0]
    assert any("a6" in n for n in res.notes) and any("a7" in n for n in res.notes)


@pytest.mark.parametrize("points, kw, words", [
    ([(300, 29.0), (400, 30.0)], {}, "at least 5 points"),
    ([(300, 29.0)] * 6, {"tmin": 250, "tmax": 400}, "at distinct temperatures"),
    ([(300, 29.0)] * 6, {}, "the fit range 300 to 300 K is empty"),
    ([(300, "x")] * 6, {}, "pairs of numbers"),
    ([(-1, 29.0)] * 6, {}, "positive temperatures"),
    ([(t, 30.0) for t in range(500, 1000, 50)], {"anchors": {"Cp298": 29.0}}, "includes it"),
    ([(t, 30.0) for t in range(300, 1000, 50)], {"anchors": {"Cp500": 29.0}}, "unknown anchor"),
    ([(t, 30.0) for t in range(300, 1000, 50)], {"tmin": 900, "tmax": 800}, "empty"),
])
def test_bad_fit_requests_are_refused_with_a_sentence(points, kw, words):
    with pytest.raises(InputError) as err:
        fit(points, "shomate", **kw)
    assert words in str(err.value)


def test_fit_refuses_an_unknown_kind():
    with pytest.raises(InputError, match="choose shomate or nasa7"):
        fit([(t, 30.0) for t in range(300, 1000, 50)], "tabulated")
