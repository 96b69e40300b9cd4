"""Text from data, made safe to show: control characters become visible escapes.

Terminal control sequences (ESC/CSI/OSC, C1 codes, BEL, backspace, carriage return) in a record must
never reach the terminal as controls. ``printable`` replaces every C0, DEL and C1 character (and the
Unicode bidi overrides that reorder what is shown) with a visible ``\\xNN``/``\\uNNNN`` escape; the
result holds only characters that a terminal prints as themselves. Markup safety is the faces' concern
(they wrap the result in a literal Text object).
"""

from __future__ import annotations

import re

_UNSAFE = re.compile("[\x00-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069\u200b-\u200f\u2028\u2029]")


def _escape(m: re.Match[str]) -> str:
    c = ord(m.group(0))
    return f"\\x{c:02x}" if c < 0x100 else f"\\u{c:04x}"


def printable(value: object) -> str:
    """``str(value)`` with control and bidi characters shown as escapes."""
    s = "" if value is None else str(value)
    return _UNSAFE.sub(_escape, s)


def has_control(s: str) -> bool:
    return bool(_UNSAFE.search(s))


_UNSAFE_IN_JSON = re.compile("[\x7f-\x9f\u202a-\u202e\u2066-\u2069\u200b-\u200f\u2028\u2029]")


def json_text(obj: object, *, indent: int | None = 2) -> str:
    """JSON for stdout, readable (non-ASCII kept) yet safe on a terminal: ``json.dumps`` with
    ``ensure_ascii=False`` escapes C0 controls but leaves C1 controls (U+009B is a CSI) and bidi
    overrides raw; those are written as ``\\uXXXX`` escapes, which decode to the same text."""
    import json

    dumped = json.dumps(obj, ensure_ascii=False, indent=indent)
    return _UNSAFE_IN_JSON.sub(lambda m: f"\\u{ord(m.group(0)):04x}", dumped)
