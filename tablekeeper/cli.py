"""The command line: parses arguments, calls the core, prints. No computation lives here.

Data goes to stdout, diagnostics to stderr. Exit codes (DESIGN.md section 6): 0 success; 1 the
command ran and found what ``--fail-on`` names (or verify found damage); 2 bad usage or unreadable
input, with a one-line reason and no traceback.
"""

from __future__ import annotations

import argparse
import enum
import sys
from collections.abc import Sequence
from pathlib import Path

from .errors import TablekeeperError
from .text import json_text, printable


class Exit(enum.IntEnum):
    OK = 0
    FOUND = 1
    USAGE = 2


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # one line, exit 2
        self.exit(Exit.USAGE, f"tablekeeper: {message} (see tablekeeper {self.prog.split()[-1]} --help)\n")


def demo_path() -> Path:
    """The shipped demo dataset: the source tree's datasets/ or the packaged copy."""
    here = Path(__file__).resolve().parent
    for base in (here.parent / "datasets", here / "demo"):
        cand = base / "kestrel-works"
        if (cand / "dataset.json").is_file():
            return cand
    raise TablekeeperError("the demo dataset is not installed")


def _out(text: str) -> None:
    sys.stdout.write(text if text.endswith("\n") else text + "\n")


# -- commands -----------------------------------------------------------------------------------------

def cmd_init(args: argparse.Namespace) -> int:
    from .store import Dataset

    ds = Dataset.init(args.dataset, args.name, title=args.title)
    _out(f"created dataset {ds.name} in {printable(ds.root)}")
    return Exit.OK


def cmd_check(args: argparse.Namespace) -> int:
    from .checks import check_dataset
    from .store import Dataset

    report = check_dataset(Dataset(args.dataset))
    if args.format == "json":
        _out(json_text(report.to_json()))
    else:
        _out(format_report(report))
    return Exit.FOUND if report.fails(args.fail_on) else Exit.OK


def format_report(report) -> str:
    s = report.summary
    lines = [f"{printable(report.dataset)}: {s['error']} errors, {s['warning']} warnings, {s['info']} infos"]
    for f in report.findings:
        where = " ".join(printable(x) for x in (f.species, f.field) if x)
        lines.append(f"{f.severity:<8} {f.check:<18} {where}: {printable(f.message)}")
        if f.suggestion:
            lines.append(f"{'':<28}suggestion: {printable(f.suggestion)}")
    return "\n".join(lines)


def cmd_import(args: argparse.Namespace) -> int:
    from .importers import apply_import, parse_pairs, plan_import
    from .store import Dataset

    ds = Dataset(args.dataset)
    ds.require("edit")
    plan = plan_import(ds, Path(args.file), mapping=parse_pairs(args.map, "--map"),
                       units=parse_pairs(args.unit, "--unit"), source=args.source, update=args.update)
    n = apply_import(ds, plan, reason=args.reason or f"import of {Path(args.file).name}")
    _out(f"imported {len(plan.create)} new and {len(plan.update)} updated species "
         f"({len(plan.unchanged)} unchanged); {n} records written")
    return Exit.OK


def cmd_flag(args: argparse.Namespace) -> int:
    from .flags import raise_flag
    from .store import Dataset

    rec = raise_flag(Dataset(args.dataset), args.species, args.field, args.note, blocking=args.blocking)
    kind = "blocking flag" if rec["blocking"] else "flag"
    _out(f"raised {kind} {rec['id']} on {rec['species']} {rec['field']}")
    return Exit.OK


def cmd_open(args: argparse.Namespace) -> int:
    from .tui import run_app

    run_app(Path(args.dataset) if args.dataset else demo_path())
    return Exit.OK


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="tablekeeper", description="Keep thermochemical tables honest. With no command, "
                "opens the terminal app on the shipped demo dataset.")
    from . import __version__

    p.add_argument("--version", action="version", version=f"tablekeeper {__version__}")
    sub = p.add_subparsers(dest="command", parser_class=_Parser)

    s = sub.add_parser("open", help="open the terminal app on a dataset folder")
    s.add_argument("dataset", nargs="?")
    s.set_defaults(func=cmd_open)

    s = sub.add_parser("init", help="create an empty dataset")
    s.add_argument("dataset")
    s.add_argument("--name", required=True, help="short name (a-z, 0-9, '.', '_', '-')")
    s.add_argument("--title")
    s.set_defaults(func=cmd_init)

    s = sub.add_parser("check", help="run the check catalogue")
    s.add_argument("dataset")
    s.add_argument("--format", choices=("text", "json"), default="text")
    s.add_argument("--fail-on", choices=("error", "warning", "never"), default="error")
    s.set_defaults(func=cmd_check)

    s = sub.add_parser("import", help="import species from a CSV file (all or nothing)")
    s.add_argument("dataset")
    s.add_argument("file")
    s.add_argument("--map", action="append", default=[], metavar="COLUMN=FIELD")
    s.add_argument("--unit", action="append", default=[], metavar="FIELD=UNIT")
    s.add_argument("--source", metavar="ID", help="source id for every imported value")
    s.add_argument("--update", action="store_true", help="change species that already exist")
    s.add_argument("--reason", help="reason written to the journal")
    s.set_defaults(func=cmd_import)

    s = sub.add_parser("flag", help="flag a value as suspicious")
    s.add_argument("dataset")
    s.add_argument("species")
    s.add_argument("field")
    s.add_argument("--note", required=True)
    s.add_argument("--blocking", action="store_true", help="block releases until resolved")
    s.set_defaults(func=cmd_flag)

    _extend(sub)
    return p


def _extend(sub) -> None:
    """Commands whose core lives in thermo (table, reaction) and bundle (release, diff, verify)."""
    from . import cli_bundle, cli_thermo

    cli_thermo.register(sub)
    cli_bundle.register(sub)


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        args = parser.parse_args(["open"])
    try:
        return int(args.func(args))
    except TablekeeperError as exc:
        sys.stderr.write(f"tablekeeper: {printable(exc)}\n")
        return Exit.USAGE
    except OSError as exc:
        sys.stderr.write(f"tablekeeper: {printable(exc.filename or '')}: {exc.strerror or exc}\n")
        return Exit.USAGE
    except KeyboardInterrupt:
        sys.stderr.write("tablekeeper: interrupted\n")
        return 130


if __name__ == "__main__":
    sys.exit(main())
