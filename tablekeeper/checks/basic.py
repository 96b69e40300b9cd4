"""Structural checks: schema, reference, formula, element-reference, duplicate."""

from __future__ import annotations

from collections.abc import Iterator

from .. import validation
from ..model import FIELDS
from . import Context, Finding, check

_KIND_FOLDERS = (("species", "species"), ("sources", "sources"), ("reactions", "reactions"),
                 ("flags", "flags"))


@check("schema", "every file validates against its JSON Schema; the JSON pointer of each error")
def schema_check(ctx: Context) -> Iterator[Finding]:
    for dmg in ctx.damaged:
        yield Finding("schema", "error", f"{dmg}; the file was not loaded", species=dmg.record,
                      field=dmg.field)
    for pointer, msg in validation.errors("dataset", ctx.meta):
        yield Finding("schema", "error", f"dataset.json {pointer or '/'}: {msg}", field=pointer or None)
    for kind, folder in _KIND_FOLDERS:
        invalid = validation.errors_many(kind, getattr(ctx, kind))
        for ident, errs in invalid.items():
            for pointer, msg in errs:
                yield Finding("schema", "error", f"{folder}/{ident}.json {pointer or '/'}: {msg}",
                              species=ident if kind == "species" else None, field=pointer or None)


@check("reference", "every source, species and element reference named exists")
def reference_check(ctx: Context) -> Iterator[Finding]:
    fr = ctx.frame
    known_sources = set(ctx.sources)
    for fld in FIELDS:
        col = fr[f"src_{fld}"]
        missing = col.notna() & ~col.isin(known_sources)
        for ident, src in col[missing].items():
            yield Finding("reference", "error", f"{fld} cites source {src!r}, which is not in sources/",
                          species=ident, field=fld,
                          suggestion=f"add sources/{src}.json or correct the source id")
    for ident, rec in ctx.species.items():
        model = rec.get("cp_model")
        src = model.get("source") if isinstance(model, dict) else None
        if src is not None and src not in known_sources:
            yield Finding("reference", "error", f"cp_model cites source {src!r}, which is not in sources/",
                          species=ident, field="cp_model")
    for ident, rec in ctx.reactions.items():
        src = rec.get("source")
        if src is not None and src not in known_sources:
            yield Finding("reference", "error",
                          f"reaction {ident} cites source {src!r}, which is not in sources/")
    for ident, rec in ctx.flags.items():
        sp = rec.get("species")
        if sp is not None and sp not in ctx.species:
            yield Finding("reference", "warning",
                          f"flag {ident} is about species {sp!r}, which does not exist", species=None)
    refs = ctx.meta.get("element_references") if isinstance(ctx.meta, dict) else None
    for element, sp in (refs or {}).items():
        if sp not in ctx.species:
            yield Finding("reference", "error",
                          f"dataset.json names {sp!r} as the reference state of {element}, "
                          "but no such species exists", field="element_references")
            continue
        row = fr.loc[sp]
        if row["hill"] is not None and row["hill"].rstrip("0123456789") != element:
            yield Finding("reference", "error",
                          f"dataset.json names {sp!r} ({row['formula']}) as the reference state of "
                          f"{element}, but it is not the pure element", species=sp, field="formula")


@check("formula", "formula parses; elements known; charge consistent with phase (ions in aq or g)")
def formula_check(ctx: Context) -> Iterator[Finding]:
    fr = ctx.frame
    bad = fr["formula_error"].notna()
    for ident, reason in fr.loc[bad, "formula_error"].items():
        yield Finding("formula", "error", reason, species=ident, field="formula")
    ok = ~bad
    mismatch = ok & fr["charge"].notna() & (fr["charge"] != fr["formula_charge"])
    for ident, row in fr.loc[mismatch, ["formula", "charge", "formula_charge"]].iterrows():
        yield Finding("formula", "error",
                      f"charge is {int(row['charge'])} but the formula {row['formula']!r} carries "
                      f"{int(row['formula_charge'])}", species=ident, field="charge",
                      observed=row["charge"], expected=row["formula_charge"])
    ion = ok & (fr["formula_charge"] != 0)
    wrong_phase = ion & ~fr["phase"].isin(["aq", "g"])
    for ident, row in fr.loc[wrong_phase, ["formula", "phase"]].iterrows():
        yield Finding("formula", "error",
                      f"{row['formula']} is an ion but its phase is {row['phase']!r}; "
                      "a single ion exists only as aq or g", species=ident, field="phase")


@check("element-reference", "an element in its reference state has ΔfH° = ΔfG° = 0")
def element_reference_check(ctx: Context) -> Iterator[Finding]:
    fr = ctx.frame
    ref = fr["reference_state"].astype(bool)
    for fld in ("dfH298", "dfG298"):
        nonzero = ref & fr[fld].notna() & (fr[fld] != 0)
        for ident, value in fr.loc[nonzero, fld].items():
            yield Finding("element-reference", "error",
                          f"{ident} is an element in its reference state, so {fld} is zero by definition; "
                          f"it is {value:g} kJ/mol", species=ident, field=fld, observed=value,
                          expected=0.0, tolerance=0.0, suggestion="set the value to 0")
    # Only the (few) reference-state rows are looked at letter by letter.
    hills = fr.loc[ref & fr["hill"].notna(), "hill"]
    multi = hills.map(lambda h: isinstance(h, str) and len([c for c in h if c.isupper()]) != 1)
    for ident in hills.index[multi.to_numpy(bool)]:
        yield Finding("element-reference", "error",
                      f"{ident} is marked as an element reference state but its formula is not a "
                      "single element", species=ident, field="reference_state")
    charged = ref & (fr["formula_charge"].fillna(0) != 0)
    for ident in fr.index[charged]:
        yield Finding("element-reference", "error", f"{ident} is marked as a reference state but is "
                      "charged", species=ident, field="reference_state")
    # Two reference states for one element.
    elem = fr.loc[ref & fr["hill"].notna(), "hill"].astype(str).str.rstrip("0123456789")
    for element, group in elem.groupby(elem):
        if len(group) > 1:
            ids = ", ".join(group.index)
            for ident in group.index:
                yield Finding("element-reference", "error",
                              f"{element} has more than one reference state ({ids})",
                              species=ident, field="reference_state")


@check("duplicate", "two records for one formula, phase and form")
def duplicate_check(ctx: Context) -> Iterator[Finding]:
    fr = ctx.frame
    live = fr[(fr["status"] != "deprecated") & fr["hill"].notna()]
    key = (live["hill"].astype(str) + "|" + live["phase"].astype(str) + "|"
           + live["form"].fillna("").astype(str))
    dup = key[key.duplicated(keep=False)]
    if dup.empty:
        return
    rows = fr.loc[dup.index, ["formula", "phase", "form", "name", "dfH298", "u_dfH298", "S298",
                              "u_S298"]].to_dict("index")
    for _, members in dup.groupby(dup, sort=True):
        ids = list(members.index)
        for ident in ids:
            others = [m for m in ids if m != ident]
            shown = ", ".join(others[:5]) + (f" and {len(others) - 5} more" if len(others) > 5 else "")
            row = rows[ident]
            form = f", form {row['form']}" if isinstance(row["form"], str) else ""
            what = f"{row['formula']}({row['phase']}{form}) is also recorded as {shown}"
            if all(_distinct_substances(row, rows[m]) for m in others):
                # Different names and values that disagree: most likely isomers (butane and
                # isobutane are both C4H10(g)), which need a form label rather than a deletion.
                yield Finding("duplicate", "warning",
                              f"{what}, under another name and with other values: if these are isomers "
                              "or polymorphs, give each a form label", species=ident, field="form",
                              suggestion="give each record a distinct form label, e.g. n-butane, isobutane")
                continue
            yield Finding("duplicate", "error", what, species=ident, field="formula",
                          suggestion="deprecate or delete one record, or give each a distinct form label")


def _distinct_substances(a: dict, b: dict) -> bool:
    """True when two records of one formula and phase look like different substances: both named,
    with different names, and their ΔfH° or S° differ by more than twice the larger of their
    standard uncertainty and 1 kJ/mol or 1 J/(mol·K) (so a re-entry of one substance with the same
    values, whatever its name, stays an error)."""
    na, nb = a.get("name"), b.get("name")
    if not (isinstance(na, str) and isinstance(nb, str)) or na.strip().lower() == nb.strip().lower():
        return False
    for fld, floor in (("dfH298", 1.0), ("S298", 1.0)):
        va, vb = a.get(fld), b.get(fld)
        if va is None or vb is None or va != va or vb != vb:  # NaN: not given
            continue
        ua, ub = a.get(f"u_{fld}"), b.get(f"u_{fld}")
        u = max(x for x in (ua, ub, floor) if x is not None and x == x)
        if abs(va - vb) > 2 * u:
            return True
    return False
