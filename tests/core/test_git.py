"""A dataset in a real git repository: two branches that each save a species merge without conflict."""

from __future__ import annotations

import os
import subprocess
from pathlib import Path

import pytest

from tablekeeper import cli
from tablekeeper.store import Dataset

# No skip when git is missing: sharing a dataset through git is part of the contract, so its absence fails.
pytestmark = pytest.mark.timeout(120)


def _git(repo: Path, *args: str) -> str:
    # Isolated from the machine's git configuration, so that the test sees git's defaults only.
    env = dict(os.environ, GIT_CONFIG_GLOBAL=os.devnull, GIT_CONFIG_NOSYSTEM="1", HOME=str(repo.parent),
               GIT_AUTHOR_DATE="2024-05-01T12:00:00Z", GIT_COMMITTER_DATE="2024-05-01T12:00:00Z")
    r = subprocess.run(["git", "-C", str(repo), *args], capture_output=True, text=True, env=env, timeout=60)
    assert r.returncode == 0, f"git {' '.join(args)}: {r.stdout}{r.stderr}"
    return r.stdout


def test_two_branches_each_saving_a_species_merge_cleanly(tmp_path: Path, species_record) -> None:
    repo = tmp_path / "repo"
    repo.mkdir()
    _git(repo, "init", "-q", "-b", "main")
    _git(repo, "config", "user.name", "Test User")
    _git(repo, "config", "user.email", "test@example.invalid")
    root = repo / "thermo"
    assert cli.main(["init", str(root), "--name", "thermo"]) == 0
    assert _git(repo, "check-attr", "merge", "thermo/journal.jsonl").strip().endswith("merge: union")
    _git(repo, "add", "-A")
    _git(repo, "commit", "-q", "-m", "empty dataset")
    journal_at_start = (root / "journal.jsonl").read_bytes()

    _git(repo, "switch", "-q", "-c", "water")
    Dataset(root, user="ann").save("species", species_record("water-l"), expected_revision=None,
                                   reason="water from the key values")
    _git(repo, "add", "-A")
    _git(repo, "commit", "-q", "-m", "water")

    _git(repo, "switch", "-q", "main")
    _git(repo, "switch", "-q", "-c", "co2")
    assert Dataset(root).ids("species") == []
    Dataset(root, user="bob").save("species", species_record("co2-g", formula="CO2", phase="g"),
                                   expected_revision=None, reason="carbon dioxide")
    _git(repo, "add", "-A")
    _git(repo, "commit", "-q", "-m", "co2")
    assert _git(repo, "status", "--porcelain") == ""  # lock and temporary files are ignored

    _git(repo, "switch", "-q", "water")
    _git(repo, "merge", "--no-edit", "-q", "co2")  # asserts exit 0: no conflict
    assert _git(repo, "status", "--porcelain") == ""

    ds = Dataset(root)
    assert ds.ids("species") == ["co2-g", "water-l"]
    assert ds.load_all("species").damaged == []
    entries, problems = ds.journal()
    assert problems == []
    journal = (root / "journal.jsonl").read_bytes()
    assert journal.startswith(journal_at_start) and b"<<<<<<<" not in journal
    saves = [(e["user"], e["target"], e["reason"]) for e in entries if e["action"] == "create"]
    assert sorted(saves) == [("ann", "species/water-l", "water from the key values"),
                             ("bob", "species/co2-g", "carbon dioxide")]
