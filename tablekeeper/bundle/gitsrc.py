"""Git, the distributed engine a dataset's users already have: a dataset as it stood at a revision,
the cleanliness of a work tree, the commit released, and the annotated release tag.

Only git's plumbing is used to read a revision (``ls-tree`` and ``cat-file --batch``): they hand out the
stored bytes and never run a filter, a text conversion or a hook that a repository's own configuration
could name; so nothing from the repository is ever executed. Symbolic links and submodules in the
tree are skipped, and every path is checked before a file is written. Settings that could make git run
a program (fsmonitor, tag signing) are switched off on the command line, which overrides the
repository's configuration.
"""

from __future__ import annotations

import os
import re
import subprocess
from pathlib import Path

from ..errors import InputError

_SAFE = ("-c", "core.fsmonitor=false", "-c", "core.untrackedCache=false", "-c", "tag.gpgSign=false",
         "-c", "gpg.program=false", "-c", "core.hooksPath=/dev/null")
#: A revision as a user types it (HEAD~2, v1.0, a hash, main@{1}); never an option.
_REV = re.compile(r"^[A-Za-z0-9._/~^@{}+-]{1,200}$")
MAX_BLOB_BYTES = 64 << 20


def _env() -> dict[str, str]:
    env = dict(os.environ)
    env.update(GIT_TERMINAL_PROMPT="0", GIT_OPTIONAL_LOCKS="0", LC_ALL="C", GIT_PAGER="cat")
    env.pop("GIT_DIR", None)
    env.pop("GIT_WORK_TREE", None)
    return env


def git(args: list[str], cwd: Path, *, input: bytes | None = None, check: bool = True) -> bytes:
    """Run one git command; InputError with git's first line of complaint when it fails."""
    try:
        proc = subprocess.run(["git", *_SAFE, *args], cwd=cwd, input=input, capture_output=True,
                              env=_env(), check=False, timeout=600)
    except FileNotFoundError:
        raise InputError("git is not installed or not on the PATH") from None
    except subprocess.TimeoutExpired:
        raise InputError(f"git {args[0]} took longer than ten minutes") from None
    if check and proc.returncode != 0:
        why = proc.stderr.decode("utf-8", "replace").strip().splitlines()
        raise InputError(f"git {args[0]} failed: {why[0] if why else 'exit status ' + str(proc.returncode)}",
                         file=str(cwd))
    return proc.stdout


def work_tree(path: Path) -> tuple[Path, str] | None:
    """(top of the work tree, path of ``path`` inside it with a trailing '/') or None outside git."""
    if not path.is_dir():
        return None
    try:
        out = subprocess.run(["git", *_SAFE, "rev-parse", "--show-toplevel", "--show-prefix"], cwd=path,
                             capture_output=True, env=_env(), check=False, timeout=60)
    except (FileNotFoundError, subprocess.TimeoutExpired):
        return None
    if out.returncode != 0:
        return None
    lines = out.stdout.decode("utf-8", "surrogateescape").split("\n")
    return Path(lines[0]), (lines[1] if len(lines) > 1 else "")


def _require_tree(path: Path) -> tuple[Path, str]:
    wt = work_tree(path)
    if wt is None:
        raise InputError("is not inside a git work tree", file=str(path))
    return wt


def resolve(rev: str, dataset: Path) -> str:
    """The commit hash of a revision in the dataset's repository."""
    if not _REV.match(rev) or rev.startswith("-"):
        raise InputError(f"{rev[:60]!r} is not a git revision", field="git:REV")
    top, _ = _require_tree(dataset)
    out = git(["rev-parse", "--verify", "--quiet", f"{rev}^{{commit}}"], top, check=False).strip()
    if not re.fullmatch(rb"[0-9a-f]{40}", out):
        raise InputError(f"the repository has no revision {rev!r}", file=str(top))
    return out.decode()


def export_dataset(rev: str, dataset: Path, dest: Path) -> str:
    """Write the dataset folder as it stood at ``rev`` into ``dest`` (a new folder); return the commit."""
    top, prefix = _require_tree(dataset)
    commit = resolve(rev, dataset)
    listing = git(["ls-tree", "-r", "-z", "--full-tree", commit, "--", prefix or "."], top)
    entries = []
    for item in listing.split(b"\0"):
        if not item:
            continue
        meta, _, raw_path = item.partition(b"\t")
        mode, kind, sha = meta.split(b" ")
        if kind != b"blob" or mode not in (b"100644", b"100755"):
            continue  # links and submodules are never followed
        path = raw_path.decode("utf-8", "surrogateescape")
        rel = path[len(prefix):] if prefix else path
        parts = rel.split("/")
        if not rel or rel.startswith("/") or any(p in ("", ".", "..") for p in parts):
            raise InputError(f"the tree at {rev} holds the unsafe path {path[:120]!r}", file=str(top))
        entries.append((sha.decode(), rel))
    if not any(rel == "dataset.json" for _, rel in entries):
        raise InputError(f"held no dataset at {prefix or 'the top'} at revision {rev}", file=str(top))
    blobs = git(["cat-file", "--batch"], top, input=b"".join(f"{sha}\n".encode() for sha, _ in entries))
    dest.mkdir(parents=True)
    pos = 0
    for sha, rel in entries:
        end = blobs.index(b"\n", pos)
        head = blobs[pos:end].split(b" ")
        if len(head) != 3 or head[0].decode() != sha:
            raise InputError(f"git cat-file gave an unexpected answer for {rel}", file=str(top))
        size = int(head[2])
        if size > MAX_BLOB_BYTES:
            raise InputError(f"{rel} at {rev} is {size} bytes, larger than a dataset file may be")
        data = blobs[end + 1:end + 1 + size]
        pos = end + 1 + size + 1
        target = dest.joinpath(*rel.split("/"))
        target.parent.mkdir(parents=True, exist_ok=True)
        with open(target, "xb") as fh:
            fh.write(data)
    for kind in ("species", "sources", "reactions", "flags", "releases"):
        (dest / kind).mkdir(exist_ok=True)
    return commit


def dirty_paths(dataset: Path) -> list[str]:
    """Uncommitted changes (modified, staged, untracked) inside the dataset folder."""
    top, prefix = _require_tree(dataset)
    out = git(["status", "--porcelain", "-z", "--untracked-files=all", "--", prefix or "."], top)
    return [e[3:].decode("utf-8", "replace") for e in out.split(b"\0") if len(e) > 3 and e[2:3] == b" "]


def head_commit(dataset: Path) -> str:
    top, _ = _require_tree(dataset)
    out = git(["rev-parse", "--verify", "HEAD^{commit}"], top).strip().decode()
    if not re.fullmatch(r"[0-9a-f]{40}", out):
        raise InputError("the repository has no commit yet", file=str(top))
    return out


def tag_exists(dataset: Path, tag: str) -> bool:
    top, _ = _require_tree(dataset)
    out = git(["rev-parse", "--verify", "--quiet", f"refs/tags/{tag}"], top, check=False)
    return bool(out.strip())


def create_tag(dataset: Path, tag: str, commit: str, message: str) -> None:
    top, _ = _require_tree(dataset)
    git(["tag", "-a", "-m", message, "--", tag, commit], top)


def delete_tag(dataset: Path, tag: str) -> None:
    top, _ = _require_tree(dataset)
    git(["tag", "-d", "--", tag], top, check=False)
