"""Odd data never makes a value check crash; the catalogue is complete; checks scale as columns."""

from __future__ import annotations

import math

import numpy as np
import pytest
from checkkit import context, findings, record

from tablekeeper.checks import CHECKS, FAMILIES, Context, _load_families, run

VALUE_IDS = ["gibbs-consistency", "third-law", "gas-entropy-floor", "cp-range", "cp-model", "cp-continuity",
             "phase-order", "unit-suspect", "reaction-closure", "uncertainty", "flag"]


def test_every_value_check_is_registered() -> None:
    _load_families()
    assert {"consistency", "heat_capacity", "curation"} <= set(FAMILIES)
    assert set(VALUE_IDS) <= set(CHECKS)


def _odd_records() -> dict[str, dict]:
    good = record("ok", "H2O", "l", dfH=-285.83, S=69.95, dfG=-237.13)
    odd = {
        "str-value": dict(good, id="str-value", properties={"dfH298": {"value": "abc", "unit": "kJ/mol"},
                                                            "S298": {"value": None, "unit": "J/(mol*K)"}}),
        "not-dict": dict(good, id="not-dict", properties={"dfH298": 5, "S298": [1, 2]}),
        "no-props": {"id": "no-props", "formula": "NaCl", "phase": "cr"},
        "props-list": dict(good, id="props-list", properties=[1, 2, 3]),
        "bad-formula": dict(good, id="bad-formula", formula="Xq9(("),
        "no-formula": dict(good, id="no-formula", formula=None),
        "bad-phase": dict(good, id="bad-phase", phase="plasma"),
        "bool-value": dict(good, id="bool-value", properties={"S298": {"value": True, "unit": "J/(mol*K)"}}),
        "nan": record("nan", "CO2", "g", dfH=math.nan, S=math.inf, dfG=-394.4, Cp=math.nan),
        "bad-u": record("bad-u", "CO2", "g", dfH=-393.5, S=213.8, dfG=-394.4,
                        u={"dfH298": "big", "S298": -1}),
        "huge": record("huge", "CO2", "g", dfH=1e300, S=1e300, dfG=-1e300, Cp=1e300),
        "model-str": dict(good, id="model-str", cp_model="nasa"),
        "model-kind": dict(good, id="model-kind", cp_model={"kind": "nasa7", "ranges": "x"}),
        "model-nan": dict(good, id="model-nan",
                          cp_model={"kind": "tabulated", "points": [[300, math.nan], [400, 1]]}),
        "model-huge": dict(good, id="model-huge", cp_model={"kind": "shomate", "ranges": [
            {"tmin": 298.0, "tmax": 1000.0, "A": 1e308, "B": 1e308, "C": 0, "D": 0, "E": 1e308}]}),
        "ok": good,
    }
    return odd


def test_odd_records_never_raise() -> None:
    meta = {"policy": {"tolerance_k": "two", "required_fields": "dfH298", "max_relative_uncertainty": -1},
            "element_references": {"O": 5, "H": "missing"}, "electron_convention": ["x"]}
    reactions = {"r1": {"equation": 12}, "r2": {"equation": "ok = ok", "drH": {"value": "x"}},
                 "r3": {"equation": "H2O(l) = H2O(l) + ", "temperature_K": "hot"}, "r4": "not a dict"}
    flags = {"f1": {"status": "open", "species": ["x"], "note": None, "blocking": "yes"}, "f2": 7}
    ctx = Context.from_records(meta, _odd_records(), reactions=reactions, flags=flags)
    report = run(ctx, only=VALUE_IDS)
    assert all(f.check in VALUE_IDS for f in report.findings)
    for f in report.findings:
        f.to_json()  # serialisable, numbers finite or None


def test_a_consistent_synthetic_table_raises_nothing_and_faults_are_found_where_put() -> None:
    """10k species built consistent by construction (ΔfG° from ΔfH° and S° with the CODATA element
    entropies, computed here by hand); every 97th then gets ΔfG° + 5 kJ/mol. The vectorised check must
    name exactly those: a misaligned index would name others."""
    rng = np.random.default_rng(7)
    s_el = {"C": 5.74, "H": 130.680 / 2, "O": 205.152 / 2}
    recs = []
    for i in range(10_000):
        c, h, o = (int(x) for x in rng.integers(1, 12, size=3))
        s = round(float(150 + 25 * c + rng.random() * 30), 2)
        dh = round(float(-40 * c + rng.random() * 80), 2)
        dfs = s - (c * s_el["C"] + h * s_el["H"] + o * s_el["O"])
        dg = round(dh - 298.15 * dfs / 1000, 2)
        shift = 5.0 if i % 97 == 0 else 0.0
        recs.append(record(f"s{i:05d}", f"C{c}H{h}O{o}", "g", dfH=dh, S=s, dfG=round(dg + shift, 2),
                           u={"dfH298": 0.3, "S298": 0.3, "dfG298": 0.3}))
    found = findings(context(recs), "gibbs-consistency")
    assert {f.species for f in found} == {f"s{i:05d}" for i in range(0, 10_000, 97)}
    assert all(f.observed - f.expected == pytest.approx(5.0, abs=0.02) for f in found)
