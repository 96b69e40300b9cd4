"""Reactions against a dataset: parse an equation, check its balance, compute ΔrH°, ΔrS°, ΔrG°(T), K.

Equations name species by id or by ``formula(phase)`` / ``formula(phase, form)``: ``CH4(g) + 2 O2(g) =
CO2(g) + 2 H2O(l)``, ``1/2 N2(g) + 3/2 H2(g) -> NH3(g)``, ``Na+(aq) + Cl-(aq) = nacl-cr``. A '+' right
after a formula and before its phase (``Na+(aq)``, ``Fe+3(aq)``) is a charge; any other '+' separates
terms.

ΔrX = Σν·X with ν > 0 for products (Hess's law). Standard uncertainties (GUM, first order) are
propagated with the ``uncertainties`` package: each stored value is one independent variable with
u = U/k, so a species that appears twice is correlated with itself as it should be. A value stored
without an uncertainty counts as exact and the result lists it.

At T ≠ 298.15 K: ΔrH(T) = ΔrH(298.15) + Σν·[H − H298](T) and ΔrS(T) = ΔrS(298.15) + Σν·[S(T) − S298]
from each species' Cp model; the model increments carry no uncertainty of their own here.
"""

from __future__ import annotations

import functools
import math
import re
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np
from uncertainties import UFloat, ufloat

from .. import formula as _formula
from ..errors import FormulaError, InputError
from ..model import PHASES
from ..store import SLUG
from ..units import R
from .integrate import property_value, record_model
from .models import T_REF, CpModel

#: The sentence every text report of a reaction ends with (DESIGN.md section 12).
CAUTION = ("caution: a thermodynamic consistency figure from the dataset's values, not a safety "
           "assessment; combustion and hazard decisions follow local codes and licensed practice.")

_MAX_EQUATION = 2000
_ARROWS = ("<=>", "⇌", "->", "→", "=")
_COEF = r"(?:\d+(?:\.\d*)?|\.\d+)(?:\s*/\s*\d+)?"
# formula (lazy) then the phase group at the very end; a charge sits between them.
_FORMULA_TERM = re.compile(
    r"^(?P<formula>.+?)\(\s*(?P<phase>[A-Za-z]+)\s*(?:,\s*(?P<form>[^()]*?)\s*)?\)$")
_COEF_TERM = re.compile(rf"^(?P<coef>{_COEF})\s*(?P<rest>.*)$", re.S)
# A '+' is a charge when glued to the formula before it and followed by an optional count and the phase.
_SEPARATOR = re.compile(r"\+(?!\d*\s*\()|(?<=\s)\+")


@dataclass(frozen=True)
class Reaction:
    """A parsed reaction: signed coefficients (products +, reactants −) and species ids."""

    terms: list[tuple[float, str]]
    text: str
    exact: tuple[tuple[Fraction, str], ...] = field(default=(), compare=False)

    def coefficient(self, ident: str) -> float:
        return sum(nu for nu, s in self.terms if s == ident)

    def display(self) -> str:
        """The equation with ids, reactants = products."""
        def side(sign: int) -> str:
            parts = []
            for nu, s in self.terms:
                if nu * sign > 0:
                    a = abs(nu)
                    c = "" if a == 1 else (f"{a:g}" if float(a).is_integer() else _frac_text(a))
                    parts.append(f"{c} {s}".strip())
            return " + ".join(parts)
        return f"{side(-1)} = {side(1)}"


def _frac_text(x: float) -> str:
    f = Fraction(x).limit_denominator(1000)
    return f"{f.numerator}/{f.denominator}" if abs(float(f) - x) < 1e-12 else f"{x:g}"


def _coefficient(text: str, term: str) -> Fraction:
    t = re.sub(r"\s+", "", text)
    try:
        if "/" in t:
            num, den = t.split("/")
            value = Fraction(Fraction(num), Fraction(den))
        else:
            value = Fraction(t)
    except (ValueError, ZeroDivisionError):
        raise InputError(f"term {term!r}: {text!r} is not a coefficient (integer, decimal or fraction)",
                         field="equation") from None
    if value <= 0:
        raise InputError(f"term {term!r}: the coefficient must be positive", field="equation")
    return value


def _split_terms(side: str, which: str) -> list[str]:
    terms = [t.strip() for t in _SEPARATOR.split(side)]
    if not side.strip():
        raise InputError(f"the {which} side of the equation is empty", field="equation")
    for t in terms:
        if not t:
            raise InputError(f"the {which} side {side.strip()!r} has an empty term (a stray '+')",
                             field="equation")
    return terms


@functools.lru_cache(maxsize=1 << 18)
def _hill(text: str) -> str | None:
    """Hill formula with charge of a record's formula text, None when it does not parse (cached: a
    dataset's formulas repeat across calls)."""
    try:
        return _formula.parse(text).hill
    except FormulaError:
        return None


_SYMBOL = re.compile(r"[A-Z][a-z]?")


def _symbol_key(text: str) -> str:
    """The element symbols a formula text mentions, sorted: equal for any two Hill-equivalent formulas."""
    return " ".join(sorted(set(_SYMBOL.findall(text))))


class _Index:
    """Candidate ids of a species mapping by (phase, element symbols), so that a term is resolved by
    parsing a handful of formulas rather than the whole dataset.

    Building it costs one regular-expression pass over the formulas; the last one built is kept for
    the next equation on the same mapping (a check resolves many equations against one dataset). The
    candidates are always re-read from the records, so a cached index never returns a record that no
    longer matches.
    """

    _last: tuple[Mapping[str, dict], int, dict[tuple[str, str], list[str]]] | None = None

    def __init__(self, species: Mapping[str, dict]) -> None:
        self.species = species
        self._map: dict[tuple[str, str], list[str]] | None = None

    def _build(self) -> dict[tuple[str, str], list[str]]:
        last = _Index._last
        if last is not None and last[0] is self.species and last[1] == len(self.species):
            return last[2]
        m: dict[tuple[str, str], list[str]] = {}
        for ident, rec in self.species.items():
            if isinstance(rec, dict):
                ftext, ph = rec.get("formula"), rec.get("phase")
                if isinstance(ftext, str) and isinstance(ph, str):
                    m.setdefault((ph, _symbol_key(ftext)), []).append(ident)
        _Index._last = (self.species, len(self.species), m)
        return m

    def lookup(self, text: str, hill: str, phase: str, form: str | None) -> list[str]:
        if self._map is None:
            self._map = self._build()
        out = []
        for ident in self._map.get((phase, _symbol_key(text)), []):
            rec = self.species.get(ident)
            if not isinstance(rec, dict) or rec.get("phase") != phase:
                continue
            if form and rec.get("form") != form:
                continue
            ftext = rec.get("formula")
            if isinstance(ftext, str) and _hill(ftext) == hill:
                out.append(ident)
        return sorted(out)


def resolve_species(term: str, species: Mapping[str, dict], _index: _Index | None = None) -> str:
    """The id of the one species a term names: an id, or ``formula(phase)`` / ``formula(phase, form)``."""
    term = term.strip()
    if term in species:
        return term
    m = _FORMULA_TERM.match(term)
    if not m:
        if SLUG.match(term):
            raise InputError(f"term {term!r}: no species with that id in the dataset", field="equation")
        raise InputError(f"term {term!r} is neither a species id nor formula(phase) such as CO2(g)",
                         field="equation")
    text, phase, form = m.group("formula").strip(), m.group("phase"), m.group("form")
    if phase not in PHASES:
        raise InputError(f"term {term!r}: {phase!r} is not a phase label (use one of {', '.join(PHASES)})",
                         field="equation")
    try:
        f = _formula.parse(text)
    except FormulaError as exc:
        raise InputError(f"term {term!r}: {exc.reason}", field="equation") from None
    hits = (_index or _Index(species)).lookup(text, f.hill, phase, form or None)
    if not hits:
        what = f"{f.hill}({phase}{', ' + form if form else ''})"
        raise InputError(f"term {term!r}: no species {what} in the dataset", field="equation")
    if len(hits) > 1:
        # Prefer a record whose formula is written exactly as typed (isomers share a Hill formula).
        exact = [i for i in hits if species[i].get("formula") == text]
        if len(exact) == 1 and not any(species[i].get("form") for i in hits):
            return exact[0]
        shown = ", ".join(f"{i}" + (f" (form {species[i].get('form')})" if species[i].get("form") else "")
                          for i in hits[:6])
        raise InputError(f"term {term!r} is ambiguous: it matches {shown}; write the id or "
                         "formula(phase, form)", field="equation")
    return hits[0]


def parse_equation(text: str, species: dict[str, dict]) -> Reaction:
    """Parse an equation against the dataset's species (id → record). InputError names the bad term."""
    if not isinstance(text, str) or not text.strip():
        raise InputError("the equation is empty", field="equation")
    if len(text) > _MAX_EQUATION:
        raise InputError(f"the equation is longer than {_MAX_EQUATION} characters", field="equation")
    s = text.replace("−", "-").replace("\u00a0", " ")
    for arrow in _ARROWS:
        if arrow in s:
            sides = s.split(arrow)
            if len(sides) != 2 or any(a in sides[1] or a in sides[0] for a in _ARROWS if a != arrow):
                raise InputError("the equation must have exactly one '=', '->' or '→' between its two "
                                 "sides", field="equation")
            break
    else:
        raise InputError("the equation has no '=', '->' or '→' between reactants and products",
                         field="equation")
    index = _Index(species)
    net: dict[str, Fraction] = {}
    order: list[str] = []
    for sign, side, which in ((-1, sides[0], "left"), (1, sides[1], "right")):
        for term in _split_terms(side, which):
            coef = Fraction(1)
            body = term
            m = _COEF_TERM.match(term)
            if m and term not in species:
                rest = m.group("rest").strip()
                # A leading number belongs to the coefficient unless the whole term is an id.
                if rest:
                    coef = _coefficient(m.group("coef"), term)
                    body = rest
            ident = resolve_species(body, species, index)
            if ident not in net:
                order.append(ident)
                net[ident] = Fraction(0)
            net[ident] += sign * coef
    exact = tuple((net[i], i) for i in order if net[i] != 0)
    if not exact:
        raise InputError("the equation has no net change: every species cancels", field="equation")
    return Reaction(terms=[(float(nu), i) for nu, i in exact], text=text.strip(), exact=exact)


def balance(reaction: Reaction, species: Mapping[str, dict]) -> None:
    """InputError saying which elements (or the charge) do not balance."""
    terms = reaction.exact or tuple((Fraction(nu).limit_denominator(10**6), s) for nu, s in reaction.terms)
    totals: dict[str, Fraction] = {}
    left: dict[str, Fraction] = {}
    charge = Fraction(0)
    charge_left = Fraction(0)
    for nu, ident in terms:
        rec = species.get(ident)
        if rec is None:
            raise InputError(f"no species {ident!r} in the dataset", field="equation")
        try:
            f = _formula.parse(rec.get("formula"))
        except (FormulaError, TypeError):
            raise InputError("has a formula that does not parse, so the balance cannot be checked",
                             record=ident, field="formula") from None
        for el, n in f.elements:
            totals[el] = totals.get(el, Fraction(0)) + nu * n
            if nu < 0:
                left[el] = left.get(el, Fraction(0)) - nu * n
        z = rec.get("charge")
        z = z if isinstance(z, int) and not isinstance(z, bool) else f.charge
        charge += nu * z
        if nu < 0:
            charge_left -= nu * z
    bad = [el for el, v in totals.items() if v != 0]
    if bad:
        parts = [f"{el} has {_num(left.get(el, Fraction(0)))} on the left and "
                 f"{_num(left.get(el, Fraction(0)) + totals[el])} on the right" for el in bad]
        raise InputError(f"the equation does not balance: {'; '.join(parts)}", field="equation")
    if charge != 0:
        raise InputError(f"the charge does not balance: {_signed(charge_left)} on the left and "
                         f"{_signed(charge_left + charge)} on the right", field="equation")


def _num(x: Fraction) -> str:
    return str(x.numerator) if x.denominator == 1 else f"{float(x):g}"


def _signed(x: Fraction) -> str:
    return ("+" if x > 0 else "") + _num(x)


# -- properties --------------------------------------------------------------------------------------

@dataclass(frozen=True)
class ReactionResult:
    """ΔrH°, ΔrS°, ΔrG° at T and what follows from them, each with its standard uncertainty."""

    T: float
    drH: UFloat            # kJ/mol
    drS: UFloat            # J/(mol·K)
    drG: UFloat            # kJ/mol
    log10K: UFloat
    dS_surroundings: UFloat    # −ΔrH/T, J/(mol·K)
    dS_universe: UFloat        # ΔrS − ΔrH/T, J/(mol·K)
    verdict: str
    t_sign_change: UFloat | None
    equation: str = ""
    terms: tuple[tuple[float, str], ...] = ()
    t_sign_change_method: str | None = None    # "models" | "constant ΔrH and ΔrS" | None
    t_sign_change_note: str | None = None
    drG_from_dfG: UFloat | None = None         # Σν·ΔfG° at 298.15 K when every species has one
    exact_inputs: tuple[str, ...] = ()         # "species field" of values that had no uncertainty
    models_used: bool = False

    def to_json(self) -> dict:
        def q(x: UFloat | None, unit: str) -> dict | None:
            if x is None:
                return None
            return {"value": float(x.nominal_value), "uncertainty": float(x.std_dev), "unit": unit}

        return {
            "equation": self.equation,
            "terms": [{"species": s, "nu": nu} for nu, s in self.terms],
            "T_K": self.T,
            "drH": q(self.drH, "kJ/mol"),
            "drS": q(self.drS, "J/(mol*K)"),
            "drG": q(self.drG, "kJ/mol"),
            "drG_from_dfG": q(self.drG_from_dfG, "kJ/mol"),
            "log10K": q(self.log10K, "1"),
            "dS_surroundings": q(self.dS_surroundings, "J/(mol*K)"),
            "dS_universe": q(self.dS_universe, "J/(mol*K)"),
            "verdict": self.verdict,
            "t_sign_change": q(self.t_sign_change, "K"),
            "t_sign_change_method": self.t_sign_change_method,
            "t_sign_change_note": self.t_sign_change_note,
            "models_used": self.models_used,
            "exact_inputs": list(self.exact_inputs),
            "uncertainty": "standard uncertainties (k = 1), first-order propagation (GUM)",
            "caution": CAUTION.removeprefix("caution: "),
        }


def _exact(x: float) -> UFloat:
    """A value without uncertainty as a UFloat (uncertainties warns about zero-width variables, which
    are harmless here: nothing is ever correlated with an exact value)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        return ufloat(float(x), 0.0)


def _u(x: float | UFloat) -> UFloat:
    return x if isinstance(x, UFloat) else _exact(x)


def _value(rec: dict, ident: str, fld: str, exact: list[str]) -> float | UFloat | None:
    """A property as a ufloat (a plain float when exact); a reference-state element's ΔfH°/ΔfG° is 0
    by definition when absent."""
    pv = property_value(rec, fld)
    if pv is None:
        if fld in ("dfH298", "dfG298") and rec.get("reference_state") is True:
            return 0.0
        return None
    v, u = pv
    if not u:
        if not (fld in ("dfH298", "dfG298") and rec.get("reference_state") is True and v == 0):
            exact.append(f"{ident} {fld}")
        return v
    return ufloat(v, u, tag=f"{ident}.{fld}")


_FIELD_NAMES = {"dfH298": "ΔfH°(298.15 K)", "S298": "S°(298.15 K)", "dfG298": "ΔfG°(298.15 K)"}


def verdict_of(drG: UFloat) -> str:
    """'spontaneous' when ΔrG° < 0, 'non-spontaneous' when > 0, and 'at equilibrium' when ΔrG° is
    zero within its expanded uncertainty (k = 2): the sign is then not established by the data."""
    g, u = float(drG.nominal_value), float(drG.std_dev)
    if abs(g) <= max(2.0 * u, 1e-9):
        return "at equilibrium"
    return "spontaneous" if g < 0 else "non-spontaneous"


def reaction_properties(reaction: Reaction, species: Mapping[str, dict], T: float = 298.15) -> ReactionResult:
    """ΔrH°, ΔrS°, ΔrG°, log10 K, ΔS of surroundings and universe at T, with standard uncertainties."""
    if not isinstance(T, int | float) or isinstance(T, bool) or not math.isfinite(T) or T <= 0:
        raise InputError(f"the temperature must be a positive number of kelvin, not {T!r}",
                         field="temperature")
    T = float(T)
    balance(reaction, species)
    exact: list[str] = []
    drH: float | UFloat = 0.0
    drS: float | UFloat = 0.0
    drG_f: float | UFloat = 0.0
    have_dfG = True
    for nu, ident in reaction.terms:
        rec = species[ident]
        h = _value(rec, ident, "dfH298", exact)
        s = _value(rec, ident, "S298", exact)
        for val, fld in ((h, "dfH298"), (s, "S298")):
            if val is None:
                raise InputError(f"has no {_FIELD_NAMES[fld]}, which the reaction needs", record=ident,
                                 field=f"properties.{fld}")
        drH = drH + nu * h
        drS = drS + nu * s
        g = _value(rec, ident, "dfG298", [])
        if g is None:
            have_dfG = False
        else:
            drG_f = drG_f + nu * g
    drH298, drS298 = drH, drS

    at_ref = abs(T - T_REF) < 1e-9
    models: dict[str, CpModel] = {}
    if not at_ref:
        models = _models(reaction, species, T, required=True)
        dh = sum(nu * float(models[i].enthalpy_increment(T)) for nu, i in reaction.terms)
        ds = sum(nu * float(models[i].entropy_increment(T)) for nu, i in reaction.terms)
        drH = drH + dh
        drS = drS + ds
    drG = drH - T * drS / 1000.0
    log10K = -drG * 1000.0 / (R * T * math.log(10))
    dS_sur = -drH * 1000.0 / T
    dS_uni = drS + dS_sur

    if at_ref:
        models = _models(reaction, species, T, required=False)
    t_star, method, note = _sign_change(reaction, _u(drH298), _u(drS298), models)
    exact_sorted = tuple(dict.fromkeys(exact))
    return ReactionResult(
        T=T, drH=_u(drH), drS=_u(drS), drG=_u(drG), log10K=_u(log10K), dS_surroundings=_u(dS_sur),
        dS_universe=_u(dS_uni), verdict=verdict_of(_u(drG)), t_sign_change=t_star,
        equation=reaction.text,
        terms=tuple(reaction.terms), t_sign_change_method=method, t_sign_change_note=note,
        drG_from_dfG=_u(drG_f) if (at_ref and have_dfG) else None, exact_inputs=exact_sorted,
        models_used=bool(models) and not at_ref)


def _models(reaction: Reaction, species: Mapping[str, dict], T: float, *,
            required: bool) -> dict[str, CpModel]:
    """Every species' Cp model covering 298.15 K and T; with required=False an empty dict if any lacks one."""
    out: dict[str, CpModel] = {}
    for _nu, ident in reaction.terms:
        rec = species[ident]
        if rec.get("cp_model") is None:
            if required:
                raise InputError(f"has no Cp(T) model, so the reaction cannot be taken to {T:g} K "
                                 "(only 298.15 K needs none)", record=ident, field="cp_model")
            return {}
        try:
            m = record_model(rec)
        except InputError:
            if required:
                raise
            return {}
        if required and not (m.covers(T) and m.covers_reference()):
            raise InputError(f"its Cp model covers {m.range_text()}, which does not reach both 298.15 K "
                             f"and {T:g} K", record=ident, field="cp_model")
        if not required and not m.covers_reference():
            return {}
        out[ident] = m
    return out


def _sign_change(reaction: Reaction, drH298: UFloat, drS298: UFloat, models: dict[str, CpModel]
                 ) -> tuple[UFloat | None, str | None, str | None]:
    """Where ΔrG°(T) = 0: a root over the models' common range, else ΔrH°/ΔrS° at 298.15 K."""
    h0, s0 = float(drH298.nominal_value), float(drS298.nominal_value)
    if models:
        lo = max(max(m.tmin for m in models.values()), 1e-3)
        hi = min(m.tmax for m in models.values())
        if hi > lo:
            def gfun(T: np.ndarray) -> np.ndarray:
                dh = sum(nu * models[i].enthalpy_increment(T, extrapolate=True) for nu, i in reaction.terms)
                ds = sum(nu * models[i].entropy_increment(T, extrapolate=True) for nu, i in reaction.terms)
                return (h0 + dh) - T * (s0 + ds) / 1000.0

            def sfun(T: float) -> float:
                return s0 + float(sum(nu * models[i].entropy_increment(T, extrapolate=True)
                                      for nu, i in reaction.terms))

            grid = np.unique(np.concatenate([np.linspace(lo, hi, 401), np.geomspace(lo, hi, 401)]))
            g = np.asarray(gfun(grid), dtype=float)
            roots = []
            for k in range(len(grid) - 1):
                if g[k] == 0:
                    roots.append(float(grid[k]))
                elif g[k] * g[k + 1] < 0:
                    roots.append(_bisect(lambda x: float(gfun(np.asarray(x))), grid[k], grid[k + 1]))
            if g[-1] == 0:
                roots.append(float(grid[-1]))
            if roots:
                t0 = roots[0]
                s_t = sfun(t0)
                note = None
                if len(roots) > 1:
                    note = (f"ΔrG° changes sign {len(roots)} times in {lo:g} to {hi:g} K; the lowest "
                            "temperature is given")
                if s_t == 0:
                    return _exact(t0), "models", note
                # Implicit differentiation of ΔrG°(T*; ΔrH298, ΔrS298) = 0: dT* = (1000 dH − T* dS)/ΔrS(T*).
                t_u = t0 + (1000.0 * (drH298 - h0) - t0 * (drS298 - s0)) / s_t
                return t_u, "models", note
            est = h0 / s0 * 1000.0 if s0 else math.nan
            if est > 0 and not lo <= est <= hi:
                return (drH298 * 1000.0 / drS298, "constant ΔrH and ΔrS",
                        f"ΔrG° keeps one sign over the models' common range {lo:g} to {hi:g} K; estimated "
                        "as ΔrH°/ΔrS° at 298.15 K (heat capacities neglected), outside that range")
            return None, None, f"ΔrG° keeps one sign over the models' common range {lo:g} to {hi:g} K"
    if s0 == 0 or h0 / s0 * 1000.0 <= 0:
        return None, None, "ΔrH° and ΔrS° at 298.15 K do not give a positive temperature where ΔrG° = 0"
    t_est = drH298 * 1000.0 / drS298
    return t_est, "constant ΔrH and ΔrS", "estimated as ΔrH°/ΔrS° at 298.15 K (heat capacities neglected)"


def _bisect(f, a: float, b: float, tol: float = 1e-9) -> float:
    """A root of f in [a, b] where f changes sign; bisection to a relative tolerance (robust, no scipy)."""
    fa = f(a)
    for _ in range(200):
        m = 0.5 * (a + b)
        fm = f(m)
        if fm == 0 or (b - a) <= tol * max(1.0, abs(m)):
            return m
        if (fa < 0) == (fm < 0):
            a, fa = m, fm
        else:
            b = m
    return 0.5 * (a + b)


def format_uncertain(x: UFloat, unit: str = "", *, decimals: int = 2) -> str:
    """``value ± u unit`` with u to two significant digits and the value to the same decimal place
    (GUM 7.2.2 style); an exact value is shown with ``decimals`` places and no ±."""
    v, u = float(x.nominal_value), float(x.std_dev)
    tail = f" {unit}" if unit else ""
    if not math.isfinite(v):
        return f"{v}{tail}"
    if not u or not math.isfinite(u):
        return f"{v:.{decimals}f}{tail}"
    places = max(0, 1 - math.floor(math.log10(u)))
    places = min(places, 12)
    return f"{v:.{places}f} ± {u:.{places}f}{tail}"
