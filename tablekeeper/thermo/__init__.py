"""The thermochemistry engine: Cp(T) models and their integrals, derived tables, fits and reactions.

No face imports here (textual, rich); the command line and the terminal app call these functions.
"""

from .fit import FitResult, fit
from .integrate import TABLE_COLUMNS, default_grid, derived_table, property_value, record_model
from .models import (
    REF_SLACK_K,
    T_REF,
    CpModel,
    ExtrapolationError,
    Nasa7Model,
    ShomateModel,
    TabulatedModel,
    model_from_json,
)
from .reactions import (
    CAUTION,
    Reaction,
    ReactionResult,
    balance,
    format_uncertain,
    parse_equation,
    reaction_properties,
    resolve_species,
    verdict_of,
)
from .report import (
    TABLE_HEADS,
    UNCERTAINTY_NOTE,
    VERDICT_TEXT,
    fit_summary,
    format_reaction,
    format_table_lines,
    reaction_rows,
    table_cells,
)

__all__ = [
    "CAUTION",
    "REF_SLACK_K",
    "TABLE_COLUMNS",
    "TABLE_HEADS",
    "T_REF",
    "UNCERTAINTY_NOTE",
    "VERDICT_TEXT",
    "CpModel",
    "ExtrapolationError",
    "FitResult",
    "Nasa7Model",
    "Reaction",
    "ReactionResult",
    "ShomateModel",
    "TabulatedModel",
    "balance",
    "default_grid",
    "derived_table",
    "fit",
    "fit_summary",
    "format_reaction",
    "format_table_lines",
    "format_uncertain",
    "model_from_json",
    "parse_equation",
    "property_value",
    "reaction_properties",
    "reaction_rows",
    "record_model",
    "resolve_species",
    "table_cells",
    "verdict_of",
]
