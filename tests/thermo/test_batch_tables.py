"""Batched derived tables (thermo.batch.derived_tables) against derived_table per species, float for float.

The per-species reference is integrate.derived_table on integrate.default_grid; its own correctness
against outside values is tested in test_models.py. Here the two paths must agree exactly.
"""

from __future__ import annotations

import numpy as np
import pytest

from tablekeeper.thermo import TABLE_COLUMNS, default_grid, derived_table, record_model
from tablekeeper.thermo.batch import MAX_BATCH_POINTS, derived_tables

# Shomate coefficients of N2(g), 100–500 K and 500–2000 K, NIST-JANAF style (from memory).
N2_LOW = {"A": 28.98641, "B": 1.853978, "C": -9.647459, "D": 16.63537, "E": 0.000117, "F": -8.671914,
          "G": 226.4168, "H": 0.0}
N2_HIGH = {"A": 19.50583, "B": 19.88705, "C": -8.598535, "D": 1.369784, "E": 0.527601, "F": -4.935202,
           "G": 212.39, "H": 0.0}
# NASA 7 coefficients of H2O(g), 200–1000 K and 1000–3500 K (from memory).
H2O_LOW = [4.19864056, -2.0364341e-3, 6.52040211e-6, -5.48797062e-9, 1.77197817e-12, -30293.7267, -0.849032208]
H2O_HIGH = [3.03399249, 2.17691804e-3, -1.64072518e-7, -9.7041987e-11, 1.68200992e-14, -30004.2971, 4.9667701]


def _rec(ident: str, model: dict, s298: float | None = 190.0, unit: str = "J/(mol*K)") -> dict:
    props = {} if s298 is None else {"S298": {"value": s298, "unit": unit}}
    return {"id": ident, "properties": props, "cp_model": model}


def _shomate(ranges: list[tuple[float, float, dict]]) -> dict:
    return {"kind": "shomate", "ranges": [{"tmin": a, "tmax": b, **c} for a, b, c in ranges]}


def _nasa(ranges: list[tuple[float, float, list]]) -> dict:
    return {"kind": "nasa7", "ranges": [{"tmin": a, "tmax": b, "a": c} for a, b, c in ranges]}


def _varied() -> list[dict]:
    rng = np.random.default_rng(7)
    recs = [
        _rec("n2-one", _shomate([(100.0, 500.0, N2_LOW)])),
        _rec("n2-two", _shomate([(100.0, 500.0, N2_LOW), (500.0, 2000.0, N2_HIGH)])),
        _rec("n2-300", _shomate([(300.0, 500.0, N2_LOW), (500.0, 2000.0, N2_HIGH)])),  # starts at 300 K
        _rec("n2-three", _shomate([(200.0, 500.0, N2_LOW), (500.0, 1200.0, N2_HIGH),
                                   (1200.0, 6000.0, N2_HIGH)])),
        _rec("h2o", _nasa([(200.0, 1000.0, H2O_LOW), (1000.0, 3500.0, H2O_HIGH)])),
        _rec("h2o-300", _nasa([(300, 1000, H2O_LOW), (1000, 3500, H2O_HIGH)]), s298=45.1, unit="cal/(mol*K)"),
        _rec("h2o-one", _nasa([(250.0, 1234.5, H2O_LOW)])),
        _rec("tab", {"kind": "tabulated", "points": [[100, 29.1], [298.15, 29.12], [400, 29.25], [1000, 32.7]]}),
        _rec("tab-300", {"kind": "tabulated", "points": [[300, 29.1], [700, 30.0], [1500.5, 34.0]]}),
        _rec("tab-long", {"kind": "tabulated", "points": [[100.0 + 7 * i, 20.0 + 0.01 * i]
                                                          for i in range(MAX_BATCH_POINTS + 10)]}),
        # Refused by derived_table: range without 298.15 K, a gap at 298.15 K, no S298, malformed.
        _rec("hot", _nasa([(500.0, 1000.0, H2O_LOW)])),
        _rec("gap", _shomate([(100.0, 290.0, N2_LOW), (310.0, 900.0, N2_HIGH)])),
        _rec("no-s", _nasa([(200.0, 1000.0, H2O_LOW)]), s298=None),
        _rec("bad", {"kind": "nasa7", "ranges": [{"tmin": 200, "tmax": 1000, "a": [1, 2]}]}),
    ]
    for k in range(30):  # random multi-range models of every kind
        n = int(rng.integers(1, 4))
        edges = np.sort(rng.uniform(320.0, 3000.0, n - 1)).tolist()
        lows, highs = [float(rng.uniform(150.0, 298.0)), *edges], [*edges, float(rng.uniform(3100, 5000))]
        if k % 3 == 0:
            coefs = [{key: float(v) * rng.uniform(0.5, 1.5) for key, v in N2_HIGH.items()} for _ in lows]
            recs.append(_rec(f"s{k}", _shomate(list(zip(lows, highs, coefs, strict=True)))))
        elif k % 3 == 1:
            coefs = [[float(x * rng.uniform(0.9, 1.1)) for x in H2O_LOW] for _ in lows]
            recs.append(_rec(f"n{k}", _nasa(list(zip(lows, highs, coefs, strict=True)))))
        else:
            ts = np.cumsum(rng.uniform(20.0, 300.0, int(rng.integers(2, 12)))) + 150.0
            pts = [[float(t), float(rng.uniform(20.0, 60.0))] for t in ts]
            recs.append(_rec(f"t{k}", {"kind": "tabulated", "points": pts}, s298=float(rng.uniform(50, 300))))
    return recs


@pytest.mark.parametrize("step", [100.0, 37.5])
def test_batched_tables_equal_per_species_tables(step: float) -> None:
    recs = _varied()
    got = derived_tables(recs, step)
    assert len(got) == len(recs)
    refused = set()
    for rec, result in zip(recs, got, strict=True):
        try:
            model = record_model(rec)
            frame = derived_table(rec, default_grid(model, step))
        except Exception as exc:  # the type is asserted below
            assert type(exc).__name__ in {"InputError", "ExtrapolationError"}, exc
            assert result is None, rec["id"]
            refused.add(rec["id"])
            continue
        assert result is not None, rec["id"]
        want = frame.loc[:, list(TABLE_COLUMNS)].to_numpy(dtype="float64")
        assert result.values.shape == want.shape, rec["id"]
        # Exact: the same doubles, bit for bit (tobytes is in C order whatever the memory layout).
        assert result.values.tobytes() == want.tobytes(), rec["id"]
        assert (result.tmin, result.tmax) == (model.tmin, model.tmax)
    assert {"hot", "gap", "no-s", "bad"} <= refused
    assert len(refused) < len(recs) // 2  # most models give a table: the comparison is not vacuous


def test_no_records() -> None:
    assert derived_tables([]) == []
