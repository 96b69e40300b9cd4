"""The core never imports the terminal faces: importing every core module leaves textual and rich out."""

from __future__ import annotations

import json
import subprocess
import sys

CORE = ["tablekeeper.units", "tablekeeper.formula", "tablekeeper.model", "tablekeeper.store",
        "tablekeeper.jsonio", "tablekeeper.validation", "tablekeeper.importers", "tablekeeper.flags",
        "tablekeeper.checks", "tablekeeper.errors", "tablekeeper.text"]

SCRIPT = """
import importlib, json, sys
for name in sys.argv[1:]:
    importlib.import_module(name)
# Importing the check package does not load its families; running the registry does.
from tablekeeper import checks
checks._load_families()
print(json.dumps(sorted(m for m in sys.modules if m.split(".")[0] in ("textual", "rich", "tablekeeper"))))
"""


def test_core_modules_do_not_import_textual_or_rich() -> None:
    r = subprocess.run([sys.executable, "-c", SCRIPT, *CORE], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    loaded = json.loads(r.stdout)
    assert set(CORE) <= set(loaded)  # the modules were really imported
    assert [m for m in loaded if m.split(".")[0] in ("textual", "rich")] == []
    assert not any(m.startswith("tablekeeper.tui") or m == "tablekeeper.cli" for m in loaded)
