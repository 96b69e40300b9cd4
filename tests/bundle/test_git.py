"""git: release --git-tag on a clean work tree, and diff git:REV DATASET, with a real repository."""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest

from tablekeeper.bundle import diff, release
from tablekeeper.cli import main
from tablekeeper.errors import InputError
from tablekeeper.store import Dataset

pytestmark = pytest.mark.skipif(shutil.which("git") is None, reason="git is not installed")


def git(repo: Path, *args: str) -> str:
    return subprocess.run(["git", *args], cwd=repo, check=True, capture_output=True, text=True).stdout.strip()


@pytest.fixture
def repo(tmp_path, monkeypatch, clean_dataset) -> tuple[Path, Dataset]:
    """A git repository holding the clean dataset under data/keyvalues, committed."""
    for k, v in {"GIT_AUTHOR_NAME": "Tester", "GIT_AUTHOR_EMAIL": "tester@example.invalid",
                 "GIT_COMMITTER_NAME": "Tester", "GIT_COMMITTER_EMAIL": "tester@example.invalid",
                 "GIT_CONFIG_GLOBAL": "/dev/null", "GIT_CONFIG_NOSYSTEM": "1"}.items():
        monkeypatch.setenv(k, v)
    top = tmp_path / "repo"
    top.mkdir()
    git(top, "init", "-q")
    shutil.copytree(clean_dataset.root, top / "data" / "keyvalues")
    git(top, "add", "-A")
    git(top, "commit", "-q", "-m", "key values")
    return top, Dataset(top / "data" / "keyvalues")


def test_git_tag_names_the_released_commit(repo, tmp_path):
    top, ds = repo
    head = git(top, "rev-parse", "HEAD")
    done = release(ds, "1.0.0", out=tmp_path / "out", git_tag=True)
    assert done.tag == "keyvalues-v1.0.0"
    assert done.record["git_commit"] == head
    assert git(top, "cat-file", "-t", "keyvalues-v1.0.0") == "tag"  # annotated, not lightweight
    assert git(top, "rev-list", "-n", "1", "keyvalues-v1.0.0") == head


def test_git_tag_refused_with_uncommitted_changes(repo, tmp_path):
    top, ds = repo
    rec = ds.load("species", "co-g")
    ds.save("species", dict(rec, name="carbon monoxide (edited)"), expected_revision=rec["revision"])
    with pytest.raises(InputError, match="uncommitted changes"):
        release(ds, "1.0.0", out=tmp_path / "out", git_tag=True)
    assert not (tmp_path / "out").exists() and ds.ids("releases") == []
    assert git(top, "tag") == ""


def test_git_tag_refused_outside_a_work_tree(clean_dataset, tmp_path, monkeypatch):
    monkeypatch.setenv("GIT_CEILING_DIRECTORIES", str(tmp_path))
    with pytest.raises(InputError, match="not inside a git work tree"):
        release(clean_dataset, "1.0.0", out=tmp_path / "out", git_tag=True)


def test_diff_git_rev_against_the_work_tree(repo, capsys, monkeypatch):
    top, ds = repo
    rec = ds.load("species", "co-g")
    ds.save("species", {**rec, "properties": {**rec["properties"], "dfH298": {**rec["properties"]["dfH298"],
                                                                             "value": -110.6}}},
            expected_revision=rec["revision"])
    git(top, "commit", "-q", "-am", "CO corrected")
    d = diff("git:HEAD~1", ds.root)
    assert d.old.startswith("git:HEAD~1 (")
    assert [c.species for c in d.changed] == ["co-g"]
    assert d.changed[0].changes[0].text() == "ΔfH° −110.53 → −110.6 kJ/mol (−0.07, 0.8 u)"
    assert diff("git:HEAD", ds.root).empty
    # The command line, run from inside the dataset folder with git:REV on both sides.
    monkeypatch.chdir(ds.root)
    assert main(["diff", "git:HEAD~1", "git:HEAD"]) == 0
    out = capsys.readouterr().out
    assert "~ co-g CO(g)" in out and "suggested bump: patch" in out


def test_diff_git_rev_runs_nothing_from_the_repository(repo, tmp_path):
    # A repository that asks git to run a filter program on checkout: reading a revision must not run it.
    top, ds = repo
    marker = tmp_path / "filter-ran"
    (top / ".gitattributes").write_text("*.json filter=trap\n")
    git(top, "config", "filter.trap.smudge", f"sh -c 'touch {marker}; cat'")
    git(top, "config", "filter.trap.clean", "cat")
    git(top, "add", ".gitattributes")
    git(top, "commit", "-q", "-m", "attributes")
    assert diff("git:HEAD", ds.root).empty
    assert not marker.exists()


def test_bad_revisions_are_refused(repo):
    _, ds = repo
    with pytest.raises(InputError, match="not a git revision"):
        diff("git:--output=/tmp/x", ds.root)
    with pytest.raises(InputError, match="no revision"):
        diff("git:no-such-branch", ds.root)
