"""The species table as shown: columns, marks, filter and sort over the core's species frame.

No textual here: the model turns ``tablekeeper.model.species_frame`` plus the check report and the flags
into the rows the virtual table draws. It is built once per load, in the loading worker: columns are
taken from the frame whole, column widths measured over whole columns, and the filter's search text
made once. Filtering and sorting yield an array of row positions: a column's sort order is computed
the first time it is asked for and kept, and typing one more character into the filter searches only
the rows the shorter query matched; moving the cursor costs nothing here, and cell texts are made only
for the rows on screen. Numbers are shown with ``editing.number_text`` (shortest text that reads back
as the stored float).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..editing import number_text
from ..model import FIELDS
from ..text import has_control, printable

#: (key, header lines, cap on width) in display order.
COLUMNS: tuple[tuple[str, tuple[str, ...], int], ...] = (
    ("marks", ("", "!"), 2),
    ("id", ("", "id"), 22),
    ("formula", ("", "formula"), 14),
    ("phase", ("", "ph"), 5),
    ("dfH298", ("ΔfH°", "kJ/mol"), 14),
    ("S298", ("S°", "J/(mol·K)"), 14),
    ("dfG298", ("ΔfG°", "kJ/mol"), 14),
    ("Cp298", ("Cp°", "J/(mol·K)"), 14),
    ("status", ("", "status"), 10),
)
SORT_KEYS: tuple[str, ...] = tuple(c[0] for c in COLUMNS)
NUMERIC = set(FIELDS)
_SEVERITY_RANK = {"error": 0, "warning": 1, "info": 2}
_MARK = {0: "E", 1: "W", 2: "i", 3: " "}


@dataclass
class Marks:
    """Per-species worst finding severity and open flags."""

    severity: dict[str, int]  # species -> 0 error, 1 warning, 2 info
    open_flags: dict[str, int]
    blocking: set[str]


def marks_from(findings: Iterable | None, flags: Mapping[str, Mapping] | None) -> Marks:
    sev: dict[str, int] = {}
    for f in findings or ():
        if f.species:
            r = _SEVERITY_RANK.get(f.severity, 3)
            if r < sev.get(f.species, 3):
                sev[f.species] = r
    open_flags: dict[str, int] = {}
    blocking: set[str] = set()
    for rec in (flags or {}).values():
        if isinstance(rec, Mapping) and rec.get("status") == "open" and isinstance(rec.get("species"), str):
            open_flags[rec["species"]] = open_flags.get(rec["species"], 0) + 1
            if rec.get("blocking"):
                blocking.add(rec["species"])
    return Marks(sev, open_flags, blocking)


def _longest_number(values: np.ndarray) -> int:
    """Length of the longest ``number_text`` of finite floats (``repr``, as ``number_text`` writes)."""
    return max(map(len, map(repr, values.tolist())), default=0)


def _longest_text(values: Iterable[object]) -> int:
    """Length of the longest ``printable`` text of the strings among ``values``."""
    texts = {v for v in values if isinstance(v, str)}  # phases, statuses, formulas repeat: measure each once
    if not texts:
        return 0
    # ``printable`` only lengthens text that holds control characters: one scan of all texts decides
    # whether the cheap path (plain lengths) gives the same answer.
    if has_control(" ".join(texts)):
        return max(len(printable(v)) for v in texts)
    return max(map(len, texts))


def _text_order(values: np.ndarray) -> np.ndarray:
    """Row positions of a text column sorted case-blind, rows without text last, ties in row order.

    Phases and statuses repeat a few values: those are found by hashing (in C), only they are lowered
    and sorted in Python, and the rows are sorted stably by the rank of their value. A column of mostly
    distinct values (formulas) is sorted directly, which is then the cheaper way.
    """
    is_text = np.fromiter((isinstance(v, str) for v in values), dtype=bool, count=len(values))
    rows = np.flatnonzero(is_text)
    texts = values[rows]
    sample = texts[:2000]  # enough to tell a column of few values from one of mostly distinct ones
    if len(pd.unique(sample)) * 2 > len(sample):
        keys = [v.lower() for v in texts]
        ranked = np.array(sorted(range(len(keys)), key=keys.__getitem__), dtype=np.int64)
    else:
        codes, uniques = pd.factorize(texts)
        keys = [v.lower() for v in uniques]
        # Dense ranks of the keys: distinct values with one key ("CO", "co") tie, as in a plain sort.
        rank_of = {k: r for r, k in enumerate(sorted(set(keys)))}
        ranks = np.fromiter((rank_of[k] for k in keys), dtype=np.int64, count=len(keys))
        ranked = np.argsort(ranks[codes], kind="stable")
    return np.concatenate([rows[ranked], np.flatnonzero(~is_text)])


class SpeciesModel:
    """Rows of the species table with the current filter and sort."""

    def __init__(self, frame: pd.DataFrame, marks: Marks | None = None) -> None:
        self.frame = frame
        self.ids: np.ndarray = frame.index.to_numpy(dtype=object)
        self.n = len(self.ids)
        self._text = {c: frame[c].to_numpy(dtype=object)
                      for c in ("formula", "phase", "status", "name", "form")}
        self._num = {f: frame[f].to_numpy(dtype="float64") for f in FIELDS}
        formulas = frame["formula"].fillna("").astype(str).tolist()
        names = frame["name"].fillna("").astype(str).tolist()
        # A plain list of lower-case "id\nformula\nname": ``q in s`` over a list of str is several times
        # faster than pandas' object-dtype ``str.contains`` (no pyarrow here) and copies nothing per search.
        self._haystack: list[str] = [f"{i}\n{f}\n{m}".lower()
                                     for i, f, m in zip(map(str, self.ids.tolist()), formulas, names,
                                                        strict=True)]
        self._row_of: dict[str, int] = dict(zip(self.ids.tolist(), range(self.n), strict=True))
        self.filter_text = ""
        self.sort_key = "id"
        self.descending = False
        self._sorted: dict[str, np.ndarray] = {}
        # The last filter's query and the frame rows it matched: typing one more character only searches
        # the rows that matched before (a longer query can only match fewer rows).
        self._match_query = ""
        self._match_rows: np.ndarray | None = None
        #: Raised by every ``set_marks``, so a view can tell that the marks (and a marks sort) changed.
        self.marks_serial = 0
        self.set_marks(marks)
        self.widths = self._widths()
        self.order = np.arange(self.n)

    # -- marks -----------------------------------------------------------------------------------------

    def set_marks(self, marks: Marks | None) -> None:
        self.marks = marks or Marks({}, {}, set())
        sev = np.full(self.n, 3, dtype=np.int8)
        flag = np.zeros(self.n, dtype=np.int8)
        for ident, r in self.marks.severity.items():
            i = self._row_of.get(ident)
            if i is not None:
                sev[i] = r
        for ident in self.marks.open_flags:
            i = self._row_of.get(ident)
            if i is not None:
                flag[i] = 2 if ident in self.marks.blocking else 1
        self._sev = sev
        self._flag = flag
        self._sorted.pop("marks", None)
        self.marks_serial += 1

    def mark_text(self, row: int) -> str:
        return _MARK[int(self._sev[row])] + {0: " ", 1: "F", 2: "!"}[int(self._flag[row])]

    def severity_of_row(self, row: int) -> int:
        return int(self._sev[row])

    # -- cells -----------------------------------------------------------------------------------------

    def cell(self, row: int, key: str) -> str:
        if key == "marks":
            return self.mark_text(row)
        if key == "id":
            return printable(self.ids[row])
        if key in NUMERIC:
            v = self._num[key][row]
            return "" if np.isnan(v) else number_text(float(v))
        v = self._text[key][row]
        return "" if v is None or (isinstance(v, float) and np.isnan(v)) else printable(v)

    def cells(self, row: int) -> list[str]:
        return [self.cell(row, c[0]) for c in COLUMNS]

    def _widths(self) -> dict[str, int]:
        """Column widths: the widest cell (numbers are never cut), text columns capped.

        Made once per load over whole columns; the loops run in C (``map``), not per cell in Python.
        """
        out = {}
        for key, label, cap in COLUMNS:
            head = max(len(x) for x in label)
            if key == "marks":
                out[key] = 2
            elif key in NUMERIC:
                col = self._num[key]
                out[key] = max(head, _longest_number(col[~np.isnan(col)]))
            else:
                values = self.ids if key == "id" else self._text[key]
                out[key] = max(head, min(cap, _longest_text(values)))
        return out

    # -- filter and sort -------------------------------------------------------------------------------

    def _sort_order(self, key: str) -> np.ndarray:
        if key not in self._sorted:
            if key == "marks":
                # Worst severity first, then blocking before plain flags, then id.
                order = np.lexsort((np.arange(self.n), -self._flag.astype(np.int16), self._sev))
            elif key == "id":
                order = np.arange(self.n)  # the frame is sorted by id
            elif key in NUMERIC:
                order = np.argsort(self._num[key], kind="stable")  # NaN last
            else:
                order = _text_order(self._text[key])
            self._sorted[key] = order
        return self._sorted[key]

    def apply(self) -> np.ndarray:
        """Recompute ``order``: the frame rows that pass the filter, in sort order."""
        order = self._sort_order(self.sort_key)
        if self.descending:
            if self.sort_key in NUMERIC:
                missing = np.isnan(self._num[self.sort_key][order])
                order = np.concatenate([order[~missing][::-1], order[missing]])
            else:
                order = order[::-1]
        q = self.filter_text.strip().lower()
        if q:
            mask = np.zeros(self.n, dtype=bool)
            mask[self._matching_rows(q)] = True
            order = order[mask[order]]
        self.order = order
        return order

    def _matching_rows(self, q: str) -> np.ndarray:
        """Frame rows whose id, formula or name contains ``q`` (lower case), ascending."""
        if q == self._match_query and self._match_rows is not None:
            return self._match_rows
        hay = self._haystack
        if self._match_query and self._match_rows is not None and self._match_query in q:
            rows = self._match_rows
            hits = np.fromiter((q in hay[i] for i in rows.tolist()), dtype=bool, count=len(rows))
            found = rows[hits]
        else:
            found = np.flatnonzero(np.fromiter((q in h for h in hay), dtype=bool, count=self.n))
        self._match_query, self._match_rows = q, found
        return found

    def set_filter(self, text: str) -> None:
        self.filter_text = text
        self.apply()

    def set_sort(self, key: str, descending: bool = False) -> None:
        if key not in SORT_KEYS:
            raise ValueError(f"{key!r} is not a column")
        self.sort_key = key
        self.descending = descending
        self.apply()

    def next_sort(self) -> str:
        i = SORT_KEYS.index(self.sort_key)
        self.set_sort(SORT_KEYS[(i + 1) % len(SORT_KEYS)], False)
        return self.sort_key

    def reverse(self) -> None:
        self.set_sort(self.sort_key, not self.descending)

    # -- lookups ---------------------------------------------------------------------------------------

    def row_of(self, ident: str) -> int | None:
        return self._row_of.get(ident)

    def view_index_of(self, ident: str) -> int | None:
        """Position of a species in the current (filtered, sorted) view."""
        row = self._row_of.get(ident)
        if row is None:
            return None
        hits = np.flatnonzero(self.order == row)
        return int(hits[0]) if len(hits) else None

    def ident_at(self, view_index: int) -> str | None:
        if 0 <= view_index < len(self.order):
            return str(self.ids[self.order[view_index]])
        return None
