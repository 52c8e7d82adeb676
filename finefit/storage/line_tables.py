"""Observed line lists (CSV, TSV or whitespace tables with a header line).

Columns: ``wavenumber`` (cm-1) or ``wavelength`` (angstrom; air from 2000 A up and vacuum
below, unless the medium is given), optional ``intensity`` and ``uncertainty`` (in the
unit of the position column), and optional ``lower`` and ``upper``: a classification by
level ids or labels (several separated by ``+`` for a blend; empty or ``-`` when the line
is unclassified). Returns wavenumbers in vacuum cm-1.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from finefit.errors import FinefitError
from finefit.storage.atomic import read_text
from finefit.storage.level_tables import _rows, detect_format


@dataclass(frozen=True, eq=False)
class LineList:
    wavenumber: np.ndarray  # vacuum cm^-1
    uncertainty: np.ndarray | None  # cm^-1
    intensity: np.ndarray | None
    source_lines: np.ndarray  # file line numbers
    lower: list[str] | None = None  # classification columns as written ("" if empty)
    upper: list[str] | None = None
    wavelength: np.ndarray | None = None  # as written (angstrom), when given so
    in_air: np.ndarray | None = None  # per line, for a wavelength column


def read_lines(path: str | Path, medium: str | None = None) -> LineList:
    from finefit.lines.wavelengths import MIN_AIR_ANGSTROM, air_to_vacuum

    p = Path(path)
    text = read_text(p, "line list")
    rows = _rows(text, detect_format(p, text))
    if len(rows) < 2:
        raise FinefitError(f"{p}: the line list has no lines", str(p))
    header = [h.lower() for h in rows[0][1]]
    pos_col = next((c for c in ("wavenumber", "sigma", "wavelength", "lambda") if c in header),
                   None)
    if pos_col is None:
        raise FinefitError(f"{p}: the header needs a 'wavenumber' or 'wavelength' column", str(p))
    if medium not in (None, "air", "vacuum"):
        raise FinefitError(f"medium must be air or vacuum, not {medium!r}", "medium")

    def column(name: str, required: bool) -> np.ndarray | None:
        if name not in header:
            return None
        i = header.index(name)
        vals = []
        for lineno, row in rows[1:]:
            cell = row[i] if i < len(row) else ""
            if cell == "" and not required:
                vals.append(np.nan)
                continue
            try:
                vals.append(float(cell))
            except ValueError:
                raise FinefitError(f"{p} line {lineno}, column {name!r}: {cell!r} is not a "
                                   "number", f"line {lineno}") from None
        return np.array(vals)

    def text_column(name: str) -> list[str] | None:
        if name not in header:
            return None
        i = header.index(name)
        vals = [(row[i] if i < len(row) else "").strip() for _, row in rows[1:]]
        return ["" if v == "-" else v for v in vals]

    lower, upper = text_column("lower"), text_column("upper")
    if (lower is None) != (upper is None):
        raise FinefitError(f"{p}: a classification needs both a 'lower' and an 'upper' column",
                           "lower" if lower is None else "upper")
    if lower is not None:
        for (lineno, _), a, b in zip(rows[1:], lower, upper, strict=True):
            if bool(a) != bool(b) or a.count("+") != b.count("+"):
                raise FinefitError(f"{p} line {lineno}: 'lower' {a!r} and 'upper' {b!r} must "
                                   "both be given, with as many '+'-separated entries",
                                   f"line {lineno}")
    pos = column(pos_col, True)
    unc = column("uncertainty", False)
    inten = column("intensity", False)
    if not np.all(np.isfinite(pos)) or np.any(pos <= 0):
        raise FinefitError(f"{p}: every line needs a positive {pos_col}", pos_col)
    lam_written = air = None
    if pos_col in ("wavelength", "lambda"):
        lam_written = pos.copy()
        vac = pos.copy()
        air = (pos >= MIN_AIR_ANGSTROM) if medium is None else np.full(pos.shape, medium == "air")
        if np.any(air):
            vac[air] = air_to_vacuum(pos[air])
        sigma = 1e8 / vac
        if unc is not None:
            unc = sigma**2 * unc / 1e8
    else:
        sigma = pos
    return LineList(sigma, unc, inten, np.array([ln for ln, _ in rows[1:]]), lower, upper,
                    lam_written, air)
