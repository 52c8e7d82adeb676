"""Number formats and column layout of the workspace tables (no Textual imports).

Numbers are never cut silently: a column is as wide as its widest value, columns that do
not fit the screen are left out whole (their values are in the detail pane), and text
that must be shortened ends in '…'.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

CELL_PADDING = 2  # DataTable's cell padding, one space either side


def clip(text: str, width: int) -> str:
    """``text`` shortened to ``width`` characters with a visible '…' mark."""
    if len(text) <= width:
        return text
    return text[: max(width - 1, 0)] + "…"


def decimals_for(scale: float | None, lo: int = 2, hi: int = 5) -> int:
    """Decimals that show a quantity of this size with two significant digits (at least
    ``lo``): sigma 3.1 -> 2, sigma 0.021 -> 4."""
    if scale is None or not math.isfinite(scale) or scale <= 0:
        return lo
    return max(lo, min(hi, 1 - math.floor(math.log10(scale))))


def value_error(value: float, error: float | None) -> tuple[str, str]:
    """A value and its standard error, the error to two significant digits and the value
    to the same decimal place (0.0 errors and infinite ones are written by the caller)."""
    if error is None or not math.isfinite(error) or error <= 0:
        return f"{value:.2f}", ""
    d = max(0, min(8, 1 - math.floor(math.log10(error))))
    return f"{value:.{d}f}", f"{error:.{d}f}"


@dataclass
class Column:
    key: str
    title: str
    width: int
    required: bool = True
    shrink_to: int = 0  # a text column that may be narrowed (with '…') down to this


def fit_columns(columns: list[Column], available: int) -> list[Column]:
    """The columns that fit ``available`` cells: required ones always (text columns
    narrowed first, down to their ``shrink_to``), optional ones in the given order while
    they fit whole. Never a partly visible column."""
    need = sum(c.width + CELL_PADDING for c in columns if c.required)
    over = need - available
    for c in columns:
        if over <= 0:
            break
        if c.required and c.shrink_to and c.width > c.shrink_to:
            cut = min(c.width - c.shrink_to, over)
            c.width -= cut
            over -= cut
    room = available - sum(c.width + CELL_PADDING for c in columns if c.required)
    out = []
    for c in columns:
        if c.required:
            out.append(c)
        elif c.width + CELL_PADDING <= room:
            out.append(c)
            room -= c.width + CELL_PADDING
        elif c.shrink_to and room - CELL_PADDING >= c.shrink_to:
            c.width = room - CELL_PADDING  # a text column takes the rest, marked '…'
            out.append(c)
            room = 0
    return out


def pack_status(parts: list[tuple[int, str]], width: int, sep: str = " │ ") -> str:
    """The status line: parts (priority, text) in their given order, leaving out the
    lowest-priority ones (largest number) until the line fits ``width``."""
    keep = list(parts)
    while keep and len(sep.join(t for _, t in keep)) > width:
        worst = max(range(len(keep)), key=lambda i: (keep[i][0], i))
        if keep[worst][0] == 0:  # priority 0 is never left out: shorten the last part
            break
        keep.pop(worst)
    return clip(sep.join(t for _, t in keep), width)
