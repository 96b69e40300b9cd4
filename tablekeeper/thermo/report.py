"""Text of the engine's results, shared by both faces: a reaction's rows, a derived table's cells, a fit's
residual statistics.

The command line prints these rows one per line; the terminal app lays the same rows out on a screen.
Keeping the wording and the number of decimals here means the two faces can never disagree on a
figure. Strings that come from data (equations, species ids) are made printable here; making them
literal (never markup) is the faces' concern.
"""

from __future__ import annotations

from collections.abc import Sequence

import pandas as pd

from ..text import printable
from .fit import FitResult
from .reactions import CAUTION, ReactionResult, format_uncertain

#: What each verdict means, in a sentence.
VERDICT_TEXT = {
    "spontaneous": "spontaneous: ΔrG° < 0, K > 1 (products favoured at the standard state)",
    "non-spontaneous": "non-spontaneous: ΔrG° > 0, K < 1 (reactants favoured at the standard state)",
    "at equilibrium": "at equilibrium: ΔrG° is zero within its expanded uncertainty (k = 2), K ≈ 1",
}

#: The last row of every reaction report: what the ± mean.
UNCERTAINTY_NOTE = "± are standard uncertainties (k = 1), propagated to first order (GUM)"

#: Columns of a derived table as shown: title, unit, decimals (same order as TABLE_COLUMNS).
TABLE_HEADS: tuple[tuple[str, str, int], ...] = (
    ("T", "K", 2), ("Cp°", "J/(mol·K)", 3), ("S°", "J/(mol·K)", 3),
    ("H°−H°(298.15)", "kJ/mol", 3), ("G°−H°(298.15)", "kJ/mol", 3),
)


def reaction_rows(res: ReactionResult) -> list[tuple[str, str]]:
    """(label, text) rows of a reaction result, in reading order; a row with an empty label continues
    the one before. The caution sentence is not among them (``CAUTION``): each face places it."""

    def sign(nu: float) -> str:
        return f"{nu:+g}"

    rows: list[tuple[str, str]] = [
        ("reaction", printable(res.equation)),
        ("species (ν)", printable(", ".join(f"{sign(nu)} {s}" for nu, s in res.terms))),
        ("T", f"{res.T:g} K" + (" (Cp models used)" if res.models_used else "")),
        ("ΔrH°", format_uncertain(res.drH, "kJ/mol")),
        ("ΔrS°", format_uncertain(res.drS, "J/(mol·K)", decimals=3)),
        ("ΔrG°", format_uncertain(res.drG, "kJ/mol")),
    ]
    if res.drG_from_dfG is not None:
        rows.append(("ΔrG° from ΔfG°", format_uncertain(res.drG_from_dfG, "kJ/mol")))
    rows += [
        ("log10 K", format_uncertain(res.log10K, decimals=3)),
        ("ΔS surroundings", format_uncertain(res.dS_surroundings, "J/(mol·K)")),
        ("ΔS universe", format_uncertain(res.dS_universe, "J/(mol·K)")),
        ("verdict", VERDICT_TEXT.get(res.verdict, res.verdict)),
    ]
    if res.t_sign_change is not None:
        how = f" ({res.t_sign_change_method})" if res.t_sign_change_method else ""
        rows.append(("ΔrG° = 0 at", format_uncertain(res.t_sign_change, "K", decimals=1) + how))
    if res.t_sign_change_note:
        rows.append(("", res.t_sign_change_note))
    if res.exact_inputs:
        rows.append(("no uncertainty", printable(", ".join(res.exact_inputs)) + " (counted as exact)"))
    rows.append(("", UNCERTAINTY_NOTE))
    return rows


def format_reaction(res: ReactionResult) -> str:
    """The rows as aligned text lines, then the caution sentence."""
    rows = reaction_rows(res)
    width = max(len(k) for k, _ in rows)
    lines = [f"{k:<{width}}  {v}" for k, v in rows]
    lines.append(CAUTION)
    return "\n".join(lines)


def table_cells(frame: pd.DataFrame) -> list[list[str]]:
    """The cells of a derived table (``derived_table``) as text, row by row, with TABLE_HEADS' decimals."""
    cols = [[f"{v:.{d}f}" for v in frame.iloc[:, j]] for j, (_, _, d) in enumerate(TABLE_HEADS)]
    return [list(row) for row in zip(*cols, strict=True)]


def format_table_lines(frame: pd.DataFrame) -> list[str]:
    """Header, unit line and rows, right-aligned in columns as wide as their widest cell."""
    cells = table_cells(frame)
    widths = [max(len(h), len(u), *(len(r[j]) for r in cells))
              for j, (h, u, _) in enumerate(TABLE_HEADS)]
    lines = ["  ".join(h.rjust(w) for (h, _, _), w in zip(TABLE_HEADS, widths, strict=True)),
             "  ".join(u.rjust(w) for (_, u, _), w in zip(TABLE_HEADS, widths, strict=True))]
    lines += ["  ".join(c.rjust(w) for c, w in zip(row, widths, strict=True)) for row in cells]
    return lines


def fit_summary(result: FitResult, kind: str | None = None, anchors: Sequence[str] = ()) -> str:
    """One sentence of a fit's residual statistics, for a journal reason and a screen:
    ``shomate fit to 10 points, 298.15 to 1200 K: n = 10, rms = 0.0123, max = 0.0311 J/(mol·K)``."""
    model = result.model
    pinned = f", pinned to {', '.join(anchors)}" if anchors else ""
    return (f"{kind or model.kind} fit, {model.range_text()}{pinned}: n = {result.n}, "
            f"rms = {result.rms:.4g}, max = {result.max_abs:.4g} J/(mol·K)")
