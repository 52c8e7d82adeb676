"""Figures for publication (matplotlib, Agg backend): O-C against energy, a level diagram
by configuration and J, and a predicted stick spectrum against observed lines."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import numpy as np

from finefit.fitting.results import FitResult
from finefit.notation.jvalues import format_j

Writer = Callable[[Path, bytes], Path]


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def oc_figure(r: FitResult, path: str | Path, writer: Writer | None = None) -> Path:
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(7, 3.5))
    inc = [x for x in r.levels if x.included]
    exc = [x for x in r.levels if not x.included]
    ax.axhline(0.0, color="0.5", lw=0.8)
    if r.sigma:
        for k in (1, -1):
            ax.axhline(k * r.sigma, color="0.7", lw=0.6, ls="--")
    ax.plot([x.energy_obs for x in inc], [x.residual for x in inc], "o", ms=4, label="fitted")
    if exc:
        ax.plot([x.energy_obs for x in exc], [x.residual for x in exc], "x", ms=5,
                label="excluded")
    ax.set_xlabel("E obs (cm$^{-1}$)")
    ax.set_ylabel("O $-$ C (cm$^{-1}$)")
    ax.legend(frameon=False, fontsize=8)
    fig.tight_layout()
    return _save(fig, plt, path, writer)


def level_diagram_figure(r: FitResult, path: str | Path, writer: Writer | None = None) -> Path:
    plt = _pyplot()
    keys = sorted({(x.configuration, x.J) for x in r.levels}, key=lambda k: (k[0], k[1]))
    fig, ax = plt.subplots(figsize=(max(4, 0.45 * len(keys) + 2), 5))
    for i, key in enumerate(keys):
        rows = [x for x in r.levels if (x.configuration, x.J) == key]
        for x in rows:
            ax.hlines(x.energy_calc, i - 0.4, i, color="tab:blue", lw=1)
            ax.hlines(x.energy_obs, i, i + 0.4, color="k" if x.included else "0.6", lw=1.5)
        for p in r.predictions:
            if (p.configuration, p.J) == key:
                ax.hlines(p.energy, i - 0.4, i, color="tab:red", lw=0.8, ls=":")
    ax.set_xticks(range(len(keys)))
    ax.set_xticklabels([f"{c}\nJ={format_j(j)}" for c, j in keys], fontsize=6, rotation=90)
    ax.set_ylabel("energy (cm$^{-1}$)")
    ax.set_title("calculated (left, blue), observed (right, black), predicted (dotted)",
                 fontsize=8)
    fig.tight_layout()
    return _save(fig, plt, path, writer)


def stick_spectrum_figure(lines, observed: np.ndarray | None, path: str | Path,
                          writer: Writer | None = None) -> Path:
    """Predicted lines as sticks of height gf against vacuum wavenumber; observed lines
    as ticks below the axis."""
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(8, 3.5))
    if lines:
        s = np.array([x.wavenumber for x in lines])
        gf = np.array([x.gf for x in lines])
        ax.vlines(s, 0, gf, color="tab:blue", lw=1, label="predicted gf")
    if observed is not None and len(observed):
        top = max([x.gf for x in lines], default=1.0)
        ax.vlines(observed, -0.08 * top, -0.02 * top, color="k", lw=0.8, label="observed")
    ax.set_xlabel("wavenumber (cm$^{-1}$, vacuum)")
    ax.set_ylabel("gf")
    ax.legend(frameon=False, fontsize=8)
    fig.tight_layout()
    return _save(fig, plt, path, writer)


def _save(fig, plt, path, writer: Writer | None) -> Path:
    """Render to memory, then write atomically (``writer`` decides whether it may)."""
    import io

    p = Path(path)
    buf = io.BytesIO()
    try:
        fig.savefig(buf, format=p.suffix.lstrip(".").lower() or "png", dpi=150)
    finally:
        plt.close(fig)
    if writer is None:
        from finefit.storage.atomic import atomic_write_bytes

        return atomic_write_bytes(p, buf.getvalue(), backup=False)
    return writer(p, buf.getvalue())
