"""Fit results as plain, immutable data (safe to hand to any front end)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True, eq=False)
class LevelRow:
    """One observed level after a fit: observed vs calculated, and its eigenstate."""

    id: str
    J: float
    parity: str
    energy_obs: float
    uncertainty: float | None
    energy_calc: float
    residual: float  # O - C
    included: bool
    label: str  # the user's label ('' when none)
    calc_label: str  # leading LS component of the attached state
    configuration: str  # leading configuration of the attached state
    purity: float  # leading LS fraction
    purity_jj: float
    purity_jk: float
    best_scheme: str
    components: tuple[tuple[str, float], ...]  # top three in the best scheme
    g_calc: float
    g_obs: float | None
    state_rank: int  # 1-based energy rank of the attached state within its J and parity
    calc_uncertainty: float
    label_mismatch: bool


@dataclass(frozen=True, eq=False)
class PredictedLevel:
    """A computed state no observed level is attached to."""

    J: float
    parity: str
    energy: float
    uncertainty: float
    label: str
    configuration: str
    purity: float
    g: float
    state_rank: int
    components: tuple[tuple[str, float], ...]


@dataclass(frozen=True, eq=False)
class FitResult:
    """Everything a fit reports. Errors: 0 for fixed parameters, inf where undetermined."""

    converged: bool
    message: str
    n_levels: int
    n_free: int
    sigma: float | None  # sqrt(sum (O-C)^2 / (N_levels - N_free)); None when N <= N_free
    chi2: float  # weighted chi-square sum ((O-C)/u)^2 (u = default uncertainty if absent)
    reduced_chi2: float | None
    iterations: int
    values: dict[str, float]
    errors: dict[str, float]
    status: dict[str, str]  # fixed | varied | linked | at bound | undetermined
    start: dict[str, float]
    ratios: dict[str, float | None]  # fitted / ab initio (or / start value)
    ratio_reference: dict[str, str]  # "ab initio" | "start"
    correlation: tuple[list[str], np.ndarray]
    strong_correlations: list[tuple[str, str, float]]
    levels: list[LevelRow]
    predictions: list[PredictedLevel]
    warnings: list[str]
    undetermined: list[str]
    included_ids: list[str]
    covariance_note: str = ""
    solutions: dict = field(default_factory=dict, repr=False)
    # exchanges of two levels (or a move of one, second id "") that lower chi-square but
    # contradict a label: proposed, not applied; with the sigma after the refit
    suspected_swaps: list[tuple[str, str, float]] = field(default_factory=list)
    fitted: bool = True  # False for a report at given values (no fit was made)
    fixed_point: bool = True  # re-solving at the values with the states reproduces E_calc
    next_steps: list[str] = field(default_factory=list)  # "what to check next", plain words
    starts: tuple[int, int] | None = None  # (starts that reached this minimum, starts made)

    def level(self, level_id: str) -> LevelRow:
        return next(r for r in self.levels if r.id == level_id)

    def to_dict(self) -> dict:
        """JSON-ready dictionary (inf and None become null)."""

        def num(x):
            if x is None or (isinstance(x, float) and not math.isfinite(x)):
                return None
            return float(x)

        names, corr = self.correlation
        return {
            "converged": self.converged,
            "message": self.message,
            "n_levels": self.n_levels,
            "n_free": self.n_free,
            "sigma": num(self.sigma),
            "chi2": num(self.chi2),
            "reduced_chi2": num(self.reduced_chi2),
            "iterations": self.iterations,
            "covariance": self.covariance_note,
            "parameters": [
                {
                    "name": n,
                    "value": num(self.values[n]),
                    "error": num(self.errors[n]),
                    "status": self.status[n],
                    "start": num(self.start[n]),
                    "ratio": num(self.ratios[n]),
                    "ratio_to": self.ratio_reference[n],
                }
                for n in self.values
            ],
            "correlation": {"names": names, "matrix": np.asarray(corr).tolist()},
            "strong_correlations": [
                {"a": a, "b": b, "rho": float(r)} for a, b, r in self.strong_correlations
            ],
            "levels": [
                {
                    "id": r.id, "J": r.J, "parity": r.parity, "E_obs": r.energy_obs,
                    "uncertainty": num(r.uncertainty), "E_calc": r.energy_calc,
                    "O-C": r.residual, "included": r.included, "label": r.label,
                    "calc_label": r.calc_label, "configuration": r.configuration,
                    "purity_LS": r.purity, "purity_jj": r.purity_jj, "purity_JK": r.purity_jk,
                    "best_scheme": r.best_scheme,
                    "components": [{"label": a, "fraction": b} for a, b in r.components],
                    "g_calc": r.g_calc, "g_obs": num(r.g_obs), "state": r.state_rank,
                    "E_calc_uncertainty": num(r.calc_uncertainty),
                    "label_mismatch": r.label_mismatch,
                }
                for r in self.levels
            ],
            "predictions": [
                {
                    "J": p.J, "parity": p.parity, "energy": p.energy,
                    "uncertainty": num(p.uncertainty), "label": p.label,
                    "configuration": p.configuration, "purity_LS": p.purity, "g": p.g,
                    "state": p.state_rank,
                }
                for p in self.predictions
            ],
            "warnings": list(self.warnings),
            "undetermined": list(self.undetermined),
            "suspected_swaps": [
                {"levels": [a, b] if b else [a], "sigma_after": num(sg)}
                for a, b, sg in self.suspected_swaps
            ],
            "fitted": self.fitted,
            "fixed_point": self.fixed_point,
            "next_steps": list(self.next_steps),
            "starts": None if self.starts is None else {
                "reached": self.starts[0], "made": self.starts[1]
            },
        }
