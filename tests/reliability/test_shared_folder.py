"""Shared use: a dataset in a group-writable, setgid folder stays usable by every member of the group.

Saves, imports and flags made under the common umask 022 must keep an existing file's mode and give
new files group write and the folder's group; and two different OS users of that group must both be
able to save (the lock file and the journal stay writable for the group). The control shows that the
same dataset without group write on its folders refuses the second user, so the test can fail.
"""

from __future__ import annotations

import os
import shutil
import stat
import subprocess
import sys
import tempfile
from pathlib import Path

import pytest

from tablekeeper.store import Dataset

GID = 4242  # a group number nobody else uses on a test machine
USERS = (4301, 4302)
CHILD = Path(__file__).with_name("child.py")


def _share(root: Path, dir_mode: int, file_mode: int) -> None:
    for p in [root, *root.rglob("*")]:
        os.chown(p, -1, GID)
        os.chmod(p, dir_mode if p.is_dir() else file_mode)


def _modes(root: Path) -> dict[str, int]:
    return {str(p.relative_to(root)): stat.S_IMODE(p.stat().st_mode) for p in root.rglob("*")}


def _run(args: list[str], *, uid: int | None = None, cwd: Path | None = None) -> subprocess.CompletedProcess:
    """Run under umask 022; as another user when ``uid`` is given (child.py drops root after its imports,
    because the interpreter may live in a folder only root can read)."""
    env = dict(os.environ, TABLEKEEPER_USER=f"u{uid or 0}", HOME="/tmp")
    if uid is not None:
        env.update(TK_AS_UID=str(uid), TK_AS_GID=str(GID))
    return subprocess.run(
        [sys.executable, *args],
        preexec_fn=lambda: os.umask(0o022),
        capture_output=True,
        text=True,
        timeout=120,
        env=env,
        cwd=cwd,
    )


@pytest.fixture
def shared_root(make_species):
    if os.geteuid() != 0:
        pytest.skip("needs root to create files of another group and run as other users")
    base = Path(tempfile.mkdtemp(prefix="tk-shared-", dir="/tmp"))
    os.chmod(base, 0o755)  # other users must reach the dataset
    ds = Dataset.init(base / "ds", "shared")
    ds.save("species", make_species("water", notes="v1"), expected_revision=None)
    ds.save("species", make_species("private", notes="v1"), expected_revision=None)
    yield ds.root
    shutil.rmtree(base, ignore_errors=True)


@pytest.mark.timeout(120)
def test_saves_imports_and_flags_keep_the_dataset_group_writable(shared_root):
    root = shared_root
    _share(root, 0o2775, 0o664)
    os.chmod(root / "species" / "private.json", 0o660)  # a chosen mode must survive saves
    csv = root.parent / "in.csv"
    csv.write_text("id,formula,phase,name\nsteam,H2O,g,steam\nprivate,H2O,l,private water\n")
    steps = [
        [str(CHILD), "saver", str(root), "water", "v2"],
        ["-m", "tablekeeper.cli", "import", str(root), str(csv), "--update"],
        ["-m", "tablekeeper.cli", "flag", str(root), "water", "dfH298", "--note", "check the source"],
    ]
    for args in steps:
        r = _run(args)
        assert r.returncode == 0, (args, r.stdout, r.stderr)
    modes = _modes(root)
    files = {k: m for k, m in modes.items() if (root / k).is_file()}
    wrong = {
        k: oct(m)
        for k, m in files.items()
        if k != "species/private.json" and k != ".tablekeeper.lock" and m & 0o060 != 0o060
    }
    print(
        f"shared folder: {len(files) - len(wrong)} of {len(files)} files group-readable and -writable "
        f"after save, import and flag under umask 022; private.json kept {oct(files['species/private.json'])}"
    )
    assert not wrong, f"files lost group read/write: {wrong}"
    assert files["species/private.json"] == 0o660, "the mode of an existing file was not kept by import"
    new = [k for k in files if k.startswith("flags/") or k in ("species/steam.json", "species/water-0.json")]
    assert len(new) >= 3, new
    assert all((root / k).stat().st_gid == GID for k in files), "a new file did not get the folder's group"
    assert not [k for k in modes if ".tmp-" in k]


@pytest.mark.timeout(120)
def test_two_users_of_the_group_can_both_save(shared_root):
    root = shared_root
    _share(root, 0o2775, 0o664)
    (root / ".tablekeeper.lock").unlink(missing_ok=True)  # the first user creates it; the second must open it
    for uid in USERS:
        r = _run([str(CHILD), "saver", str(root), "water", f"by {uid}"], uid=uid, cwd=Path("/tmp"))
        assert r.returncode == 0, f"user {uid} could not save: {r.stderr[-1500:]}"
    ds = Dataset(root)
    entries, problems = ds.journal()
    users = {e["user"] for e in entries}
    print(f"two users: both saved; journal users {sorted(users)}")
    assert {f"u{u}" for u in USERS} <= users and not problems
    assert ds.load("species", "water")["notes"] == f"by {USERS[1]}"


@pytest.mark.timeout(120)
def test_control_dataset_without_group_write_refuses_the_second_user(shared_root):
    root = shared_root
    _share(root, 0o755, 0o644)
    r = _run([str(CHILD), "saver", str(root), "water", "by other"], uid=USERS[0], cwd=Path("/tmp"))
    print(f"control: a folder without group write refuses another user (exit {r.returncode})")
    assert r.returncode != 0, "another user could write a folder without group write: the test cannot fail"
    assert Dataset(root).load("species", "water")["notes"] == "v1"
