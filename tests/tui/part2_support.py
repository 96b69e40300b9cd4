"""Helpers of the tests of the plot, reaction, release, thermo and fit screens (no fixtures here: the
shared ones live in tests/conftest.py and tests/tui/conftest.py)."""

from __future__ import annotations

import asyncio
import json
import shutil
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path

from tablekeeper.store import Dataset

from .conftest import settle

SIZE = (80, 24)
ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "datasets" / "kestrel-works"


def ready(app) -> bool:
    return app.snapshot is not None and app.snapshot.report is not None


async def loaded(pilot) -> None:
    # Generous bound: the machine running the tests may be busy; the wait ends as soon as the checks are in.
    await settle(pilot, pilot.app, lambda: ready(pilot.app), tries=1500)


async def until(pilot, app, condition: Callable[[], bool], tries: int = 1000) -> None:
    """Pause (bounded) until ``condition`` holds; workers are waited for on the way."""
    for _ in range(tries):
        await app.workers.wait_for_complete()
        await pilot.pause()
        if condition():
            return
        await asyncio.sleep(0.02)
    raise AssertionError("the expected state was never reached")


async def type_text(pilot, text: str) -> None:
    await pilot.press(*["space" if c == " " else c for c in text])


async def open_screen(pilot, app, name: str, species: str | None = None):
    """Show a registered screen by its key action, on a species when given; the screen object."""
    app.action_show(name)
    await pilot.pause()
    screen = app.screen
    if species is not None:
        screen.choose(species)
    await settle(pilot, app)
    return screen


def journal(path: Path) -> list[dict]:
    return [json.loads(line) for line in (path / "journal.jsonl").read_text().splitlines() if line]


def run_cli(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "tablekeeper.cli", *args], capture_output=True, text=True,
                          timeout=120, cwd=ROOT)


def copy_demo(dst: Path) -> Path:
    shutil.copytree(DEMO, dst)
    return dst


def fix_demo_faults(path: Path) -> None:
    """Correct the demo's seeded faults (datasets/README.md, the table of faults) through the store, as a
    steward would: each correction is the value the README names, saved and journaled."""
    ds = Dataset(path, user="mhale")

    def edit(ident: str, change: Callable[[dict], None], why: str, kind: str = "species") -> None:
        rec = ds.load(kind, ident)
        change(rec)
        ds.save(kind, rec, expected_revision=int(rec.get("revision", 0)), reason=why)

    def prop(name: str, value: float) -> Callable[[dict], None]:
        def apply(rec: dict) -> None:
            rec["properties"][name]["value"] = value
            rec["properties"][name].pop("entered", None)
        return apply

    def both(*fns: Callable[[dict], None]) -> Callable[[dict], None]:
        def apply(rec: dict) -> None:
            for fn in fns:
                fn(rec)
        return apply

    # 1, 2: SO2 ΔfH° typed in kcal/mol (CODATA 1989: -296.81 kJ/mol); ΔfG° agrees again once it is fixed.
    edit("so2-g", prop("dfH298", -296.81), "kcal/mol slip: × 4.184")
    # 3: hematite S° lost its sign.
    edit("fe2o3-cr-hematite", prop("S298", 87.4), "sign lost on entry")
    # 4: HCl Cp° 19.14 typed for 29.14.
    edit("hcl-g", prop("Cp298", 29.14), "digit slip")
    # 5: NO2 ΔfG° 15.31 typed for 51.31.
    edit("no2-g", prop("dfG298", 51.31), "digit slip")

    # 6: NO's high-range a1 3.5606 typed for 3.2606.
    def fix_no(rec: dict) -> None:
        rng = rec["cp_model"]["ranges"][1]
        rng["a"][0] = 3.2606
    edit("no-g", fix_no, "coefficient a1 of the high range: 3.5606 typed for 3.2606")
    # 7: the legacy quicklime row duplicates cao-cr.
    edit("quicklime", lambda r: r.__setitem__("status", "deprecated"), "duplicate of cao-cr")

    # 8: c2h6-g cites a note never filed; the evaluated memo is the source in the dataset.
    def fix_src(rec: dict) -> None:
        rec["properties"]["dfH298"]["source"] = "krw-em-003"
    edit("c2h6-g", fix_src, "cite a filed source")
    # 9: resolve the blocking flag (and leave 10 open: it is not blocking).
    from tablekeeper.flags import resolve

    resolve(ds, "flag-20240311-142205-3fa9c1", "value confirmed against the datasheet")
    # 11: propane S° 270.3 J/(mol·K) and ΔfG° -23.46 kJ/mol (NIST-JANAF gives about 270.3 and -23.4; from
    # memory), the ΔfG° derived again from ΔfH° and the new S°, as the record says it was.
    edit("c3h8-g", both(prop("S298", 270.3), prop("dfG298", -23.46)), "group-additivity estimate replaced")
    # 12: ethanol liquid S° 160.7 J/(mol·K) and ΔfG° -174.71 kJ/mol (published about 160.7 and -174.8;
    # from memory), ΔfG° derived again.
    edit("c2h5oh-l", both(prop("S298", 160.7), prop("dfG298", -174.71)), "ΔfS° entered as S°")
    # 13: quartz S° uncertainty (CODATA 1989: 41.46 ± 0.20 J/(mol·K)).
    def fix_u(rec: dict) -> None:
        rec["properties"]["S298"]["uncertainty"] = 0.2
    edit("sio2-cr-quartz", fix_u, "uncertainty from CODATA 1989")
    # 14: silicon is an element in its reference state.
    edit("si-cr", prop("dfH298", 0.0), "element in its reference state")
    # 15: the legacy reaction's ΔrH° per two moles of water.
    def fix_rx(rec: dict) -> None:
        rec["drH"]["value"] = -571.66
    edit("hydrogen-combustion-legacy", fix_rx, "per the equation as written (two moles of water)",
         kind="reactions")
