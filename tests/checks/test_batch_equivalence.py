"""The fast paths of the check catalogue give the report of the reference paths.

Fast: Cp models evaluated in stacked arrays (heat_capacity.BATCH), plain formulas read without molmass
(formula.FAST_PLAIN). Reference: each model through the public per-model classes, every formula through
molmass. The dataset is the
benchmark generator's (benchmarks/generate.py), with its seeded faults, plus varied and malformed Cp
models and schema-invalid records, so that every check has findings to agree on.
"""

from __future__ import annotations

import copy
import importlib.util
import math
import random
from pathlib import Path

import pytest

from tablekeeper import formula
from tablekeeper.checks import Context, run
from tablekeeper.checks import heat_capacity as hc
from tablekeeper.thermo import model_from_json

ROOT = Path(__file__).resolve().parents[2]
R = 8.314462618  # CODATA 2018


def _generator():
    spec = importlib.util.spec_from_file_location("tk_generate", ROOT / "benchmarks" / "generate.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def _poly(rng: random.Random, kind: str, cp298: float) -> dict:
    """A Shomate or NASA 7 model near cp298, one to three ranges, with now and then a gap, an overlap,
    a jump at a break, a missing constant or a wild coefficient."""
    n = rng.choice((1, 2, 2, 3))
    edges = [rng.choice((200.0, 250.0, 298.15, 300.0, 400.0))]
    for _ in range(n):
        edges.append(edges[-1] + rng.choice((300.0, 700.0, 1000.0, 2500.0)))
    ranges = []
    for i in range(n):
        lo, hi = edges[i], edges[i + 1]
        if i and rng.random() < 0.15:
            lo += rng.choice((-40.0, 40.0))  # overlap or gap
        slope = rng.uniform(-0.01, 0.03)
        jump = rng.choice((0.0, 0.0, 0.0, 0.5, 5.0)) if i else 0.0
        if kind == "shomate":
            r = {"tmin": lo, "tmax": hi, "A": cp298 - slope * 298.15 + jump, "B": slope * 1000.0,
                 "C": rng.choice((0.0, rng.uniform(-5, 5))), "D": 0.0, "E": rng.choice((0.0, 0.1))}
            if rng.random() < 0.8:
                r["F"] = rng.uniform(-400, 100)
            if rng.random() < 0.8:
                r["G"] = rng.uniform(100, 300)
            if rng.random() < 0.6:
                r["H"] = rng.uniform(-400, 100)
        else:
            a = [(cp298 - slope * 298.15) / R + jump, slope / R, 0.0, 0.0, 0.0,
                 rng.uniform(-5e4, 1e4), rng.uniform(-10, 30)]
            r = {"tmin": lo, "tmax": hi, "a": a}
        ranges.append(r)
    return {"kind": kind, "source": "src-000", "ranges": ranges}


def _table(rng: random.Random, cp298: float) -> dict:
    n = rng.choice((2, 3, 9, 20, 80))  # 80 points: beyond the batch size, per model
    t0 = rng.choice((100.0, 200.0, 298.15, 310.0))
    pts = [[t0 + 50.0 * i, round(cp298 + rng.uniform(-3, 3) * i, 3)] for i in range(n)]
    if rng.random() < 0.1:
        pts[-1][1] = -5.0  # a negative Cp at the top
    return {"kind": "tabulated", "points": pts}


MALFORMED = [
    {"kind": "nasa9", "ranges": []},
    {"kind": "shomate", "ranges": [{"tmin": 300, "tmax": 1000, "A": True, "B": 0, "C": 0, "D": 0, "E": 0}]},
    {"kind": "shomate", "ranges": [{"tmin": 1000, "tmax": 300, "A": 1, "B": 0, "C": 0, "D": 0, "E": 0}]},
    {"kind": "nasa7", "ranges": [{"tmin": 300, "tmax": 1000, "a": [1, 2, 3]}]},
    {"kind": "nasa7", "ranges": [{"tmin": 300, "tmax": 1000, "a": [3.5, 0, 0, 0, 0, 0, "7"]}]},
    {"kind": "nasa7", "ranges": [{"tmin": 300, "tmax": 1000, "a": [3.5, 0, 0, 0, 0, 0, 0]},
                                 {"tmin": 200, "tmax": 3000, "a": [3.5, 0, 0, 0, 0, 0, 0]}]},
    {"kind": "tabulated", "points": [[300, 20], [200, 25]]},
    {"kind": "tabulated", "points": [[300, 20], "400 K"]},
    {"kind": "tabulated", "points": [[300, 20]]},
    {"kind": "shomate", "source": 12, "ranges": [{"tmin": 300, "tmax": 1000, "A": 1, "B": 0, "C": 0,
                                                  "D": 0, "E": 0}]},
    {"kind": "shomate"},
    {"ranges": []},  # no kind: not a model the checks look at
    # Valid but absurd: Cp overflows to infinity inside the range.
    {"kind": "shomate", "ranges": [{"tmin": 300, "tmax": 3000, "A": 1e308, "B": 1e308, "C": 0, "D": 0,
                                    "E": 0}]},
]


def _constant_nasa(cp: float, a6: float = 0.0, a7: float = 10.0) -> dict:
    return {"kind": "nasa7", "ranges": [{"tmin": 200.0, "tmax": 1000.0, "a": [cp / R, 0, 0, 0, 0, a6, a7]},
                                        {"tmin": 1000.0, "tmax": 3000.0, "a": [cp / R, 0, 0, 0, 0, a6, a7]}]}


def _near_thresholds(species: dict, ids: list[str]) -> None:
    """Models and values placed on both sides of every tolerance of cp-model and cp-continuity, so that
    a batch test that drifted from the per-model one (a slack dropped, a bound moved) shows."""
    gases = [i for i in ids if species[i]["phase"] == "g"]
    condensed = [i for i in ids if species[i]["phase"] in ("cr", "l")]
    spread = [0.5 + 0.1 * n for n in range(11)]  # 0.5 to 1.5 times a tolerance
    take = iter(gases)
    for f in spread:
        # A jump at 1000 K in Cp (tolerance: larger of 1 % and 0.1 J/(mol·K)), H (0.01 kJ/mol), S (0.02).
        for which in ("cp", "h", "s"):
            rec = species[next(take)]
            cp = rec["properties"]["Cp298"]["value"]
            model = _constant_nasa(cp)
            upper = model["ranges"][1]["a"]
            if which == "cp":
                upper[0] += f * max(hc.CONT_CP_REL * cp, hc.CONT_CP_ABS) / R
            elif which == "h":
                upper[5] += f * hc.CONT_H * 1000.0 / R
            else:
                upper[6] += f * hc.CONT_S / R
            rec["cp_model"] = model
        # A record's Cp°, ΔfH° and S° beside what its model gives at 298.15 K.
        rec = species[next(take)]
        props = rec["properties"]
        cp = props["Cp298"]["value"]
        rec["cp_model"] = _constant_nasa(cp, a6=-20000.0, a7=25.0)
        m = model_from_json(rec["cp_model"])
        props["Cp298"]["value"] = cp + f * 2 * math.hypot(props["Cp298"]["uncertainty"], hc.MODEL_CP_REL * cp)
        props["dfH298"]["value"] = m.implied_dfH298() + f * 2 * math.hypot(props["dfH298"]["uncertainty"],
                                                                          hc.MODEL_H_TERM)
        props["S298"]["value"] = m.implied_S298() - f * 2 * math.hypot(props["S298"]["uncertainty"],
                                                                      hc.MODEL_S_TERM)
    low = hc.gas_cp_lower() - hc.MODEL_CP_SLACK
    for d in (-0.06, -0.02, -1e-9, 1e-9, 0.02, 0.06, 0.099, 0.101):
        rec = species[next(take)]
        rec["cp_model"] = {"kind": "tabulated", "points": [[200.0, low + d], [1500.0, low + d + 1.0]]}
        rec = species[next(take)]
        atoms = formula.parse(rec["formula"]).atoms
        high = float(hc.gas_cp_classical(atoms)) + hc.MODEL_CP_SLACK
        rec["cp_model"] = {"kind": "tabulated",
                           "points": [[200.0, high - 5.0], [hc.MODEL_CLASSICAL_TMAX, high + d],
                                      [3000.0, high + 50.0]]}
    for ident, d in zip(condensed, (-1e-9, 0.0, 1e-9, 0.01), strict=False):
        species[ident]["cp_model"] = {"kind": "tabulated", "points": [[100.0, d], [900.0, 50.0]]}
    for ident, d in zip(condensed[4:], (-2e-6, -5e-7, 5e-7, 2e-6), strict=False):
        # Neighbouring ranges that meet within the slack of 1e-6 K, or leave a gap or an overlap.
        model = _constant_nasa(species[ident]["properties"]["Cp298"]["value"])
        model["ranges"][1]["tmin"] += d
        species[ident]["cp_model"] = model


@pytest.fixture(scope="module")
def dataset() -> tuple[dict, dict, dict]:
    gen = _generator()
    rng = random.Random(20240601)
    species = gen.build_species(2000, rng, 40)
    gen.seed_faults(species, 0.05, rng)
    ids = sorted(i for i, r in species.items() if not r.get("reference_state"))
    picked = rng.sample(ids, 400)
    for n, ident in enumerate(picked):
        rec = species[ident]
        cp298 = rec["properties"]["Cp298"]["value"]
        if n < len(MALFORMED):
            rec["cp_model"] = copy.deepcopy(MALFORMED[n])
        elif n % 3 == 0:
            rec["cp_model"] = _table(rng, cp298)
        else:
            rec["cp_model"] = _poly(rng, ("shomate", "nasa7")[n % 2], cp298)
        if n % 7 == 0:
            rec["phase"] = rng.choice(("aq", "am", "l"))
    _near_thresholds(species, [i for i in ids if i not in set(picked)])
    for ident in picked[-6:]:  # schema-invalid records: the schema check has findings too
        species[ident]["properties"]["dfH298"]["value"] = "-12.5"
        species[ident]["color"] = "blue"
    sources = {f"src-{i:03d}": {"id": f"src-{i:03d}", "revision": 1, "title": f"Synthetic compilation {i}",
                                "year": 1990 + i % 30, "kind": "compilation"} for i in range(40)}
    meta = {"name": "synth-2k", "title": "Synthetic", "schema_version": 1, "standard_pressure_bar": 1,
            "reference_temperature_K": 298.15,
            "element_references": {el: ref[0] for el, ref in gen.REFERENCES.items()},
            "policy": {"tolerance_k": 2, "require_uncertainty": True, "max_relative_uncertainty": 0.5}}
    return meta, species, sources


def _report(monkeypatch: pytest.MonkeyPatch, data: tuple, fast: bool) -> dict:
    meta, species, sources = data
    monkeypatch.setattr(hc, "BATCH", fast)
    monkeypatch.setattr(formula, "FAST_PLAIN", fast)
    formula.parse.cache_clear()
    try:
        ctx = Context.from_records(meta, copy.deepcopy(species), sources)
        return run(ctx).to_json()
    finally:
        formula.parse.cache_clear()


def _same_numbers(a: float | None, b: float | None) -> bool:
    if a is None or b is None:
        return a is b
    return math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-12)


def test_fast_and_reference_paths_give_the_same_report(monkeypatch: pytest.MonkeyPatch,
                                                       dataset: tuple) -> None:
    fast = _report(monkeypatch, dataset, True)
    ref = _report(monkeypatch, dataset, False)
    assert fast["summary"] == ref["summary"]
    assert len(fast["findings"]) == len(ref["findings"])
    for f, r in zip(fast["findings"], ref["findings"], strict=True):
        for key in ("check", "severity", "species", "field", "message", "suggestion"):
            assert f[key] == r[key], (key, f, r)
        for key in ("observed", "expected", "tolerance"):
            assert _same_numbers(f[key], r[key]), (key, f, r)


def test_the_dataset_exercises_every_model_test(monkeypatch: pytest.MonkeyPatch, dataset: tuple) -> None:
    """The comparison above means something only if the models give findings of every kind."""
    ref = _report(monkeypatch, dataset, False)
    messages = [f["message"] for f in ref["findings"] if f["check"] in ("cp-model", "cp-continuity")]
    for fragment in ("cannot be read", "leave a gap", "overlap from", "no finite Cp", "below 5/2 R",
                     "a pure phase has Cp > 0", "Cp(298.15 K) =", "constants give ΔfH°", "constants give S°",
                     "Cp jumps", "H jumps", "S jumps"):
        assert any(fragment in m for m in messages), fragment
    assert any(f["check"] == "schema" for f in ref["findings"])
