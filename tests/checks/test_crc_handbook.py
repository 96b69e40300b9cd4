"""The CRC Handbook table of standard thermodynamic properties (as carried by the `chemicals` package:
"CRC Standard Thermodynamic Properties of Chemical Substances.tsv") through the value checks.

Element reference entropies: the built-in table of tablekeeper.elements (not derived from the CRC rows).
Rows left out, each with its reason:
* the CAS number is named by none of the package's formula-bearing tables (checkkit._FORMULA_TABLES);
* the row is a known anomaly: NIST-JANAF 1998 (the package's JANAF_1998.tsv) lists the same species and
  phase with ΔfH° and S° agreeing (within 2 kJ/mol and 2 J/(mol·K)) but ΔfG° more than 5 kJ/mol away,
  so the CRC ΔfG° alone is a transcription slip: CHCl3(g) 6.0 against −70.4 and V(g) 754.4 against
  469.7 kJ/mol. Other rows that disagree with JANAF are kept: the CRC often carries a different
  evaluation, which may well be consistent in itself.
"""

from __future__ import annotations

from pathlib import Path

import chemicals
import pandas as pd
from checkkit import context, crc_rows

from tablekeeper.checks import run


def _janaf_anomalies(recs: list[dict]) -> dict[str, str]:
    path = Path(chemicals.__file__).parent / "Reactions" / "JANAF_1998.tsv"
    janaf = pd.read_csv(path, sep="\t", index_col=0)
    out = {}
    for r in recs:
        cas, ph = r["cas"], r["phase"]
        if ph not in ("g", "l") or cas not in janaf.index:
            continue
        j = janaf.loc[cas]
        p = {k: v["value"] for k, v in r["properties"].items()}
        dh = abs(j[f"Hf{ph}"] / 1000 - p["dfH298"])
        ds = abs(j[f"S0{ph}"] - p["S298"])
        dg = abs(j[f"Gf{ph}"] / 1000 - p["dfG298"])
        if dh <= 2.0 and ds <= 2.0 and dg > 5.0:
            out[r["id"]] = (f"{r['name']}({ph}): CRC ΔfG° {p['dfG298']} against NIST-JANAF "
                            f"{j[f'Gf{ph}'] / 1000}")
    return out


def _clean() -> tuple[list[dict], dict]:
    recs, left_out = crc_rows()
    anomalies = _janaf_anomalies(list(recs))
    clean = [r for r in recs if r["id"] not in anomalies]
    return clean, {**left_out, "known anomalies": sorted(anomalies.values())}


def test_crc_rows_pass_gibbs_consistency() -> None:
    clean, left_out = _clean()
    report = run(context(clean), only=["gibbs-consistency"])
    errors = {f.species for f in report.findings if f.severity == "error"}
    skipped = {f.species for f in report.findings if f.severity == "info"}
    checked = len(clean) - len(skipped)
    share = 1 - len(errors) / checked
    # The same rows without any uncertainty: the tolerance is then only the rounding of the digits.
    bare = [dict(r, properties={k: {kk: vv for kk, vv in v.items() if kk not in ("uncertainty", "coverage")}
                                for k, v in r["properties"].items()}) for r in clean]
    bare_errors = sum(f.severity == "error" for f in run(context(bare), only=["gibbs-consistency"]).findings)
    line = (f"CRC Handbook via chemicals: {checked} rows checked ({len(skipped)} not checked for want of an "
            f"element entropy; left out: {left_out}); {share:.1%} pass gibbs-consistency with the NBS "
            f"uncertainty convention, {1 - bare_errors / checked:.1%} with rounding alone")
    print("\n" + line)
    assert checked > 500, line
    assert share >= 0.95, line


def test_no_clean_crc_row_trips_third_law_or_the_entropy_floor() -> None:
    clean, _ = _clean()
    report = run(context(clean), only=["third-law", "gas-entropy-floor"])
    assert report.findings == [], [f.message for f in report.findings][:5]
    assert sum(r["phase"] == "g" for r in clean) > 200
