"""Synthetic datasets for the performance harness: 1k, 10k and 100k species, deterministic from a seed.

Usage::

    python benchmarks/generate.py [--sizes 1k,10k,100k] [--seed 1] [--faults 0.02] [--out benchmarks/data]

Each size becomes ``<out>/synth-<size>/``, a dataset folder written directly in canonical form
(tablekeeper.jsonio.dumps, revision 1; no journal history beyond its creation) for speed, and
``<out>/synth-<size>.faults.json`` listing the species given a seeded fault and its kind.

The species are hydrocarbons and their O, N, S and Cl derivatives (unique Hill formulas, one to three
phases each) plus the element reference states. Values are invented but made consistent with the laws
the checks apply, so that a clean dataset passes and each seeded fault is a real finding:

* S°(gas) above its Sackur–Tetrode translational entropy, S°(g) > S°(l) > S°(cr), ΔfH° in the same
  order; ΔfG° = ΔfH° − T·ΔfS° from the element reference entropies;
* Cp°(298.15) between 5/2 R and the classical limit for gases, and below Dulong–Petit 3nR for
  condensed phases; a share of species carries a Cp(T) model of each kind (Shomate, NASA 7 in two
  ranges, tabulated) whose integration constants reproduce ΔfH° and S° at 298.15 K.

Element reference entropies are CODATA Key Values (Cox, Wagman & Medvedev 1989), from memory.
"""

from __future__ import annotations

import argparse
import itertools
import json
import math
import random
import shutil
import sys
import time
from pathlib import Path

from tablekeeper import jsonio

R = 8.314462618  # J/(mol·K), CODATA 2018
T0 = 298.15
# Sackur–Tetrode at 1 bar: S/R = 3/2 ln(M / g mol-1) + 5/2 ln(T / K) + S0/R, S0/R = -1.1517078 (CODATA 2018).
ST_CONST = -1.1517078
ATOMIC_MASS = {"C": 12.011, "H": 1.008, "O": 15.999, "N": 14.007, "S": 32.06, "Cl": 35.45}
# Element reference states: id, formula, phase, form, S° (J/(mol·K)), Cp°; CODATA 1989, from memory.
REFERENCES = {
    "C": ("c-cr-graphite", "C", "cr", "graphite", 5.74, 8.517),
    "H": ("h2-g", "H2", "g", None, 130.680, 28.836),
    "O": ("o2-g", "O2", "g", None, 205.152, 29.378),
    "N": ("n2-g", "N2", "g", None, 191.609, 29.124),
    "S": ("s-cr-rhombic", "S", "cr", "rhombic", 32.054, 22.75),
    "Cl": ("cl2-g", "Cl2", "g", None, 223.081, 33.949),
}
ATOMS_IN_REF = {"C": 1, "H": 2, "O": 2, "N": 2, "S": 1, "Cl": 2}
FAULT_KINDS = ("unit-slip", "negative-entropy", "gas-cp-low", "missing-source", "cp-jump", "duplicate")


def parse_size(text: str) -> int:
    text = text.strip().lower()
    return int(float(text[:-1]) * 1000) if text.endswith("k") else int(text)


def _formula(counts: dict[str, int]) -> str:
    return "".join(f"{el}{n if n > 1 else ''}" for el, n in counts.items() if n)


def _formulas(rng: random.Random):
    """Unique element counts, in a seeded order: C 1-40, H 0-81, O 0-6, N 0-3, S 0-1, Cl 0-2."""
    space = itertools.product(
        range(1, 41), range(0, 82, 1), range(0, 7), range(0, 4), range(0, 2), range(0, 3)
    )
    pool = [c for c in space if c[1] <= 2 * c[0] + 2 + c[3] and sum(c[2:]) <= 6]
    rng.shuffle(pool)
    for c, h, o, n, s, cl in pool:
        yield {"C": c, "H": h, "O": o, "N": n, "S": s, "Cl": cl}


def _pv(value: float, unit: str, u: float, source: str, digits: int = 3) -> dict:
    return {
        "value": round(value, digits),
        "unit": unit,
        "uncertainty": u,
        "source": source,
        "method": "estimated",
    }


def _sackur_tetrode(mass: float) -> float:
    return R * (1.5 * math.log(mass) + 2.5 * math.log(T0) + ST_CONST)


def _gas_cp_limit(atoms: int) -> float:
    if atoms <= 1:
        return 2.5 * R
    return (3 * atoms - 1.5) * R if atoms <= 4 else (3 * atoms - 2.0) * R


def _cp_model(kind: str, cp298: float, slope: float, dfh: float, s298: float, source: str) -> dict:
    """A model whose Cp(298.15) is cp298 (rising by ``slope`` per kelvin) and whose constants give
    ΔfH° and S° at 298.15 K."""
    a = cp298 - slope * T0  # Cp = a + slope·T
    if kind == "shomate":
        A, B = a, slope * 1000.0  # t = T/1000
        t0 = T0 / 1000.0
        # H(T) = A t + B t²/2 + F in kJ/mol (A in J/(mol·K), t = T/1000): equal to ΔfH° at 298.15 K.
        F = dfh - (A * t0 + B * t0**2 / 2)
        G = s298 - (A * math.log(t0) + B * t0)
        rng_ = {
            "tmin": 200.0,
            "tmax": 1500.0,
            "A": A,
            "B": B,
            "C": 0.0,
            "D": 0.0,
            "E": 0.0,
            "F": F,
            "G": G,
            "H": dfh,
        }
        return {"kind": "shomate", "source": source, "ranges": [rng_]}
    if kind == "nasa7":
        a1, a2 = a / R, slope / R
        a6 = dfh * 1000.0 / R - (a1 * T0 + a2 * T0**2 / 2)
        a7 = s298 / R - (a1 * math.log(T0) + a2 * T0)
        coeffs = [a1, a2, 0.0, 0.0, 0.0, a6, a7]
        return {
            "kind": "nasa7",
            "source": source,
            "ranges": [
                {"tmin": 200.0, "tmax": 1000.0, "a": coeffs},
                {"tmin": 1000.0, "tmax": 3000.0, "a": list(coeffs)},
            ],
        }
    pts = [[float(T), round(a + slope * T, 6)] for T in range(200, 1001, 100)]
    return {"kind": "tabulated", "source": source, "points": pts}


def build_species(n: int, rng: random.Random, n_sources: int) -> dict[str, dict]:
    """n species (the element references included), clean."""
    out: dict[str, dict] = {}
    for el, (ident, formula, phase, form, s, cp) in REFERENCES.items():
        rec = {
            "id": ident,
            "formula": formula,
            "phase": phase,
            "charge": 0,
            "status": "reviewed",
            "reference_state": True,
            "name": f"{el} reference state",
            "revision": 1,
            "properties": {
                "dfH298": _pv(0.0, "kJ/mol", 0.0, "src-000"),
                "dfG298": _pv(0.0, "kJ/mol", 0.0, "src-000"),
                "S298": _pv(s, "J/(mol*K)", 0.05, "src-000"),
                "Cp298": _pv(cp, "J/(mol*K)", 0.05, "src-000"),
            },
        }
        if form:
            rec["form"] = form
        out[ident] = rec
    el_s = {el: REFERENCES[el][4] / ATOMS_IN_REF[el] for el in REFERENCES}
    model_kinds = ("shomate", "nasa7", "tabulated")
    for k, counts in enumerate(_formulas(rng)):
        if len(out) >= n:
            break
        formula = _formula(counts)
        atoms = sum(counts.values())
        mass = sum(ATOMIC_MASS[el] * c for el, c in counts.items())
        phases = rng.choice((("g",), ("g",), ("l", "g"), ("cr",), ("cr", "l", "g")))
        s_cr = 9.0 * atoms + rng.uniform(0, 5)
        s_l = s_cr + 20.0 + rng.uniform(0, 10)
        s_g = max(_sackur_tetrode(mass) + 8.0 * atoms + rng.uniform(0, 20), s_l + 25.0)
        h_cr = rng.uniform(-400.0, 150.0)
        h_l = h_cr + 8.0 + rng.uniform(0, 20)
        h_g = h_l + 20.0 + rng.uniform(0, 30)
        values = {"cr": (h_cr, s_cr), "l": (h_l, s_l), "g": (h_g, s_g)}
        for phase in phases:
            if len(out) >= n:
                break
            ident = f"sp{k:06d}-{phase}"
            source = f"src-{rng.randrange(n_sources):03d}"
            h, s = values[phase]
            h, s = round(h, 3), round(s, 3)
            ds_f = s - sum(c * el_s[el] for el, c in counts.items())
            g = round(h - T0 * ds_f / 1000.0, 3)
            if phase == "g":
                cp = 2.5 * R + 0.5 * (_gas_cp_limit(atoms) - 2.5 * R)
            else:
                cp = 0.8 * 3 * atoms * R
            cp = round(cp, 3)
            rec = {
                "id": ident,
                "formula": formula,
                "phase": phase,
                "charge": 0,
                "status": "draft",
                "name": f"synthetic {formula} ({phase})",
                "revision": 1,
                "properties": {
                    "dfH298": _pv(h, "kJ/mol", 0.8, source),
                    "dfG298": _pv(g, "kJ/mol", 1.0, source),
                    "S298": _pv(s, "J/(mol*K)", 0.6, source),
                    "Cp298": _pv(cp, "J/(mol*K)", 0.5, source),
                },
            }
            if rng.random() < 0.3:
                slope = 0.0 if atoms == 1 else cp * 0.00008
                rec["cp_model"] = _cp_model(model_kinds[len(out) % 3], cp, slope, h, s, source)
            out[ident] = rec
    if len(out) < n:
        raise SystemExit(f"the formula space holds only {len(out)} species")
    return out


def seed_faults(species: dict[str, dict], share: float, rng: random.Random) -> dict[str, str]:
    """Give a share of the species one fault each, in turn of FAULT_KINDS; return id -> kind."""
    candidates = sorted(i for i, r in species.items() if not r.get("reference_state"))
    chosen = rng.sample(candidates, int(len(candidates) * share))
    faults = {}
    for j, ident in enumerate(chosen):
        kind = FAULT_KINDS[j % len(FAULT_KINDS)]
        rec = species[ident]
        if kind == "gas-cp-low" and rec["phase"] != "g":
            kind = "unit-slip"  # a low Cp is no fault in a condensed phase
        props = rec["properties"]
        if kind == "unit-slip":
            props["dfG298"]["value"] = round(props["dfG298"]["value"] / 4.184, 3)  # kcal typed as kJ
        elif kind == "negative-entropy":
            props["S298"]["value"] = -abs(props["S298"]["value"])
        elif kind == "gas-cp-low":
            props["Cp298"]["value"] = round(2.0 * R, 3)
            rec.pop("cp_model", None)
        elif kind == "missing-source":
            props["dfH298"]["source"] = "no-such-source"
        elif kind == "cp-jump":
            cp = props["Cp298"]["value"]
            model = _cp_model("nasa7", cp, 0.0, props["dfH298"]["value"], props["S298"]["value"], "src-000")
            model["ranges"][1]["a"][0] += 1.0  # Cp jumps by R at 1000 K
            rec["cp_model"] = model
        else:
            dup = json.loads(json.dumps(rec))
            dup["id"] = ident + "-dup"
            species[dup["id"]] = dup
        faults[ident] = kind
    return faults


def write_dataset(root: Path, name: str, species: dict[str, dict], n_sources: int) -> None:
    if root.exists():
        shutil.rmtree(root)
    for kind in ("species", "sources", "reactions", "flags", "releases"):
        (root / kind).mkdir(parents=True)
    meta = {
        "name": name,
        "title": f"Synthetic benchmark dataset ({len(species)} species)",
        "schema_version": 1,
        "standard_pressure_bar": 1,
        "reference_temperature_K": 298.15,
        "element_references": {el: ref[0] for el, ref in REFERENCES.items()},
        "policy": {"tolerance_k": 2, "require_uncertainty": True, "max_relative_uncertainty": 0.5},
    }
    (root / "dataset.json").write_bytes(jsonio.dumps(meta))
    for i in range(n_sources):
        src = {
            "id": f"src-{i:03d}",
            "revision": 1,
            "title": f"Synthetic compilation {i}",
            "year": 1990 + i % 30,
            "kind": "compilation",
        }
        (root / "sources" / f"{src['id']}.json").write_bytes(jsonio.dumps(src))
    folder = root / "species"
    for ident, rec in species.items():
        (folder / f"{ident}.json").write_bytes(jsonio.dumps(rec))
    entry = {
        "action": "init",
        "reason": f"generated {name}",
        "revision": 0,
        "target": "dataset",
        "time": "2024-01-01T00:00:00Z",
        "user": "generator",
    }
    (root / "journal.jsonl").write_bytes(jsonio.dumps_line(entry))
    (root / ".gitignore").write_text(".tablekeeper.lock\n")


def generate(size: int, seed: int, faults: float, out: Path) -> tuple[Path, dict[str, str]]:
    label = f"{size // 1000}k" if size % 1000 == 0 else str(size)
    rng = random.Random(f"{seed}-{size}")
    n_sources = 40
    species = build_species(size, rng, n_sources)
    fault_map = seed_faults(species, faults, rng)
    root = out / f"synth-{label}"
    write_dataset(root, f"synth-{label}", species, n_sources)
    (out / f"synth-{label}.faults.json").write_text(json.dumps(fault_map, indent=1, sort_keys=True))
    return root, fault_map


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--sizes", default="1k,10k,100k")
    p.add_argument("--seed", type=int, default=1)
    p.add_argument("--faults", type=float, default=0.02, help="share of species given a seeded fault")
    p.add_argument("--out", default=str(Path(__file__).parent / "data"))
    args = p.parse_args(argv)
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    for size in (parse_size(s) for s in args.sizes.split(",")):
        t = time.perf_counter()
        root, fault_map = generate(size, args.seed, args.faults, out)
        print(f"{root}: {size} species, {len(fault_map)} seeded faults, {time.perf_counter() - t:.1f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
