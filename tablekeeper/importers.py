"""Spreadsheet import: CSV rows into species records, with column mapping and units. All or nothing.

Columns are matched by field name (``id, formula, phase, form, charge, name, dfH298, S298, dfG298,
Cp298``, ``u_<field>`` for standard uncertainties, plus ``status``) unless ``--map COLUMN=FIELD`` says
otherwise. ``--unit dfH298=kcal/mol`` converts a field on the way in; the value and unit as entered
are kept beside the canonical value. Every row is parsed and validated before anything is written;
the first problem is reported with its file, row and column.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path

from . import formula as _formula
from . import validation
from .errors import InputError, UnitError
from .model import FIELDS, PHASES, STATUSES
from .store import SLUG, Dataset, field_changes
from .units import canonical_unit, factor_to_canonical, scale

TEXT_COLUMNS = ("id", "formula", "phase", "form", "name", "status")
KNOWN = (*TEXT_COLUMNS, "charge", *FIELDS, *(f"u_{f}" for f in FIELDS))
MAX_CSV_BYTES = 32 << 20
_FORMULA_LEAD = ("=", "+", "@", "\t", "\r", "-")


@dataclass
class ImportPlan:
    """What an import would do: records to create and to update (with expected revisions)."""

    create: list[dict] = field(default_factory=list)
    update: list[tuple[dict, int]] = field(default_factory=list)
    unchanged: list[str] = field(default_factory=list)


def parse_pairs(pairs: Sequence[str], what: str) -> dict[str, str]:
    """``["A=B", ...]`` → dict, refusing malformed pairs."""
    out = {}
    for p in pairs or ():
        if "=" not in p:
            raise InputError(f"{what} {p!r} must be written as NAME=VALUE")
        k, v = p.split("=", 1)
        out[k.strip()] = v.strip()
    return out


def _number(text: str, *, file: str, row: str, column: str) -> float:
    try:
        v = float(text.replace("−", "-"))
    except ValueError:
        raise InputError(f"{text[:40]!r} is not a number", file=file, record=row, field=column) from None
    if not math.isfinite(v):
        raise InputError(f"{text[:40]!r} is not a finite number", file=file, record=row, field=column)
    return v


def read_csv(path: Path) -> tuple[list[str], list[dict[str, str]]]:
    name = str(path)
    try:
        size = path.stat().st_size
        if size > MAX_CSV_BYTES:
            raise InputError(f"is {size} bytes, larger than the {MAX_CSV_BYTES} bytes an import may be",
                             file=name)
        raw = path.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror})", file=name) from None
    if raw.startswith(b"\xef\xbb\xbf"):
        raise InputError("starts with a byte-order mark; save it as UTF-8 without BOM", file=name)
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(f"is not valid UTF-8 (byte {exc.start})", file=name) from None
    if "\x00" in text:
        raise InputError("contains a NUL byte; it is not a text CSV file", file=name)
    reader = csv.DictReader(io.StringIO(text, newline=""), strict=True)
    try:
        header = list(reader.fieldnames or [])
        rows = list(reader)
    except csv.Error as exc:
        raise InputError(f"is not valid CSV (line {reader.line_num}: {exc})", file=name) from None
    if not header:
        raise InputError("has no header row", file=name)
    if len(set(header)) != len(header):
        raise InputError("has a column name twice in its header", file=name)
    for i, r in enumerate(rows, start=2):
        if None in r:
            raise InputError("has more cells than the header has columns", file=name, record=f"row {i}")
    return header, rows


def plan_import(dataset: Dataset, path: Path, *, mapping: Mapping[str, str] | None = None,
                units: Mapping[str, str] | None = None, source: str | None = None,
                update: bool = False) -> ImportPlan:
    """Parse and validate a CSV against a dataset; raise InputError at the first problem."""
    name = str(path)
    mapping = dict(mapping or {})
    units = dict(units or {})
    for f, u in units.items():
        if f not in FIELDS:
            raise InputError(f"--unit names {f!r}, which is not one of {', '.join(FIELDS)}")
        factor_to_canonical(u, f)  # refuse a wrong dimension before reading a row
    for col, f in mapping.items():
        if f not in KNOWN:
            raise InputError(f"--map {col}={f}: {f!r} is not a field ({', '.join(KNOWN)})")
    if source is not None and source not in dataset.ids("sources"):
        raise InputError(f"--source {source!r} is not in the dataset's sources/")
    header, rows = read_csv(path)
    col_for: dict[str, str] = {}
    for col in header:
        target = mapping.get(col, col)
        if target not in KNOWN:
            raise InputError(f"column {col!r} is not a field; map it with --map {col}=FIELD", file=name)
        if target in col_for:
            raise InputError(f"columns {col_for[target]!r} and {col!r} both give {target}", file=name)
        col_for[target] = col
    for need in ("id", "formula", "phase"):
        if need not in col_for and not (update and need != "id"):
            raise InputError(f"has no {need!r} column", file=name)
    existing = set(dataset.ids("species"))
    plan = ImportPlan()
    seen: set[str] = set()
    for i, row in enumerate(rows, start=2):
        where = f"row {i}"

        def cell(f: str, row: dict = row) -> str:
            c = col_for.get(f)
            return (row.get(c) or "").strip() if c else ""

        ident = cell("id")
        if not SLUG.match(ident):
            raise InputError(f"{ident[:70]!r} is not a valid id (a-z, 0-9, '.', '_', '-')", file=name,
                             record=where, field=col_for["id"])
        where = f"row {i} ({ident})"
        if ident in seen:
            raise InputError("repeats an id given earlier in the file", file=name, record=where,
                             field=col_for["id"])
        seen.add(ident)
        for f in TEXT_COLUMNS:
            raw = (row.get(col_for[f]) or "") if f in col_for else ""
            if raw[:1] in ("=", "+", "@", "\t", "\r"):
                raise InputError("may not begin with =, +, @, tab or carriage return", file=name,
                                 record=where, field=col_for[f])
        is_update = ident in existing
        if is_update and not update:
            raise InputError("already exists; use --update to change existing species", file=name,
                             record=where, field=col_for["id"])
        old = dataset.load("species", ident) if is_update else None
        rec = _build(old, ident, cell, col_for, units, source, name, where)
        rec["revision"] = int(old.get("revision", 0)) + 1 if old else 1  # as it will be saved
        errs = validation.errors("species", rec)
        if errs:
            pointer, msg = errs[0]
            raise InputError(msg, file=name, record=where, field=pointer.lstrip("/").replace("/", ".") or None)
        if old is None:
            plan.create.append(rec)
        elif field_changes(old, rec):
            plan.update.append((rec, int(old.get("revision", 0))))
        else:
            plan.unchanged.append(ident)
    return plan


def _build(old: dict | None, ident: str, cell, col_for: dict, units: Mapping[str, str], source: str | None,
           file: str, where: str) -> dict:
    rec: dict = {k: (dict(v) if isinstance(v, dict) else v) for k, v in (old or {}).items()}
    rec["id"] = ident
    rec.setdefault("status", "draft")
    props = {k: dict(v) for k, v in (rec.get("properties") or {}).items()}
    for f in ("formula", "phase", "form", "name", "status"):
        v = cell(f)
        if v:
            rec[f] = v
    if rec.get("phase") not in PHASES:
        raise InputError(f"{str(rec.get('phase'))[:20]!r} is not a phase ({', '.join(PHASES)})", file=file,
                         record=where, field=col_for.get("phase", "phase"))
    if rec.get("status") not in STATUSES:
        raise InputError(f"{rec['status'][:20]!r} is not a status ({', '.join(STATUSES)})", file=file,
                         record=where, field=col_for.get("status", "status"))
    try:
        parsed = _formula.parse(rec.get("formula", ""))
    except InputError as exc:
        raise InputError(exc.reason, file=file, record=where, field=col_for.get("formula", "formula")) from None
    ch = cell("charge")
    if ch:
        try:
            rec["charge"] = int(ch)
        except ValueError:
            raise InputError(f"{ch[:20]!r} is not a whole number", file=file, record=where,
                             field=col_for["charge"]) from None
    elif "charge" not in rec or cell("formula"):
        rec["charge"] = parsed.charge
    for f in FIELDS:
        text = cell(f)
        utext = cell(f"u_{f}")
        if not text:
            if utext:
                raise InputError(f"gives an uncertainty but no {f} value", file=file, record=where,
                                 field=col_for[f"u_{f}"])
            continue
        entered = _number(text, file=file, row=where, column=col_for[f])
        unit = units.get(f, canonical_unit(f))
        try:
            factor = factor_to_canonical(unit, f)
        except UnitError as exc:
            raise InputError(exc.reason, file=file, record=where, field=col_for[f]) from None
        pv: dict = {"value": scale(entered, factor), "unit": canonical_unit(f)}
        u_entered = None
        if utext:
            u_entered = _number(utext, file=file, row=where, column=col_for[f"u_{f}"])
            if u_entered < 0:
                raise InputError("an uncertainty cannot be negative", file=file, record=where,
                                 field=col_for[f"u_{f}"])
            pv["uncertainty"] = scale(u_entered, factor)
        prev = props.get(f, {})
        src = source or prev.get("source")
        if src:
            pv["source"] = src
        if prev.get("method"):
            pv["method"] = prev["method"]
        if factor != 1.0 or unit != canonical_unit(f):
            pv["entered"] = {"value": entered, "unit": unit}
            if u_entered is not None:
                pv["entered"]["uncertainty"] = u_entered
        props[f] = pv
    rec["properties"] = props
    return rec


def apply_import(dataset: Dataset, plan: ImportPlan, *, reason: str | None = None) -> int:
    """Write an import plan, all or nothing. Returns the number of records written."""
    items: list[tuple[dict, int | None]] = [(r, None) for r in plan.create] + list(plan.update)
    if not items:
        return 0
    dataset.save_many("species", items, reason=reason or "import", action="import")
    return len(items)
