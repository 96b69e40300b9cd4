"""Fixtures of the app tests: small datasets built with the store API, and helpers to drive the app.

Values of the key species are CODATA Key Values for Thermodynamics (Cox, Wagman & Medvedev, 1989)
where that compilation gives them (ΔfH°, S°); Cp° values are from memory (NIST-JANAF magnitudes) and
only need to be plausible here: these tests are about the app, not the numbers.
"""

from __future__ import annotations

import asyncio
from collections.abc import Callable
from pathlib import Path

import pytest

CODATA = "codata-1989"

# (id, formula, phase, form, reference_state, dfH, u, S, u, dfG, Cp)
KEY_SPECIES = [
    ("h2-g", "H2", "g", None, True, 0.0, None, 130.68, 0.003, 0.0, 28.836),
    ("o2-g", "O2", "g", None, True, 0.0, None, 205.152, 0.005, 0.0, 29.378),
    ("c-graphite", "C", "cr", "graphite", True, 0.0, None, 5.74, 0.1, 0.0, 8.517),
    ("h2o-l", "H2O", "l", None, False, -285.83, 0.04, 69.95, 0.03, -237.14, 75.351),
    ("h2o-g", "H2O", "g", None, False, -241.826, 0.04, 188.835, 0.01, -228.582, 33.59),
    ("co2-g", "CO2", "g", None, False, -393.51, 0.13, 213.785, 0.01, -394.373, 37.12),
    ("co-g", "CO", "g", None, False, -110.53, 0.17, 197.66, 0.004, -137.168, 29.14),
]

HOSTILE = {
    "click": "[@click=app.quit]x[/]",
    "close": "[/nope]",
    "open": "[bold",
    "osc52": "\x1b]52;c;ZXZpbA==\x07",
    "csi": "\x1b[2J\x1b[31mred",
}


def species_record(ident: str, formula: str, phase: str, form: str | None, ref: bool, dfh: float,
                   u_dfh: float | None, s: float, u_s: float | None, dfg: float, cp: float,
                   name: str | None = None) -> dict:
    def value(v: float, u: float | None, method: str = "evaluated") -> dict:
        out: dict = {"value": v, "unit": "kJ/mol", "source": CODATA, "method": method}
        if u is not None:
            out["uncertainty"] = u
        return out

    # ΔfG° derived from ΔfH° and S° carries their combined uncertainty; 0.05 kJ/mol and 0.1 J/(mol·K)
    # are round figures of that size (common practice, no source), so the uncertainty check stays quiet.
    props = {
        "dfH298": value(dfh, u_dfh if u_dfh is not None else 0.001),
        "S298": dict(value(s, u_s), unit="J/(mol*K)"),
        "dfG298": value(dfg, 0.05, "derived"),
        "Cp298": dict(value(cp, 0.1), unit="J/(mol*K)"),
    }
    rec: dict = {"id": ident, "revision": 1, "formula": formula, "phase": phase, "charge": 0,
                 "status": "reviewed", "properties": props}
    if form:
        rec["form"] = form
    if ref:
        rec["reference_state"] = True
    if name:
        rec["name"] = name
    return rec


def build_dataset(root: Path, *, roles: dict | None = None, extra: list[dict] | None = None,
                  flags: list[dict] | None = None, sources: list[dict] | None = None) -> Path:
    """A dataset of the key species (plus ``extra`` records) saved through the store."""
    from tablekeeper import jsonio
    from tablekeeper.store import Dataset, atomic_write

    ds = Dataset.init(root, "keyset", title="Key species", user="builder")
    meta = dict(ds.meta, element_references={"H": "h2-g", "O": "o2-g", "C": "c-graphite"})
    atomic_write(root / "dataset.json", jsonio.dumps(meta))
    ds = Dataset(root, user="builder")
    ds.save("sources", {"id": CODATA, "revision": 1, "title": "CODATA Key Values for Thermodynamics",
                        "authors": ["Cox, J. D.", "Wagman, D. D.", "Medvedev, V. A."], "year": 1989,
                        "kind": "compilation"}, expected_revision=None)
    for src in sources or []:
        ds.save("sources", src, expected_revision=None)
    names = {"h2o-l": "water", "h2o-g": "steam", "co2-g": "carbon dioxide", "co-g": "carbon monoxide"}
    for row in KEY_SPECIES:
        ds.save("species", species_record(*row, name=names.get(row[0])), expected_revision=None)
    for rec in extra or []:
        ds.save("species", rec, expected_revision=None)
    for fl in flags or []:
        ds.save("flags", fl, expected_revision=None)
    if roles is not None:
        meta = dict(jsonio.read(root / "dataset.json"), roles=roles)
        atomic_write(root / "dataset.json", jsonio.dumps(meta))
    return root


def fixed_flag(ident: str, species: str, field: str, note: str, *, blocking: bool = False,
               by: str = "alice", at: str = "2024-05-01T10:00:00Z") -> dict:
    return {"id": ident, "revision": 1, "species": species, "field": field, "note": note,
            "blocking": blocking, "status": "open", "raised_by": by, "raised_at": at, "comments": []}


@pytest.fixture
def keyset(tmp_path: Path) -> Path:
    return build_dataset(tmp_path / "keyset")


@pytest.fixture
def builder() -> Callable[..., Path]:
    return build_dataset


async def settle(pilot, app, condition: Callable[[], bool] | None = None, tries: int = 200) -> None:
    """Let workers finish and messages drain; then wait (bounded) until ``condition`` holds."""
    for _ in range(tries):
        await app.workers.wait_for_complete()
        await pilot.pause()
        if (condition is None or condition()) and not app.loading and not app.checking:
            return
        await asyncio.sleep(0.02)
    raise AssertionError("the app did not reach the expected state")


def screen_text(app) -> str:
    """Everything drawn on the current screen as plain text (what a person would read)."""
    return "\n".join(strip.text for strip in app.screen._compositor.render_strips())


async def wait_text(pilot, app, needle: str, tries: int = 100) -> str:
    """Pause until ``needle`` is drawn (a new screen composes over a few refreshes); the screen text."""
    for _ in range(tries):
        await pilot.pause()
        text = screen_text(app)
        if needle in text:
            return text
        await asyncio.sleep(0.02)
    raise AssertionError(f"{needle!r} never appeared:\n{screen_text(app)}")
