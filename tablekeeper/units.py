"""Units: the one pint registry of the program, field dimensions and canonical units.

Chemists write ``kJ mol-1`` and ``J K-1 mol-1``; pint does not read those, so ``normalise`` rewrites a
unit string into pint's syntax first. The calorie is the thermochemical calorie, exactly 4.184 J
(NIST SP 811), which is pint's ``cal``. Per-particle energies (eV, J per molecule) are molar after a
factor of the Avogadro constant.

Conversion is by a multiplicative factor per (unit, field), parsed once and cached, so that a column of
100k values converts with one array multiplication.
"""

from __future__ import annotations

import decimal
import functools
import math
import re
from dataclasses import dataclass

from .errors import UnitError


#: The one registry. Built once; pint registries are slow to construct.
@functools.cache
def registry():
    """The one pint registry, built on first use (building it costs about half a second, and most
    commands, ``check`` among them, never convert a unit)."""
    import pint

    reg = pint.UnitRegistry()
    reg.formatter.default_format = "~P"
    return reg


def __getattr__(name: str):
    # ``units.ureg`` stays available as a module attribute, built lazily.
    if name == "ureg":
        return registry()
    raise AttributeError(name)

#: Avogadro constant (exact, SI 2019) used for per-particle quantities.
AVOGADRO = 6.02214076e23
#: Molar gas constant (CODATA 2018, exact: N_A·k).
R = 8.314462618


@dataclass(frozen=True)
class FieldKind:
    """The physical dimension of a field and its canonical unit."""

    name: str
    canonical: str
    dimensionality: str  # human description for error messages


MOLAR_ENERGY = FieldKind("molar energy", "kJ/mol", "energy per amount (like kJ/mol)")
MOLAR_ENTROPY = FieldKind("molar entropy", "J/(mol*K)", "energy per amount per kelvin (like J/(mol·K))")

#: Property fields of a species and their kinds.
FIELD_KINDS: dict[str, FieldKind] = {
    "dfH298": MOLAR_ENERGY,
    "dfG298": MOLAR_ENERGY,
    "S298": MOLAR_ENTROPY,
    "Cp298": MOLAR_ENTROPY,
}

_CANONICAL = {MOLAR_ENERGY.name: "kJ/mol", MOLAR_ENTROPY.name: "J/(mol*K)"}
_PER_PARTICLE = {MOLAR_ENERGY.name: "J", MOLAR_ENTROPY.name: "J/K"}

_EXPONENT = re.compile(r"([A-Za-z]+)\s*\^?\s*(-?\d+)")


def normalise(text: str) -> str:
    """Rewrite a chemist's unit string into pint syntax (``kJ mol-1`` → ``kJ * mol**-1``)."""
    s = text.strip().replace("·", "*").replace("⋅", "*").replace("−", "-").replace("⁻¹", "-1")
    s = _EXPONENT.sub(lambda m: f"{m.group(1)}**{m.group(2)}", s)
    # Juxtaposition means multiplication: "J mol**-1 K**-1".
    s = re.sub(r"(?<=[\w)])\s+(?=[A-Za-z(])", "*", s)
    return s


_POWER = re.compile(r"(?:\*\*|\^)\s*\(?\s*[-+]?(\d+)")
_CHAINED_POWER = re.compile(r"(?:\*\*|\^)[^*/]*(?:\*\*|\^)")


def _bounded_powers(text: str) -> bool:
    """True when every power in a unit string has at most two digits and none is raised again."""
    return all(len(m.group(1)) <= 2 for m in _POWER.finditer(text)) and not _CHAINED_POWER.search(text)


@functools.lru_cache(maxsize=512)
def factor_to_canonical(unit: str, field: str) -> float:
    """Multiplicative factor that converts a value in ``unit`` into the field's canonical unit.

    Raises UnitError with a sentence when the unit does not parse or its dimension does not fit.
    The factor is rounded to 15 significant digits so that exact definitions stay exact
    (kcal → kJ is 4.184, not 4.184000000000001).
    """
    kind = FIELD_KINDS.get(field)
    if kind is None:
        raise UnitError(f"{field!r} is not a field with a unit", field=field)
    if not unit or not unit.strip():
        raise UnitError("a unit is required", field=field)
    if unit == kind.canonical:
        return 1.0  # no need to build the registry for the canonical spelling
    text = normalise(unit)
    if len(unit) > 100 or not _bounded_powers(text):
        # pint evaluates number powers exactly: "9^999999999" would compute for hours.
        raise UnitError(f"{unit[:40]!r} is too long or has a power too large for a unit", field=field)
    try:
        ureg = registry()
        q = ureg.Quantity(1, text)
        dim = q.dimensionality  # logarithmic units (Np, dB) have none: AttributeError
    except Exception as exc:  # pint raises several unrelated types on bad syntax
        raise UnitError(f"{unit!r} is not a unit tablekeeper understands ({type(exc).__name__})",
                        field=field) from None
    target = ureg.Quantity(1, _CANONICAL[kind.name])
    if dim == target.dimensionality:
        f = q.to(target.units).magnitude
    elif dim == ureg.Quantity(1, _PER_PARTICLE[kind.name]).dimensionality:
        # A per-particle quantity (eV, J/K per molecule): molar after × N_A.
        f = (q * AVOGADRO * ureg.mol**-1).to(target.units).magnitude
    else:
        raise UnitError(
            f"{unit!r} does not fit {field}, which is a {kind.name}: give {kind.dimensionality}",
            field=field)
    return float(f"{float(f):.15g}")


_EXACT = decimal.Context(prec=80)


def scale(value: float, factor: float) -> float:
    """``value × factor`` as the double nearest to the exact decimal product of the two numbers as written.

    A typed value times an exact factor has an exact decimal product (12.49 kcal/mol × 4.184 =
    52.25816 kJ/mol); binary floating-point multiplication would store 52.258160000000004 instead. Both
    faces and the importer convert through this one function, so a value converts to the same bits
    whichever way it was entered.
    """
    if factor == 1.0:
        return value
    return float(_EXACT.multiply(decimal.Decimal(repr(float(value))), decimal.Decimal(repr(float(factor)))))


def to_canonical(value: float, unit: str, field: str) -> float:
    """Convert one value to the field's canonical unit."""
    return scale(value, factor_to_canonical(unit, field))


def canonical_unit(field: str) -> str:
    kind = FIELD_KINDS.get(field)
    if kind is None:
        raise UnitError(f"{field!r} is not a field with a unit", field=field)
    return kind.canonical


_NUMBER_UNIT = re.compile(r"^\s*([-+−]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


def parse_quantity(text: str, field: str) -> tuple[float, str, float]:
    """Parse ``"-68.3 kcal/mol"`` for a field: (canonical value, unit as typed, entered value).

    A bare number is taken in the canonical unit.
    """
    m = _NUMBER_UNIT.match(text or "")
    if not m:
        raise UnitError(f"{text!r} is not a number with an optional unit", field=field)
    entered = float(m.group(1).replace("−", "-"))
    unit = m.group(2) or canonical_unit(field)
    value = to_canonical(entered, unit, field)
    if not (math.isfinite(entered) and math.isfinite(value)):  # "1e400" parses to infinity
        raise UnitError(f"{text.strip()[:40]!r} is too large to be a number", field=field)
    return value, unit, entered
