"""``tablekeeper.bundle.read``: a release bundle as pandas DataFrames, after verifying it.

Column dtypes follow the Table Schema: numbers are float64 read exactly (``float_precision="round_trip"``
under pandas 2; pandas 3 always parses exactly), so every float is the double the dataset stored, bit
for bit; integers are nullable ``Int64``, booleans ``boolean``, text ``string`` with the empty cell as
missing. A cell that reads as "NA" or
"null" stays text: only the empty cell is missing, as the descriptor's ``missingValues`` says.
"""

from __future__ import annotations

import os
from pathlib import Path

import pandas as pd

from ..errors import DamagedFileError
from .archive import opened
from .tables import TABLES, Table
from .verify import is_archive, load_verified, raise_if_damaged, verify_opened

_DTYPES = {"number": "float64", "integer": "Int64", "boolean": "boolean", "string": "string"}
# pandas 3 parses every float exactly and deprecates the option; pandas 2 needs it for exactness.
_EXACT = {"float_precision": "round_trip"} if int(pd.__version__.split(".")[0]) < 3 else {}


def _frame(table: Table, path: Path) -> pd.DataFrame:
    cols = table.columns
    dtypes = {c.name: _DTYPES[c.type] for c in cols if c.type != "boolean"}
    frame = pd.read_csv(path, dtype=dtypes, keep_default_na=False, na_values={c.name: [""] for c in cols},
                        encoding="utf-8", lineterminator="\n", **_EXACT)
    for c in cols:
        if c.type == "boolean":
            frame[c.name] = frame[c.name].map({"true": True, "false": False, True: True, False: False}
                                              ).astype("boolean")
    return frame


def _read_folder(folder: Path) -> dict[str, pd.DataFrame]:
    return {t.name: _frame(t, folder / t.path) for t in TABLES}


def read(path: str | os.PathLike[str]) -> dict[str, pd.DataFrame]:
    """Verify a bundle (folder or .tar.gz) and return its tables by name: species, values, cp_models,
    thermo_table, sources, findings. DamagedFileError when verification finds any damage."""
    p = Path(path)
    if p.is_file() and is_archive(p):
        with opened(p) as op:
            raise_if_damaged(verify_opened(p, op))
            if op.folder is None:  # cannot happen: an archive that was not extracted has damages
                raise DamagedFileError("could not be opened", file=str(p))
            return _read_folder(op.folder)
    load_verified(p, keep=())
    return _read_folder(p)
