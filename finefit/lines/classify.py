"""Line classification by Ritz combinations, and the search for unknown levels.

A line is classified when its wavenumber matches E_upper - E_lower of two known levels
of opposite parity with |J - J'| <= 1 (not 0 - 0) within a tolerance. The level search
scores trial energies E of a missing level by the unclassified lines that E would
explain as transitions to known levels (each such line counts with the predicted
strength of that transition, or 1), found exactly with sorted event lists.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from finefit.errors import FinefitError


@dataclass(frozen=True)
class KnownLevel:
    id: str
    energy: float
    J: float
    parity: str
    uncertainty: float = 0.0  # cm^-1; enters the agreement test of its lines


@dataclass(frozen=True, eq=False)
class Classification:
    """For each observed line the matching transitions, and the per-level agreement."""

    line_wavenumber: np.ndarray
    matches: list[list[tuple[str, str, float]]]  # per line: (lower id, upper id, obs - Ritz)
    unclassified: np.ndarray  # indices of lines with no match
    level_offsets: dict[str, tuple[int, float]]  # level id -> (n lines, mean obs - Ritz)
    disagreeing: list[str]  # levels whose lines sit systematically off

    @property
    def n_classified(self) -> int:
        return len(self.line_wavenumber) - len(self.unclassified)


def ritz_transitions(levels: list[KnownLevel]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """All E1-allowed combinations: (sigma, lower index, upper index), sorted by sigma."""
    e = np.array([lv.energy for lv in levels])
    j = np.array([lv.J for lv in levels])
    odd = np.array([lv.parity == "odd" for lv in levels])
    lo, up = np.meshgrid(np.arange(len(levels)), np.arange(len(levels)), indexing="ij")
    lo, up = lo.ravel(), up.ravel()
    ok = (e[up] > e[lo]) & (odd[up] != odd[lo]) & (np.abs(j[up] - j[lo]) <= 1.0)
    ok &= ~((j[up] == 0) & (j[lo] == 0))
    lo, up = lo[ok], up[ok]
    sigma = e[up] - e[lo]
    order = np.argsort(sigma)
    return sigma[order], lo[order], up[order]


def classify_lines(
    levels: list[KnownLevel],
    wavenumbers: np.ndarray,
    tolerance: float | np.ndarray,
    uncertainty: float | np.ndarray | None = None,
    disagreement: float = 3.0,
) -> Classification:
    """Classify observed wavenumbers (cm^-1) against the Ritz combinations of ``levels``.

    A level 'disagrees' when the mean (obs - Ritz) of its lines, each in units of its
    combined uncertainty (the line's, default tolerance / 3 read as a 3-sigma window,
    common practice, and the two levels' in quadrature), exceeds ``disagreement`` /
    sqrt(number of its lines).
    """
    w = np.asarray(wavenumbers, dtype=float)
    tol = np.broadcast_to(np.asarray(tolerance, dtype=float), w.shape)
    if np.any(tol <= 0):
        raise FinefitError("the classification tolerance must be positive", "tolerance")
    unc = tol / 3.0 if uncertainty is None else np.broadcast_to(
        np.asarray(uncertainty, dtype=float), w.shape)
    if np.any(unc <= 0):
        raise FinefitError("line uncertainties must be positive", "uncertainty")
    sigma, lo, up = ritz_transitions(levels)
    left = np.searchsorted(sigma, w - tol, side="left")
    right = np.searchsorted(sigma, w + tol, side="right")
    matches: list[list[tuple[str, str, float]]] = []
    sums: dict[int, list[float]] = {}
    for i in range(w.size):
        found = []
        for k in range(left[i], right[i]):
            d = float(w[i] - sigma[k])
            u = float(np.sqrt(unc[i] ** 2 + levels[lo[k]].uncertainty ** 2
                              + levels[up[k]].uncertainty ** 2))
            found.append((levels[lo[k]].id, levels[up[k]].id, d))
            # an upper level sits too low when obs > Ritz: count d for the upper, -d lower
            sums.setdefault(int(up[k]), []).append(d / u)
            sums.setdefault(int(lo[k]), []).append(-d / u)
        matches.append(found)
    unclassified = np.flatnonzero(right == left)
    offsets, bad = {}, []
    for idx, vals in sums.items():
        v = np.array(vals)
        offsets[levels[idx].id] = (int(v.size), float(v.mean()))
        if v.size >= 3 and abs(v.mean()) * np.sqrt(v.size) > disagreement:
            bad.append(levels[idx].id)
    return Classification(w, matches, unclassified, offsets, bad)


@dataclass(frozen=True, eq=False)
class Candidate:
    energy: float
    score: float
    lines: list[tuple[float, str, float]]  # (line wavenumber, known level id, weight)


def search_level(
    levels: list[KnownLevel],
    J: float,
    parity: str,
    energy: float,
    wavenumbers: np.ndarray,
    tolerance: float,
    window: float = 500.0,
    step: float = 0.01,
    weights: dict[str, float] | None = None,
    top: int = 10,
) -> tuple[np.ndarray, np.ndarray, list[Candidate]]:
    """Score trial energies energy +- window (grid ``step``) of a missing level.

    Returns (grid, score, best candidates). ``weights[id]`` is the predicted strength of
    the transition to known level ``id`` (default 1).
    """
    if step <= 0 or window <= 0 or tolerance <= 0:
        raise FinefitError("window, step and tolerance must be positive", "step")
    w = np.sort(np.asarray(wavenumbers, dtype=float))
    grid = energy + np.arange(-window, window + 0.5 * step, step)
    ev_e, ev_w, ev_k, ev_line = [], [], [], []
    for k, lv in enumerate(levels):
        if lv.parity == parity or abs(lv.J - J) > 1 or (lv.J == 0 and J == 0):
            continue
        wt = 1.0 if weights is None else weights.get(lv.id, 0.0)
        if wt <= 0:
            continue
        for sign in (1.0, -1.0):  # the new level above (+) or below (-) the known one
            lo = sign * (grid[0] - lv.energy)
            hi = sign * (grid[-1] - lv.energy)
            a, b = min(lo, hi) - tolerance, max(lo, hi) + tolerance
            i0, i1 = np.searchsorted(w, [max(a, 0.0), b])
            if i1 <= i0:
                continue
            sig = w[i0:i1]
            ev_e.append(lv.energy + sign * sig)
            ev_w.append(np.full(sig.size, wt))
            ev_k.append(np.full(sig.size, k))
            ev_line.append(sig)
    if not ev_e:
        return grid, np.zeros_like(grid), []
    e_ev = np.concatenate(ev_e)
    w_ev = np.concatenate(ev_w)
    k_ev = np.concatenate(ev_k)
    l_ev = np.concatenate(ev_line)
    order = np.argsort(e_ev)
    e_ev, w_ev, k_ev, l_ev = e_ev[order], w_ev[order], k_ev[order], l_ev[order]
    csum = np.concatenate([[0.0], np.cumsum(w_ev)])
    left = np.searchsorted(e_ev, grid - tolerance, side="left")
    right = np.searchsorted(e_ev, grid + tolerance, side="right")
    score = csum[right] - csum[left]
    count = right - left
    cands: list[Candidate] = []
    taken = np.zeros(grid.size, dtype=bool)
    # rank by score; equal scores go to the position that explains more lines
    for idx in np.lexsort((-count, -np.round(score, 9))):
        if len(cands) >= top or score[idx] <= 0:
            break
        if taken[idx]:
            continue
        lo_i = np.searchsorted(grid, grid[idx] - 2 * tolerance)
        hi_i = np.searchsorted(grid, grid[idx] + 2 * tolerance, side="right")
        taken[lo_i:hi_i] = True
        sl = slice(left[idx], right[idx])
        lines = [(float(s), levels[int(k)].id, float(x))
                 for s, k, x in zip(l_ev[sl], k_ev[sl], w_ev[sl], strict=True)]
        cands.append(Candidate(float(grid[idx]), float(score[idx]), lines))
    return grid, score, cands
