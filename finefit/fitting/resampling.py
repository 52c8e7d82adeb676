"""Monte-Carlo and bootstrap draws of observed levels, and summaries of the refits (pure).

Monte Carlo (e.g. Press et al., "Numerical Recipes", 3rd ed., section 15.6): every
observed energy is replaced by E + N(0, u), u its stated uncertainty or, where none is
given, the fit's standard deviation sigma; the spread of the refitted parameters is
their uncertainty without the linearisation behind the covariance. Bootstrap (Efron &
Tibshirani 1993, "An Introduction to the Bootstrap", ch. 9, case resampling): the
included levels are drawn with replacement; a level drawn k times enters with weight k
(uncertainty u / sqrt(k)), which is the same least-squares problem as k copies of it.
All draws come from one ``numpy.random.default_rng(seed)`` in the caller, so the
numbers do not depend on where or in what order the refits run.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

# disagreement between the refit spread and the covariance error that is flagged
DISAGREEMENT = 1.5
PERCENTILES = (2.5, 16.0, 50.0, 84.0, 97.5)


def monte_carlo_draws(energies, uncertainties, n: int, seed: int) -> np.ndarray:
    """(n, levels) perturbed energies E + N(0, u)."""
    e = np.asarray(energies, dtype=float)
    u = np.asarray(uncertainties, dtype=float)
    rng = np.random.default_rng(seed)
    return e[None, :] + rng.standard_normal((n, e.size)) * u[None, :]


def bootstrap_counts(n_levels: int, n: int, seed: int) -> np.ndarray:
    """(n, levels) multiplicities of a case resampling with replacement."""
    rng = np.random.default_rng(seed)
    return rng.multinomial(n_levels, np.full(n_levels, 1.0 / n_levels), size=n)


@dataclass(frozen=True)
class Spread:
    """Distribution of one quantity over the successful refits, against the covariance."""

    name: str
    value: float  # from the fit to the data themselves
    mean: float
    spread: float  # sample standard deviation (ddof = 1)
    percentiles: tuple[float, ...]  # at PERCENTILES
    covariance_error: float  # from the covariance of the fit to the data
    ratio: float | None  # spread / covariance error
    flagged: bool  # ratio beyond DISAGREEMENT or below 1 / DISAGREEMENT

    def to_dict(self) -> dict:
        def num(x):
            return None if x is None or not math.isfinite(x) else float(x)

        return {
            "name": self.name, "value": num(self.value), "mean": num(self.mean),
            "spread": num(self.spread),
            "percentiles": {f"{p:g}": num(v) for p, v in zip(PERCENTILES, self.percentiles,
                                                             strict=True)},
            "covariance_error": num(self.covariance_error), "ratio": num(self.ratio),
            "flagged": self.flagged,
        }


def summarise(names, values, samples: np.ndarray, cov_errors) -> list[Spread]:
    """One Spread per column of ``samples`` (rows: successful refits)."""
    out = []
    samples = np.asarray(samples, dtype=float)
    for j, name in enumerate(names):
        col = samples[:, j]
        col = col[np.isfinite(col)]
        if col.size < 2:
            out.append(Spread(name, values[j], math.nan, math.nan,
                              tuple(math.nan for _ in PERCENTILES), cov_errors[j], None, False))
            continue
        sd = float(np.std(col, ddof=1))
        ce = float(cov_errors[j])
        ratio = sd / ce if ce > 0 and math.isfinite(ce) else None
        flagged = ratio is not None and not (1.0 / DISAGREEMENT <= ratio <= DISAGREEMENT)
        if ratio is None and sd > 0 and not math.isfinite(ce):
            flagged = True  # the covariance gives none, the refits do
        out.append(Spread(name, float(values[j]), float(np.mean(col)), sd,
                          tuple(float(v) for v in np.percentile(col, PERCENTILES)), ce, ratio,
                          flagged))
    return out
