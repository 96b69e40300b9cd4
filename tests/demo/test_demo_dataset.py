"""The shipped demo dataset: its size, canonical files, schema validity, the faults seeded on purpose,
that its clean records stay clean, that the build script regenerates it, and that its values match
the published compilations they were transcribed from.
"""

from __future__ import annotations

import importlib
import importlib.util
import json
import math
from dataclasses import dataclass
from pathlib import Path

import orjson
import pytest

from tablekeeper import checks, jsonio, validation
from tablekeeper.checks import check_dataset
from tablekeeper.cli import main as cli_main
from tablekeeper.store import Dataset
from tablekeeper.units import factor_to_canonical

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "datasets" / "kestrel-works"
BUILD_SCRIPT = ROOT / "datasets" / "build_demo.py"
README = ROOT / "datasets" / "README.md"
RECORD_KINDS = ("species", "sources", "reactions", "flags", "releases")


@dataclass(frozen=True)
class Seeded:
    """One fault seeded on purpose, and where the check must report it."""

    check: str
    target: str  # species id, or reaction id for reaction-closure
    fields: frozenset[str]
    what: str


def seeded(check: str, target: str, fields: set[str], what: str) -> Seeded:
    return Seeded(check, target, frozenset(fields), what)


#: The faults seeded in datasets/build_demo.py and listed in datasets/README.md.
SEEDED: tuple[Seeded, ...] = (
    seeded("unit-suspect", "so2-g", {"dfH298"}, "ΔfH° typed in kcal/mol into the kJ/mol field"),
    seeded("gibbs-consistency", "so2-g", {"dfG298", "dfH298"}, "the same kcal/mol slip breaks ΔfG°"),
    seeded("third-law", "fe2o3-cr-hematite", {"S298"}, "negative S° for a solid"),
    seeded("cp-range", "hcl-g", {"Cp298"}, "gas Cp° below 5/2 R"),
    seeded("gibbs-consistency", "no2-g", {"dfG298"}, "ΔfG° disagreeing with ΔfH° and S°"),
    seeded("cp-continuity", "no-g", {"cp_model"}, "NASA polynomial with a jump at 1000 K"),
    seeded("duplicate", "quicklime", {"formula"}, "a second CaO(cr) record"),
    seeded("reference", "c2h6-g", {"dfH298"}, "a value citing a missing source"),
    seeded("flag", "h2s-g", {"dfH298"}, "an open blocking flag"),
    seeded("flag", "caso4-cr-anhydrite", {"dfH298"}, "an open non-blocking flag"),
    seeded("gas-entropy-floor", "c3h8-g", {"S298"}, "gas S° below its Sackur–Tetrode floor"),
    seeded("phase-order", "c2h5oh-l", {"S298"}, "S°(l) above S°(g) for ethanol"),
    seeded("uncertainty", "sio2-cr-quartz", {"S298"}, "a value without an uncertainty"),
    seeded("element-reference", "si-cr", {"dfH298"}, "an element reference with nonzero ΔfH°"),
    seeded("reaction-closure", "hydrogen-combustion-legacy", {"drH"}, "a reaction that does not close"),
)

#: Records a seeded fault also names: the other member of the duplicate pair and of the phase pair.
PARTNERS = {"cao-cr", "c2h5oh-g"}
SEEDED_SPECIES = {s.target for s in SEEDED if s.check != "reaction-closure"} | PARTNERS
SEEDED_REACTIONS = {s.target for s in SEEDED if s.check == "reaction-closure"}


def _registered() -> set[str]:
    for family in checks.FAMILIES:
        importlib.import_module(f"{checks.__name__}.{family}")
    return set(checks.CHECKS)


@pytest.fixture(scope="module")
def dataset() -> Dataset:
    return Dataset(DEMO, user="tester")


@pytest.fixture(scope="module")
def report(dataset: Dataset) -> checks.Report:
    return check_dataset(dataset)


def _matches(finding: checks.Finding, s: Seeded) -> bool:
    if finding.check != s.check:
        return False
    if s.check == "reaction-closure":
        # A reaction is not a species: the finding names it in its message.
        return finding.species in (None, s.target) and s.target in finding.message
    return finding.species == s.target and finding.field in s.fields


# -- size and shape -------------------------------------------------------------------------------------

def test_demo_has_the_promised_size(dataset: Dataset) -> None:
    species = dataset.load_all("species")
    assert not species.damaged
    recs = species.records
    assert 40 <= len(recs) <= 60
    assert {"g", "l", "cr", "aq"} <= {r["phase"] for r in recs.values()}
    models = [r["cp_model"] for r in recs.values() if "cp_model" in r]
    assert len(models) >= 10
    assert {"shomate", "nasa7", "tabulated"} <= {m["kind"] for m in models}
    assert len(dataset.ids("reactions")) >= 3
    assert len(dataset.ids("flags")) == 3


def test_element_references_are_listed_and_marked(dataset: Dataset) -> None:
    recs = dataset.load_all("species").records
    refs = dataset.meta["element_references"]
    marked = {i for i, r in recs.items() if r.get("reference_state")}
    assert set(refs.values()) == marked
    for element, ident in refs.items():
        assert recs[ident]["formula"].rstrip("0123456789") == element
    for needed in ("H", "O", "N", "C", "S", "Cl", "Na", "Ca", "Fe"):
        assert needed in refs
    assert recs["c-cr-graphite"]["form"] == "graphite"
    assert recs["s-cr-rhombic"]["form"] == "rhombic"


def test_hydrogen_ion_is_all_zeros_and_not_a_reference_state(dataset: Dataset) -> None:
    # Convention of aqueous thermochemistry (CODATA 1989; NBS tables 1982): ΔfH°, ΔfG°, S°, Cp° of H+(aq) = 0.
    rec = dataset.load("species", "h-plus-aq")
    assert not rec.get("reference_state", False)
    assert rec["charge"] == 1
    assert {f: v["value"] for f, v in rec["properties"].items()} == dict.fromkeys(
        ("dfH298", "dfG298", "S298", "Cp298"), 0.0)


def test_roles_are_left_out_so_anyone_may_edit_the_demo(dataset: Dataset) -> None:
    assert "roles" not in dataset.meta
    assert dataset.may("edit", "someone-else")


def test_values_entered_in_other_units_keep_their_entry(dataset: Dataset) -> None:
    # The thermochemical calorie is exactly 4.184 J (NIST SP 811).
    converted = []
    for ident, rec in dataset.load_all("species").records.items():
        for fld, pv in rec["properties"].items():
            if "entered" in pv:
                ent = pv["entered"]
                factor = factor_to_canonical(ent["unit"], fld)
                assert pv["value"] == pytest.approx(ent["value"] * factor, rel=1e-12), (ident, fld)
                assert pv["uncertainty"] == pytest.approx(ent["uncertainty"] * factor, rel=1e-12)
                converted.append((ident, fld, ent["unit"]))
    kcal = [c for c in converted if c[2] == "kcal/mol"]
    assert len(kcal) >= 3
    assert factor_to_canonical("kcal/mol", "dfH298") == 4.184


# -- canonical files and schemas ------------------------------------------------------------------------

def _json_files() -> list[Path]:
    files = [DEMO / "dataset.json"]
    for kind in RECORD_KINDS:
        files += sorted((DEMO / kind).glob("*.json"))
    return files


def test_every_file_is_in_canonical_form() -> None:
    files = _json_files()
    assert len(files) > 60
    for path in files:
        raw = path.read_bytes()
        assert jsonio.dumps(jsonio.loads(raw, file=str(path))) == raw, path
    lines = (DEMO / "journal.jsonl").read_bytes().splitlines(keepends=True)
    assert lines
    for line in lines:
        assert jsonio.dumps_line(orjson.loads(line)) == line


def test_every_file_passes_its_schema(dataset: Dataset) -> None:
    # No seeded fault is a schema fault: every file of the demo validates.
    assert validation.errors("dataset", dataset.meta) == []
    for kind in ("species", "sources", "reactions", "flags"):
        for ident, rec in dataset.load_all(kind).records.items():
            assert validation.errors(kind, rec, fast=False) == [], f"{kind}/{ident}"
    entries, problems = dataset.journal()
    assert not problems
    for entry in entries:
        assert validation.errors("journal", entry) == [], entry


def test_no_temporary_file_of_an_interrupted_save_is_shipped() -> None:
    # The lock file is not checked: running the app on the demo creates it, and .gitignore keeps it out.
    leftovers = [p.name for p in DEMO.rglob("*") if ".tmp-" in p.name]
    assert leftovers == []


# -- the seeded faults ----------------------------------------------------------------------------------

def test_every_seeded_check_is_registered() -> None:
    missing = {s.check for s in SEEDED} - _registered()
    assert not missing, f"checks not registered: {sorted(missing)}"


@pytest.mark.parametrize("fault", SEEDED, ids=[f"{s.check}:{s.target}" for s in SEEDED])
def test_seeded_fault_is_found_by_its_check(report: checks.Report, fault: Seeded) -> None:
    hits = [f for f in report.findings if _matches(f, fault)]
    assert hits, f"{fault.check} did not report {fault.target} ({fault.what})"


def test_blocking_flag_is_an_error_and_the_others_are_not(report: checks.Report) -> None:
    flags = {f.species: f.severity for f in report.findings if f.check == "flag"}
    assert flags["h2s-g"] == "error"
    assert flags["caso4-cr-anhydrite"] != "error"
    assert "caco3-cr-calcite" not in flags  # its flag is resolved


def test_clean_records_raise_no_error_or_warning(report: checks.Report) -> None:
    stray = []
    for f in report.findings:
        if f.severity == "info":
            continue
        if f.species in SEEDED_SPECIES:
            continue
        if f.check == "reaction-closure" and any(r in f.message for r in SEEDED_REACTIONS):
            continue
        stray.append((f.check, f.severity, f.species, f.field, f.message))
    assert stray == []


def test_each_seeded_fault_is_documented_in_the_readme() -> None:
    rows = [line for line in README.read_text("utf-8").splitlines() if line.startswith("|")]
    for s in SEEDED:
        assert any(f"`{s.target}`" in row and f"`{s.check}`" in row for row in rows), s


def test_cli_check_json_finds_the_duplicate_and_the_missing_source(capsys: pytest.CaptureFixture) -> None:
    status = cli_main(["check", str(DEMO), "--format", "json"])
    out = json.loads(capsys.readouterr().out)
    assert status == 1  # errors exist, and --fail-on defaults to error
    assert out["dataset"] == "kestrel-works"
    got = {(f["check"], f["species"], f["field"]) for f in out["findings"]}
    assert ("duplicate", "quicklime", "formula") in got
    assert ("reference", "c2h6-g", "dfH298") in got
    assert out["summary"]["error"] == sum(f["severity"] == "error" for f in out["findings"])


# -- regeneration ---------------------------------------------------------------------------------------

def _load_build_script():
    spec = importlib.util.spec_from_file_location("kestrel_build_demo", BUILD_SCRIPT)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_build_script_regenerates_the_shipped_records(tmp_path: Path) -> None:
    build = _load_build_script()
    out = build.build(tmp_path / "kestrel-works")
    for rel in ["dataset.json"] + [f"{k}/{p.name}" for k in RECORD_KINDS for p in (DEMO / k).glob("*.json")]:
        assert (out / rel).read_bytes() == (DEMO / rel).read_bytes(), rel
    for kind in RECORD_KINDS:
        names = [sorted(p.name for p in (root / kind).iterdir()) for root in (out, DEMO)]
        assert names[0] == names[1], kind
    # The journal differs only in its times.
    fresh, shipped = Dataset(out).journal()[0], Dataset(DEMO).journal()[0]
    strip = [[{k: v for k, v in e.items() if k != "time"} for e in j] for j in (fresh, shipped)]
    assert strip[0] == strip[1]
    assert {e["user"] for e in shipped} == {"mhale", "pirwin"}


def test_build_script_refuses_an_existing_folder(tmp_path: Path) -> None:
    build = _load_build_script()
    (tmp_path / "taken").mkdir()
    (tmp_path / "taken" / "x").write_text("keep me")
    assert build.main(["--out", str(tmp_path / "taken")]) == 2
    assert (tmp_path / "taken" / "x").read_text() == "keep me"


# -- against the published compilations the values came from ----------------------------------------------

# CODATA Key Values for Thermodynamics (Cox, Wagman & Medvedev, 1989), values from memory.
CODATA_1989 = [
    ("o2-g", "S298", 205.152), ("h2-g", "S298", 130.680), ("n2-g", "S298", 191.609),
    ("c-cr-graphite", "S298", 5.74), ("co2-g", "dfH298", -393.51), ("co-g", "dfH298", -110.53),
    ("h2o-l", "dfH298", -285.830), ("h2o-g", "dfH298", -241.826), ("hcl-g", "dfH298", -92.31),
    ("nh3-g", "dfH298", -45.94), ("na-plus-aq", "dfH298", -240.34), ("cl-minus-aq", "S298", 56.60),
]


@pytest.mark.parametrize(("ident", "fld", "value"), CODATA_1989)
def test_key_values_match_codata_1989(dataset: Dataset, ident: str, fld: str, value: float) -> None:
    assert dataset.load("species", ident)["properties"][fld]["value"] == value


def test_the_kcal_slip_is_exactly_the_codata_value_unconverted(dataset: Dataset) -> None:
    # CODATA 1989: ΔfH°(SO2, g) = -296.81 kJ/mol (from memory); 4.184 J/cal (NIST SP 811).
    typed = dataset.load("species", "so2-g")["properties"]["dfH298"]["value"]
    assert typed * 4.184 == pytest.approx(-296.81, abs=0.01)


# NIST-JANAF Thermochemical Tables, Cp° at 1000 K in J/(mol·K), values from memory.
JANAF_CP_1000K = [("n2-g", 32.697), ("co2-g", 54.308), ("ch4-g", 71.795), ("h2o-g", 41.268),
                  ("h2-g", 30.205), ("co-g", 33.183), ("nh3-g", 56.491)]


@pytest.mark.parametrize(("ident", "cp"), JANAF_CP_1000K)
def test_heat_capacity_models_reproduce_janaf_at_1000_k(dataset: Dataset, ident: str, cp: float) -> None:
    from tablekeeper.thermo import model_from_json

    model = model_from_json(dataset.load("species", ident)["cp_model"])
    assert float(model.cp(1000.0)) == pytest.approx(cp, rel=3e-3)


def test_calcite_decomposes_near_its_published_temperature(dataset: Dataset) -> None:
    # Calcite under 1 atm CO2 decomposes at about 1170 K (898 °C; Baker, J. Chem. Soc. 1962, from memory).
    from tablekeeper.thermo import parse_equation, reaction_properties

    species = dataset.load_all("species").records
    rx = parse_equation(dataset.load("reactions", "calcite-decomposition")["equation"], species)
    result = reaction_properties(rx, species, T=1100.0)
    assert result.models_used
    assert result.t_sign_change is not None
    assert math.isclose(result.t_sign_change.nominal_value, 1170, abs_tol=25)
