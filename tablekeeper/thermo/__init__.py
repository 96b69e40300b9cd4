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

__all__ = [
    "CAUTION",
    "REF_SLACK_K",
    "TABLE_COLUMNS",
    "T_REF",
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
    "format_uncertain",
    "model_from_json",
    "parse_equation",
    "property_value",
    "reaction_properties",
    "record_model",
    "resolve_species",
    "verdict_of",
]
