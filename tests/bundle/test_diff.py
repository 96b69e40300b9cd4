"""diff and CHANGES.md: exactly the edits made between two releases, value by value, in units of u."""

from __future__ import annotations

import pytest

from tablekeeper.bundle import diff, next_version, release
from tablekeeper.bundle.diff import decimal_delta
from tablekeeper.store import Dataset


def _edit(ds: Dataset, ident: str, fn) -> None:
    rec = ds.load("species", ident)
    fn(rec)
    ds.save("species", rec, expected_revision=rec["revision"])


def _edits(ds: Dataset) -> None:
    """The edits between 1.0.0 and 2.0.0."""
    # CO: ΔfH° corrected by −0.07 kJ/mol (CODATA 1989 gives −110.53 ± 0.17, k = 2: u = 0.085).
    _edit(ds, "co-g", lambda r: r["properties"]["dfH298"].update(value=-110.6))
    # H2O(g): the S° uncertainty widened, and the name changed.
    _edit(ds, "h2o-g", lambda r: (r["properties"]["S298"].update(uncertainty=0.02), r.update(name="steam")))
    # CH4(g) added: NIST-JANAF (Chase 1998) ΔfH° −74.87 kJ/mol, S° 186.25 J/(mol·K) (from memory).
    ds.save("species", {"id": "ch4-g", "formula": "CH4", "phase": "g", "charge": 0, "status": "draft",
                        "properties": {"dfH298": {"value": -74.87, "unit": "kJ/mol", "uncertainty": 0.34,
                                                  "source": "janaf-1998", "method": "evaluated"}}},
            expected_revision=None)
    # Graphite removed.
    rec = ds.load("species", "c-cr-graphite")
    ds.delete("species", "c-cr-graphite", expected_revision=rec["revision"])
    meta = dict(ds.meta)
    meta["element_references"] = {k: v for k, v in meta["element_references"].items() if k != "C"}
    ds.save_meta(meta)


@pytest.fixture
def two_releases(clean_dataset, tmp_path, monkeypatch):
    out = tmp_path / "out"
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")
    first = release(clean_dataset, "1.0.0", out=out)
    _edits(clean_dataset)
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700086400")
    second = release(clean_dataset, "2.0.0", out=out, allow_warnings=True)
    return clean_dataset, first, second


def test_diff_of_two_releases_lists_exactly_the_edits(two_releases):
    _, first, second = two_releases
    d = diff(first.archive, second.folder)
    assert d.added == [("ch4-g", "CH4(g)")]
    assert d.removed == [("c-cr-graphite", "C(cr, graphite)")]
    changed = {c.species: [(x.kind, x.field) for x in c.changes] for c in d.changed}
    assert changed == {"co-g": [("value", "dfH298")],
                       "h2o-g": [("attribute", "name"), ("uncertainty", "S298")]}
    co = d.changed[0].changes[0]
    assert (co.old, co.new, co.delta) == (-110.53, -110.6, "-0.07")
    assert co.u == pytest.approx(0.085) and co.in_u == pytest.approx(0.07 / 0.085)
    assert co.text() == "ΔfH° −110.53 → −110.6 kJ/mol (−0.07, 0.8 u)"
    assert d.sources_added == d.sources_removed == d.sources_changed == []
    assert d.schema_changes == []
    assert d.bump == "major" and d.suggested_version == "2.0.0"


def test_changes_md_lists_the_same_edits(two_releases):
    _, _, second = two_releases
    text = (second.folder / "CHANGES.md").read_text()
    assert "## Changes since 1.0.0" in text
    assert "- `ch4-g` CH4(g)" in text
    assert "- `c-cr-graphite` C(cr, graphite)" in text
    assert "- ΔfH° −110.53 → −110.6 kJ/mol (−0.07, 0.8 u)" in text
    assert "- name water vapour → steam" in text
    assert "- uncertainty of S° 0.01 (k = 2) → 0.02 (k = 2) J/(mol·K)" in text
    assert "#### `o2-g`" not in text  # unchanged species are not listed
    assert second.diff is not None and second.diff.bump == "major"


def test_diff_in_either_order_and_across_kinds(two_releases):
    ds, first, second = two_releases
    forward = diff(first.folder, ds.root)  # bundle → dataset
    backward = diff(ds.root, first.archive)  # dataset → bundle
    assert forward.added == backward.removed and forward.removed == backward.added
    assert [c.species for c in forward.changed] == [c.species for c in backward.changed]
    inverse = backward.changed[0].changes[0]
    assert (inverse.old, inverse.new, inverse.delta) == (-110.6, -110.53, "+0.07")
    assert diff(second.archive, ds.root).empty  # the dataset is what 2.0.0 released
    assert diff(second.folder, second.archive).bump == "none"


def test_bump_rules(clean_dataset, copy_dataset):
    base = copy_dataset(clean_dataset, "base")
    patch = copy_dataset(clean_dataset, "patch")
    _edit(patch, "h2o-l", lambda r: r["properties"]["S298"].update(value=69.91))
    assert diff(base.root, patch.root).bump == "patch"
    minor = copy_dataset(clean_dataset, "minor")
    minor.save("species", {"id": "ar-g", "formula": "Ar", "phase": "g", "charge": 0, "status": "draft",
                           "properties": {}}, expected_revision=None)
    assert diff(base.root, minor.root).bump == "minor"
    major = copy_dataset(minor, "major")
    major.delete("species", "co-g", expected_revision=major.load("species", "co-g")["revision"])
    assert diff(base.root, major.root).bump == "major"
    assert diff(base.root, base.root).bump == "none"


def test_next_version():
    assert next_version("1.4.2", "major") == "2.0.0"
    assert next_version("1.4.2", "minor") == "1.5.0"
    assert next_version("1.4.2", "patch") == "1.4.3"
    assert next_version("1.4.2", "none") is None


@pytest.mark.parametrize(("old", "new", "want"), [
    (-74.6, -74.87, "-0.27"), (0.1, 0.3, "+0.2"), (1.0, 1.0, "0"), (1e-05, 2e-05, "+0.00001"),
    (-110.53, -110.6, "-0.07"),
])
def test_decimal_delta_is_exact_on_the_digits_written(old, new, want):
    assert decimal_delta(old, new) == want


def test_a_damaged_bundle_cannot_be_compared(two_releases):
    from tablekeeper.errors import DamagedFileError

    ds, first, _ = two_releases
    path = first.folder / "values.csv"
    path.write_bytes(path.read_bytes().replace(b"-110.53", b"-110.54"))
    with pytest.raises(DamagedFileError):
        diff(first.folder, ds.root)


def test_changes_md_escapes_markdown_in_data(clean_dataset, tmp_path, monkeypatch):
    release(clean_dataset, "1.0.0", out=tmp_path / "out")
    _edit(clean_dataset, "co-g", lambda r: r.update(name="CO <script>*bold*</script>"))
    done = release(clean_dataset, "1.0.1", out=tmp_path / "out")
    text = (done.folder / "CHANGES.md").read_text()
    assert "\\<script\\>\\*bold\\*\\</script\\>" in text
    assert "<script>" not in text
