"""Rich tables of fit results, parameters and computed levels for the command line."""

from __future__ import annotations

import math

from rich.console import Console
from rich.table import Table
from rich.text import Text

from finefit.fitting.results import FitResult
from finefit.notation.jvalues import format_j

# Longer tables are printed as aligned plain text: rich measures and renders every cell
# (3-4 s for the 2 725 levels of 4f6 5d), plain formatting takes milliseconds.
LARGE_TABLE_ROWS = 400


def print_table(con: Console, tab: Table, max_rich_rows: int = LARGE_TABLE_ROWS) -> None:
    """Print a table: with rich up to ``max_rich_rows`` rows, as aligned plain text above."""
    if tab.row_count <= max_rich_rows:
        con.print(tab)
        return
    headers = [str(c.header) for c in tab.columns]
    cols = [[str(cell) for cell in c.cells] for c in tab.columns]
    widths = [max([len(h)] + [len(x) for x in col]) for h, col in zip(headers, cols, strict=True)]
    right = [c.justify == "right" for c in tab.columns]

    def line(cells: list[str]) -> str:
        return "  ".join(
            x.rjust(w) if r else x.ljust(w) for x, w, r in zip(cells, widths, right, strict=True)
        ).rstrip()

    out = [str(tab.title or ""), line(headers), "  ".join("-" * w for w in widths)]
    out.extend(line(list(cells)) for cells in zip(*cols, strict=True))
    con.file.write("\n".join(out) + "\n")
    con.file.flush()


def fmt_num(x: float | None, digits: int = 2) -> str:
    if x is None:
        return "—"
    if isinstance(x, float) and math.isinf(x):
        return "∞"
    return f"{x:.{digits}f}"


def summary_text(r: FitResult) -> Text:
    t = Text()
    if not getattr(r, "fitted", True):
        t.append("not fitted (values as given)", style="bold")
    else:
        state = "converged" if r.converged else "NOT converged"
        t.append(f"{state}", style="bold green" if r.converged else "bold red")
    sigma = "undefined" if r.sigma is None else f"{r.sigma:.3f} cm-1"
    t.append(f"   sigma = {sigma}   N levels = {r.n_levels}   N free = {r.n_free}")
    t.append(f"   evaluations = {r.iterations}")
    if r.reduced_chi2 is not None:
        t.append(f"   chi2/dof = {r.reduced_chi2:.3g}")
    return t


SHORT_STATUS = {"fixed": "fixed", "varied": "vary", "linked": "link", "at bound": "bound",
                "undetermined": "undet."}


def parameter_table(r: FitResult, settings: dict | None = None, width: int = 200) -> Table:
    """Fitted parameters; narrow screens drop the start value and shorten the status."""
    wide = width >= 110
    tab = Table(title="Parameters (cm-1)", title_justify="left", show_lines=False)
    cols = [("parameter", "left"), ("value", "right"), ("error", "right"), ("status", "left")]
    cols += [("start", "right"), ("ratio", "right"), ("to", "left")] if wide else [
        ("ratio", "right")]
    for col, just in cols:
        tab.add_column(col, justify=just, no_wrap=col != "parameter")
    for name, value in r.values.items():
        err = r.errors[name]
        status = r.status[name]
        err_text = {"fixed": "", "at bound": "at bound", "undetermined": "undetermined"}.get(
            status, fmt_num(err, 1)
        )
        if status == "linked":
            link = (settings or {}).get(name)
            status = f"linked {link.link}" if link is not None and link.link else status
        ratio = r.ratios[name]
        ratio_text = "" if ratio is None else f"{ratio:.3f}"
        if wide:
            tab.add_row(Text(name), fmt_num(value, 1), err_text, status,
                        fmt_num(r.start[name], 1), ratio_text,
                        r.ratio_reference[name] if ratio else "")
        else:
            tab.add_row(Text(name), fmt_num(value, 1), err_text,
                        SHORT_STATUS.get(r.status[name], status), ratio_text)
    return tab


def residual_style(residual: float, sigma: float | None) -> str:
    if sigma is None or sigma == 0:
        return ""
    q = abs(residual) / sigma
    return "red" if q > 3 else ("yellow" if q > 2 else "")


def level_table(r: FitResult, limit: int | None = None, width: int = 200) -> Table:
    """Observed vs calculated; narrow screens show the leading component only, no g."""
    wide = width >= 150
    tab = Table(title="Observed levels (cm-1)", title_justify="left")
    cols = [("id", "left"), ("J", "right"), ("E obs", "right"), ("E calc", "right"),
            ("O-C", "right")]
    if wide:
        cols.append(("label", "left"))
    cols.append(("leading components", "left"))
    if wide:
        cols += [("g calc", "right"), ("g obs", "right")]
    cols.append(("", "left"))
    for col, just in cols:
        tab.add_column(col, justify=just, no_wrap=col not in ("label", "leading components"))
    rows = r.levels if limit is None else r.levels[:limit]
    n_comp = 3 if width >= 200 else 1
    for row in rows:
        comps = "  ".join(f"{100 * f:.0f}% {lab}" for lab, f in row.components[:n_comp])
        flags = []
        if not row.included:
            flags.append("excl.")
        if row.label_mismatch:
            flags.append("≠ label" if wide else f"≠ {row.label}")
        cells = [
            row.id, format_j(row.J), f"{row.energy_obs:.2f}", f"{row.energy_calc:.2f}",
            Text(f"{row.residual:.2f}", style=residual_style(row.residual, r.sigma)),
        ]
        if wide:
            cells.append(Text(row.label or "—"))
        cells.append(Text(comps))
        if wide:
            cells += [f"{row.g_calc:.4f}", "" if row.g_obs is None else f"{row.g_obs:.3f}"]
        cells.append(" ".join(flags))
        tab.add_row(*cells)
    return tab


def prediction_table(r: FitResult, limit: int | None = None) -> Table:
    tab = Table(title="Predicted (unobserved) levels (cm-1)", title_justify="left")
    for col, just in (("parity", "left"), ("J", "right"), ("energy", "right"), ("±", "right"),
                      ("leading components", "left"), ("g", "right")):
        tab.add_column(col, justify=just)
    rows = r.predictions if limit is None else r.predictions[:limit]
    for p in rows:
        comps = "  ".join(f"{100 * f:.0f}% {lab}" for lab, f in p.components)
        tab.add_row(p.parity, format_j(p.J), f"{p.energy:.1f}", f"{p.uncertainty:.1f}",
                    Text(comps), f"{p.g:.4f}")
    return tab


def correlation_table(r: FitResult) -> Table | None:
    if not r.strong_correlations:
        return None
    tab = Table(title="Strong correlations", title_justify="left")
    tab.add_column("parameter")
    tab.add_column("parameter")
    tab.add_column("rho", justify="right")
    for a, b, rho in r.strong_correlations:
        tab.add_row(Text(a), Text(b), f"{rho:+.3f}")
    return tab
