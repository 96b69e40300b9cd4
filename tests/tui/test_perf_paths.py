"""The fast paths of the species table keep their answers and their shape.

Behaviour, not timing: the filter and sort shortcuts (narrowing while typing, ranked text sorts, widths
over whole columns) give the same rows as a plain computation; a cursor move draws only the rows that
changed and never rebuilds the model; the first screen does not wait for the checks; the snapshot's
per-species indexes agree with a scan; the cycle collector is kept away from the loaded data without
losing memory. Values of the key species: CODATA Key Values for Thermodynamics (Cox, Wagman & Medvedev,
1989), through ``conftest.KEY_SPECIES``; the other records here are invented and only need a shape.
"""

from __future__ import annotations

import asyncio
import gc
import math
import threading
import weakref
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tablekeeper import jsonio
from tablekeeper.editing import number_text
from tablekeeper.model import FIELDS, species_frame
from tablekeeper.store import Dataset
from tablekeeper.text import printable
from tablekeeper.tui import app as app_module
from tablekeeper.tui import data as data_module
from tablekeeper.tui import species_model
from tablekeeper.tui.app import create_app
from tablekeeper.tui.species_model import COLUMNS, SpeciesModel, marks_from
from tablekeeper.tui.species_screen import SpeciesScreen

from .conftest import KEY_SPECIES, fixed_flag, screen_text, settle, species_record

SIZE = (80, 24)

# -- the model against plain computations ------------------------------------------------------------

# Letters of both cases (case-blind matching and sorting), digits, the characters of formulas and ids,
# a few non-ASCII letters, and control characters (shown escaped; they must not break widths).
_ALPHABET = st.sampled_from(list("aAbBcCoOhH2()+-. 0é\u00e9\u0394\x1b\x07\u202e"))
_TEXT = st.text(_ALPHABET, max_size=8)
_MAYBE_TEXT = st.one_of(st.none(), _TEXT)
_NUMBER = st.one_of(
    st.none(),
    st.floats(allow_nan=False, allow_infinity=False, width=64),
    st.sampled_from([0.0, -0.0, 1e16, 1e-5, 0.1 + 0.2, -285.83, 123456789.123]),
)


@st.composite
def _records(draw: st.DrawFn) -> dict[str, dict]:
    n = draw(st.integers(min_value=0, max_value=25))
    out: dict[str, dict] = {}
    for i in range(n):
        ident = f"sp-{i:03d}"
        rec: dict = {"id": ident, "revision": 1}
        for key in ("formula", "phase", "status", "name"):
            value = draw(_MAYBE_TEXT)
            if value is not None:
                rec[key] = value
        props = {}
        for fld in FIELDS:
            v = draw(_NUMBER)
            if v is not None:
                props[fld] = {"value": v, "unit": "kJ/mol"}
        rec["properties"] = props
        out[ident] = rec
    return out


def _shown(model: SpeciesModel) -> list[str]:
    return [model.ident_at(i) for i in range(len(model.order))]


def _plain_filter(records: dict[str, dict], query: str) -> set[str]:
    q = query.strip().lower()
    if not q:
        return set(records)
    return {i for i, r in records.items()
            if any(q in str(r.get(k) or "").lower() for k in ("formula", "name")) or q in i.lower()}


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(records=_records(), queries=st.lists(_TEXT, max_size=6))
def test_filter_while_typing_matches_a_fresh_search_every_time(records: dict[str, dict],
                                                               queries: list[str]) -> None:
    model = SpeciesModel(species_frame(records))
    # Typing a query one character at a time, then the next query (a jump), as the filter line sends it.
    for query in queries:
        for end in range(len(query) + 1):
            model.set_filter(query[:end])
            assert set(_shown(model)) == _plain_filter(records, query[:end])
            assert _shown(model) == sorted(_shown(model))  # still in id order


def _plain_order(records: dict[str, dict], key: str, descending: bool) -> list[str]:
    ids = sorted(records)
    if key == "id":
        return ids[::-1] if descending else ids
    if key in FIELDS:
        def num(i: str) -> float | None:
            v = (records[i].get("properties") or {}).get(key, {}).get("value")
            return None if v is None or (isinstance(v, float) and math.isnan(v)) else float(v)

        # Descending is the ascending list reversed, except that missing numbers stay last.
        present = sorted((i for i in ids if num(i) is not None), key=num)
        return (present[::-1] if descending else present) + [i for i in ids if num(i) is None]
    # A text column: case-blind, rows without text last; descending is the same list reversed.
    with_text = [i for i in ids if isinstance(records[i].get(key), str)]
    without = [i for i in ids if not isinstance(records[i].get(key), str)]
    ascending = sorted(with_text, key=lambda i: records[i][key].lower()) + without
    return ascending[::-1] if descending else ascending


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(records=_records(), descending=st.booleans())
def test_every_sort_matches_a_plain_sort(records: dict[str, dict], descending: bool) -> None:
    model = SpeciesModel(species_frame(records))
    for key in ("id", "formula", "phase", "status", *FIELDS):
        model.set_sort(key, descending)
        assert _shown(model) == _plain_order(records, key, descending), key


def test_a_text_sort_ties_values_that_differ_only_in_case() -> None:
    # Few distinct values take the ranked path, many take the direct one: both must tie "CO" and "co".
    few = {f"sp-{i:03d}": {"id": f"sp-{i:03d}", "formula": ["co", "CO", "Co"][i % 3]} for i in range(30)}
    many = {f"sp-{i:03d}": {"id": f"sp-{i:03d}", "formula": f"{'cC'[i % 2]}o{i // 2}"} for i in range(30)}
    for records in (few, many):
        model = SpeciesModel(species_frame(records))
        model.set_sort("formula")
        assert _shown(model) == _plain_order(records, "formula", False)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(records=_records())
def test_column_widths_are_the_widest_shown_cell(records: dict[str, dict]) -> None:
    model = SpeciesModel(species_frame(records))
    for key, label, cap in COLUMNS:
        if key == "marks":
            continue
        head = max(len(x) for x in label)
        if key in FIELDS:
            cells = [number_text(r["properties"][key]["value"]) for r in records.values()
                     if key in r["properties"]]
            expected = max([head, *map(len, cells)])
        else:
            values = list(records) if key == "id" else [r.get(key) for r in records.values()]
            longest = max((len(printable(v)) for v in values if isinstance(v, str)), default=0)
            expected = max(head, min(cap, longest))
        assert model.widths[key] == expected, key
        # Numbers are never cut: every cell of the column fits.
        for row in range(model.n):
            if key in FIELDS:
                assert len(model.cell(row, key)) <= model.widths[key]


def test_marks_sort_follows_new_marks() -> None:
    class F:
        def __init__(self, species: str, severity: str) -> None:
            self.species, self.severity = species, severity

    recs = {r[0]: species_record(*r) for r in KEY_SPECIES}
    model = SpeciesModel(species_frame(recs))
    model.set_sort("marks")
    assert model.ident_at(0) == "c-graphite"  # no marks: id order
    serial = model.marks_serial
    model.set_marks(marks_from([F("o2-g", "error")], {}))
    assert model.marks_serial != serial
    model.apply()
    assert model.ident_at(0) == "o2-g"


# -- the app: what a key press costs in rows drawn and models built ------------------------------------

N_MANY = 120
LONG_NAME = "a name long enough to wrap the detail line of the species table onto a second line " * 2


def _many_dataset(root: Path) -> Path:
    """Key species plus ``N_MANY`` invented gases written straight to disk (the store's format)."""
    ds = Dataset.init(root, "many", user="builder")
    folder = ds.root / "species"
    recs = [species_record(*row) for row in KEY_SPECIES]
    for i in range(N_MANY):
        recs.append(species_record(f"x{i:03d}-g", f"C{i + 2}H{2 * i + 6}", "g", None, False,
                                   -100.0 - i, 0.5, 200.0 + i, 0.1, -50.0 - i, 30.0 + i / 10))
    recs[-1]["name"] = LONG_NAME.strip()
    for rec in recs:
        (folder / f"{rec['id']}.json").write_bytes(jsonio.dumps(rec))
    return root


@pytest.fixture
def many(tmp_path: Path) -> Path:
    return _many_dataset(tmp_path / "many")


def _spy(fn):
    """A function that records its calls and delegates to ``fn``; a plain function, so that it binds
    ``self`` when it replaces a method on a class."""
    calls: list[tuple] = []

    def spy(*args, **kwargs):
        calls.append(args)
        return fn(*args, **kwargs)

    spy.calls = calls
    return spy


def _cursor_rows(app) -> list[int]:
    """Screen lines holding a table row drawn in reverse video (the cursor), as the compositor holds
    them (the scrollbar's thumb and the keys in the footer are reverse too, but short)."""
    rows = []
    for y, strip in enumerate(app.screen._compositor.render_strips()):
        if any(seg.style is not None and seg.style.reverse and len(seg.text.strip()) > 20 for seg in strip):
            rows.append(y)
    return rows


async def test_a_cursor_move_draws_two_rows_and_never_rebuilds_the_model(many: Path,
                                                                        monkeypatch: pytest.MonkeyPatch) -> None:
    builds = _spy(SpeciesModel.__init__)
    applies = _spy(SpeciesModel.apply)
    monkeypatch.setattr(SpeciesModel, "__init__", builds)
    monkeypatch.setattr(SpeciesModel, "apply", applies)
    app = create_app(many, poll_interval=3600)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        screen = app.screen
        assert isinstance(screen, SpeciesScreen)
        model, table = screen.model, screen.table
        drawn = _spy(model.cells)
        monkeypatch.setattr(model, "cells", drawn)
        builds.calls.clear()
        applies.calls.clear()
        before = _cursor_rows(app)
        await pilot.press("down")
        await pilot.pause()
        # The old cursor row and the new one; not the page (about 17 rows at 80×24).
        assert 1 <= len(drawn.calls) <= 2
        after = _cursor_rows(app)
        assert len(before) == len(after) == 1 and after[0] == before[0] + 1
        assert screen.species_id == model.ident_at(1)
        drawn.calls.clear()
        await pilot.press("pagedown", "end", "home", "up", "down")
        await pilot.pause()
        # Every press drew at most one page of rows, whatever the number of species.
        assert len(drawn.calls) <= 5 * table.page_rows
        assert table.cursor == 1
        assert not builds.calls and not applies.calls
        await pilot.press("end")
        await pilot.pause()
        text = screen_text(app)
        assert model.ident_at(table.count - 1) in text and model.ident_at(0) not in text


async def test_sorting_twice_by_one_column_computes_its_order_once(many: Path,
                                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    orders = _spy(species_model._text_order)
    monkeypatch.setattr(species_model, "_text_order", orders)
    app = create_app(many, poll_interval=3600)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        screen = app.screen
        await pilot.press(*["s"] * (len(COLUMNS) + 1))  # round every column and on to formula again
        await pilot.pause()
        assert screen.model.sort_key == "formula"
        assert len(orders.calls) == 3  # formula, phase, status: once each
        shown = [screen.model.ident_at(i) for i in range(screen.table.count)]
        formulas = [app.snapshot.species[i]["formula"].lower() for i in shown]
        assert formulas == sorted(formulas)


async def test_the_detail_line_follows_the_cursor_and_grows_when_it_wraps(many: Path) -> None:
    app = create_app(many, poll_interval=3600)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        screen = app.screen
        detail = screen.query_one("#detail")
        await pilot.press("end")
        await pilot.pause()
        last = screen.species_id
        assert app.snapshot.species[last].get("name") == LONG_NAME.strip()
        assert detail.size.height == 2  # the long name wraps: a new layout gave the line its height
        await pilot.press("up")
        await pilot.pause()
        assert detail.size.height == 1
        text = screen_text(app)
        assert screen.species_id in text.splitlines()[-2]  # the line above the keys
        await pilot.press("up")
        await pilot.pause()
        assert screen.species_id in screen_text(app).splitlines()[-2]


# -- the first screen and the checks -------------------------------------------------------------------


@pytest.fixture
def faulty(builder, tmp_path: Path) -> Path:
    path = builder(tmp_path / "faulty")
    # An element in its reference state with a non-zero ΔfH°: an error finding on h2-g.
    bad = species_record("h2-g", "H2", "g", None, True, 0.5, 0.001, 130.68, 0.003, 0.0, 28.836)
    Dataset(path, user="builder").save("species", bad, expected_revision=1)
    return path


async def test_the_table_shows_before_the_checks_and_marks_follow_them(faulty: Path,
                                                                       monkeypatch: pytest.MonkeyPatch) -> None:
    release = threading.Event()
    real = app_module.check_snapshot

    def held_checks(snap):
        release.wait(30)
        return real(snap)

    monkeypatch.setattr(app_module, "check_snapshot", held_checks)
    app = create_app(faulty, poll_interval=3600)
    try:
        async with app.run_test(size=SIZE) as pilot:
            for _ in range(200):
                await pilot.pause()
                if app.snapshot is not None and app.screen.table.count:
                    break
                await asyncio.sleep(0.02)
            screen = app.screen
            model = screen.model
            assert app.checking and app.snapshot.report is None
            assert screen.table.count == len(KEY_SPECIES)
            assert model.mark_text(model.row_of("h2-g")) == "  "
            # The checks run in a thread: the table answers keys meanwhile, sorted by marks too.
            await pilot.press("down")
            await pilot.pause()
            assert screen.table.cursor == 1
            model.set_sort("marks")
            screen.sort_key = "marks"
            screen._show(None, cursor=0)
            assert screen.species_id == "c-graphite"  # no marks yet: id order
            release.set()
            await settle(pilot, app, lambda: app.snapshot.report is not None)
            assert model.mark_text(model.row_of("h2-g"))[0] == "E"
            assert screen.model.ident_at(0) == "h2-g"  # the marks sort took the new marks
            assert "E" in [line[:2].strip() for line in screen_text(app).splitlines()]
    finally:
        release.set()


async def test_the_poll_reloads_only_when_the_dataset_changed(keyset: Path,
                                                              monkeypatch: pytest.MonkeyPatch) -> None:
    loads = _spy(app_module.load_snapshot)
    monkeypatch.setattr(app_module, "load_snapshot", loads)
    app = create_app(keyset, poll_interval=0.05)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, app)
        for _ in range(10):  # about ten polls
            await pilot.pause(0.06)
        assert len(loads.calls) == 1
        Dataset(keyset, user="bob").save("flags", fixed_flag("flag-bob", "co-g", "S298", "low?"),
                                         expected_revision=None)
        await settle(pilot, app, lambda: "flag-bob" in app.snapshot.flags)
        assert len(loads.calls) == 2


# -- the snapshot: indexes and memory ------------------------------------------------------------------


def _checked_snapshot(path: Path) -> data_module.Snapshot:
    snap = data_module.load_snapshot(Dataset(path, user="builder"))
    snap.report = data_module.check_snapshot(snap)
    return snap


def test_per_species_lookups_agree_with_a_scan(builder, tmp_path: Path) -> None:
    flags = [fixed_flag("f-1", "co2-g", "S298", "a", at="2024-05-02T00:00:00Z"),
             dict(fixed_flag("f-2", "co2-g", "S298", "b", at="2024-05-01T00:00:00Z"), status="resolved"),
             fixed_flag("f-3", "co2-g", "dfH298", "c", at="2024-05-03T00:00:00Z"),
             fixed_flag("f-4", "h2o-l", "dfH298", "d")]
    path = builder(tmp_path / "ds", flags=flags)
    bad = species_record("h2-g", "H2", "g", None, True, 0.5, 0.001, -1.0, 0.003, 0.0, 28.836)
    Dataset(path, user="builder").save("species", bad, expected_revision=1)
    snap = _checked_snapshot(path)
    assert snap.report.findings  # the faulty record gives findings to index
    for ident in [*snap.species, "no-such-species"]:
        assert snap.findings_for(ident) == [f for f in snap.report.findings if f.species == ident]
        mine = [f for f in snap.flags.values() if f.get("species") == ident]
        expected = sorted(mine, key=lambda f: (f["status"] != "open", f["raised_at"]))
        assert snap.flags_for(ident) == expected
    assert [f["id"] for f in snap.flags_for("co2-g")] == ["f-1", "f-3", "f-2"]
    # A new report (the checks ran again) replaces what the index answers.
    snap.report = type(snap.report)(snap.report.dataset, [])
    assert snap.findings_for("h2-g") == []


def test_a_replaced_snapshot_is_freed_by_reference_counting_alone(keyset: Path) -> None:
    """The loaded data is hidden from the cycle collector (gc.freeze); that is only safe because a
    snapshot holds no reference cycles, so dropping it frees it without the collector."""
    snap = _checked_snapshot(keyset)
    snap.findings_for("h2o-l")
    snap.flags_for("h2o-l")
    snap.model.set_filter("h2")
    snap.model.set_sort("formula")
    refs = [weakref.ref(x) for x in (snap, snap.model, snap.context, snap.context.frame, snap.report)]
    was = gc.isenabled()
    gc.disable()
    try:
        del snap
        assert [r() for r in refs] == [None] * len(refs)
    finally:
        if was:
            gc.enable()


def test_garbage_kept_by_a_freeze_is_reclaimed_at_the_next_load(keyset: Path) -> None:
    class Node:
        pass

    node = Node()
    node.me = node  # a reference cycle: only the cycle collector can free it
    ref = weakref.ref(node)
    data_module.load_snapshot(Dataset(keyset, user="builder"))
    assert gc.get_freeze_count() > 0
    del node
    gc.collect()
    assert ref() is not None  # frozen with the snapshot: the collector skips it
    data_module.load_snapshot(Dataset(keyset, user="builder"))
    assert ref() is None


def test_cells_of_the_fast_model_read_back_as_the_stored_numbers() -> None:
    values = [0.1 + 0.2, 1e16, 1e-5, -0.0, 123456789.123, float(np.float64(2.5))]
    recs = {f"sp-{i}": {"id": f"sp-{i}", "properties": {"S298": {"value": v, "unit": "J/(mol*K)"}}}
            for i, v in enumerate(values)}
    model = SpeciesModel(species_frame(recs))
    for i, v in enumerate(values):
        cell = model.cell(model.row_of(f"sp-{i}"), "S298")
        assert float(cell) == v and len(cell) <= model.widths["S298"]
