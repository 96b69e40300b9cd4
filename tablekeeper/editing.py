"""Editing one species record: field texts in, a would-be record, its problems and the save out.

Both faces edit through this module. An editor holds the record as loaded (``original``) and the texts
the user typed, one per field path (``name``, ``properties.dfH298.value``, ...). ``RecordEdit.result``
applies every typed text to a copy of the original and validates the result: unit parsing and
conversion (``-68.3 kcal/mol`` becomes the canonical kJ/mol value, keeping what was entered), then the
species JSON Schema. Nothing here touches the disk except ``save_edit`` and ``apply_unit_fix``, which
go through ``Dataset.save`` (revision check, atomic write, journal line with the user's reason).

The same module edits a record's Cp(T) model one number at a time (paths such as
``cp_model.ranges.1.a.0``, the whole model removed by emptying ``cp_model``), and measured reactions
(``apply_reaction_edit``, ``save_reaction``, ``delete_reaction``), each checked as the user types.

Numbers are shown in the shortest text that reads back as the same float (``repr``), never rounded to
a fixed number of decimals, so that what a user sees is exactly what is stored.
"""

from __future__ import annotations

import copy
import math
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

from . import formula as _formula
from . import validation
from .errors import FormulaError, InputError, UnitError
from .model import FIELDS, LABELS, METHODS, PHASES, STATUSES
from .store import SLUG, Dataset, flatten
from .units import FIELD_KINDS, canonical_unit, factor_to_canonical, parse_quantity

#: Sub-fields of a property value that an editor offers, in order.
PROPERTY_PARTS: tuple[str, ...] = ("value", "uncertainty", "coverage", "source", "method")

#: Top-level fields an editor offers, in order (id and revision are never edited).
SCALAR_FIELDS: tuple[str, ...] = ("name", "formula", "phase", "form", "charge", "status", "reference_state",
                                  "cas", "notes")

#: Units a unit slip is usually made in, per field kind, tried when naming what was entered by mistake.
_SLIP_UNITS = {
    "molar energy": ("kcal/mol", "J/mol", "cal/mol", "MJ/mol"),
    "molar entropy": ("cal/(mol*K)", "kJ/(mol*K)", "mJ/(mol*K)", "kcal/(mol*K)"),
}
_TRUE = {"yes", "y", "true", "1"}
_FALSE = {"no", "n", "false", "0"}


@dataclass(frozen=True)
class FieldSpec:
    """One editable field: its dotted path in the record and how to label it."""

    path: str
    label: str
    prop: str | None = None  # dfH298 ... for the parts of a property value
    part: str | None = None

    @property
    def unit(self) -> str | None:
        if self.prop and self.part in ("value", "uncertainty"):
            return canonical_unit(self.prop)
        return None


def _specs() -> tuple[FieldSpec, ...]:
    out = [FieldSpec(name, name.replace("_", " ")) for name in SCALAR_FIELDS]
    for prop in FIELDS:
        for part in PROPERTY_PARTS:
            out.append(FieldSpec(f"properties.{prop}.{part}", f"{LABELS[prop]} {part}", prop, part))
    return tuple(out)


#: Every editable field, in the order an editor shows them.
EDIT_FIELDS: tuple[FieldSpec, ...] = _specs()
SPEC_BY_PATH: dict[str, FieldSpec] = {s.path: s for s in EDIT_FIELDS}


def number_text(value: Any) -> str:
    """The shortest text that reads back as the stored number (``repr`` of a float); '' for none."""
    if value is None or isinstance(value, bool):
        return ""
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return ""
        return repr(value)
    return str(value)


def field_path(finding_field: str | None) -> str | None:
    """The editor field a finding's field names: ``dfH298`` or a JSON pointer such as
    ``/properties/dfH298/uncertainty``. None when the editor has no such field (cp_model, ...)."""
    if not finding_field:
        return None
    parts = [p for p in finding_field.strip("/").split("/" if "/" in finding_field else ".") if p]
    if not parts:
        return None
    if parts[0] in FIELDS:
        parts = ["properties", *parts]
    if parts[0] == "properties" and len(parts) >= 2 and parts[1] in FIELDS:
        part = parts[2] if len(parts) >= 3 and parts[2] in PROPERTY_PARTS else "value"
        return f"properties.{parts[1]}.{part}"
    return parts[0] if parts[0] in SCALAR_FIELDS else None


def editor_path(finding_field: str | None) -> str | None:
    """The editor field a finding's (or a flag's) field belongs to: as ``field_path``, and the Cp(T)
    model (``cp_model``) for a field inside it."""
    path = field_path(finding_field)
    if path is None and finding_field:
        head = finding_field.strip("/").split("/")[0].split(".")[0]
        if head == "cp_model":
            return head
    return path


def field_text(record: Mapping, path: str) -> str:
    """The text an editor shows for a field of a record."""
    if is_cp_path(path):
        return cp_field_text(record, path)
    spec = SPEC_BY_PATH.get(path)
    if spec is None:
        raise InputError(f"{path!r} is not an editable field", record=record.get("id"), field=path)
    if spec.prop:
        prop = (record.get("properties") or {}).get(spec.prop)
        if not isinstance(prop, Mapping):
            return ""
        v = prop.get(spec.part)
        if spec.part in ("value", "uncertainty", "coverage"):
            return number_text(v)
        return "" if v is None else str(v)
    v = record.get(path)
    if path == "reference_state":
        return "" if v is None else ("yes" if v else "no")
    if path == "charge":
        return number_text(v)
    return "" if v is None else str(v)


@dataclass
class EditResult:
    """A would-be record and what an editor shows beside each field."""

    record: dict
    problems: dict[str, str] = field(default_factory=dict)  # path -> reason; any problem blocks a save
    notes: dict[str, str] = field(default_factory=dict)  # path -> information (a conversion made)

    @property
    def ok(self) -> bool:
        return not self.problems

    def sentences(self) -> list[str]:
        """Each problem as one sentence naming the record and field."""
        ident = self.record.get("id")
        return [str(InputError(reason, record=ident, field=path)) for path, reason in self.problems.items()]


def _parse_number(text: str) -> float:
    try:
        v = float(text.strip().replace("−", "-"))
    except ValueError:
        raise ValueError(f"{text.strip()[:40]!r} is not a number") from None
    if not math.isfinite(v):
        raise ValueError(f"{text.strip()[:40]!r} is not a finite number")
    return v


def _apply_scalar(rec: dict, path: str, text: str) -> str | None:
    """Set a top-level field from its text; return a note or None. Raises ValueError with a reason."""
    t = text.strip()
    if path in ("name", "notes", "cas", "form"):
        if not t:
            rec.pop(path, None)
            return None
        if path == "form" and not SLUG.match(t):
            raise ValueError(f"{t[:40]!r} is not a form label: use a-z, 0-9, '.', '_', '-'")
        # Free text keeps the user's spacing inside; only the ends are trimmed.
        rec[path] = t
        return None
    if path == "formula":
        if not t:
            raise ValueError("a species needs a formula")
        try:
            parsed = _formula.parse(t)
        except FormulaError as exc:
            raise ValueError(exc.reason) from None
        rec[path] = t
        charge = f", charge {parsed.charge:+d}" if parsed.charge else ""
        return f"{parsed.hill}, {parsed.molar_mass:.4f} g/mol{charge}"
    if path == "phase":
        if t not in PHASES:
            raise ValueError(f"{t[:20]!r} is not a phase: use one of {', '.join(PHASES)}")
        rec[path] = t
        return None
    if path == "status":
        if t not in STATUSES:
            raise ValueError(f"{t[:20]!r} is not a status: use one of {', '.join(STATUSES)}")
        rec[path] = t
        return None
    if path == "charge":
        try:
            rec[path] = int(t.replace("−", "-"))
        except ValueError:
            raise ValueError(f"{t[:20]!r} is not a whole number") from None
        return None
    if path == "reference_state":
        low = t.lower()
        if not low:
            rec.pop(path, None)
        elif low in _TRUE:
            rec[path] = True
        elif low in _FALSE:
            rec[path] = False
        else:
            raise ValueError(f"{t[:20]!r}: answer yes or no")
        return None
    raise ValueError(f"{path!r} is not an editable field")


def _apply_part(rec: dict, spec: FieldSpec, text: str) -> str | None:
    """Set one part of a property value; return a note or None. Raises ValueError with a reason."""
    assert spec.prop and spec.part
    props = rec.setdefault("properties", {})
    prop = props.get(spec.prop)
    t = text.strip()
    if spec.part == "value":
        if not t:
            props.pop(spec.prop, None)
            return "the value will be removed" if prop is not None else None
        try:
            canonical, unit, entered = parse_quantity(t, spec.prop)
            factor = factor_to_canonical(unit, spec.prop)
        except UnitError as exc:
            raise ValueError(exc.reason) from None
        if not math.isfinite(canonical):
            raise ValueError(f"{t[:40]!r} is not a finite number")
        new = dict(prop) if isinstance(prop, Mapping) else {}
        new["unit"] = canonical_unit(spec.prop)
        new.pop("entered", None)
        if factor == 1.0:
            new["value"] = float(entered)
            props[spec.prop] = new
            return None
        new["value"] = canonical
        new["entered"] = {"value": float(entered), "unit": unit}
        props[spec.prop] = new
        shown = f"{number_text(new['value'])} {new['unit']}"
        return f"= {shown} (entered {number_text(float(entered))} {unit}, kept)"
    if not isinstance(prop, Mapping):
        if t:
            raise ValueError(f"give the {LABELS[spec.prop]} value first")
        return None
    new = dict(prop)
    props[spec.prop] = new
    if spec.part == "uncertainty":
        if not t:
            new.pop("uncertainty", None)
            if isinstance(new.get("entered"), dict):
                new["entered"] = {k: v for k, v in new["entered"].items() if k != "uncertainty"}
            return None
        try:
            canonical, unit, entered = parse_quantity(t, spec.prop)
            factor = factor_to_canonical(unit, spec.prop)
        except UnitError as exc:
            raise ValueError(exc.reason) from None
        if canonical < 0:
            raise ValueError("an uncertainty cannot be negative")
        if factor == 1.0:
            new["uncertainty"] = float(entered)
            return None
        new["uncertainty"] = canonical
        if isinstance(new.get("entered"), dict) and new["entered"].get("unit") == unit:
            new["entered"] = dict(new["entered"], uncertainty=float(entered))
        return f"= {number_text(new['uncertainty'])} {new['unit']}"
    if spec.part == "coverage":
        if not t:
            new.pop("coverage", None)
            return None
        k = _parse_number(t)
        if not 0 < k <= 10:
            raise ValueError("the coverage factor k must be above 0 and at most 10")
        new["coverage"] = k
        return "expanded uncertainty U = k·u" if k != 1 else None
    if spec.part == "source":
        if not t:
            new.pop("source", None)
            return None
        if not SLUG.match(t):
            raise ValueError(f"{t[:40]!r} is not a source id: use a-z, 0-9, '.', '_', '-'")
        new["source"] = t
        return None
    if spec.part == "method":
        if not t:
            new.pop("method", None)
            return None
        if t not in METHODS:
            raise ValueError(f"{t[:20]!r} is not a method: use one of {', '.join(METHODS)}")
        new["method"] = t
        return None
    raise ValueError(f"{spec.path!r} is not an editable field")


def pointer_path(pointer: str) -> str:
    """The editor field a schema error's JSON pointer belongs to ('record' for the whole record)."""
    return field_path(pointer) or (pointer.strip("/").split("/")[0] if pointer.strip("/") else "record")


def build(original: Mapping, texts: Mapping[str, str], *, sources: Iterable[str] | None = None) -> EditResult:
    """Apply typed texts to a copy of ``original`` and validate the would-be record."""
    rec = copy.deepcopy(dict(original))
    result = EditResult(rec)
    known = set(sources) if sources is not None else None
    for spec in EDIT_FIELDS:  # fixed order: a property's value before its other parts
        if spec.path not in texts:
            continue
        try:
            note = _apply_part(rec, spec, texts[spec.path]) if spec.prop else \
                _apply_scalar(rec, spec.path, texts[spec.path])
        except ValueError as exc:
            result.problems[spec.path] = str(exc)
            continue
        if note:
            result.notes[spec.path] = note
    if known is not None:
        for prop in FIELDS:
            src = ((rec.get("properties") or {}).get(prop) or {}).get("source")
            path = f"properties.{prop}.source"
            if src and src not in known and path not in result.problems:
                result.notes[path] = f"no source named {src!r} yet: add it on the sources screen"
    cp_texts = {p: t for p, t in texts.items() if is_cp_path(p)}
    if cp_texts:
        _apply_cp_texts(rec, cp_texts, result)
    if not result.problems:
        for pointer, msg in validation.errors("species", rec):
            result.problems.setdefault(pointer_path(pointer), msg)
    if cp_texts and not result.problems and isinstance(rec.get("cp_model"), dict):
        # The schema checks shapes; the engine checks what it needs to compute (ordered ranges,
        # increasing points): an edited model must pass both before it can be saved.
        from .thermo import model_from_json

        try:
            model_from_json(rec["cp_model"])
        except InputError as exc:
            result.problems[CP_MODEL] = exc.reason
    return result


class RecordEdit:
    """The state of one editor: the record as loaded and the texts typed over it.

    Texts equal to the original's own text are dropped, so an untouched field never changes the record
    (the value and unit as entered are kept exactly).
    """

    def __init__(self, original: Mapping, *, sources: Iterable[str] | None = None) -> None:
        self.original: dict = copy.deepcopy(dict(original))
        self.texts: dict[str, str] = {}
        self.sources = set(sources) if sources is not None else None

    @property
    def ident(self) -> str:
        return str(self.original.get("id"))

    @property
    def revision(self) -> int:
        return int(self.original.get("revision", 0))

    def text(self, path: str) -> str:
        return self.texts.get(path, field_text(self.original, path))

    def set_text(self, path: str, text: str) -> None:
        if path not in SPEC_BY_PATH and not is_cp_path(path):
            raise InputError(f"{path!r} is not an editable field", record=self.ident, field=path)
        if text == field_text(self.original, path):
            self.texts.pop(path, None)
        else:
            self.texts[path] = text
        if path == CP_MODEL and path in self.texts and not text.strip():
            # Removing the model: typed coefficients of the model go with it.
            for other in [p for p in self.texts if p.startswith(CP_MODEL + ".")]:
                del self.texts[other]

    def undo_field(self, path: str) -> None:
        self.texts.pop(path, None)

    def undo_all(self) -> None:
        self.texts.clear()

    @property
    def dirty(self) -> list[str]:
        """Paths with a typed change, in editor order (the Cp(T) model's parts last)."""
        order = {f.path: i for i, f in enumerate(cp_fields(self.original))}
        return [s.path for s in EDIT_FIELDS if s.path in self.texts] + \
            sorted((p for p in self.texts if is_cp_path(p)), key=lambda p: (order.get(p, len(order)), p))

    def result(self) -> EditResult:
        return build(self.original, self.texts, sources=self.sources)

    def changes(self) -> list[FieldChange]:
        """What a save would change, field by field."""
        return diff(self.original, self.result().record)

    def rebase(self, theirs: Mapping) -> None:
        """Take the version on disk as the new base and keep the typed texts over it: "reload theirs and
        apply mine again". Texts that now equal the new base are dropped."""
        self.original = copy.deepcopy(dict(theirs))
        for path in list(self.texts):
            if self.texts[path] == field_text(self.original, path):
                del self.texts[path]

    def saved(self, record: Mapping) -> None:
        """After a successful save the saved record is the new base and nothing is pending."""
        self.original = copy.deepcopy(dict(record))
        self.texts.clear()


# -- differences ---------------------------------------------------------------------------------------

_ABSENT = object()


@dataclass(frozen=True)
class FieldChange:
    """One leaf that differs between two versions of a record."""

    field: str
    old: Any = None
    new: Any = None
    old_present: bool = True
    new_present: bool = True


def diff(old: Mapping | None, new: Mapping | None) -> list[FieldChange]:
    """Leaf-by-leaf differences (dotted paths), ignoring the revision counter."""
    a = flatten(dict(old or {}))
    b = flatten(dict(new or {}))
    out = []
    for key in sorted(set(a) | set(b)):
        if key == "revision":
            continue
        va, vb = a.get(key, _ABSENT), b.get(key, _ABSENT)
        if va is _ABSENT or vb is _ABSENT or va != vb or type(va) is not type(vb):
            out.append(FieldChange(key, None if va is _ABSENT else va, None if vb is _ABSENT else vb,
                                   va is not _ABSENT, vb is not _ABSENT))
    return out


@dataclass(frozen=True)
class ConflictRow:
    """One field in a conflict: the version both started from, mine and theirs."""

    field: str
    base: Any
    mine: Any
    theirs: Any
    mine_changed: bool
    theirs_changed: bool

    @property
    def clash(self) -> bool:
        """Both changed the field, to different values."""
        return self.mine_changed and self.theirs_changed and self.mine != self.theirs


def conflict_rows(base: Mapping, mine: Mapping, theirs: Mapping | None) -> list[ConflictRow]:
    """Every field that I or they changed since ``base``; ``theirs`` None means they deleted it."""
    b, m, t = flatten(dict(base)), flatten(dict(mine)), flatten(dict(theirs or {}))
    rows = []
    for key in sorted(set(b) | set(m) | set(t)):
        if key == "revision":
            continue
        vb, vm, vt = b.get(key, _ABSENT), m.get(key, _ABSENT), t.get(key, _ABSENT)
        mc, tc = vm != vb, vt != vb
        if mc or tc:
            rows.append(ConflictRow(key, None if vb is _ABSENT else vb, None if vm is _ABSENT else vm,
                                    None if vt is _ABSENT else vt, mc, tc))
    return rows


# -- saving --------------------------------------------------------------------------------------------

def save_edit(dataset: Dataset, edit: RecordEdit, reason: str) -> dict:
    """Save the edited record with the user's reason (journaled) and return it as saved. Refuses an
    invalid record or an empty reason with InputError; raises ConflictError (both versions inside) when
    someone saved first. The editor is not changed: the caller makes the saved record its new base
    (``RecordEdit.saved``) on its own thread."""
    dataset.require("edit")
    reason = (reason or "").strip()
    if not reason:
        raise InputError("a save needs a reason for the journal", record=edit.ident, field="reason")
    result = edit.result()
    if not result.ok:
        raise InputError(result.sentences()[0].split(": ", 1)[-1], record=edit.ident,
                         field=next(iter(result.problems)))
    if not diff(edit.original, result.record):
        raise InputError("nothing to save: no field differs from the record as loaded", record=edit.ident)
    return dataset.save("species", result.record, expected_revision=edit.revision, reason=reason)


def slip_unit(field_name: str, observed: float, expected: float) -> str | None:
    """The unit a value was probably typed in, when ``expected`` is ``observed`` in that unit converted to
    the canonical one (kcal/mol typed into a kJ/mol field: expected = 4.184 × observed)."""
    kind = FIELD_KINDS.get(field_name)
    if kind is None or not observed or not math.isfinite(observed) or not math.isfinite(expected):
        return None
    ratio = expected / observed
    for unit in _SLIP_UNITS[kind.name]:
        if math.isclose(ratio, factor_to_canonical(unit, field_name), rel_tol=1e-9):
            return unit
    return None


def unit_fix(record: Mapping, finding: Any) -> dict:
    """The record with a ``unit-suspect`` finding's correction applied: the field's value becomes the
    finding's expected canonical value, and the stored number is kept as what was entered, in the unit
    the slip was made in. The uncertainty is left as it is: whether it was typed in the same unit is not
    known, and the user sees it beside the value.

    Refuses (InputError) a finding of another check, or one that no longer matches the record.
    """
    ident = record.get("id")
    if getattr(finding, "check", None) != "unit-suspect":
        raise InputError("only a unit-suspect finding carries a unit correction", record=ident)
    fld = finding.field
    path = field_path(fld)
    if path is None or not path.endswith(".value"):
        raise InputError(f"the finding names no property value ({fld!r})", record=ident)
    prop_name = path.split(".")[1]
    expected = finding.expected
    if expected is None or not math.isfinite(expected):
        raise InputError("the finding gives no corrected value", record=ident, field=prop_name)
    prop = (record.get("properties") or {}).get(prop_name)
    if not isinstance(prop, Mapping) or not isinstance(prop.get("value"), int | float):
        raise InputError("the record has no such value any more", record=ident, field=prop_name)
    current = float(prop["value"])
    if finding.observed is not None and not math.isclose(current, finding.observed, rel_tol=1e-12, abs_tol=0):
        raise InputError(f"the value is now {number_text(current)}, not the {number_text(finding.observed)} "
                         "the check saw; run the checks again", record=ident, field=prop_name)
    new = copy.deepcopy(dict(record))
    value = dict(prop, value=float(expected), unit=canonical_unit(prop_name))
    unit = slip_unit(prop_name, current, float(expected))
    if unit:
        value["entered"] = {"value": current, "unit": unit}
    else:
        value.pop("entered", None)
    new["properties"][prop_name] = value
    return new


def apply_unit_fix(dataset: Dataset, finding: Any, *, reason: str | None = None) -> dict:
    """Load the finding's record, apply its unit correction and save it, journaled."""
    dataset.require("edit")
    if not finding.species:
        raise InputError("the finding names no species")
    record = dataset.load("species", finding.species)
    new = unit_fix(record, finding)
    errs = validation.errors("species", new)
    if errs:
        raise InputError(errs[0][1], record=finding.species, field=pointer_path(errs[0][0]))
    prop_name = str(field_path(finding.field)).split(".")[1]
    old = record["properties"][prop_name]["value"]
    why = reason or (f"unit-suspect fix of {prop_name}: {number_text(old)} -> "
                     f"{number_text(new['properties'][prop_name]['value'])} {canonical_unit(prop_name)}")
    return dataset.save("species", new, expected_revision=int(record.get("revision", 0)), reason=why)


def save_cp_model(dataset: Dataset, record: Mapping, model: Mapping, reason: str) -> dict:
    """Replace a record's ``cp_model`` (for instance with a fitted model), journaled with ``reason``.

    ``record`` is the record as the user saw it: its revision is the one expected on disk, so a save by
    someone else in between gives a ConflictError rather than being overwritten. The old model (a
    tabulated model's points included) stays in the journal's field-level old values.
    """
    dataset.require("edit")
    ident = str(record.get("id"))
    reason = (reason or "").strip()
    if not reason:
        raise InputError("a save needs a reason for the journal", record=ident, field="reason")
    new = copy.deepcopy(dict(record))
    new["cp_model"] = copy.deepcopy(dict(model))
    errs = validation.errors("species", new)
    if errs:
        raise InputError(errs[0][1], record=ident, field=pointer_path(errs[0][0]))
    return dataset.save("species", new, expected_revision=int(record.get("revision", 0)), reason=reason)


# -- sources -------------------------------------------------------------------------------------------

#: Fields of a source an editor offers, in order; authors are one text separated by ';'.
SOURCE_FIELDS: tuple[str, ...] = ("id", "title", "authors", "year", "identifier", "kind", "notes")
SOURCE_KINDS: tuple[str, ...] = ("journal", "compilation", "report", "internal", "handbook", "other")


def source_text(record: Mapping | None, name: str) -> str:
    """The text an editor shows for a field of a source."""
    v = (record or {}).get(name)
    if v is None:
        return ""
    if name == "authors" and isinstance(v, list):
        return "; ".join(str(a) for a in v)
    return str(v)


def build_source(original: Mapping | None, texts: Mapping[str, str]) -> EditResult:
    """A would-be source from typed texts over ``original`` (None for a new source), schema-checked."""
    rec: dict = copy.deepcopy(dict(original)) if original else {}
    result = EditResult(rec)
    for name in SOURCE_FIELDS:
        if name not in texts:
            continue
        t = texts[name].strip()
        if name == "id":
            if original is not None and t != original.get("id"):
                result.problems[name] = "the id of an existing source cannot change"
            elif not SLUG.match(t):
                result.problems[name] = f"{t[:40]!r} is not an id: use a-z, 0-9, '.', '_', '-'"
            else:
                rec["id"] = t
        elif not t:
            rec.pop(name, None)
        elif name == "authors":
            rec[name] = [a.strip() for a in t.split(";") if a.strip()]
        elif name == "year":
            try:
                rec[name] = int(t)
            except ValueError:
                result.problems[name] = f"{t[:20]!r} is not a year"
        elif name == "kind" and t not in SOURCE_KINDS:
            result.problems[name] = f"{t[:20]!r} is not a kind: use one of {', '.join(SOURCE_KINDS)}"
        else:
            rec[name] = t
    rec.setdefault("revision", 1)  # the schema wants one; the store sets the real number on save
    if not result.problems:
        for pointer, msg in validation.errors("sources", rec):
            name = pointer.strip("/").split("/")[0] or "record"
            result.problems.setdefault(name, msg)
    return result


def save_source(dataset: Dataset, original: Mapping | None, texts: Mapping[str, str],
                reason: str | None = None) -> dict:
    """Validate and save a source (new when ``original`` is None); InputError names the field."""
    dataset.require("edit")
    result = build_source(original, texts)
    ident = result.record.get("id")
    if not result.ok:
        name, reason_text = next(iter(result.problems.items()))
        raise InputError(reason_text, record=ident, field=name)
    if original is None and ident in dataset.ids("sources"):
        raise InputError("a source with this id exists already", record=ident, field="id")
    expected = None if original is None else int(original.get("revision", 0))
    why = reason or (f"source {ident} added" if original is None else f"source {ident} edited")
    return dataset.save("sources", result.record, expected_revision=expected, reason=why)


# -- the Cp(T) model -----------------------------------------------------------------------------------
# A record's model is edited part by part through the same texts as the other fields, under paths that
# mirror its JSON (``cp_model.ranges.1.a.0`` is a1 of the second range): one number per text, so a
# steward corrects one coefficient or one range bound and the rest of the model stays exactly as stored.
# The path ``cp_model`` itself stands for the whole model: its text is a summary, and emptying it
# removes the model.

#: The editor path of the whole model.
CP_MODEL = "cp_model"
_SHOMATE_COEFFS = ("A", "B", "C", "D", "E", "F", "G", "H")
_SHOMATE_OPTIONAL = ("F", "G", "H")  # the integration constants, optional in the schema
_CP_PATH = re.compile(r"^cp_model(?:\.source|\.ranges\.\d{1,4}\.(?:tmin|tmax|[A-H]|a\.[0-6])"
                      r"|\.points\.\d{1,5}\.[01])?\Z")


def is_cp_path(path: str) -> bool:
    """Whether an editor path names the Cp(T) model or one of its parts."""
    return bool(_CP_PATH.match(path))


@dataclass(frozen=True)
class CpField:
    """One editable part of a Cp(T) model: its path, its label, its unit ('' for a plain number)."""

    path: str
    label: str
    unit: str = ""


def cp_fields(record: Mapping) -> list[CpField]:
    """The editable parts of a record's model in the order an editor shows them: the model, its source,
    then each range's bounds and coefficients (NASA a1..a7 of Cp/R; Shomate A..E and the constants F, G,
    H) or each tabulated (T, Cp) point. Empty when the record has no model."""
    model = record.get(CP_MODEL)
    if not isinstance(model, Mapping):
        return []
    out = [CpField(CP_MODEL, "model"), CpField(f"{CP_MODEL}.source", "model source")]
    kind = model.get("kind")
    if kind == "tabulated":
        points = model.get("points")
        for i in range(len(points) if isinstance(points, list) else 0):
            out.append(CpField(f"{CP_MODEL}.points.{i}.0", f"point {i + 1} T", "K"))
            out.append(CpField(f"{CP_MODEL}.points.{i}.1", f"point {i + 1} Cp", "J/(mol*K)"))
        return out
    ranges = model.get("ranges")
    for i in range(len(ranges) if isinstance(ranges, list) else 0):
        base = f"{CP_MODEL}.ranges.{i}"
        out += [CpField(f"{base}.tmin", f"range {i + 1} tmin", "K"),
                CpField(f"{base}.tmax", f"range {i + 1} tmax", "K")]
        if kind == "nasa7":
            out += [CpField(f"{base}.a.{j}", f"range {i + 1} a{j + 1}") for j in range(7)]
        elif kind == "shomate":
            out += [CpField(f"{base}.{k}", f"range {i + 1} {k}") for k in _SHOMATE_COEFFS]
    return out


def cp_summary(model: Any) -> str:
    """A model in a few words: kind and number of ranges or points."""
    if not isinstance(model, Mapping):
        return ""
    kind = str(model.get("kind", "?"))
    if kind == "tabulated":
        n = len(model.get("points") or [])
        return f"tabulated, {n} point{'s' if n != 1 else ''}"
    n = len(model.get("ranges") or [])
    return f"{kind}, {n} range{'s' if n != 1 else ''}"


def cp_span(model: Any) -> str:
    """A model's validity range as stored (first tmin to last tmax, or first to last point), '' if none."""
    if not isinstance(model, Mapping):
        return ""
    try:
        if model.get("kind") == "tabulated":
            pts = model.get("points") or []
            return f"{number_text(pts[0][0])}–{number_text(pts[-1][0])} K" if pts else ""
        ranges = model.get("ranges") or []
        return f"{number_text(ranges[0].get('tmin'))}–{number_text(ranges[-1].get('tmax'))} K" if ranges else ""
    except (AttributeError, IndexError, KeyError, TypeError):
        return ""


def _cp_parts(path: str) -> list[str]:
    return path.split(".")[1:]


def _cp_get(model: Any, path: str) -> Any:
    obj = model
    for part in _cp_parts(path):
        obj = obj[int(part)] if isinstance(obj, list) else obj[part]
    return obj


def cp_field_text(record: Mapping, path: str) -> str:
    """The text an editor shows for the model (its summary) or one of its parts ('' when absent)."""
    model = record.get(CP_MODEL)
    if path == CP_MODEL:
        return cp_summary(model)
    try:
        value = _cp_get(model, path)
    except (KeyError, IndexError, TypeError, ValueError):
        return ""
    if value is None:
        return ""
    return number_text(value) if isinstance(value, int | float) else str(value)


def _apply_cp(rec: dict, path: str, text: str) -> str | None:
    """Set one part of the record's model from its text (or remove the model); return a note or None.
    Raises ValueError with a reason."""
    t = text.strip()
    model = rec.get(CP_MODEL)
    if path == CP_MODEL:
        if not t:
            if model is None:
                return None
            del rec[CP_MODEL]
            return "the whole Cp(T) model will be removed when you save (ctrl+z keeps it)"
        if t == cp_summary(model):
            return None
        raise ValueError("this line only removes the model (empty it, or ctrl+d); edit the ranges, "
                         "coefficients and points on their own lines")
    if not isinstance(model, dict):
        raise ValueError("the record has no Cp(T) model (any more)")
    parts = _cp_parts(path)
    if parts == ["source"]:
        if not t:
            model.pop("source", None)
            return None
        if not SLUG.match(t):
            raise ValueError(f"{t[:40]!r} is not a source id: use a-z, 0-9, '.', '_', '-'")
        model["source"] = t
        return None
    try:
        container: Any = model
        for part in parts[:-1]:
            container = container[int(part)] if isinstance(container, list) else container[part]
        last = parts[-1]
        if isinstance(container, list):
            if not 0 <= int(last) < len(container):
                raise IndexError(last)
        elif not isinstance(container, dict):
            raise TypeError(last)
    except (KeyError, IndexError, TypeError, ValueError):
        raise ValueError("the model has no such part (its shape changed?)") from None
    if not t:
        if isinstance(container, dict) and last in _SHOMATE_OPTIONAL and model.get("kind") == "shomate":
            container.pop(last, None)
            return f"the constant {last} will be removed"
        raise ValueError("a number is needed here")
    value: float | int = _parse_number(t)
    old = container[int(last)] if isinstance(container, list) else container.get(last)
    if isinstance(old, int) and not isinstance(old, bool) and float(value).is_integer():
        value = int(value)  # a bound stored as 1000 stays 1000 when retyped, not 1000.0
    if isinstance(container, list):
        container[int(last)] = value
    else:
        container[last] = value
    return None


def _apply_cp_texts(rec: dict, texts: Mapping[str, str], result: EditResult) -> None:
    """Apply the model texts of an editor in a fixed order: the removal first, then the parts."""
    removing = CP_MODEL in texts and not texts[CP_MODEL].strip()
    for path in sorted(texts, key=lambda p: (p != CP_MODEL, p)):
        if removing and path != CP_MODEL:
            result.problems[path] = "the model is being removed: ctrl+z on the model line keeps it"
            continue
        try:
            note = _apply_cp(rec, path, texts[path])
        except ValueError as exc:
            result.problems[path] = str(exc)
            continue
        if note:
            result.notes[path] = note


def apply_cp_edit(record: Mapping, path: str, text: str) -> dict:
    """The record with one part of its Cp(T) model set from ``text`` (a coefficient, a range bound, a
    point or the model's source; for ``cp_model`` itself, an empty text removes the model). The result is
    checked against the species schema and by ``tablekeeper.thermo.model_from_json``; InputError names
    the record and the field."""
    ident = record.get("id")
    if not is_cp_path(path):
        raise InputError(f"{path!r} is not a part of a Cp(T) model", record=ident, field=path)
    result = build(record, {path: text})
    if not result.ok:
        where, reason = next(iter(result.problems.items()))
        raise InputError(reason, record=ident, field=where)
    return result.record


def remove_cp_model(record: Mapping) -> dict:
    """The record without its Cp(T) model; InputError when it has none."""
    if not isinstance(record.get(CP_MODEL), Mapping):
        raise InputError("the record has no Cp(T) model to remove", record=record.get("id"), field=CP_MODEL)
    return apply_cp_edit(record, CP_MODEL, "")


@dataclass(frozen=True)
class BreakValues:
    """Cp, H and S at a break between two ranges, from each range's own coefficients (H in kJ/mol, Cp
    and S in J/(mol·K); H and S None where a range carries no integration constants)."""

    T: float
    below: int  # index of the range below the break
    cp_below: float
    cp_above: float
    h_below: float | None = None
    h_above: float | None = None
    s_below: float | None = None
    s_above: float | None = None


def cp_breaks(model: Mapping) -> list[BreakValues]:
    """The values on both sides of every break of a model (``tablekeeper.thermo``'s ``segment_values``);
    InputError when the model is malformed. A tabulated model has no breaks."""
    from .thermo import model_from_json

    m = model_from_json(dict(model))

    def f(x: Any) -> float | None:
        return None if x is None else float(x)

    out = []
    for i, tb in enumerate(m.breaks):
        left, right = m.segment_values(i, tb), m.segment_values(i + 1, tb)
        out.append(BreakValues(float(tb), i, float(left[0]), float(right[0]), f(left[1]), f(right[1]),
                               f(left[2]), f(right[2])))
    return out


def cp_findings(record: Mapping, meta: Mapping | None = None) -> list:
    """The findings the cp-model and cp-continuity checks give for one (would-be) record: the same
    checks as ``tablekeeper check``, run on this record alone."""
    from .checks import Context, run

    ctx = Context.from_records(dict(meta or {}), {str(record.get("id")): dict(record)})
    return run(ctx, only=["cp-model", "cp-continuity"]).findings


def _open_leaves(obj: Any, prefix: str = "") -> dict[str, Any]:
    """Dotted paths to leaves, lists opened too (``cp_model.ranges.1.a.0``)."""
    if isinstance(obj, dict):
        out: dict[str, Any] = {}
        for k, v in obj.items():
            out.update(_open_leaves(v, f"{prefix}.{k}" if prefix else k))
        return out
    if isinstance(obj, list) and prefix.startswith(CP_MODEL):
        out = {}
        for i, v in enumerate(obj):
            out.update(_open_leaves(v, f"{prefix}.{i}"))
        return out
    return {prefix: obj}


def detailed_changes(old: Mapping, new: Mapping) -> list[FieldChange]:
    """What an edit changes, for a person to read: as ``diff``, but a Cp(T) model's changed coefficients,
    bounds and points are named one by one (``cp_model range 2 a1``), and a removed or added model is one
    line. The journal keeps the store's own field-level record."""
    old_m, new_m = old.get(CP_MODEL), new.get(CP_MODEL)
    plain = [c for c in diff(old, new) if not is_cp_path(c.field.split(".")[0])]
    if isinstance(old_m, Mapping) != isinstance(new_m, Mapping):
        return [*plain, FieldChange(CP_MODEL, cp_summary(old_m) or None, cp_summary(new_m) or None,
                                    isinstance(old_m, Mapping), isinstance(new_m, Mapping))]
    if not isinstance(old_m, Mapping):
        return plain
    fields = cp_fields(old) + cp_fields(new)
    labels = {f.path: f.label for f in fields}
    order = {f.path: i for i, f in reversed(list(enumerate(fields)))}
    a, b = _open_leaves({CP_MODEL: old_m}), _open_leaves({CP_MODEL: new_m})
    out = []
    for key in sorted(set(a) | set(b), key=lambda k: (order.get(k, len(order)), k)):
        va, vb = a.get(key, _ABSENT), b.get(key, _ABSENT)
        if va is _ABSENT or vb is _ABSENT or va != vb or type(va) is not type(vb):
            name = f"{CP_MODEL} {labels[key]}" if key in labels else key
            out.append(FieldChange(name, None if va is _ABSENT else va, None if vb is _ABSENT else vb,
                                   va is not _ABSENT, vb is not _ABSENT))
    return plain + out


# -- measured reactions --------------------------------------------------------------------------------
# A reaction record (reactions/<id>.json) is edited as texts by field name, like a source: the equation,
# the temperature, each measured quantity's value and standard uncertainty, the source and the notes.
# The would-be record is checked against the reaction schema and its equation is parsed and balanced
# against the species the user sees (tablekeeper.thermo.parse_equation, balance).

#: Fields of a reaction an editor offers, in order.
REACTION_FIELDS: tuple[str, ...] = ("id", "equation", "temperature_K", "drH.value", "drH.uncertainty",
                                    "drG.value", "drG.uncertainty", "logK.value", "logK.uncertainty",
                                    "source", "notes")
#: The measured quantities: record key -> (label, canonical unit, the species field whose units apply).
REACTION_QUANTITIES: dict[str, tuple[str, str, str | None]] = {
    "drH": ("ΔrH°", "kJ/mol", "dfH298"),
    "drG": ("ΔrG°", "kJ/mol", "dfG298"),
    "logK": ("log10 K", "", None),
}


def reaction_text(record: Mapping | None, name: str) -> str:
    """The text an editor shows for a field of a reaction ('' when absent)."""
    rec = record or {}
    if "." in name:
        key, part = name.split(".", 1)
        obj = rec.get(key)
        v = obj.get(part) if isinstance(obj, Mapping) else None
    else:
        v = rec.get(name)
    if v is None:
        return ""
    return number_text(v) if isinstance(v, int | float) and not isinstance(v, bool) else str(v)


def _reaction_number(text: str, key: str) -> tuple[float, str | None]:
    """A measured value or uncertainty from its text: (canonical value, note of a conversion or None).
    ΔrH° and ΔrG° may be typed with an energy unit (kcal/mol); log10 K is a plain number."""
    unit_field = REACTION_QUANTITIES[key][2]
    if unit_field is None:
        return _parse_number(text), None
    try:
        canonical, unit, entered = parse_quantity(text.strip(), unit_field)
        factor = factor_to_canonical(unit, unit_field)
    except UnitError as exc:
        raise ValueError(exc.reason) from None
    if factor == 1.0:
        return float(entered), None
    value = canonical  # parse_quantity converts through units.scale: the exact decimal product
    return value, f"= {number_text(value)} kJ/mol (typed {number_text(float(entered))} {unit})"


def _apply_reaction_part(rec: dict, name: str, text: str, original: Mapping | None) -> str | None:
    t = text.strip()
    if name == "id":
        if original is not None and t != original.get("id"):
            raise ValueError("the id of an existing reaction cannot change")
        if not SLUG.match(t):
            raise ValueError(f"{t[:40]!r} is not an id: use a-z, 0-9, '.', '_', '-'")
        rec["id"] = t
        return None
    if name in ("equation", "notes", "source"):
        if not t:
            if name == "equation":
                raise ValueError("a reaction needs an equation")
            rec.pop(name, None)
            return None
        if name == "source" and not SLUG.match(t):
            raise ValueError(f"{t[:40]!r} is not a source id: use a-z, 0-9, '.', '_', '-'")
        if name != "source" and t[0] in "=+@":
            # The schema refuses it too; this says why (an exported cell would be a spreadsheet formula).
            raise ValueError(f"the {name} may not begin with {t[0]!r} (a spreadsheet would read a formula)")
        rec[name] = t
        return None
    if name == "temperature_K":
        if not t:
            rec.pop(name, None)
            return "at 298.15 K"
        T = _parse_number(t)
        if T <= 0:
            raise ValueError("a temperature in kelvin is above zero")
        rec[name] = T
        return None
    key, part = name.split(".", 1)
    obj = rec.get(key)
    if part == "value":
        if not t:
            rec.pop(key, None)
            return f"the measured {REACTION_QUANTITIES[key][0]} will be removed" if obj is not None else None
        value, note = _reaction_number(t, key)
        rec[key] = dict(obj, value=value) if isinstance(obj, Mapping) else {"value": value}
        return note
    if not isinstance(obj, Mapping):
        if t:
            raise ValueError(f"give the measured {REACTION_QUANTITIES[key][0]} first")
        return None
    new = dict(obj)
    rec[key] = new
    if not t:
        new.pop("uncertainty", None)
        return None
    u, note = _reaction_number(t, key)
    if u < 0:
        raise ValueError("an uncertainty cannot be negative")
    new["uncertainty"] = u
    return note


def _reaction_pointer_field(pointer: str) -> str:
    parts = [p for p in pointer.strip("/").split("/") if p]
    if not parts:
        return "record"
    if parts[0] in REACTION_QUANTITIES:
        return f"{parts[0]}.{parts[1] if len(parts) > 1 and parts[1] == 'uncertainty' else 'value'}"
    return parts[0]


def apply_reaction_edit(original: Mapping | None, texts: Mapping[str, str],
                        species: Mapping[str, dict] | None = None,
                        sources: Iterable[str] | None = None) -> EditResult:
    """A would-be reaction from typed texts over ``original`` (None for a new reaction): each text
    applied, the record checked against the reaction schema, and its equation parsed and balanced against
    ``species`` when given. Problems and notes are keyed by field name (``drH.value``, ``equation``)."""
    from .thermo import balance, parse_equation

    rec: dict = copy.deepcopy(dict(original)) if original else {}
    result = EditResult(rec)
    for name in REACTION_FIELDS:
        if name not in texts:
            continue
        try:
            note = _apply_reaction_part(rec, name, texts[name], original)
        except ValueError as exc:
            result.problems[name] = str(exc)
            continue
        if note:
            result.notes[name] = note
    rec.setdefault("revision", 1)  # the schema wants one; the store sets the real number on save
    if "id" not in rec and "id" not in result.problems:
        result.problems["id"] = "a new reaction needs an id"
    if not result.problems:
        for pointer, msg in validation.errors("reactions", rec):
            result.problems.setdefault(_reaction_pointer_field(pointer), msg)
    eq = rec.get("equation")
    if species is not None and isinstance(eq, str) and "equation" not in result.problems:
        try:
            reaction = parse_equation(eq, dict(species))
            balance(reaction, species)
        except InputError as exc:
            result.problems["equation"] = exc.reason
        else:
            result.notes.setdefault("equation", f"read as {reaction.display()}")
    src = rec.get("source")
    if sources is not None and isinstance(src, str) and src not in set(sources):
        result.notes.setdefault("source", f"no source named {src!r} yet: add it on the sources screen")
    if not any(isinstance(rec.get(k), Mapping) for k in REACTION_QUANTITIES):
        result.notes.setdefault("drH.value", "no measured value: the closure check has nothing to compare")
    return result


def reaction_findings(findings: Iterable[Any], ident: str) -> list:
    """The findings of a check report about one reaction. Findings carry no reaction field (``species``
    is for species); the checks name the reaction first in their message (``reaction <id> ...``, the
    schema check ``reactions/<id>.json ...``), and an id is a slug, so the prefix is unambiguous."""
    heads = (f"reaction {ident} ", f"reaction {ident}:", f"reactions/{ident}.json ")
    return [f for f in findings if f.species is None and str(f.message).startswith(heads)]


def reaction_closure_preview(context: Any, record: Mapping) -> list:
    """The reaction-closure findings the check would give for a would-be reaction against the species
    of ``context`` (a ``tablekeeper.checks.Context``, such as the snapshot the user sees)."""
    import dataclasses

    from .checks import run

    ctx = dataclasses.replace(context, reactions={str(record.get("id") or "new"): dict(record)})
    return run(ctx, only=["reaction-closure"]).findings


def save_reaction(dataset: Dataset, original: Mapping | None, texts: Mapping[str, str], reason: str, *,
                  species: Mapping[str, dict] | None = None) -> dict:
    """Validate and save a reaction (new when ``original`` is None) with the user's reason, journaled.
    ``original`` is the record as the user saw it: a save by someone else in between is a ConflictError
    carrying both versions. InputError names the record and field."""
    dataset.require("edit")
    result = apply_reaction_edit(original, texts, species)
    ident = result.record.get("id")
    if not result.ok:
        name, why = next(iter(result.problems.items()))
        raise InputError(why, record=ident, field=name)
    reason = (reason or "").strip()
    if not reason:
        raise InputError("a save needs a reason for the journal", record=ident, field="reason")
    if original is not None and not diff(original, result.record):
        raise InputError("nothing to save: no field differs from the reaction as loaded", record=ident)
    if original is None and ident in dataset.ids("reactions"):
        raise InputError("a reaction with this id exists already", record=ident, field="id")
    expected = None if original is None else int(original.get("revision", 0))
    return dataset.save("reactions", result.record, expected_revision=expected, reason=reason)


def delete_reaction(dataset: Dataset, record: Mapping, reason: str) -> None:
    """Delete a reaction as the user saw it (its revision must still be the one on disk), journaled with
    the old values and the reason."""
    dataset.require("edit")
    ident = str(record.get("id"))
    reason = (reason or "").strip()
    if not reason:
        raise InputError("a deletion needs a reason for the journal", record=ident, field="reason")
    dataset.delete("reactions", ident, expected_revision=int(record.get("revision", 0)), reason=reason)
