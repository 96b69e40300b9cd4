"""Release bundles: the writer with its gate, the descriptor, diff and change log, verify, the reader.

Public entry points::

    release(dataset, "1.2.0", out=..., note=..., allow_warnings=..., git_tag=..., progress=...)
    verify(path)  -> VerifyReport        # folder or .tar.gz; every damage listed
    read(path)    -> dict of DataFrames  # after verifying
    diff(old, new) -> Diff               # datasets, bundles or "git:REV", in either order
    preview(dataset) -> Preview          # last version, changes since, suggested version, gate

The layout of a bundle is fixed in DESIGN.md section 7; the columns are defined once in ``tables.py``.
"""

from __future__ import annotations

from .diff import Diff, compare, diff, next_version, parse_version
from .reader import read
from .tables import BUNDLE_FILES, TABLES
from .verify import VerifyReport, verify
from .writer import Gate, GateRefused, Preview, Released, gate, last_version, preview, release

__all__ = ["BUNDLE_FILES", "TABLES", "Diff", "Gate", "GateRefused", "Preview", "Released", "VerifyReport",
           "compare", "diff", "gate", "last_version", "next_version", "parse_version", "preview", "read",
           "release", "verify"]
