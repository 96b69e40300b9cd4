"""Chemical formulas: parsing, element counts, Hill order, charge and molar mass.

Parsing and the IUPAC standard atomic weights come from the ``molmass`` library rather than a table
typed by hand. The notation tablekeeper documents:

* elements with counts and nested parentheses or brackets: ``Ca(OH)2``, ``K4[Fe(CN)6]``;
* hydrates with a dot: ``CuSO4.5H2O`` (``·`` and ``*`` are read as the dot);
* charge as a trailing sign with an optional count: ``Cl-``, ``Na+``, ``SO4-2``, ``SO4 2-``, ``Fe+3``.
  Write the count after the sign: ``Fe3+`` reads as Fe₃ with charge +1 (a count before a lone sign
  is the element count, as in ``NH4+``).
* natural elements only: isotope labels (``D``, ``T``, a leading mass number such as ``2H``) are
  refused, because the element reference states and the checks know the natural elements only.
"""

from __future__ import annotations

import functools
import re
from dataclasses import dataclass

import molmass

from .errors import FormulaError

_CHARGE = re.compile(r"^(?P<body>.*?)(?:(?P<sign>[+-])(?P<n>\d*)|\s+(?P<n2>\d+)(?P<sign2>[+-]))$")


@dataclass(frozen=True)
class Formula:
    """A parsed formula."""

    text: str
    elements: tuple[tuple[str, int], ...]  # Hill order
    charge: int
    molar_mass: float  # g/mol, IUPAC standard atomic weights (conventional values), electrons removed

    @property
    def counts(self) -> dict[str, int]:
        return dict(self.elements)

    @property
    def atoms(self) -> int:
        return sum(n for _, n in self.elements)

    @property
    def hill(self) -> str:
        body = "".join(f"{el}{n if n != 1 else ''}"
                       for el, n in self.elements)
        if self.charge:
            body += ("+" if self.charge > 0 else "-") + (str(abs(self.charge)) if abs(self.charge) != 1 else "")
        return body


def _hill_order(counts: dict[str, int]) -> tuple[tuple[str, int], ...]:
    if "C" in counts:
        first = [e for e in ("C", "H") if e in counts]
        rest = sorted(e for e in counts if e not in ("C", "H"))
        order = first + rest
    else:
        order = sorted(counts)
    return tuple((e, counts[e]) for e in order)


def _molmass(s: str, text: str) -> tuple[dict[str, int], float]:
    """Element counts and molar mass (neutral) of a formula body, read by molmass."""
    try:
        f = molmass.Formula(s)
        comp = f.composition()
        counts: dict[str, int] = {}
        for item in comp.values():
            sym = item.symbol
            if sym == "e-":
                continue
            counts[sym] = counts.get(sym, 0) + int(item.count)
        mass = float(f.mass)
    except Exception as exc:
        reason = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise FormulaError(f"{text!r} does not parse as a formula ({reason})", field="formula") from None
    return counts, mass


#: Read plain formulas (element symbols and counts only) without molmass's general parser, which
#: costs about 0.1 ms a formula: most of a 100k-species load when formulas are distinct. False forces
#: molmass for every formula; tests/checks/test_fast_paths.py shows both give the same Formula.
FAST_PLAIN = True
_PLAIN = re.compile(r"(?:[A-Z][a-z]?[0-9]*)+")
_TOKEN = re.compile(r"([A-Z][a-z]?)([0-9]*)")
# What molmass would read as something other than element symbols: its group abbreviations (Me, Et,
# Ph, Cp, ...), deuterium written D, and one-letter oligonucleotide and peptide sequences.
_GROUP = re.compile("|".join(re.escape(g) for g in sorted(molmass.GROUPS, key=len, reverse=True)))
_DEUTERIUM = re.compile(r"D(?![a-z])")
_AMINO = frozenset(molmass.AMINOACIDS)


def _plain(s: str) -> tuple[dict[str, int], float] | None:
    """Counts and mass of a plain formula, computed as molmass computes them (its elements' average
    masses, summed in the same order, so the float is identical), or None when molmass is needed."""
    if not _PLAIN.fullmatch(s) or _GROUP.search(s) or _DEUTERIUM.search(s):
        return None
    chars = set(s)
    if len(s) > 1 and (chars <= set("ATCG") or chars <= set("AUCG") or chars <= _AMINO):
        return None
    table = molmass.ELEMENTS
    # molmass scans the formula from its end; the mass is summed in that order of first appearance.
    scanned: dict[str, int] = {}
    for sym, n in reversed(_TOKEN.findall(s)):
        if sym not in table:
            return None
        count = int(n) if n else 1
        if count == 0:
            return None
        scanned[sym] = scanned.get(sym, 0) + count
    mass = 0.0
    for sym, count in scanned.items():
        mass += table[sym].mass * count
    return scanned, mass


@functools.lru_cache(maxsize=65536)
def parse(text: str) -> Formula:
    """Parse a formula; raise FormulaError with a sentence when it does not parse."""
    if not isinstance(text, str) or not text.strip():
        raise FormulaError("the formula is empty", field="formula")
    s = text.strip().replace("·", ".").replace("*", ".")
    if len(s) > 200:
        raise FormulaError("the formula is longer than 200 characters", field="formula")
    charge = 0
    m = _CHARGE.match(s)
    if m and (m.group("sign") or m.group("sign2")):
        sign = m.group("sign") or m.group("sign2")
        n = m.group("n") or m.group("n2") or "1"
        charge = int(n) * (1 if sign == "+" else -1)
        s = m.group("body").strip()
    if not s or not re.fullmatch(r"[A-Za-z0-9().\[\]{}]+", s):
        raise FormulaError(f"{text!r} is not a formula (letters, digits, brackets and a hydrate dot only)",
                           field="formula")
    plain = _plain(s) if FAST_PLAIN else None
    if plain is not None:
        counts, mass = plain
    else:
        counts, mass = _molmass(s, text)
    isotopes = sorted(sym for sym in counts if not sym[:1].isalpha())
    if isotopes:
        raise FormulaError(f"{text!r} names the isotope {isotopes[0]} (from D, T or a leading mass number); "
                           "only natural elements are supported", field="formula")
    if not counts:
        raise FormulaError(f"{text!r} names no element", field="formula")
    # molmass leaves the mass of the neutral formula; remove the electrons of the charge.
    electron = 5.485799090441e-4  # electron molar mass, g/mol (CODATA 2018)
    mass -= charge * electron
    return Formula(text=text, elements=_hill_order(counts), charge=charge, molar_mass=mass)
