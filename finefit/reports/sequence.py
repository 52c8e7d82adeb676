"""Tables and figures of sequence trends and of Monte-Carlo / bootstrap refits."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from rich.table import Table
from rich.text import Text

from finefit.notation.jvalues import format_j


def pm(value: float | None, error: float | None, digits: int = 1) -> str:
    """``value ± error`` (error omitted when 0 or unknown)."""
    if value is None or not math.isfinite(value):
        return "—"
    if error is None or not math.isfinite(error):
        return f"{value:.{digits}f} ± ?"
    if error == 0:
        return f"{value:.{digits}f}"
    return f"{value:.{digits}f} ± {error:.{digits}f}"


def member_table(analysis) -> Table:
    tab = Table(title="Members (each fitted)", title_justify="left")
    for c in ("Z", "charge", "ion", "levels", "free", "sigma (cm-1)", "converged"):
        tab.add_column(c, justify="left" if c in ("ion", "converged") else "right")
    for m in analysis.members:
        tab.add_row(str(m["Z"]), str(m["charge"]), m["name"] or "", str(m["n_levels"]),
                    str(m["n_free"]), "—" if m["sigma"] is None else f"{m['sigma']:.2f}",
                    "yes" if m["converged"] else "NO")
    return tab


def trend_table(analysis) -> Table:
    """One row per parameter: each member's value and ratio to Hartree-Fock, and the law."""
    tab = Table(title="Parameters against Z (value ± standard error; ratio to Hartree-Fock)",
                title_justify="left")
    tab.add_column("parameter")
    for z in analysis.Z:
        tab.add_column(f"Z = {z}", justify="right")
    tab.add_column("law", justify="left")
    rows = analysis.table()
    for n in analysis.names:
        cells = []
        for z in analysis.Z:
            r = next(x for x in rows if x["parameter"] == n and x["Z"] == z)
            cell = pm(r["value"], r["error"] if r["status"] != "fixed" else 0.0)
            if r["status"] == "fixed":
                cell += " (fixed)"
            if r["ratio"] is not None:
                cell += f"\n{pm(r['ratio'], r['ratio_error'], 4)}"
            cells.append(cell)
        law = analysis.laws.get(n)
        if law is None:
            desc = "fixed in every member: their mean"
        else:
            what = "ratio to HF" if law.kind == "ratio" else "value"
            desc = f"{what}, degree {law.degree} in Z"
            if law.dof > 0:
                desc += f", chi2/dof {law.chi2 / law.dof:.3g}"
        tab.add_row(Text(n), *cells, desc)
    return tab


def prediction_table(new) -> Table:
    """Parameters of a predicted member: value ± uncertainty, ab initio, ratio."""
    ps = next(x for x in new.parameter_sets if x.name == "sequence trends")
    tab = Table(title=f"Predicted parameters of Z = {new.ion.Z}, charge {new.ion.charge} "
                "(from the trends; cm-1)", title_justify="left")
    for c in ("parameter", "value ± uncertainty", "Hartree-Fock", "ratio"):
        tab.add_column(c, justify="left" if c == "parameter" else "right")
    for n, p in new.parameters.items():
        ab = p.ab_initio
        tab.add_row(Text(n), pm(p.value, ps.errors.get(n)), "" if not ab else f"{ab:.1f}",
                    "" if not ab else f"{p.value / ab:.3f}")
    return tab


def values_at_table(at) -> Table:
    """Parameters from the laws at several Z: [(Z, {name: (value, uncertainty)})]."""
    tab = Table(title="Parameters from the trends (cm-1; E_av relative to the ground level)",
                title_justify="left")
    tab.add_column("parameter")
    for z, _ in at:
        tab.add_column(f"Z = {z}", justify="right")
    for n in at[0][1]:
        tab.add_row(Text(n), *[pm(*vals[n]) for _, vals in at])
    return tab


def predicted_levels_table(r) -> Table:
    tab = Table(title="Predicted levels (relative to the predicted ground level; uncertainty "
                "from the trends)", title_justify="left")
    for c in ("label", "J", "parity", "energy (cm-1)", "±", "purity"):
        tab.add_column(c, justify="left" if c in ("label", "parity") else "right")
    for p in sorted(r.predictions, key=lambda p: p.energy):
        e = 0.0 if abs(p.energy) < 0.05 else p.energy  # no "-0.0" for the ground level
        tab.add_row(p.label, format_j(p.J), p.parity, f"{e:.1f}", f"{p.uncertainty:.1f}",
                    f"{p.purity:.2f}")
    return tab


def spread_table(spreads, title: str, flagged_only: bool = False) -> Table:
    tab = Table(title=title, title_justify="left")
    for c in ("quantity", "fitted", "mean", "spread", "95 % of refits", "cov. error",
              "ratio", ""):
        tab.add_column(c, justify="left" if c in ("quantity", "") else "right")
    for s in spreads:
        if flagged_only and not s.flagged:
            continue
        p = s.percentiles
        tab.add_row(
            Text(s.name), f"{s.value:.1f}", f"{s.mean:.1f}", f"{s.spread:.3g}",
            f"{p[0]:.1f} … {p[4]:.1f}",
            "∞" if not math.isfinite(s.covariance_error) else f"{s.covariance_error:.3g}",
            "—" if s.ratio is None else f"{s.ratio:.2f}",
            Text("DIFFERS", style="bold yellow") if s.flagged else "",
        )
    return tab


# ----------------------------------------------------------------------------- figures
def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def sequence_figure(analysis, path: str | Path, new=None) -> Path:
    """Per parameter: value against Z (top) and ratio to Hartree-Fock with the law and its
    one-sigma band (bottom); the predicted member as an open marker."""
    plt = _pyplot()
    names = list(analysis.names)
    fig, axes = plt.subplots(2, len(names), figsize=(2.6 * len(names) + 0.6, 5.2),
                             squeeze=False)
    rows = analysis.table()
    zs = np.array(analysis.Z, dtype=float)
    lo, hi = zs.min(), zs.max()
    if new is not None:
        lo, hi = min(lo, new.ion.Z), max(hi, new.ion.Z)
    grid = np.linspace(lo - 0.3, hi + 0.3, 60)
    ps = None if new is None else next(x for x in new.parameter_sets
                                       if x.name == "sequence trends")
    for k, n in enumerate(names):
        top, bottom = axes[0, k], axes[1, k]
        mine = [r for r in rows if r["parameter"] == n]
        z = [r["Z"] for r in mine]
        v = [r["value"] for r in mine]
        e = [0.0 if r["error"] is None or r["status"] == "fixed" else r["error"] for r in mine]
        top.errorbar(z, v, yerr=e, fmt="o", ms=4, capsize=2, color="tab:blue")
        law = analysis.laws.get(n)
        if law is not None and law.kind == "value":
            band = np.array([law(x) for x in grid])
            top.plot(grid, band[:, 0], color="tab:blue", lw=0.8)
            top.fill_between(grid, band[:, 0] - band[:, 1], band[:, 0] + band[:, 1],
                             color="tab:blue", alpha=0.2, lw=0)
        if new is not None:
            top.errorbar([new.ion.Z], [new.parameters[n].value], yerr=[ps.errors.get(n, 0.0)],
                         fmt="o", mfc="white", color="tab:red", ms=5, capsize=2)
        top.set_title(n, fontsize=8)
        top.tick_params(labelsize=7)
        if law is not None and law.kind == "ratio":
            r = [x["ratio"] for x in mine]
            re = [0.0 if x["ratio_error"] is None or x["status"] == "fixed"
                  else x["ratio_error"] for x in mine]
            bottom.errorbar(z, r, yerr=re, fmt="s", ms=4, capsize=2, color="tab:green")
            band = np.array([law(x) for x in grid])
            bottom.plot(grid, band[:, 0], color="tab:green", lw=0.8)
            bottom.fill_between(grid, band[:, 0] - band[:, 1], band[:, 0] + band[:, 1],
                                color="tab:green", alpha=0.2, lw=0)
            if new is not None and new.parameters[n].ab_initio:
                ab = new.parameters[n].ab_initio
                bottom.errorbar([new.ion.Z], [new.parameters[n].value / ab],
                                yerr=[ps.errors.get(n, 0.0) / abs(ab)], fmt="s", mfc="white",
                                color="tab:red", ms=5, capsize=2)
            bottom.set_ylabel("fitted / HF", fontsize=7)
        else:
            bottom.text(0.5, 0.5, "no ratio\n(no ab initio value)", ha="center", va="center",
                        fontsize=7, transform=bottom.transAxes)
            bottom.set_yticks([])
            bottom.set_xticks([])
        bottom.set_xlabel("Z", fontsize=8)
        bottom.tick_params(labelsize=7)
    axes[0, 0].set_ylabel("cm$^{-1}$", fontsize=8)
    fig.tight_layout()
    return _save(fig, plt, path)


def histogram_figure(res, path: str | Path) -> Path:
    """Histograms of the refitted parameters with the normal curve of the covariance error
    (same area) for comparison; flagged parameters are titled in red."""
    plt = _pyplot()
    spreads = res.parameters
    n = max(1, len(spreads))
    cols = min(4, n)
    nrows = math.ceil(n / cols)
    fig, axes = plt.subplots(nrows, cols, figsize=(3.0 * cols, 2.4 * nrows), squeeze=False)
    for k, s in enumerate(spreads):
        ax = axes[k // cols, k % cols]
        col = res.parameter_samples[:, k]
        col = col[np.isfinite(col)]
        if col.size:
            counts, edges, _ = ax.hist(col, bins=min(30, max(5, col.size // 5)),
                                       color="tab:blue", alpha=0.7)
            ce = s.covariance_error
            if math.isfinite(ce) and ce > 0:
                x = np.linspace(edges[0], edges[-1], 200)
                area = col.size * (edges[1] - edges[0])
                ax.plot(x, area * np.exp(-0.5 * ((x - s.value) / ce) ** 2)
                        / (ce * math.sqrt(2 * math.pi)), color="k", lw=0.8)
        ax.axvline(s.value, color="tab:red", lw=0.8)
        ax.ticklabel_format(axis="x", useOffset=False)
        ax.set_title(s.name + ("  (differs)" if s.flagged else ""), fontsize=7,
                     color="tab:red" if s.flagged else "black")
        ax.tick_params(labelsize=6)
    for k in range(len(spreads), nrows * cols):
        axes[k // cols, k % cols].axis("off")
    fig.suptitle(f"{res.method}: {res.n_ok} refits; curve: covariance error", fontsize=8)
    fig.tight_layout()
    return _save(fig, plt, path)


def level_spread_figure(res, path: str | Path) -> Path:
    """Per computed level: the refit spread and the propagated covariance error against
    the level's energy; flagged levels marked."""
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(7, 3.5))
    e = np.array([s.value for s in res.levels])
    sp = np.array([s.spread for s in res.levels])
    ce = np.array([s.covariance_error if math.isfinite(s.covariance_error) else np.nan
                   for s in res.levels])
    flag = np.array([s.flagged for s in res.levels], dtype=bool)
    ax.plot(e, ce, "o", mfc="white", color="k", ms=4, label="covariance error")
    ax.plot(e, sp, ".", color="tab:blue", ms=6, label="refit spread")
    if flag.any():
        ax.plot(e[flag], sp[flag], "x", color="tab:red", ms=8, label="differ > 1.5x")
    ax.set_xlabel("calculated energy (cm$^{-1}$)")
    ax.set_ylabel("standard uncertainty (cm$^{-1}$)")
    ax.set_title(f"{res.method}: {res.n_ok} refits", fontsize=8)
    ax.legend(frameon=False, fontsize=7)
    fig.tight_layout()
    return _save(fig, plt, path)


def _save(fig, plt, path) -> Path:
    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(p, dpi=150)
    plt.close(fig)
    return p
