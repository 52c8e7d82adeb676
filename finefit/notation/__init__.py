"""The trade's notation: configurations, J values and level labels (pure, no I/O)."""

from finefit.notation.configuration import (
    ORBITAL_LETTERS,
    Configuration,
    Subshell,
    parse_configuration,
)
from finefit.notation.jvalues import format_j, parse_j

__all__ = [
    "ORBITAL_LETTERS",
    "Configuration",
    "Subshell",
    "parse_configuration",
    "format_j",
    "parse_j",
]
