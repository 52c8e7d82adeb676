"""Pictures drawn with text: O-C against energy, a level diagram, a correlation heatmap.

Pure functions from fit results to rich Text, so they work in any terminal (16 colours,
NO_COLOR: every mark also has a distinct character).
"""

from __future__ import annotations

import math

import numpy as np
from rich.text import Text

from finefit.fitting.results import FitResult
from finefit.notation.jvalues import format_j


def residual_plot(r: FitResult, width: int, height: int, selected: str | None = None,
                  color: bool = True) -> Text:
    """O-C (cm-1) against observed energy; excluded levels as 'x', |O-C| > 2 sigma as '+',
    > 3 sigma as '#', the selected level as '@' (named below the plot with the outliers)."""
    rows = r.levels
    if not rows:
        return Text("no observed levels")
    width = max(width, 30)
    height = max(height, 9)
    left = 10
    pw, ph = width - left - 1, height - 5
    if ph % 2 == 0:
        ph -= 1  # an odd number of rows puts the zero line exactly on a row
    e = np.array([row.energy_obs for row in rows])
    oc = np.array([row.residual for row in rows])
    lim = max(float(np.max(np.abs(oc))), 1e-9) * 1.1
    emin, emax = float(e.min()), float(e.max())
    span = max(emax - emin, 1e-9)
    grid = [[" "] * pw for _ in range(ph)]
    styles = [[""] * pw for _ in range(ph)]
    zero = (ph - 1) // 2
    for x in range(pw):
        grid[zero][x] = "─"
        styles[zero][x] = "dim" if color else ""
    sigma = r.sigma or 0.0
    marks = []
    for row, ei, oi in zip(rows, e, oc, strict=True):
        x = int(round((ei - emin) / span * (pw - 1)))
        y = int(round((1 - (oi + lim) / (2 * lim)) * (ph - 1)))
        y = min(max(y, 0), ph - 1)
        if row.id == selected:
            continue
        if not row.included:
            ch, st = "x", "dim"
        elif sigma and abs(oi) > 3 * sigma:
            ch, st = "#", "bold red"
            marks.append(row)
        elif sigma and abs(oi) > 2 * sigma:
            ch, st = "+", "yellow"
        else:
            ch, st = "o", "cyan"
        grid[y][x] = ch
        styles[y][x] = st if color else ("bold" if ch == "#" else "")
    chosen = next((row for row in rows if row.id == selected), None)
    if chosen is not None:
        x = int(round((chosen.energy_obs - emin) / span * (pw - 1)))
        y = int(round((1 - (chosen.residual + lim) / (2 * lim)) * (ph - 1)))
        grid[min(max(y, 0), ph - 1)][x] = "@"
        styles[min(max(y, 0), ph - 1)][x] = "bold reverse"
    out = Text()
    out.append("O-C (cm-1) against E obs   o fitted  + >2σ  # >3σ  x excluded  @ selected\n",
               style="bold")
    for y in range(ph):
        if y == zero:
            label = f"{0.0:9.1f} "
        elif y in (0, ph - 1):
            label = f"{lim - 2 * lim * y / (ph - 1):+9.1f} "
        else:
            label = " " * left
        out.append(label[:left])
        out.append("│")
        for x in range(pw):
            out.append(grid[y][x], style=styles[y][x] or None)
        out.append("\n")
    out.append(" " * left + "└" + "─" * pw + "\n")
    lo, hi = f"{emin:.0f}", f"{emax:.0f}"
    out.append(" " * (left + 1) + lo + " " * max(pw - len(lo) - len(hi), 1) + hi + "\n")
    if chosen is not None:
        out.append(f"@ {chosen.id}  E obs {chosen.energy_obs:.3f}  O-C {chosen.residual:+.3f}"
                   f"  {chosen.label or chosen.calc_label}   (← → move)", style="bold")
    else:
        out.append("← → select a level")
    if marks:
        marks.sort(key=lambda row: -abs(row.residual))
        out.append("\n# " + "  ".join(f"{m.id} {m.residual:+.2f}" for m in marks[:8])
                   + ("  …" if len(marks) > 8 else ""))
    return out


def diagram_configurations(r: FitResult) -> list[str]:
    seen: list[str] = []
    for row in r.levels:
        if row.configuration not in seen:
            seen.append(row.configuration)
    for p in r.predictions:
        if p.configuration not in seen:
            seen.append(p.configuration)
    return seen


def level_diagram(r: FitResult, width: int, height: int, configuration: str | None = None
                  ) -> Text:
    """Levels by configuration and J: calculated '─', observed '━' (excluded '┄'),
    predicted '╌'. The energy range is that of the observed levels (plus a margin)."""
    columns: dict[tuple[str, float], list[tuple[float, str]]] = {}
    for row in r.levels:
        if configuration and row.configuration != configuration:
            continue
        key = (row.configuration, row.J)
        columns.setdefault(key, []).append((row.energy_calc, "calc"))
        columns[key].append((row.energy_obs, "obs" if row.included else "excl"))
    obs = [row.energy_obs for row in r.levels] or [0.0]
    lo_e, hi_e = min(obs), max(obs)
    margin = 0.1 * max(hi_e - lo_e, 1.0)
    for p in r.predictions:
        if configuration and p.configuration != configuration:
            continue
        if lo_e - margin <= p.energy <= hi_e + margin:
            columns.setdefault((p.configuration, p.J), []).append((p.energy, "pred"))
    if not columns:
        return Text("nothing to draw")
    order = diagram_configurations(r)
    keys = sorted(columns, key=lambda k: (order.index(k[0]) if k[0] in order else 99, k[1]))
    energies = [e for k in keys for e, _ in columns[k]]
    emin, emax = min(energies), max(energies)
    span = max(emax - emin, 1e-9)
    left = 9
    # columns as wide as the screen allows (at least 3: calc and obs marks side by side)
    colw = max(3, min(9, (width - left) // max(len(keys), 1)))
    shown = keys[: max((width - left) // colw, 1)]
    ph = max(height - 5, 6)
    grid = [[" "] * (colw * len(shown)) for _ in range(ph)]
    styles = [[""] * (colw * len(shown)) for _ in range(ph)]
    marks = {"calc": ("─", "cyan"), "obs": ("━", "bold"), "excl": ("┄", "dim"),
             "pred": ("╌", "magenta")}
    for c, key in enumerate(shown):
        for e, kind in sorted(columns[key], key=lambda t: t[1] != "obs"):
            y = int(round((1 - (e - emin) / span) * (ph - 1)))
            ch, st = marks[kind]
            x0 = c * colw
            half = max((colw - 1) // 2, 1)
            xs = range(x0, x0 + half) if kind in ("calc", "pred") else range(
                x0 + half, max(x0 + colw - 1, x0 + half + 1))
            for x in xs:
                grid[y][x] = ch
                styles[y][x] = st
    out = Text()
    title = configuration or "all configurations"
    out.append(f"{title} by J   ─ calc  ━ obs  ┄ excluded  ╌ predicted\n", style="bold")
    for y in range(ph):
        val = emax - span * y / max(ph - 1, 1)
        out.append(f"{val:8.0f} " if y % 4 == 0 else " " * left)
        for x in range(len(grid[y])):
            out.append(grid[y][x], style=styles[y][x] or None)
        out.append("\n")
    jt = [format_j(k[1]) for k in shown]
    if all(len(t) < colw for t in jt):
        out.append("       J " + "".join(t.ljust(colw) for t in jt))
    else:  # narrow columns: J values alternate between two rows
        rows = ["", ""]
        for i, t in enumerate(jt):
            rows[i % 2] = rows[i % 2].ljust(i * colw) + t
        out.append("       J " + rows[0] + "\n         " + rows[1])
    # each configuration's name spans its own columns
    out.append("\n" + " " * left)
    pos = 0
    while pos < len(shown):
        conf = shown[pos][0]
        n = 1
        while pos + n < len(shown) and shown[pos + n][0] == conf:
            n += 1
        span_w = n * colw
        name = conf if len(conf) + 1 <= span_w else conf[: max(span_w - 2, 1)] + "…"
        out.append(("▏" + name).ljust(span_w)[:span_w], style="bold")
        pos += n
    if len(shown) < len(keys):
        missing = sorted({k[0] for k in keys[len(shown):]}, key=order.index)
        out.append(f"\n(not shown for lack of width: {', '.join(missing)}; c shows one "
                   "configuration at a time)", style="dim")
    return out


def correlation_cells(r: FitResult, threshold: float) -> tuple[list[str], list[list[Text]]]:
    """Full parameter names (configuration kept: three E_av of three configurations
    differ) and coloured cells of the correlation matrix; strong ones marked '*'."""
    names, corr = r.correlation
    cells = []
    for i in range(len(names)):
        row = []
        for j in range(len(names)):
            rho = float(corr[i, j])
            strong = i != j and abs(rho) >= threshold
            if math.isnan(rho):
                row.append(Text("  ·  "))
                continue
            style = _heat(rho, i == j)
            row.append(Text(f"{rho:+.2f}{'*' if strong else ' '}", style=style))
        cells.append(row)
    return list(names), cells


def _heat(rho: float, diagonal: bool) -> str:
    if diagonal:
        return "dim"
    a = abs(rho)
    if a >= 0.9:
        return "bold white on red" if rho > 0 else "bold white on blue"
    if a >= 0.7:
        return "red" if rho > 0 else "blue"
    if a >= 0.4:
        return "yellow" if rho > 0 else "cyan"
    return ""


def composition_bars(components: list[tuple[str, float]], width: int) -> Text:
    """Horizontal bars of percentage composition. A label that names two different basis
    states (jj labels do not carry every intermediate coupling) is numbered [1], [2] so
    the two components are not read as one."""
    out = Text()
    barw = max(width - 8, 6)
    counts: dict[str, int] = {}
    for label, _ in components:
        counts[label] = counts.get(label, 0) + 1
    seen: dict[str, int] = {}
    for label, frac in components:
        n = int(round(frac * barw))
        out.append(f"{100 * frac:5.1f}% ")
        out.append("█" * n, style="green")
        out.append("░" * (barw - n), style="dim")
        out.append("\n   ")
        out.append(label)
        if counts[label] > 1:
            seen[label] = seen.get(label, 0) + 1
            out.append(f" [{seen[label]}]")
        out.append("\n")
    return out
