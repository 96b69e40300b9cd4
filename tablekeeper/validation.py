"""JSON Schema validation of every file kind (Draft 2020-12, format checker on).

jsonschema is the reference. For the bulk of species records a compiled validator (fastjsonschema)
runs first: a record it accepts is accepted; a record it rejects goes to jsonschema, whose verdict and
JSON pointers are reported. tests/test_validation.py proves on valid and invalid records that the
two give the same verdicts for the species schema. Kinds whose schemas use ``format`` (flags, journal,
releases) always go through jsonschema, so no format is ever skipped.
"""

from __future__ import annotations

import functools
import json
from collections.abc import Mapping, Sequence
from importlib import resources
from typing import Any

import fastjsonschema
import jsonschema
from jsonschema import Draft202012Validator

from .bulk import paused_gc, split_map

SCHEMA_FILES = {
    "dataset": "dataset.schema.json",
    "species": "species.schema.json",
    "sources": "source.schema.json",
    "reactions": "reaction.schema.json",
    "flags": "flag.schema.json",
    "journal": "journal.schema.json",
    "releases": "release.schema.json",
    "datapackage": "datapackage.schema.json",
}

#: Formats our schemas use; tests fail if the format checker cannot really check one of them.
FORMATS_USED = ("date-time",)


@functools.cache
def schema(kind: str) -> dict:
    text = resources.files("tablekeeper").joinpath("schemas", SCHEMA_FILES[kind]).read_text("utf-8")
    return json.loads(text)


@functools.cache
def validator(kind: str) -> Draft202012Validator:
    return Draft202012Validator(schema(kind), format_checker=Draft202012Validator.FORMAT_CHECKER)


def _uses_format(node: Any) -> bool:
    if isinstance(node, dict):
        return "format" in node or any(_uses_format(v) for v in node.values())
    if isinstance(node, list):
        return any(_uses_format(v) for v in node)
    return False


@functools.cache
def _fast(kind: str):
    if _uses_format(schema(kind)):
        return None
    sch = dict(schema(kind))
    # fastjsonschema reads the same keywords under draft 7; $defs refs resolve as JSON pointers.
    sch["$schema"] = "http://json-schema.org/draft-07/schema#"
    return fastjsonschema.compile(sch)


def pointer(path: Any) -> str:
    parts = [str(p).replace("~", "~0").replace("/", "~1") for p in path]
    return "/" + "/".join(parts) if parts else ""


def errors(kind: str, document: Any, *, fast: bool = True) -> list[tuple[str, str]]:
    """(JSON pointer, message) for each schema error of a document; empty when valid."""
    if fast:
        f = _fast(kind)
        if f is not None:
            try:
                f(document)
                return []
            except fastjsonschema.JsonSchemaException:
                pass
    out = []
    for err in validator(kind).iter_errors(document):
        best = jsonschema.exceptions.best_match([err])
        out.append((pointer(best.absolute_path), _short(best.message)))
    out.sort()
    return out


def errors_many(kind: str, documents: Mapping[str, Any]) -> dict[str, list[tuple[str, str]]]:
    """Schema errors of many documents of one kind, keyed like ``documents``, for the invalid ones only.

    The same verdicts and messages as ``errors`` per document. The compiled validator runs over all of
    them in one loop (split over two processes for a large dataset, see tablekeeper.bulk); only the
    documents it rejects are passed to jsonschema for their JSON pointers.
    """
    keys = list(documents)
    fast = _fast(kind)
    if fast is None:
        rejected = keys
    else:
        docs = [documents[k] for k in keys]

        def reject(part: Sequence[int]) -> list[int]:
            out = []
            for i in part:
                try:
                    fast(docs[i])
                except fastjsonschema.JsonSchemaException:
                    out.append(i)
            return out

        with paused_gc():
            rejected = [keys[i] for i in split_map(reject, range(len(keys)))]
    found = {}
    for key in rejected:
        errs = errors(kind, documents[key], fast=False)
        if errs:
            found[key] = errs
    return found


def _short(message: str) -> str:
    # jsonschema puts the offending value first and the reason last ("'[[[…' is too long"): keep both.
    return message if len(message) <= 200 else message[:120] + " ... " + message[-75:]
