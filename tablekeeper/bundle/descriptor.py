"""The bundle manifest, ``datapackage.json``: a Data Package descriptor (Frictionless Data, v1).

It names the package and version, lists one resource per CSV file with its Table Schema, sha256 hash
and byte count (and ``CHANGES.md`` as a text resource), and carries tablekeeper's own properties under
the ``tablekeeper:`` prefix: the previous version, the standard state, the check summary and the
warnings accepted at release, the cautions, and ``tablekeeper:descriptor_hash``.

The descriptor cannot list its own hash, yet a changed byte in it must be noticed: the descriptor
hash is the sha256 of the canonical JSON of the descriptor without that one property. Verification
also requires the file to be in canonical form (tablekeeper.jsonio), so a byte changed anywhere
either breaks the JSON, breaks the canonical form, or changes content the hash covers.
"""

from __future__ import annotations

import hashlib
from collections.abc import Mapping, Sequence
from typing import Any

from .. import jsonio, validation
from .tables import CHANGES, TABLES

FORMAT = 1
HASH_KEY = "tablekeeper:descriptor_hash"
CAUTIONS = (
    "A passing check proves that the values are consistent with one another and with the laws the "
    "checks apply; it does not prove that they are correct.",
    "Thermochemical data feed hazard assessments, relief sizing and combustion design: safety "
    "decisions follow local codes and licensed engineering practice, not this table alone.",
)
STANDARD_STATE = {"pressure_bar": 1, "temperature_K": 298.15}


def sha256(data: bytes) -> str:
    return "sha256:" + hashlib.sha256(data).hexdigest()


def descriptor_hash(descriptor: Mapping[str, Any]) -> str:
    body = {k: v for k, v in descriptor.items() if k != HASH_KEY}
    return sha256(jsonio.dumps(body))


def build(*, meta: Mapping[str, Any], version: str, created: str, previous: str | None,
          files: Mapping[str, bytes], summary: Mapping[str, int], accepted: Sequence[Mapping[str, Any]],
          note: str | None) -> dict[str, Any]:
    """The descriptor of a bundle whose files (name → bytes) are given."""
    res: list[dict[str, Any]] = []
    for table in TABLES:
        data = files[table.path]
        res.append({
            "name": table.name, "path": table.path, "profile": "tabular-data-resource",
            "title": table.title, "description": table.description, "format": "csv",
            "mediatype": "text/csv", "encoding": "utf-8", "hash": sha256(data), "bytes": len(data),
            "dialect": {"delimiter": ",", "doubleQuote": True, "header": True, "lineTerminator": "\n",
                        "quoteChar": '"'},
            "schema": table.table_schema(),
        })
    changes = files[CHANGES]
    res.append({"name": "changes", "path": CHANGES, "title": "Changes",
                "description": "What changed since the previous release, value by value.", "format": "md",
                "mediatype": "text/markdown", "encoding": "utf-8", "hash": sha256(changes),
                "bytes": len(changes)})
    out: dict[str, Any] = {
        "profile": "data-package",
        "name": meta.get("name"),
        "title": str(meta.get("title") or meta.get("name")),
        "version": version,
        "created": created,
        "resources": res,
        "tablekeeper:format": FORMAT,
        "tablekeeper:previous_version": previous,
        "tablekeeper:standard_state": dict(STANDARD_STATE),
        "tablekeeper:element_references": dict(meta.get("element_references") or {}),
        "tablekeeper:check_summary": {k: int(summary.get(k, 0)) for k in ("error", "warning", "info")},
        "tablekeeper:accepted_warnings": [dict(a) for a in accepted],
        "tablekeeper:cautions": list(CAUTIONS),
    }
    if meta.get("description"):
        out["description"] = str(meta["description"])
    if note:
        out["tablekeeper:note"] = note
    out[HASH_KEY] = descriptor_hash(out)
    return out


def schema_errors(descriptor: Any) -> list[str]:
    """'<JSON pointer>: message' for every way the descriptor breaks datapackage.schema.json."""
    return [f"{ptr or '/'}: {msg}" for ptr, msg in validation.errors("datapackage", descriptor, fast=False)]


def accepted_entry(finding: Any) -> dict[str, Any]:
    """The descriptor's record of one accepted warning."""
    return {"check": finding.check, "species": finding.species, "field": finding.field,
            "message": finding.message}
