"""JSON Schema validation of every file kind (Draft 2020-12, format checker on).

jsonschema is the reference. For the bulk of records a faster accept-only test runs first: a record it
accepts is accepted; a record it rejects goes to jsonschema, whose verdict and JSON pointers are
reported. That test is, for schemas written in the keywords listed in ``_KEYWORDS`` (the species schema),
a predicate compiled here from the schema, about three times faster than a generated validator because
it only answers yes or no; for other schemas without ``format`` it is fastjsonschema. The compiled
predicate is sound by construction: every keyword is checked at least as strictly as Draft 2020-12
asks (only ``int`` and ``float`` are numbers, a ``oneOf`` is compiled only when a string constant
tells its branches apart), and an unknown keyword makes the schema fall back whole.
tests/core/test_validation_parity.py and tests/checks/test_fast_paths.py show on valid and invalid
records that the fast path and jsonschema give the same verdicts. Kinds whose schemas use ``format``
(flags, journal, releases) always go through jsonschema, so no format is ever skipped.
"""

from __future__ import annotations

import functools
import json
import re
from collections.abc import Callable, Mapping
from importlib import resources
from typing import Any

import fastjsonschema
import jsonschema
from jsonschema import Draft202012Validator

from .bulk import paused_gc

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


# -- the compiled accept-only predicate ------------------------------------------------------------------

#: Keywords the compiled predicate understands; any other (besides annotations) makes it refuse a schema.
_KEYWORDS = frozenset({"type", "enum", "const", "properties", "required", "additionalProperties", "pattern",
                       "minLength", "maxLength", "minimum", "maximum", "exclusiveMinimum", "exclusiveMaximum",
                       "items", "minItems", "maxItems", "$ref", "oneOf"})
_ANNOTATIONS = frozenset({"$schema", "$id", "$defs", "$comment", "title", "description", "examples",
                          "default"})
_BY_TYPE = {
    "object": {"properties", "required", "additionalProperties"},
    "string": {"pattern", "minLength", "maxLength"},
    "number": {"minimum", "maximum", "exclusiveMinimum", "exclusiveMaximum"},
    "integer": {"minimum", "maximum", "exclusiveMinimum", "exclusiveMaximum"},
    "array": {"items", "minItems", "maxItems"},
    "boolean": set(),
}
_GENERIC = {"type", "enum", "const", "$ref", "oneOf"}


class _Unsupported(Exception):
    """A schema construct the compiled predicate does not handle; the schema falls back whole."""


Predicate = Callable[[Any], bool]


def _all_of(checks: list[Predicate]) -> Predicate:
    if len(checks) == 1:
        return checks[0]
    return lambda x: all(c(x) for c in checks)


def compile_predicate(root: dict) -> Predicate:
    """A function telling whether a document is valid under ``root``, never saying yes to an invalid
    one (it may say no to a valid one, which then goes to jsonschema). _Unsupported if it cannot."""
    defs: dict[str, Predicate | None] = {}

    def ref(target: str) -> Predicate:
        name = target.removeprefix("#/$defs/")
        if name == target or "/" in name or name not in root.get("$defs", {}):
            raise _Unsupported(target)
        if name not in defs:
            defs[name] = None  # a recursive reference: unsupported
            defs[name] = node_check(root["$defs"][name])
        found = defs[name]
        if found is None:
            raise _Unsupported(f"recursive {target}")
        return found

    def node_check(node: Any) -> Predicate:
        if not isinstance(node, dict) or set(node) - _ANNOTATIONS - _KEYWORDS:
            raise _Unsupported(repr(node)[:60])
        kind = node.get("type")
        if kind is not None and (not isinstance(kind, str) or kind not in _BY_TYPE):
            raise _Unsupported(f"type {kind!r}")
        if set(node) & _KEYWORDS - _GENERIC - (_BY_TYPE[kind] if kind else set()):
            raise _Unsupported("a keyword outside its type")  # e.g. "required" without type object
        checks = []
        if "$ref" in node:
            checks.append(ref(node["$ref"]))
        if "oneOf" in node:
            checks.append(one_of(node["oneOf"]))
        if "enum" in node or "const" in node:
            values = node["enum"] if "enum" in node else [node["const"]]
            if not isinstance(values, list) or not all(type(v) is str for v in values):
                raise _Unsupported("enum of other than strings")
            allowed = frozenset(values)
            checks.append(lambda x: type(x) is str and x in allowed)
        if kind == "object":
            checks.append(object_check(node))
        elif kind == "string":
            checks.append(string_check(node))
        elif kind in ("number", "integer"):
            checks.append(number_check(node, kind == "integer"))
        elif kind == "boolean":
            checks.append(lambda x: type(x) is bool)
        elif kind == "array":
            checks.append(array_check(node))
        return _all_of(checks) if checks else (lambda x: True)

    def object_check(node: dict) -> Predicate:
        props = {k: node_check(v) for k, v in node.get("properties", {}).items()}
        required = frozenset(node.get("required", ()))
        extra = node.get("additionalProperties", True)
        if extra is not True and extra is not False:
            raise _Unsupported("additionalProperties with a schema")
        closed, allowed = extra is False, frozenset(props)

        def check(x: Any) -> bool:
            if type(x) is not dict:
                return False
            keys = x.keys()
            if not required <= keys or (closed and not keys <= allowed):
                return False
            for k, v in x.items():
                f = props.get(k)
                if f is not None and not f(v):
                    return False
            return True

        return check

    def string_check(node: dict) -> Predicate:
        lo, hi = node.get("minLength", 0), node.get("maxLength")
        pattern = re.compile(node["pattern"]) if "pattern" in node else None  # jsonschema: re.search

        def check(x: Any) -> bool:
            if type(x) is not str or len(x) < lo or (hi is not None and len(x) > hi):
                return False
            return pattern is None or pattern.search(x) is not None

        return check

    def number_check(node: dict, integer: bool) -> Predicate:
        lo, hi = node.get("minimum"), node.get("maximum")
        xlo, xhi = node.get("exclusiveMinimum"), node.get("exclusiveMaximum")

        def check(x: Any) -> bool:
            t = type(x)
            if t is float:
                if integer and not x.is_integer():
                    return False
            elif t is not int:  # bool, Decimal, numpy scalars: left to jsonschema
                return False
            # Written as "not (x >= lo)" so that NaN, which Draft 2020-12 would let through, is refused.
            return not ((lo is not None and not x >= lo) or (hi is not None and not x <= hi)
                        or (xlo is not None and not x > xlo) or (xhi is not None and not x < xhi))

        return check

    def array_check(node: dict) -> Predicate:
        lo, hi = node.get("minItems", 0), node.get("maxItems")
        item = node_check(node["items"]) if "items" in node else None

        def check(x: Any) -> bool:
            if type(x) is not list or len(x) < lo or (hi is not None and len(x) > hi):
                return False
            return item is None or all(item(v) for v in x)

        return check

    def one_of(branches: Any) -> Predicate:
        # Only a discriminated oneOf: every branch an object that requires one property with a string
        # constant of its own. At most one branch can then hold, so "exactly one" is "the one whose
        # constant the document names, and it holds".
        if not isinstance(branches, list) or not branches:
            raise _Unsupported("oneOf")
        key, table = None, {}
        for b in branches:
            if not isinstance(b, dict) or not isinstance(b.get("properties", {}), dict):
                raise _Unsupported("oneOf")
            props = b.get("properties", {})
            named = [k for k in b.get("required", ()) if isinstance(props.get(k), dict)
                     and type(props[k].get("const")) is str]
            key = key or (named[0] if named else None)
            if b.get("type") != "object" or key not in named or props[key]["const"] in table:
                raise _Unsupported("oneOf without a discriminating constant")
            table[props[key]["const"]] = node_check(b)

        def check(x: Any) -> bool:
            if type(x) is not dict:
                return False
            tag = x.get(key)
            branch = table.get(tag) if type(tag) is str else None
            return branch is not None and branch(x)

        return check

    return node_check(root)


@functools.cache
def accepts(kind: str) -> Predicate | None:
    """The fast accept-only test of a kind (see the module docstring), or None: jsonschema only."""
    if _uses_format(schema(kind)):
        return None
    try:
        return compile_predicate(schema(kind))
    except _Unsupported:
        pass
    compiled = _fast(kind)

    def by_fastjsonschema(document: Any) -> bool:
        try:
            compiled(document)
        except fastjsonschema.JsonSchemaException:
            return False
        return True

    return by_fastjsonschema


def pointer(path: Any) -> str:
    parts = [str(p).replace("~", "~0").replace("/", "~1") for p in path]
    return "/" + "/".join(parts) if parts else ""


def errors(kind: str, document: Any, *, fast: bool = True) -> list[tuple[str, str]]:
    """(JSON pointer, message) for each schema error of a document; empty when valid."""
    if fast:
        accept = accepts(kind)
        if accept is not None and accept(document):
            return []
    out = []
    for err in validator(kind).iter_errors(document):
        best = jsonschema.exceptions.best_match([err])
        out.append((pointer(best.absolute_path), _short(best.message)))
    out.sort()
    return out


def errors_many(kind: str, documents: Mapping[str, Any]) -> dict[str, list[tuple[str, str]]]:
    """Schema errors of many documents of one kind, keyed like ``documents``, for the invalid ones only.

    The same verdicts and messages as ``errors`` per document. The fast test runs over all of them in
    one loop; only the documents it rejects are passed to jsonschema for their JSON pointers.
    """
    keys = list(documents)
    accept = accepts(kind)
    if accept is None:
        rejected = keys
    else:
        with paused_gc():
            rejected = [k for k in keys if not accept(documents[k])]
    found = {}
    for key in rejected:
        errs = errors(kind, documents[key], fast=False)
        if errs:
            found[key] = errs
    return found


def _short(message: str) -> str:
    # jsonschema puts the offending value first and the reason last ("'[[[…' is too long"): keep both.
    return message if len(message) <= 200 else message[:120] + " ... " + message[-75:]
