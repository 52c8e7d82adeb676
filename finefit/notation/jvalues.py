"""Angular-momentum quantum numbers as the trade writes them: ``7/2``, ``3``, ``3.5``."""

from __future__ import annotations

from fractions import Fraction

from finefit.errors import FinefitError


def parse_j(value: object, field: str = "J") -> float:
    """Read J from ``7/2``, ``3.5``, ``3`` or a number; must be a non-negative half-integer."""
    if isinstance(value, bool):
        raise FinefitError(f"{field} must be a number such as 7/2 or 3.5, not {value!r}", field)
    try:
        if isinstance(value, (int, float)):
            twice = 2 * Fraction(value).limit_denominator(1000)
        else:
            text = str(value).strip()
            twice = 2 * Fraction(text)
    except (ValueError, ZeroDivisionError, TypeError, OverflowError):
        raise FinefitError(
            f"{field} = {value!r} is not a J value: write it as 7/2 or 3.5", field
        ) from None
    if abs(twice) > 2000:
        raise FinefitError(f"{field} = {str(value)[:24]} is far too large for a J value", field)
    if twice.denominator != 1 or twice < 0:
        raise FinefitError(
            f"{field} = {value!r} is not a non-negative integer or half-integer", field
        )
    return float(twice) / 2.0


def format_j(j: float) -> str:
    """Write J as the trade does: ``7/2`` for half-integers, ``3`` otherwise."""
    twice = round(2 * j)
    return str(twice // 2) if twice % 2 == 0 else f"{twice}/2"


def format_angular(value2: int) -> str:
    """Format an angular momentum given as twice its value."""
    return str(value2 // 2) if value2 % 2 == 0 else f"{value2}/2"
