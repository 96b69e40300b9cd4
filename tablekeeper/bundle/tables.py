"""The tables of a release bundle: their columns (Table Schema), their rows, and the cell text.

One definition serves the writer (rows from the dataset's records), the descriptor (the Table Schema
of each resource), the verifier (header, types, keys) and the reader (pandas dtypes), so that the
four can never disagree about a column.

Cell text is fixed byte for byte: a float is written as Python's ``repr`` (the shortest text that
reads back to the same double), an integer in decimal, a boolean as ``true``/``false``, a missing
value as the empty cell; text is written as it is, except that a text cell beginning with ``=``,
``+``, ``@``, a tab or a carriage return is never written (a spreadsheet would run it as a formula).

Layout choices a reader relies on:

* ``species.csv`` holds one row per species, the four standard values in their canonical units
  (the unit in the column name) and their standard uncertainties ``u_…`` (U/k).
* ``values.csv`` is the long form of the same values, as stored: the uncertainty with its coverage
  factor k, the source and the method, and the value and unit as entered when a conversion happened.
* ``cp_models.csv`` is wide: one row per temperature range of a Shomate or NASA 7-coefficient model
  with one column per coefficient, and one row per point of a tabulated model (``range`` then numbers
  the points and ``tmin_K``/``tmax_K`` give the table's whole validity range).
* ``thermo_table.csv`` is derived from each species' Cp model and S°(298.15 K) on the grid of
  ``tablekeeper.thermo.default_grid`` (298.15 K, every 100 K inside the range, and its upper end);
  never extrapolated. A species without a model, without S°, or whose model does not reach 298.15 K
  has no rows.
"""

from __future__ import annotations

import math
import operator
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from typing import Any

from .. import formula as _formula
from ..errors import FormulaError, InputError
from ..model import FIELDS, LABELS, METHODS, PHASES, STATUSES

#: Leading characters that would make a spreadsheet evaluate a cell.
FORBIDDEN_LEAD = ("=", "+", "@", "\t", "\r")

#: Step of the derived temperature grid, K.
THERMO_STEP_K = 100.0

#: Column-name suffix and display form of each canonical unit.
UNIT_SUFFIX = {"kJ/mol": "kJ_per_mol", "J/(mol*K)": "J_per_molK"}
FIELD_UNIT = {"dfH298": "kJ/mol", "dfG298": "kJ/mol", "S298": "J/(mol*K)", "Cp298": "J/(mol*K)"}
FIELD_TEXT = {
    "dfH298": "standard enthalpy of formation ΔfH°(298.15 K)",
    "S298": "standard molar entropy S°(298.15 K)",
    "dfG298": "standard Gibbs energy of formation ΔfG°(298.15 K)",
    "Cp298": "standard molar heat capacity Cp°(298.15 K)",
}
SHOMATE_COEFFS = ("A", "B", "C", "D", "E", "F", "G", "H")
NASA_COEFFS = ("a1", "a2", "a3", "a4", "a5", "a6", "a7")
CP_KINDS = ("shomate", "nasa7", "tabulated")


@dataclass(frozen=True)
class Column:
    """One column of a bundle table."""

    name: str
    type: str  # Table Schema type: string, number, integer, boolean
    description: str
    required: bool = False
    enum: tuple[str, ...] | None = None

    def field(self) -> dict[str, Any]:
        """The Table Schema field descriptor."""
        out: dict[str, Any] = {"name": self.name, "type": self.type, "description": self.description}
        constraints: dict[str, Any] = {}
        if self.required:
            constraints["required"] = True
        if self.enum:
            constraints["enum"] = list(self.enum)
        if constraints:
            out["constraints"] = constraints
        return out


@dataclass(frozen=True)
class Table:
    """One CSV file of the bundle and its Table Schema."""

    name: str
    title: str
    description: str
    columns: tuple[Column, ...]
    primary_key: tuple[str, ...] = ()
    foreign_keys: tuple[tuple[tuple[str, ...], str, tuple[str, ...]], ...] = ()

    @property
    def path(self) -> str:
        return f"{self.name}.csv"

    @property
    def header(self) -> list[str]:
        return [c.name for c in self.columns]

    def table_schema(self) -> dict[str, Any]:
        out: dict[str, Any] = {"fields": [c.field() for c in self.columns], "missingValues": [""]}
        if self.primary_key:
            out["primaryKey"] = list(self.primary_key)
        if self.foreign_keys:
            out["foreignKeys"] = [{"fields": list(f), "reference": {"resource": r, "fields": list(rf)}}
                                  for f, r, rf in self.foreign_keys]
        return out


def _unit_col(fld: str) -> str:
    return f"{fld}_{UNIT_SUFFIX[FIELD_UNIT[fld]]}"


def _shown_unit(unit: str) -> str:
    return unit.replace("*", "·")


_SPECIES_COLS: list[Column] = [
    Column("id", "string", "Species identifier (slug).", required=True),
    Column("formula", "string", "Chemical formula as recorded, charge as a trailing sign and count.",
           required=True),
    Column("hill_formula", "string", "Formula in Hill order with its charge, derived from formula."),
    Column("phase", "string", "IUPAC state label: g, l, cr, am or aq.", required=True, enum=PHASES),
    Column("form", "string", "Polymorph or form label, when one phase has several."),
    Column("charge", "integer", "Charge number z.", required=True),
    Column("name", "string", "Common name."),
    Column("status", "string", "Review status.", required=True, enum=STATUSES),
    Column("reference_state", "boolean", "True for an element in its reference state (ΔfH° = ΔfG° = 0).",
           required=True),
    Column("cas", "string", "CAS registry number."),
    Column("molar_mass_g_per_mol", "number",
           "Molar mass in g/mol from IUPAC standard atomic weights, electrons of the charge removed."),
]
for _f in FIELDS:
    _u = _shown_unit(FIELD_UNIT[_f])
    _SPECIES_COLS.append(Column(_unit_col(_f), "number", f"{FIELD_TEXT[_f].capitalize()} in {_u}."))
    _SPECIES_COLS.append(Column(f"u_{_unit_col(_f)}", "number",
                                f"Standard uncertainty u (= U/k) of {LABELS[_f]} in {_u}."))
_SPECIES_COLS.append(Column("cp_model", "string",
                            "Kind of Cp(T) model; its coefficients are in cp_models.csv.", enum=CP_KINDS))

_R_NOTE = "NASA 7-coefficient polynomial: Cp/R = a1 + a2 T + a3 T² + a4 T³ + a5 T⁴ with T in K"
_S_NOTE = "Shomate equation: Cp = A + B t + C t² + D t³ + E/t² in J/(mol·K) with t = T/1000 K"

TABLES: tuple[Table, ...] = (
    Table("species", "Species",
          "One row per species; standard values at p° = 1 bar and 298.15 K in the unit named in each "
          "column.", tuple(_SPECIES_COLS), ("id",)),
    Table("values", "Property values",
          "Long form of the standard values as stored: one row per species and property.",
          (Column("species", "string", "Species identifier.", required=True),
           Column("property", "string",
                  "dfH298 (ΔfH°), S298 (S°), dfG298 (ΔfG°) or Cp298 (Cp°), at 298.15 K.",
                  required=True, enum=FIELDS),
           Column("value", "number", "Value in the unit of the unit column.", required=True),
           Column("unit", "string", "Canonical unit: kJ/mol for ΔfH° and ΔfG°, J/(mol*K) for S° and Cp°.",
                  required=True, enum=("kJ/mol", "J/(mol*K)")),
           Column("uncertainty", "number", "Uncertainty in the same unit: the standard uncertainty when "
                  "coverage is 1, else the expanded uncertainty U = k·u (GUM)."),
           Column("coverage", "number", "Coverage factor k of the uncertainty; 1 for a standard uncertainty.",
                  required=True),
           Column("source", "string", "Identifier of the source in sources.csv."),
           Column("method", "string", "How the value was obtained.", enum=METHODS),
           Column("entered_value", "number", "The value as entered, when a unit conversion happened."),
           Column("entered_unit", "string", "The unit as entered, when a unit conversion happened.")),
          ("species", "property"),
          ((("species",), "species", ("id",)), (("source",), "sources", ("id",)))),
    Table("cp_models", "Heat-capacity models",
          "Cp°(T) models. Shomate and NASA 7-coefficient models: one row per temperature range, in "
          "increasing temperature. Tabulated models: one row per (T, Cp) point, numbered in range; tmin_K "
          "and tmax_K then give the whole table's validity range.",
          (Column("species", "string", "Species identifier.", required=True),
           Column("model", "string", "shomate, nasa7 or tabulated.", required=True, enum=CP_KINDS),
           Column("range", "integer", "Range number from 1 (for tabulated models: point number from 1).",
                  required=True),
           Column("tmin_K", "number", "Lower end of the validity range in K.", required=True),
           Column("tmax_K", "number", "Upper end of the validity range in K.", required=True),
           *(Column(c, "number", f"Shomate coefficient {c}. {_S_NOTE}; H − H(298.15 K) in kJ/mol = "
                    "A t + B t²/2 + C t³/3 + D t⁴/4 − E/t + F − H; S = A ln t + B t + C t²/2 + D t³/3 − "
                    "E/(2t²) + G.") for c in SHOMATE_COEFFS),
           *(Column(c, "number", f"NASA coefficient {c} (dimensionless, T in K). {_R_NOTE}; a6 and a7 are "
                    "the enthalpy and entropy integration constants.") for c in NASA_COEFFS),
           Column("T_K", "number", "Temperature of a tabulated point in K."),
           Column("Cp_J_per_molK", "number", "Cp° of a tabulated point in J/(mol·K)."),
           Column("source", "string", "Identifier of the model's source in sources.csv.")),
          ("species", "range"),
          ((("species",), "species", ("id",)), (("source",), "sources", ("id",)))),
    Table("thermo_table", "Derived thermodynamic functions",
          "Cp°, S°, H° − H°(298.15 K) and G° − H°(298.15 K) from each species' Cp model and S°(298.15 K) "
          "on a grid of 298.15 K, every 100 K inside the model's range and its upper end; never "
          "extrapolated. Species without a model or S°, or whose model does not reach 298.15 K, have no "
          "rows.",
          (Column("species", "string", "Species identifier.", required=True),
           Column("T_K", "number", "Temperature in K.", required=True),
           Column("Cp_J_per_molK", "number", "Cp°(T) in J/(mol·K).", required=True),
           Column("S_J_per_molK", "number", "S°(T) in J/(mol·K).", required=True),
           Column("H_minus_H298_kJ_per_mol", "number", "H°(T) − H°(298.15 K) in kJ/mol.", required=True),
           Column("G_minus_H298_kJ_per_mol", "number", "G°(T) − H°(298.15 K) in kJ/mol.", required=True)),
          ("species", "T_K"),
          ((("species",), "species", ("id",)),)),
    Table("sources", "Sources",
          "Bibliographic sources cited by values and models.",
          (Column("id", "string", "Source identifier.", required=True),
           Column("title", "string", "Title.", required=True),
           Column("authors", "string", "Authors, separated by '; '."),
           Column("year", "integer", "Year of publication."),
           Column("identifier", "string", "DOI, report number, URL or internal reference."),
           Column("kind", "string", "Kind of source."),
           Column("notes", "string", "Notes.")),
          ("id",)),
    Table("findings", "Findings accepted at release",
          "Warnings and infos of the check catalogue that stood when the release was made (a release "
          "never carries an error).",
          (Column("check", "string", "Check identifier.", required=True),
           Column("severity", "string", "warning or info.", required=True, enum=("warning", "info")),
           Column("species", "string", "Species identifier, when the finding is about one species."),
           Column("field", "string", "Field the finding is about."),
           Column("message", "string", "What was found.", required=True),
           Column("observed", "number", "Observed value, in the unit of the field."),
           Column("expected", "number", "Expected value, in the unit of the field."),
           Column("tolerance", "number", "Tolerance used, in the unit of the field."),
           Column("suggestion", "string", "Suggested fix."))),
)

TABLE_BY_NAME: dict[str, Table] = {t.name: t for t in TABLES}
DESCRIPTOR = "datapackage.json"
CHANGES = "CHANGES.md"
#: Every file of a bundle folder, in archive order.
BUNDLE_FILES: tuple[str, ...] = (DESCRIPTOR, *(t.path for t in TABLES), CHANGES)


# -- cell text -----------------------------------------------------------------------------------------

def unsafe_lead(text: str) -> bool:
    return bool(text) and text[0] in FORBIDDEN_LEAD


def format_cell(value: Any, column: Column, *, file: str, record: str) -> str:
    """The exact text of one cell. Raises InputError for a value that cannot be written."""
    if value is None:
        return ""
    kind = column.type
    if kind == "number":
        if isinstance(value, bool):
            raise InputError("is a boolean where a number belongs", file=file, record=record,
                             field=column.name)
        v = float(value)
        if not math.isfinite(v):
            raise InputError(f"{v!r} is not a finite number", file=file, record=record, field=column.name)
        return repr(v)
    if kind == "integer":
        if isinstance(value, bool) or not isinstance(value, int):
            raise InputError(f"{value!r} is not an integer", file=file, record=record, field=column.name)
        return str(value)
    if kind == "boolean":
        return "true" if value else "false"
    text = str(value)
    if unsafe_lead(text):
        # The store refuses such text; a cell must never reach a spreadsheet as a formula even so.
        raise InputError(f"text beginning with {text[0]!r} would be read as a spreadsheet formula; "
                         "it is never written", file=file, record=record, field=column.name)
    return text


def parse_cell(text: str, column: Column) -> Any:
    """The typed value of one cell; ValueError with a sentence when the text is not of the column's type."""
    if text == "":
        if column.required:
            raise ValueError("is empty but required")
        return None
    kind = column.type
    if kind == "number":
        try:
            v = float(text)
        except ValueError:
            raise ValueError(f"{text[:40]!r} is not a number") from None
        if not math.isfinite(v):
            raise ValueError(f"{text[:40]!r} is not a finite number")
        return v
    if kind == "integer":
        if not text.lstrip("-").isdigit() or not text.isascii():
            raise ValueError(f"{text[:40]!r} is not an integer")
        return int(text)
    if kind == "boolean":
        if text not in ("true", "false"):
            raise ValueError(f"{text[:40]!r} is not true or false")
        return text == "true"
    if unsafe_lead(text):
        raise ValueError(f"begins with {text[0]!r}, which a spreadsheet would run as a formula")
    if column.enum and text not in column.enum:
        raise ValueError(f"{text[:40]!r} is not one of {', '.join(column.enum)}")
    return text


# -- rows from records -----------------------------------------------------------------------------------

Row = dict[str, Any]


def _num(v: Any) -> float | None:
    if isinstance(v, bool) or not isinstance(v, int | float):
        return None
    return float(v)


def _text(v: Any) -> str | None:
    return v if isinstance(v, str) and v != "" else None


def species_rows(species: Mapping[str, Mapping]) -> list[Row]:
    rows = []
    for ident in sorted(species):
        rec = species[ident]
        props = rec.get("properties") if isinstance(rec.get("properties"), dict) else {}
        try:
            parsed = _formula.parse(rec.get("formula"))
            hill, mass = parsed.hill, parsed.molar_mass
        except (FormulaError, TypeError):
            hill, mass = None, None
        charge = rec.get("charge")
        model = rec.get("cp_model")
        row: Row = {
            "id": ident, "formula": _text(rec.get("formula")), "hill_formula": hill,
            "phase": _text(rec.get("phase")), "form": _text(rec.get("form")),
            "charge": charge if isinstance(charge, int) and not isinstance(charge, bool) else None,
            "name": _text(rec.get("name")), "status": _text(rec.get("status")),
            "reference_state": bool(rec.get("reference_state", False)), "cas": _text(rec.get("cas")),
            "molar_mass_g_per_mol": mass,
            "cp_model": _text(model.get("kind")) if isinstance(model, dict) else None,
        }
        for fld in FIELDS:
            pv = props.get(fld) if isinstance(props.get(fld), dict) else {}
            value = _num(pv.get("value"))
            unc = _num(pv.get("uncertainty"))
            k = _num(pv.get("coverage")) or 1.0
            row[_unit_col(fld)] = value
            row[f"u_{_unit_col(fld)}"] = unc / k if unc is not None and k > 0 else None
        rows.append(row)
    return rows


def values_rows(species: Mapping[str, Mapping]) -> list[Row]:
    rows = []
    for ident in sorted(species):
        props = species[ident].get("properties")
        if not isinstance(props, dict):
            continue
        for fld in FIELDS:  # fixed property order within a species
            pv = props.get(fld)
            if not isinstance(pv, dict) or _num(pv.get("value")) is None:
                continue
            entered = pv.get("entered") if isinstance(pv.get("entered"), dict) else {}
            rows.append({
                "species": ident, "property": fld, "value": _num(pv.get("value")),
                "unit": _text(pv.get("unit")), "uncertainty": _num(pv.get("uncertainty")),
                "coverage": _num(pv.get("coverage")) or 1.0, "source": _text(pv.get("source")),
                "method": _text(pv.get("method")), "entered_value": _num(entered.get("value")),
                "entered_unit": _text(entered.get("unit")),
            })
    return rows


def _cp_row(ident: str, kind: str, index: int, tmin: Any, tmax: Any, source: Any) -> Row:
    row: Row = dict.fromkeys(TABLE_BY_NAME["cp_models"].header)
    row.update(species=ident, model=kind, range=index, tmin_K=_num(tmin), tmax_K=_num(tmax),
               source=_text(source))
    return row


def cp_rows_of(ident: str, model: Any) -> list[Row]:
    """The cp_models.csv rows of one species' model (empty when it has none)."""
    if not isinstance(model, dict):
        return []
    kind, source = model.get("kind"), model.get("source")
    rows = []
    if kind == "shomate":
        for i, rng in enumerate(model.get("ranges") or [], start=1):
            row = _cp_row(ident, kind, i, rng.get("tmin"), rng.get("tmax"), source)
            for c in SHOMATE_COEFFS:
                row[c] = _num(rng.get(c))
            rows.append(row)
    elif kind == "nasa7":
        for i, rng in enumerate(model.get("ranges") or [], start=1):
            row = _cp_row(ident, kind, i, rng.get("tmin"), rng.get("tmax"), source)
            for c, v in zip(NASA_COEFFS, rng.get("a") or [], strict=False):
                row[c] = _num(v)
            rows.append(row)
    elif kind == "tabulated":
        points = [p for p in model.get("points") or [] if isinstance(p, list | tuple) and len(p) == 2]
        if points:
            tmin, tmax = points[0][0], points[-1][0]
            for i, (t, cp) in enumerate(points, start=1):
                row = _cp_row(ident, kind, i, tmin, tmax, source)
                row["T_K"], row["Cp_J_per_molK"] = _num(t), _num(cp)
                rows.append(row)
    return rows


def cp_model_rows(species: Mapping[str, Mapping]) -> list[Row]:
    return [row for ident in sorted(species) for row in cp_rows_of(ident, species[ident].get("cp_model"))]


def source_rows(sources: Mapping[str, Mapping]) -> list[Row]:
    rows = []
    for ident in sorted(sources):
        rec = sources[ident]
        authors = rec.get("authors")
        year = rec.get("year")
        rows.append({
            "id": ident, "title": _text(rec.get("title")),
            "authors": ("; ".join(a for a in authors if isinstance(a, str))
                        if isinstance(authors, list) else None),
            "year": year if isinstance(year, int) and not isinstance(year, bool) else None,
            "identifier": _text(rec.get("identifier")), "kind": _text(rec.get("kind")),
            "notes": _text(rec.get("notes")),
        })
    return rows


def finding_rows(findings: Iterable[Any]) -> list[Row]:
    """Rows of accepted findings (checks.Finding objects), in the report's order."""
    return [{"check": f.check, "severity": f.severity, "species": f.species, "field": f.field,
             "message": f.message, "observed": _finite(f.observed), "expected": _finite(f.expected),
             "tolerance": _finite(f.tolerance), "suggestion": f.suggestion} for f in findings]


def _finite(v: float | None) -> float | None:
    return v if v is not None and math.isfinite(v) else None


# -- CSV text ------------------------------------------------------------------------------------------

def _quoted(text: str) -> str:
    # The csv module leaves a lone carriage return unquoted when the line end is "\n"; quote it ourselves.
    if "," in text or '"' in text or "\n" in text or "\r" in text:
        return '"' + text.replace('"', '""') + '"'
    return text


def _header_line(table: Table) -> str:
    return ",".join(_quoted(c.name) for c in table.columns) + "\n"


def _column_text(table: Table, column: Column, rows: list[Row]) -> list[str]:
    """The cell text of one column for every row. Written as one loop per column, without a call per
    cell in the common cases (a finite float, a plain text); anything else goes through format_cell,
    which converts it or raises the error naming file, record and column."""
    name = column.name
    out: list[str] = []
    add = out.append
    slow = format_cell
    if column.type == "number":
        for r in rows:
            v = r.get(name)
            if v is None:
                add("")
            elif type(v) is float and v - v == 0.0:  # finite: inf - inf and nan - nan are nan
                add(repr(v))
            else:
                add(slow(v, column, file=table.path, record=_record(table, r)))
    elif column.type == "string":
        lead = FORBIDDEN_LEAD
        for r in rows:
            v = r.get(name)
            if v is None:
                add("")
            elif type(v) is str and v and v[0] not in lead:
                add(_quoted(v))
            else:
                add(_quoted(slow(v, column, file=table.path, record=_record(table, r))))
    else:
        for r in rows:
            add(slow(r.get(name), column, file=table.path, record=_record(table, r)))
    return out


def _record(table: Table, row: Row) -> str:
    key = table.primary_key or (table.columns[0].name,)
    return "/".join(str(row.get(k)) for k in key)


def encode_text(table: Table, rows: list[Row], *, header: bool = True) -> str:
    """The CSV text of rows (with the header line unless told otherwise)."""
    columns = [_column_text(table, c, rows) for c in table.columns]
    body = "".join(",".join(cells) + "\n" for cells in zip(*columns, strict=True))
    return (_header_line(table) if header else "") + body


def encode_rows(table: Table, rows: Iterable[Row]) -> bytes:
    """The CSV bytes of a table: header, one line per row, LF line ends, UTF-8, RFC 4180 quoting."""
    return encode_text(table, list(rows)).encode("utf-8")


def thermo_text(species: Mapping[str, Mapping], step: float = THERMO_STEP_K,
                tick: Callable[[int], None] | None = None) -> str:
    """thermo_table.csv as text, written straight from each species' block of derived values (the table
    is the largest of a bundle; no row dictionaries are built for it)."""
    from ..thermo.batch import derived_tables

    table = TABLE_BY_NAME["thermo_table"]
    parts = [_header_line(table)]
    picked = []  # (position among all species, for the progress ticks; identifier)
    for n, ident in enumerate(sorted(species)):
        rec = species[ident]
        props = rec.get("properties") if isinstance(rec.get("properties"), dict) else {}
        if isinstance(rec.get("cp_model"), dict) and isinstance(props.get("S298"), dict):
            picked.append((n, ident))
    # One batched evaluation for every species (the same floats as thermo.derived_table per species).
    results = derived_tables([species[ident] for _, ident in picked], step)
    for (n, ident), result in zip(picked, results, strict=True):
        if tick is not None:
            tick(n)
        if result is None or not result.tmin <= 298.15 <= result.tmax:
            continue
        block = result.values
        if not math.isfinite(float(block.sum())):
            raise InputError("the derived thermodynamic table holds a value that is not finite",
                             file=table.path, record=ident, field="cp_model")
        lead = format_cell(ident, table.columns[0], file=table.path, record=ident)
        parts.extend(f"{lead},{a!r},{b!r},{c!r},{d!r},{e!r}\n" for a, b, c, d, e in block.tolist())
    return "".join(parts)


def _parse_column(column: Column, texts: tuple[str, ...]) -> list[Any] | None:
    """Typed values of one column's cells in one pass, or None when any cell needs a closer look (the
    caller then parses cell by cell, which names the line and the reason)."""
    if column.type == "number":
        try:
            values = [float(t) if t else None for t in texts]
        except ValueError:
            return None
        for v in values:
            if v is None:
                if column.required:
                    return None
            elif v - v != 0.0:  # not finite
                return None
        return values
    if column.type == "string":
        if column.required and "" in texts:
            return None
        lead = FORBIDDEN_LEAD
        for t in texts:
            if t and t[0] in lead:
                return None
        if column.enum and not set(texts) <= {"", *column.enum}:
            return None
        return [t if t else None for t in texts]
    return None  # integers and booleans: few columns, parsed cell by cell


def decode_rows(table: Table, data: bytes, *, keep: bool = True, limit: int = 20, canonical: bool = True,
                ) -> tuple[list[Row], list[str], dict[str, set]]:
    """Typed rows of a table's CSV bytes, the problems met, and the set of values of each column that
    a foreign key points from (for the caller to check against the referenced table).

    Problems: not UTF-8, header, cell types, required cells, enumerations, duplicate primary keys, and
    (``canonical``) bytes that differ from what a release writes for the same rows (CR LF, "1.50" for
    1.5, needless quotes). At most ``limit`` problems are listed one by one; the rest are counted.
    """
    import csv
    import hashlib
    import io

    problems: list[str] = []
    more = 0

    def problem(text: str) -> None:
        nonlocal more
        if len(problems) < limit:
            problems.append(text)
        else:
            more += 1

    refs: dict[str, set] = {f[0]: set() for f, _, _ in table.foreign_keys}
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        return [], [f"is not UTF-8 text (byte {exc.start})"], refs
    reader = csv.reader(io.StringIO(text, newline=""), strict=True)
    try:
        header = next(reader, None)
    except csv.Error as exc:
        return [], [f"header does not parse as CSV ({exc})"], refs
    if header != table.header:
        found = ",".join(header or [])[:200]
        return [], [f"header is {found!r}, expected {','.join(table.header)[:200]!r}"], refs
    cols = table.columns
    names = [c.name for c in cols]
    pk = [names.index(k) for k in table.primary_key]
    ref_at = {name: names.index(name) for name in refs}
    rows: list[Row] = []
    seen: set[tuple] = set()
    again = hashlib.sha256(_header_line(table).encode("utf-8"))
    state = {"ok": True}

    def take(cells: list[list[str]], numbers: list[int]) -> None:
        """Parse a chunk of lines column by column, then check keys and (optionally) canonical bytes."""
        parsed = []
        for j, (col, texts) in enumerate(zip(cols, zip(*cells, strict=True), strict=True)):
            values = _parse_column(col, texts)
            if values is None:
                values = []
                for k, t in enumerate(texts):
                    try:
                        values.append(parse_cell(t, col))
                    except ValueError as exc:
                        problem(f"row {numbers[k]}, column {names[j]}: {exc}")
                        values.append(None)
                        state["ok"] = False
            parsed.append(values)
        tuples = list(zip(*parsed, strict=True))
        if pk:
            keys = list(map(operator.itemgetter(*pk), tuples))
            fresh = set(keys)
            if len(fresh) != len(keys) or not seen.isdisjoint(fresh):
                local: set = set()
                for k, key in enumerate(keys):
                    if key in seen or key in local:
                        shown = ", ".join(map(str, key)) if isinstance(key, tuple) else str(key)
                        problem(f"row {numbers[k]}: primary key ({shown}) appears twice")
                    local.add(key)
            seen.update(fresh)
        for name, i in ref_at.items():
            refs[name].update(v for v in parsed[i] if v is not None)
        chunk = [dict(zip(names, vals, strict=True)) for vals in tuples]
        if canonical and state["ok"]:
            try:
                again.update(encode_text(table, chunk, header=False).encode("utf-8"))
            except InputError as exc:
                problem(str(exc))
                state["ok"] = False
        if keep:
            rows.extend(chunk)

    # Rows are numbered as records, the header being row 1 (a quoted cell may span lines).
    cells: list[list[str]] = []
    numbers: list[int] = []
    row_no = 1
    try:
        for row_no, row_cells in enumerate(reader, start=2):
            if len(row_cells) != len(cols):
                problem(f"row {row_no}: {len(row_cells)} cells, expected {len(cols)}")
                state["ok"] = False
                continue
            cells.append(row_cells)
            numbers.append(row_no)
            if len(cells) >= 20000:
                take(cells, numbers)
                cells, numbers = [], []
    except csv.Error as exc:
        problem(f"row {row_no + 1}: does not parse as CSV ({exc})")
        state["ok"] = False
    if cells:
        take(cells, numbers)
    if canonical and state["ok"] and not problems and again.digest() != hashlib.sha256(data).digest():
        # Same rows, other bytes (CR LF line ends, "1.50" for 1.5, needless quotes): not as written.
        problem("is not in the canonical form a release writes (same values, other bytes)")
    if more:
        problems.append(f"and {more} more problems")
    return rows, problems, refs
