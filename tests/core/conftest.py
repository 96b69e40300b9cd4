"""Fixtures of the core suite: record factories, a CLI runner in a subprocess, a folder fingerprint."""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path

import pytest

from tablekeeper.store import Dataset


def _species(ident: str = "water-l", **over: object) -> dict:
    """A valid species record (values from memory of the CODATA key values, for shape only)."""
    rec: dict = {
        "id": ident,
        "revision": 1,
        "formula": "H2O",
        "phase": "l",
        "charge": 0,
        "status": "draft",
        "name": "water",
        "properties": {
            "dfH298": {"value": -285.83, "unit": "kJ/mol", "uncertainty": 0.04, "source": "codata-1989"},
            "S298": {"value": 69.95, "unit": "J/(mol*K)", "uncertainty": 0.03, "source": "codata-1989"},
        },
    }
    rec.update(over)
    return rec


@pytest.fixture
def species_record() -> Callable[..., dict]:
    """Factory of valid species records: ``species_record("id", phase="g")``."""
    return _species


def _valid_documents() -> dict[str, dict]:
    """One small valid document of every kind the schemas describe."""
    return {
        "dataset": {"name": "coreset", "title": "Core test set", "schema_version": 1,
                    "standard_pressure_bar": 1, "reference_temperature_K": 298.15,
                    "element_references": {"H": "h2-g"},
                    "policy": {"tolerance_k": 2, "require_uncertainty": True,
                               "max_relative_uncertainty": 0.5, "required_fields": ["dfH298"]},
                    "roles": {"steward": ["ann"], "reviewer": ["bob"], "release": ["cid"]},
                    "description": "For tests."},
        "species": _species(),
        "sources": {"id": "codata-1989", "revision": 1, "title": "CODATA Key Values for Thermodynamics",
                    "authors": ["Cox, J. D."], "year": 1989, "identifier": "ISBN 0-89116-758-7",
                    "kind": "compilation", "notes": "Key values."},
        "reactions": {"id": "h2-combustion", "revision": 1, "equation": "H2(g) + 0.5 O2(g) = H2O(l)",
                      "temperature_K": 298.15, "drH": {"value": -285.83, "uncertainty": 0.04},
                      "source": "codata-1989", "notes": "Combustion."},
        "flags": {"id": "flag-1", "revision": 1, "species": "water-l", "field": "dfH298",
                  "note": "Looks high.", "blocking": False, "status": "open", "raised_by": "bob",
                  "raised_at": "2024-05-01T12:00:00Z",
                  "comments": [{"by": "ann", "at": "2024-05-02T08:30:00Z", "text": "Checked."}],
                  "resolution": "Fine as it is."},
        "journal": {"time": "2024-05-01T12:00:00Z", "user": "ann", "action": "update",
                    "target": "species/water-l", "revision": 2,
                    "changes": [{"field": "properties.dfH298.value", "old": -285.8, "new": -285.83}],
                    "reason": "typo"},
        "releases": {"version": "1.2.3", "previous": "1.2.2", "created": "2024-05-01T12:00:00Z",
                     "user": "cid", "digest": "sha256:" + "0" * 64, "note": "Spring release.",
                     "summary": {"error": 0, "warning": 1, "info": 0}},
        "datapackage": {
            "profile": "data-package", "name": "coreset", "title": "Core test set", "version": "1.0.0",
            "created": "2024-01-01T00:00:00Z",
            "resources": [{"name": "changes", "path": "CHANGES.md", "format": "md",
                           "mediatype": "text/markdown", "encoding": "utf-8", "hash": "sha256:" + "0" * 64,
                           "bytes": 0}],
            "tablekeeper:format": 1, "tablekeeper:previous_version": None,
            "tablekeeper:standard_state": {"pressure_bar": 1, "temperature_K": 298.15},
            "tablekeeper:check_summary": {"error": 0, "warning": 0, "info": 0},
            "tablekeeper:accepted_warnings": [],
            "tablekeeper:cautions": ["A passing check proves consistency, not correctness."],
            "tablekeeper:descriptor_hash": "sha256:" + "0" * 64},
    }


@pytest.fixture
def valid_documents() -> Callable[[], dict[str, dict]]:
    """Factory of fresh valid documents, keyed by schema kind."""
    return _valid_documents


@pytest.fixture
def dataset(tmp_path: Path) -> Dataset:
    """An empty dataset with one source, ``codata-1989``."""
    ds = Dataset.init(tmp_path / "ds", "coreset", title="Core test set")
    ds.save("sources", {"id": "codata-1989", "revision": 1,
                        "title": "CODATA Key Values for Thermodynamics",
                        "authors": ["Cox, J. D.", "Wagman, D. D.", "Medvedev, V. A."], "year": 1989},
            expected_revision=None)
    return ds


def _digest(root: Path) -> dict[str, str]:
    out = {}
    for dirpath, _dirs, files in os.walk(root):
        for name in files:
            p = Path(dirpath) / name
            out[str(p.relative_to(root))] = hashlib.sha256(p.read_bytes()).hexdigest()
    return out


@pytest.fixture
def folder_digest() -> Callable[[Path], dict[str, str]]:
    """Relative path → sha256 of every file under a folder (to prove nothing changed)."""
    return _digest


@pytest.fixture
def run_cli() -> Callable[..., subprocess.CompletedProcess]:
    """Run ``python -m tablekeeper.cli ARGS`` in a subprocess, as a user would."""

    def run(*args: str | os.PathLike[str], cwd: Path | None = None) -> subprocess.CompletedProcess:
        return subprocess.run([sys.executable, "-m", "tablekeeper.cli", *map(str, args)], capture_output=True,
                              text=True, timeout=120, cwd=cwd, env=dict(os.environ))

    return run
