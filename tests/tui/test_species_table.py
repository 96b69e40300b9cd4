"""The species table: its model (filter, sort, marks, cells) and the virtual table at 10k rows."""

from __future__ import annotations

import time

import numpy as np
from textual.app import App, ComposeResult

from tablekeeper.model import species_frame
from tablekeeper.tui.species_model import COLUMNS, SpeciesModel, marks_from
from tablekeeper.tui.vtable import Column, VirtualTable

from .conftest import KEY_SPECIES, species_record


def _records() -> dict[str, dict]:
    names = {"h2o-l": "water", "h2o-g": "steam"}
    return {row[0]: species_record(*row, name=names.get(row[0])) for row in KEY_SPECIES}


def test_filter_matches_id_formula_and_name_case_insensitively() -> None:
    model = SpeciesModel(species_frame(_records()))
    model.set_filter("H2O")
    assert [model.ident_at(i) for i in range(len(model.order))] == ["h2o-g", "h2o-l"]
    model.set_filter("WAT")
    assert [model.ident_at(i) for i in range(len(model.order))] == ["h2o-l"]
    model.set_filter("graph")
    assert [model.ident_at(i) for i in range(len(model.order))] == ["c-graphite"]
    model.set_filter("")
    assert len(model.order) == len(KEY_SPECIES)


def test_sort_by_a_number_column_both_ways_with_missing_values_last() -> None:
    recs = _records()
    del recs["co-g"]["properties"]["S298"]
    model = SpeciesModel(species_frame(recs))
    model.set_sort("S298")
    shown = [model.ident_at(i) for i in range(len(model.order))]
    expected = sorted((r[0] for r in KEY_SPECIES if r[0] != "co-g"),
                      key=lambda i: recs[i]["properties"]["S298"]["value"])
    assert shown == [*expected, "co-g"]
    model.reverse()
    shown = [model.ident_at(i) for i in range(len(model.order))]
    assert shown == [*expected[::-1], "co-g"]


def test_sort_keys_cycle_through_every_column() -> None:
    model = SpeciesModel(species_frame(_records()))
    seen = [model.sort_key]
    for _ in COLUMNS:
        seen.append(model.next_sort())
    assert seen[-1] == seen[0] and set(seen) == {c[0] for c in COLUMNS}


def test_sort_and_filter_combine() -> None:
    model = SpeciesModel(species_frame(_records()))
    model.set_sort("dfH298", descending=True)
    model.set_filter("g")  # gases and graphite
    ids = [model.ident_at(i) for i in range(len(model.order))]
    values = [_records()[i]["properties"]["dfH298"]["value"] for i in ids]
    assert values == sorted(values, reverse=True)
    assert all("g" in i or "g" in _records()[i]["formula"].lower() for i in ids)


def test_cells_show_numbers_exactly_as_stored() -> None:
    recs = _records()
    recs["h2o-l"]["properties"]["dfH298"]["value"] = 0.1 + 0.2
    model = SpeciesModel(species_frame(recs))
    row = model.row_of("h2o-l")
    cells = dict(zip([c[0] for c in COLUMNS], model.cells(row), strict=True))
    assert float(cells["dfH298"]) == 0.1 + 0.2
    assert cells["S298"] == "69.95"
    assert model.widths["dfH298"] >= len(cells["dfH298"])  # never cut


def test_marks_show_the_worst_severity_and_open_flags() -> None:
    class F:
        def __init__(self, species: str, severity: str) -> None:
            self.species, self.severity = species, severity

    flags = {"f1": {"species": "co-g", "status": "open", "blocking": True},
             "f2": {"species": "h2-g", "status": "open", "blocking": False},
             "f3": {"species": "o2-g", "status": "resolved", "blocking": True}}
    model = SpeciesModel(species_frame(_records()),
                         marks_from([F("co-g", "warning"), F("co-g", "error"), F("h2-g", "info")], flags))
    assert model.mark_text(model.row_of("co-g")) == "E!"
    assert model.mark_text(model.row_of("h2-g")) == "iF"
    assert model.mark_text(model.row_of("o2-g")) == "  "
    model.set_sort("marks")
    assert model.ident_at(0) == "co-g"


def _many(n: int) -> dict[str, dict]:
    rng = np.random.default_rng(7)
    out = {}
    for i in range(n):
        ident = f"sp-{i:06d}"
        out[ident] = species_record(ident, "CH4", "g", None, False, float(rng.normal(-100, 50)), 0.5,
                                    float(rng.uniform(100, 300)), 0.1, float(rng.normal(-80, 40)), 35.0)
    return out


class _TableApp(App):
    def __init__(self, model: SpeciesModel) -> None:
        super().__init__()
        self.model = model

    def compose(self) -> ComposeResult:
        yield VirtualTable(id="t")

    def on_mount(self) -> None:
        model = self.model
        cols = [Column(k, label, model.widths[k], k in {"dfH298", "S298", "dfG298", "Cp298"})
                for k, label, _ in COLUMNS]
        table = self.query_one(VirtualTable)
        table.set_data(cols, len(model.order), lambda i: model.cells(int(model.order[i])))
        table.focus()


async def test_a_10k_species_table_builds_and_pages_down() -> None:
    t0 = time.perf_counter()
    model = SpeciesModel(species_frame(_many(10_000)))
    t_model = time.perf_counter() - t0
    app = _TableApp(model)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        table = app.query_one(VirtualTable)
        assert table.count == 10_000
        t1 = time.perf_counter()
        await pilot.press("pagedown")
        t_page = time.perf_counter() - t1
        assert table.cursor == table.page_rows
        top = round(table.scroll_y)
        assert top <= table.cursor < top + table.page_rows
        await pilot.press("end")
        assert table.cursor == 9_999
        t2 = time.perf_counter()
        model.set_filter("sp-0099")
        table.set_data(table.columns, len(model.order), lambda i: model.cells(int(model.order[i])))
        t_filter = time.perf_counter() - t2
        assert table.count == 100
    # Measured, not asserted (a loaded test machine is no benchmark): printed for the report.
    print(f"\n10k: frame+model {t_model:.3f} s, page-down {t_page * 1000:.1f} ms (with the pilot's own "
          f"overhead), filter {t_filter * 1000:.1f} ms")
