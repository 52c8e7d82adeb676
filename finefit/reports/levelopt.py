"""Tables of a level optimisation: optimised levels and the classified lines with their
Ritz wavenumbers and wavelengths, for the terminal (rich) and for publication (LaTeX
booktabs, CSV). Values are written with the decimals that show two significant digits
of their uncertainty (the usual convention)."""

from __future__ import annotations

import math

import numpy as np
from rich import box
from rich.table import Table
from rich.text import Text

from finefit.lines.levelopt import LevelOptimisation, RitzLine
from finefit.notation.jvalues import format_j
from finefit.reports.publication import to_csv, to_latex


def decimals(u: float | None, fallback: int = 4) -> int:
    """Decimals that show two significant digits of an uncertainty (at most 6)."""
    if u is None or not math.isfinite(u) or u <= 0:
        return fallback
    return min(6, max(0, 1 - math.floor(math.log10(u))))


def _typical(opt: LevelOptimisation) -> int:
    u = [d.uncertainty for d in opt.details.values() if d.uncertainty > 0]
    return decimals(float(np.median(u))) if u else 4


def summary_text(opt: LevelOptimisation, n_lines: int) -> Text:
    t = Text()
    n_cls = n_lines - len(opt.unclassified)
    t.append(f"{n_cls} of {n_lines} lines classified, {opt.n_used} classifications used; "
             f"{len(opt.levels)} levels optimised")
    red = opt.reduced_chi2
    t.append(f"   chi2 = {opt.chi2:.2f} with {opt.dof} degrees of freedom")
    if red is not None:
        t.append(f" (chi2/dof = {red:.2f})", style="bold" if red > 2 else "")
    t.append(f"\nreference level {opt.reference} (held fixed); uncertainties are relative to it")
    if len(opt.parts) > 1:
        t.append(f"; {len(opt.parts) - 1} disconnected part(s) with their own reference",
                 style="yellow")
    return t


def paren(value: float, u: float | None, fallback: int = 4) -> str:
    """``value(uu)``: the uncertainty in units of the last two digits shown (the usual
    compact notation, e.g. 6420.1234(27)); the value alone when u is 0 or unknown."""
    if u is None or not math.isfinite(u) or u <= 0:
        return f"{value:.{fallback}f}"
    k = decimals(u)
    return f"{value:.{k}f}({round(u * 10**k):d})"


def level_table(opt: LevelOptimisation, labels: dict[str, str] | None = None) -> Table:
    tab = Table(title="Optimised levels (cm-1; uncertainty in the last digits)",
                title_justify="left")
    for col, just in (("id", "left"), ("J", "right"), ("label", "left"),
                      ("E optimised", "right"), ("change", "right"), ("lines", "right"),
                      ("flags", "left")):
        tab.add_column(col, justify=just, no_wrap=col not in ("label", "flags"))
    fallback = _typical(opt)
    for d in sorted(opt.details.values(), key=lambda x: (x.part, x.energy)):
        k = decimals(d.uncertainty, fallback)
        flags = list(d.flags)
        if d.part > 0:
            flags = [f if f != "disconnected" else f"part {d.part} (ref. {d.reference})"
                     for f in flags]
        style = "yellow" if "outlier line" in d.flags or d.part > 0 else ""
        j = format_j(d.J) + ("°" if d.parity == "odd" else "")
        tab.add_row(d.id, j, Text((labels or {}).get(d.id, "")),
                    paren(d.energy, d.uncertainty, k), f"{d.energy - d.previous:+.{k}f}",
                    str(d.n_lines), Text(", ".join(flags), style=style))
    return tab


def line_table(opt: LevelOptimisation, lines: list[RitzLine] | None = None,
               title: str = "Classified lines with Ritz values", width: int = 200) -> Table:
    """One row per classification; narrow screens (< 110 columns) leave out the Ritz
    wavenumber (the wavelength and obs - Ritz carry it) and use a lighter frame."""
    wide = width >= 110
    tab = Table(title=title + " (σ in cm-1, λ in Å; uncertainty in the last digits)",
                title_justify="left", box=box.HEAVY_HEAD if wide else box.SIMPLE_HEAD)
    cols = ["line", "lower", "upper", "σ obs"] + (["σ Ritz"] if wide else []) + [
        "λ Ritz", "O-R", "/σ", "flags"]
    for col in cols:
        tab.add_column(col, justify="left" if col in ("lower", "upper", "flags") else "right",
                       no_wrap=col != "flags")
    for x in sorted(opt.lines if lines is None else lines, key=lambda x: x.wavenumber):
        k = decimals(x.uncertainty)
        if x.air_wavelength is not None:
            lam = paren(x.air_wavelength, x.air_wavelength_uncertainty) + " a"
        else:
            lam = paren(x.vacuum_wavelength, x.vacuum_wavelength_uncertainty) + " v"
        z = "—" if x.normalised is None else f"{x.normalised:+.1f}"
        style = "red" if "outlier" in x.flags else ("dim" if not x.used else "")
        cells = [str(x.source_line), x.lower, x.upper, paren(x.wavenumber, x.uncertainty)]
        if wide:
            cells.append(paren(x.ritz, x.ritz_uncertainty, k))
        cells += [lam, f"{x.residual:+.{k}f}", Text(z, style=style),
                  Text(", ".join(x.flags), style=style)]
        tab.add_row(*cells)
    return tab


# ----------------------------------------------------------------------------- publication
LEVEL_HEADER = ["Level", "J", "Parity", "Label", "Energy", "Uncertainty", "Lines", "Note"]
LINE_HEADER = ["Line", "Lower", "Upper", "Wavenumber obs", "Unc.", "Wavenumber Ritz", "Unc.",
               "Wavelength Ritz", "Unc.", "Medium", "Obs-Ritz", "Note"]


def level_rows(opt: LevelOptimisation, labels: dict[str, str] | None = None) -> list[list[str]]:
    fallback = _typical(opt)
    rows = []
    for d in sorted(opt.details.values(), key=lambda x: (x.part, x.energy)):
        k = decimals(d.uncertainty, fallback)
        notes = [f for f in d.flags if f != "disconnected"]
        if d.part > 0:
            notes.append(f"relative to {d.reference}")
        rows.append([d.id, format_j(d.J), d.parity, (labels or {}).get(d.id, ""),
                     f"{d.energy:.{k}f}", "" if d.uncertainty == 0 else f"{d.uncertainty:.{k}f}",
                     str(d.n_lines), "; ".join(notes)])
    return rows


def line_rows(opt: LevelOptimisation) -> list[list[str]]:
    rows = []
    for x in sorted(opt.lines, key=lambda x: x.wavenumber):
        k = decimals(x.uncertainty)
        kr = decimals(x.ritz_uncertainty, k)
        air = x.air_wavelength is not None
        lam = x.air_wavelength if air else x.vacuum_wavelength
        u_lam = x.air_wavelength_uncertainty if air else x.vacuum_wavelength_uncertainty
        kl = decimals(u_lam)
        rows.append([str(x.source_line), x.lower, x.upper, f"{x.wavenumber:.{k}f}",
                     f"{x.uncertainty:.{k}f}", f"{x.ritz:.{kr}f}", f"{x.ritz_uncertainty:.{kr}f}",
                     f"{lam:.{kl}f}", f"{u_lam:.{kl}f}", "air" if air else "vacuum",
                     f"{x.residual:+.{k}f}", "; ".join(x.flags)])
    return rows


def publication_tables(opt: LevelOptimisation, labels: dict[str, str] | None = None,
                       ion: str = "") -> dict[str, str]:
    """File name -> content: optimised levels and Ritz lines, LaTeX (booktabs) and CSV, and
    the level covariance (CSV, cm^-2, relative to the reference) where it was formed."""
    what = f" of {ion}" if ion else ""
    red = opt.reduced_chi2
    lcap = (f"Optimised energy levels{what} (cm-1) from {opt.n_used} classified lines; "
            f"uncertainties relative to level {opt.reference}"
            + ("" if red is None else f"; chi2/dof = {red:.2f}") + ".")
    rcap = (f"Classified lines{what} with Ritz wavenumbers (cm-1) and wavelengths (angstrom; "
            "air from 2000 A up) of the optimised levels.")
    l_rows, r_rows = level_rows(opt, labels), line_rows(opt)
    extra = {}
    if opt.covariance is not None:
        # the full covariance (cm^-2) of the free levels, for Ritz values of any pair later
        ids = opt.covariance_ids
        extra["level_covariance.csv"] = to_csv(
            ["level"] + ids, [[i] + [f"{v:.6e}" for v in row]
                              for i, row in zip(ids, opt.covariance, strict=True)])
    return extra | {
        "optimised_levels.tex": to_latex(LEVEL_HEADER, l_rows, lcap, "tab:optimised-levels",
                                         {1, 4, 5, 6}),
        "optimised_levels.csv": to_csv(LEVEL_HEADER, l_rows),
        "ritz_lines.tex": to_latex(LINE_HEADER, r_rows, rcap, "tab:ritz-lines",
                                   {0, 3, 4, 5, 6, 7, 8, 10}),
        "ritz_lines.csv": to_csv(LINE_HEADER, r_rows),
    }
