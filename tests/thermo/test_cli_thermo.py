"""The ``table`` and ``reaction`` commands, run as a user runs them (a subprocess per call)."""

from __future__ import annotations

import io
import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from tablekeeper.store import Dataset
from tablekeeper.thermo import (
    default_grid,
    derived_table,
    model_from_json,
    parse_equation,
    reaction_properties,
)

ROOT = Path(__file__).resolve().parents[2]


def run(*args: str) -> subprocess.CompletedProcess:
    env = dict(os.environ, TABLEKEEPER_USER="tester", PYTHONPATH=str(ROOT))
    return subprocess.run([sys.executable, "-m", "tablekeeper.cli", *args], capture_output=True, text=True,
                          env=env, cwd=ROOT, timeout=120)


@pytest.fixture
def dataset(tmp_path, combustion_species, published) -> Path:
    ds = Dataset.init(tmp_path / "ds", "thermo-cli", user="tester")
    for rec in combustion_species.values():
        rec = dict(rec)
        if rec["id"] == "co2-g":
            # An escape sequence in a name must reach the terminal as visible text, never as a control.
            rec["name"] = "carbon dioxide \x1b[31mred"
            rec["cp_model"] = published["co2-shomate"]
        if rec["id"] == "o2-g":
            rec["cp_model"] = published["o2-nasa7"]
        ds.save("species", rec, expected_revision=None)
    return ds.root


def test_table_csv_parses_and_equals_the_core_table(dataset):
    p = run("table", str(dataset), "co2-g", "--format", "csv", "--tmax", "1500", "--step", "250")
    assert p.returncode == 0, p.stderr
    got = pd.read_csv(io.StringIO(p.stdout))
    rec = Dataset(dataset).load("species", "co2-g")
    grid = default_grid(model_from_json(rec["cp_model"]), 250.0, tmax=1500.0)
    want = derived_table(rec, grid)
    assert list(got.columns) == list(want.columns)
    # Shortest round-trip floats: the numbers come back bit for bit.
    assert np.array_equal(got.to_numpy(), want.to_numpy())
    assert got["T_K"].tolist() == [298.15, 500.0, 750.0, 1000.0, 1250.0, 1500.0]


def test_table_text_is_aligned_with_units_and_shows_names_literally(dataset):
    p = run("table", str(dataset), "CO2(g)", "--tmin", "300", "--tmax", "1000", "--step", "100")
    assert p.returncode == 0, p.stderr
    lines = p.stdout.splitlines()
    assert "\x1b" not in p.stdout and "\\x1b[31mred" in lines[0]
    assert "J/(mol·K)" in lines[3] and "kJ/mol" in lines[3]
    rows = lines[4:]
    assert len(rows) == 8 and len({len(r) for r in lines[2:]}) == 1
    assert rows[-1].split()[0] == "1000.00"
    # JANAF CO2 at 1000 K, H − H298 = 33.397 kJ/mol (Chase 1998; from memory): the fit shows 33.402.
    assert rows[-1].split()[3] == "33.402"


@pytest.mark.parametrize("args, words", [
    (["table", "{ds}", "no-such"], "no species named 'no-such'"),
    (["table", "{ds}", "co2-g", "--tmax", "7000"], "refusing to extrapolate"),
    (["table", "{ds}", "ch4-g"], "record ch4-g, field cp_model: has no Cp(T) model"),
    (["table", "{ds}", "co2-g", "--format", "xml"], "invalid choice"),
    (["reaction", "{ds}", "CH4(g) + O2(g) = CO2(g) + 2 H2O(l)"], "O has 2 on the left and 4 on the right"),
    (["reaction", "{ds}", "CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)", "--temperature", "800"],
     "record ch4-g, field cp_model: has no Cp(T) model"),
    (["reaction", "{ds}/missing", "CO2(g) = CO2(g)"], "is not a dataset folder"),
])
def test_bad_input_exits_2_with_one_line_and_no_traceback(dataset, args, words):
    p = run(*[a.replace("{ds}", str(dataset)) for a in args])
    assert p.returncode == 2
    assert words in p.stderr
    assert "Traceback" not in p.stderr and len(p.stderr.strip().splitlines()) == 1
    assert p.stdout == ""


def test_reaction_text_and_json(dataset, combustion_species):
    eq = "CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)"
    p = run("reaction", str(dataset), eq)
    assert p.returncode == 0, p.stderr
    lines = p.stdout.splitlines()
    assert lines[-1].startswith("caution:") and "not a safety assessment" in lines[-1]
    assert any(ln.startswith("ΔrH°") and "-890.300 ± 0.076 kJ/mol" in ln for ln in lines)
    assert any(ln.startswith("verdict") and "spontaneous" in ln for ln in lines)
    assert any("ch4-g dfH298, ch4-g S298 (counted as exact)" in ln for ln in lines)

    p = run("reaction", str(dataset), eq, "--format", "json")
    assert p.returncode == 0, p.stderr
    obj = json.loads(p.stdout)
    species = {i: Dataset(dataset).load("species", i) for i in combustion_species}
    core = reaction_properties(parse_equation(eq, species), species).to_json()
    assert obj == json.loads(json.dumps(core))
    assert obj["drG"]["value"] == pytest.approx(-817.889, abs=5e-4)


def test_the_thermo_core_never_imports_the_faces():
    code = ("import sys, tablekeeper.thermo; "
            "print(sorted(m for m in ('textual', 'rich', 'tablekeeper.cli') if m in sys.modules))")
    p = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, timeout=60,
                       env=dict(os.environ, PYTHONPATH=str(ROOT)))
    assert p.returncode == 0, p.stderr
    assert p.stdout.strip() == "[]"
