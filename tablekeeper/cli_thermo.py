"""The ``table`` and ``reaction`` commands: thin faces over tablekeeper.thermo.

``table DATASET SPECIES [--tmin K] [--tmax K] [--step K] [--format text|csv]`` prints Cp°, S°,
H° − H°(298.15) and G° − H°(298.15) from the species' Cp model; ``reaction DATASET "EQUATION"
[--temperature K] [--format text|json]`` prints ΔrH°, ΔrS°, ΔrG°, K, ΔS of surroundings and universe
and where ΔrG° changes sign. All numbers come from the core; this module only lays them out.
"""

from __future__ import annotations

import argparse
import sys

from .cli import Exit, _out
from .text import json_text, printable


def _species_record(ds, term: str) -> dict:
    """A species by id, else by formula(phase[, form]) through the same resolver as equations."""
    from .errors import NotFoundError
    from .store import SLUG
    from .thermo import resolve_species

    if SLUG.match(term):
        try:
            return ds.load("species", term)
        except NotFoundError:
            if "(" not in term:
                raise
    records = ds.load_all("species").records
    return records[resolve_species(term, records)]


def _describe(rec: dict) -> str:
    label = f"{rec.get('formula')}({rec.get('phase')}{', ' + str(rec['form']) if rec.get('form') else ''})"
    name = f"  {rec['name']}" if rec.get("name") else ""
    return printable(f"{rec.get('id')}  {label}{name}")


def format_table(rec: dict, frame, model) -> str:
    """Aligned columns with units in a second header line."""
    from .thermo import format_table_lines, property_value

    s298 = property_value(rec, "S298")
    src = f", source {model.source}" if model.source else ""
    lines = [_describe(rec),
             printable(f"Cp model: {model.kind}, {model.range_text()}{src}; "
                       f"S°(298.15 K) = {s298[0]:g} J/(mol·K)" if s298 else "")]
    # The columns and their decimals live in the core, shared with the terminal app.
    lines += format_table_lines(frame)
    return "\n".join(lines)


def cmd_table(args: argparse.Namespace) -> int:
    from .store import Dataset
    from .thermo import default_grid, derived_table, record_model

    ds = Dataset(args.dataset)
    rec = _species_record(ds, args.species)
    model = record_model(rec)
    grid = default_grid(model, args.step, tmin=args.tmin, tmax=args.tmax)
    frame = derived_table(rec, grid)
    if args.format == "csv":
        # pandas' default float format is the shortest repr that round-trips.
        sys.stdout.write(frame.to_csv(index=False, lineterminator="\n"))
    else:
        _out(format_table(rec, frame, model))
    return Exit.OK


def format_reaction(res) -> str:
    # The rows and their wording live in the core, shared with the terminal app.
    from .thermo import format_reaction as text

    return text(res)


def cmd_reaction(args: argparse.Namespace) -> int:
    from .store import Dataset
    from .thermo import parse_equation, reaction_properties

    ds = Dataset(args.dataset)
    report = ds.load_all("species")
    if report.damaged:
        sys.stderr.write(f"tablekeeper: note: {len(report.damaged)} species files could not be read and "
                         f"were left out (first: {printable(report.damaged[0])})\n")
    reaction = parse_equation(args.equation, report.records)
    res = reaction_properties(reaction, report.records, args.temperature)
    if args.format == "json":
        _out(json_text(res.to_json()))
    else:
        _out(format_reaction(res))
    return Exit.OK


def register(sub) -> None:
    """Add the ``table`` and ``reaction`` subcommands to the main parser's subparsers."""
    s = sub.add_parser("table", help="Cp°, S°, H°−H°(298.15), G°−H°(298.15) of a species from its Cp model")
    s.add_argument("dataset")
    s.add_argument("species", help="species id, or formula(phase) such as CO2(g)")
    s.add_argument("--tmin", type=float, metavar="K", help="first temperature (default 298.15 K)")
    s.add_argument("--tmax", type=float, metavar="K",
                   help="last temperature (default: the model's upper end)")
    s.add_argument("--step", type=float, default=100.0, metavar="K", help="grid step (default 100 K)")
    s.add_argument("--format", choices=("text", "csv"), default="text")
    s.set_defaults(func=cmd_table)

    s = sub.add_parser("reaction", help="ΔrH°, ΔrS°, ΔrG°, K and ΔS of the universe of a reaction")
    s.add_argument("dataset")
    s.add_argument("equation", help='e.g. "CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)"')
    s.add_argument("--temperature", type=float, default=298.15, metavar="K",
                   help="temperature (default 298.15 K; other temperatures use the Cp models)")
    s.add_argument("--format", choices=("text", "json"), default="text")
    s.set_defaults(func=cmd_reaction)
