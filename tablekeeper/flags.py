"""Flags: questions engineers raise about one value; comments; resolution by a steward.

One file per flag under flags/, so raising a flag never contends with a steward's edit of the record.
"""

from __future__ import annotations

import secrets
import time

from .errors import InputError, NotFoundError
from .model import FIELDS
from .store import Dataset, utc_now

FLAGGABLE = (*FIELDS, "formula", "phase", "charge", "name", "cp_model", "record")


def new_flag_id() -> str:
    return f"flag-{time.strftime('%Y%m%d-%H%M%S', time.gmtime())}-{secrets.token_hex(3)}"


def raise_flag(dataset: Dataset, species: str, field: str, note: str, *, blocking: bool = False) -> dict:
    dataset.require("flag")
    if species not in dataset.ids("species"):
        raise NotFoundError("species", species)
    if field not in FLAGGABLE:
        raise InputError(f"{field!r} is not a field that can be flagged ({', '.join(FLAGGABLE)})",
                         field="field")
    note = (note or "").strip()
    if not note:
        raise InputError("a flag needs a note saying what looks wrong", field="note")
    rec = {"id": new_flag_id(), "revision": 1, "species": species, "field": field, "note": note,
           "blocking": bool(blocking), "status": "open", "raised_by": dataset.user, "raised_at": utc_now(),
           "comments": []}
    _validate(rec)
    return dataset.save("flags", rec, expected_revision=None, action="flag",
                        reason=f"flag on {species} {field}")


def comment(dataset: Dataset, flag_id: str, text: str, *, expected_revision: int | None = None) -> dict:
    dataset.require("comment")
    rec = dataset.load("flags", flag_id)
    text = (text or "").strip()
    if not text:
        raise InputError("a comment cannot be empty", field="text")
    new = dict(rec, comments=[*rec.get("comments", []), {"by": dataset.user, "at": utc_now(), "text": text}])
    _validate(new)
    return dataset.save("flags", new, expected_revision=expected_revision or rec["revision"], action="comment")


def resolve(dataset: Dataset, flag_id: str, resolution: str, *, expected_revision: int | None = None) -> dict:
    dataset.require("resolve")
    rec = dataset.load("flags", flag_id)
    new = dict(rec, status="resolved", resolved_by=dataset.user, resolved_at=utc_now())
    if resolution and resolution.strip():
        new["resolution"] = resolution.strip()
    _validate(new)
    return dataset.save("flags", new, expected_revision=expected_revision or rec["revision"], action="resolve")


def _validate(rec: dict) -> None:
    from . import validation

    errs = validation.errors("flags", rec)
    if errs:
        pointer, msg = errs[0]
        raise InputError(msg, record=rec.get("id"), field=pointer.lstrip("/") or None)
