"""The release commands of the command line: ``release``, ``diff`` and ``verify``. Thin: parse, call
tablekeeper.bundle, print. Data to stdout, diagnostics to stderr.

Exit codes (DESIGN.md section 6):

* ``release``: 0 released; 1 refused by the gate (errors, open blocking flags, or warnings without
  ``--allow-warnings``), every reason listed on stderr; 2 bad usage or unreadable input, including a
  broken version rule (a version that exists or does not increase) and an existing bundle.
* ``diff``: 0 whatever the differences; 2 bad usage or an unreadable or damaged operand.
* ``verify``: 0 intact; 1 damage found, every damage listed; 2 not a bundle at all.
"""

from __future__ import annotations

import argparse
import sys

from .cli import Exit, _out
from .text import json_text, printable

_RELEASE_HELP = """\
Check the dataset and publish a versioned bundle: the folder <name>-<version>/ (datapackage.json,
species.csv, values.csv, cp_models.csv, thermo_table.csv, sources.csv, findings.csv, CHANGES.md)
and <name>-<version>.tar.gz beside it, in --out (default: the current folder). The dataset keeps a
copy of the archive and the release record in its releases/ folder. Byte for byte reproducible: set
SOURCE_DATE_EPOCH to fix the release time.

exit status: 0 released; 1 refused by the gate (errors, open blocking flags, or warnings without
--allow-warnings), the reasons listed; 2 bad usage or unreadable input, including a version that
exists or does not increase over the last release, and a bundle that exists already."""

_DIFF_HELP = """\
Compare two states of a table: dataset folders, bundle folders, bundle archives (.tar.gz), or
git:REV, the dataset as it stood at a git revision (the dataset of the other operand, else the one in
the current folder). Lists species added, removed and changed, value by value with the change in
units of its standard uncertainty, and suggests the version bump.

exit status: 0 compared (whatever the differences); 2 bad usage or an unreadable or damaged operand."""

_VERIFY_HELP = """\
Recompute every hash and byte count of a bundle (folder or .tar.gz) and validate every file; report
every damage. An archive member with '..', an absolute path, a link or a device is refused and
nothing is extracted.

exit status: 0 intact; 1 damage found; 2 not a bundle."""


def _err(text: str) -> None:
    sys.stderr.write(text if text.endswith("\n") else text + "\n")


def cmd_release(args: argparse.Namespace) -> int:
    from .bundle import GateRefused, release
    from .store import Dataset

    show = sys.stderr.isatty()

    def progress(stage: str, fraction: float) -> None:
        if show:
            sys.stderr.write(f"\r{fraction * 100:3.0f}% {stage:<50}")
            if fraction >= 1.0:
                sys.stderr.write("\n")
            sys.stderr.flush()

    try:
        done = release(Dataset(args.dataset), args.version, out=args.out, note=args.note,
                       allow_warnings=args.allow_warnings, git_tag=args.git_tag, progress=progress)
    except GateRefused as exc:
        if show:
            sys.stderr.write("\n")
        _err(f"tablekeeper: {printable(exc)}")
        for reason in exc.gate.reasons():
            _err(f"  {printable(reason)}")
        return Exit.FOUND
    c = done.counts
    _out(f"released {printable(done.folder.name)}: {c.get('species', 0)} species, {c.get('values', 0)} "
         f"values, {len(done.gate.accepted)} findings accepted")
    _out(f"  folder  {printable(done.folder)}")
    _out(f"  archive {printable(done.archive)}  {done.record['archive_digest']}")
    _out(f"  datapackage.json {done.record['digest']}")
    if done.tag:
        _out(f"  git tag {printable(done.tag)} on {done.record.get('git_commit', '')[:12]}")
    if done.previous:
        d = done.diff
        if d is None:
            _out(f"  changes since {done.previous}: not listed (the previous bundle was not found)")
        else:
            _out(f"  changes since {done.previous}: {len(d.added)} added, {len(d.removed)} removed, "
                 f"{len(d.changed)} changed")
    if done.bump_hint:
        _err(f"tablekeeper: note: {printable(done.bump_hint)}")
    return Exit.OK


def cmd_diff(args: argparse.Namespace) -> int:
    from .bundle import diff

    d = diff(args.old, args.new)
    if args.format == "json":
        _out(json_text(d.to_json()))
    else:
        _out("\n".join(printable(line) for line in d.text().split("\n")))
    return Exit.OK


def cmd_verify(args: argparse.Namespace) -> int:
    from .bundle import verify

    report = verify(args.bundle)
    if report.ok:
        total = sum(report.files.values())
        _out(f"{printable(args.bundle)}: intact ({printable(report.name)} {printable(report.version)}, "
             f"{len(report.files)} files, {total} bytes, every hash matches)")
        return Exit.OK
    _out(f"{printable(args.bundle)}: DAMAGED, {len(report.damages)} problem"
         f"{'s' if len(report.damages) != 1 else ''}")
    for line in report.damages:
        _out(f"  {printable(line)}")
    return Exit.FOUND


def register(sub) -> None:
    """Add release, diff and verify to the command line's subparsers."""
    fmt = argparse.RawDescriptionHelpFormatter
    s = sub.add_parser("release", help="check and publish a versioned bundle", description=_RELEASE_HELP,
                       formatter_class=fmt)
    s.add_argument("dataset")
    s.add_argument("--version", required=True, metavar="X.Y.Z", help="the new version; must increase")
    s.add_argument("--out", metavar="DIR",
                   help="folder for the bundle and its archive (default: the current folder)")
    s.add_argument("--note", metavar="TEXT", help="a note for the release record and the change log")
    s.add_argument("--allow-warnings", action="store_true",
                   help="release despite warnings; they are listed in findings.csv and the descriptor")
    s.add_argument("--git-tag", action="store_true",
                   help="tag the current commit <name>-v<version> (the dataset must be committed)")
    s.set_defaults(func=cmd_release)

    s = sub.add_parser("diff", help="compare datasets, bundles or git revisions", description=_DIFF_HELP,
                       formatter_class=fmt)
    s.add_argument("old", metavar="OLD")
    s.add_argument("new", metavar="NEW")
    s.add_argument("--format", choices=("text", "json"), default="text")
    s.set_defaults(func=cmd_diff)

    s = sub.add_parser("verify", help="verify a bundle's hashes and files", description=_VERIFY_HELP,
                       formatter_class=fmt)
    s.add_argument("bundle", metavar="BUNDLE")
    s.set_defaults(func=cmd_verify)
