"""Canonical JSON: strict reading and the one byte form every file is written in.

Canonical form is orjson's output with sorted keys, 2-space indent and a trailing newline: floats in
shortest round-trip form, UTF-8, stable key order, so that load-then-save gives identical bytes and a
diff shows one changed line per changed value.

Reading is strict. orjson already refuses NaN, Infinity, numbers that overflow a double, integers
beyond 64 bits, a byte-order mark and invalid UTF-8; what it silently accepts (a duplicate key keeps
the last value) is caught by comparing against the canonical bytes and re-reading a non-canonical file
with the standard library and a hook that refuses duplicates.
"""

from __future__ import annotations

import json
import os
from typing import Any

import orjson

from .errors import DamagedFileError

_OPTS = orjson.OPT_INDENT_2 | orjson.OPT_SORT_KEYS | orjson.OPT_APPEND_NEWLINE

#: Largest record file read; a larger one is refused before parsing.
MAX_FILE_BYTES = 1 << 20


def dumps(obj: Any) -> bytes:
    """The canonical bytes of a JSON document."""
    return orjson.dumps(obj, option=_OPTS)


def dumps_line(obj: Any) -> bytes:
    """One compact JSON line (journal), keys sorted, with the newline."""
    return orjson.dumps(obj, option=orjson.OPT_SORT_KEYS | orjson.OPT_APPEND_NEWLINE)


def _no_duplicates(pairs: list[tuple[str, Any]]) -> dict:
    out: dict[str, Any] = {}
    for k, v in pairs:
        if k in out:
            raise ValueError(f"the key {k!r} appears twice")
        out[k] = v
    return out


def _no_constant(name: str) -> Any:
    raise ValueError(f"{name} is not a number JSON allows")


def _why(raw: bytes, exc: orjson.JSONDecodeError) -> str:
    """orjson's reason, made specific where it is vague: bad UTF-8 and the constants JSON lacks."""
    if not raw.startswith(b"\xef\xbb\xbf"):
        try:
            raw.decode("utf-8")
        except UnicodeDecodeError as bad:
            return f"not valid UTF-8 at byte {bad.start}"
    doc, pos = getattr(exc, "doc", None), getattr(exc, "pos", None)
    if isinstance(doc, str) and isinstance(pos, int):
        for name in ("-Infinity", "NaN", "Infinity"):
            if doc.startswith(name, pos) or (name[0] == "-" and doc.startswith(name, max(pos - 1, 0))):
                return f"{name} is not a number JSON allows, at line {exc.lineno} column {exc.colno}"
    return str(exc)


def loads(raw: bytes, *, file: str | None = None) -> Any:
    """Parse JSON strictly; raise DamagedFileError naming the file and what is wrong."""
    try:
        obj = orjson.loads(raw)
    except orjson.JSONDecodeError as exc:
        raise DamagedFileError(f"not valid JSON ({_why(raw, exc)})", file=file) from None
    if isinstance(obj, dict | list) and orjson.dumps(obj, option=_OPTS) != raw:
        # Not canonical: hand-edited, or hiding a duplicate key. Re-read with the strict hook.
        try:
            json.loads(raw.decode("utf-8"), object_pairs_hook=_no_duplicates, parse_constant=_no_constant)
        except (ValueError, RecursionError) as exc:
            raise DamagedFileError(f"not valid JSON ({exc})", file=file) from None
    return obj


def read(path: str | os.PathLike[str]) -> Any:
    """Read one JSON file strictly, refusing files larger than MAX_FILE_BYTES.

    Plain file calls on the path as given (no pathlib objects): a load of 100k records calls this 100k
    times. The read is bounded too, so a file that grows (or a device posing as one) is refused without
    reading more than the limit.
    """
    name = os.fspath(path)
    try:
        with open(name, "rb") as fh:  # buffered: read(n) returns n bytes unless the file ends first
            size = os.fstat(fh.fileno()).st_size
            # Ask for what the file holds (a buffer of the limit per file would cost more than the
            # parse); a file that grew since, or a special file that reports no size, reads on to the limit.
            raw = fh.read(size + 1) if size <= MAX_FILE_BYTES else b""
            if len(raw) > size:
                raw += fh.read(MAX_FILE_BYTES + 1 - len(raw))
    except OSError as exc:
        raise DamagedFileError(f"cannot be read ({exc.strerror})", file=name) from None
    if size > MAX_FILE_BYTES or len(raw) > MAX_FILE_BYTES:
        size = max(size, len(raw))
        raise DamagedFileError(f"is {size} bytes, larger than the {MAX_FILE_BYTES} bytes a record may be",
                               file=name)
    return loads(raw, file=name)
