"""Uncertainties by refitting perturbed data: Monte Carlo and bootstrap, serially or on
dask.distributed (see :mod:`finefit.fitting.resampling` for the methods).

>>> res = resample(s, runs=200, method="montecarlo", seed=1)   # doctest: +SKIP
>>> [p.name for p in res.parameters if p.flagged]              # spread vs covariance > 1.5x

The data are fitted once; every refit starts from those fitted values with the same
labels and attachment rules, so the refits explore the neighbourhood of that minimum.
Refits that fail, do not converge, or leave a parameter undetermined (possible when a
bootstrap draw leaves out every level that fixes it) are counted and left out of the
statistics.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from finefit.errors import FinefitError
from finefit.fitting.resampling import (
    Spread,
    bootstrap_counts,
    monte_carlo_draws,
    summarise,
)
from finefit.fitting.results import FitResult
from finefit.notation.jvalues import format_j
from finefit.parallel import TaskRunner, chunks, refit_task, state_keys, warm_task
from finefit.session import Session

METHODS = ("montecarlo", "bootstrap")


@dataclass
class ResamplingResult:
    """Distributions of the parameters and of every computed level over the refits."""

    method: str
    runs: int
    seed: int
    n_ok: int
    failures: list[str]
    fit: FitResult
    parameters: list[Spread]  # the varied parameters
    levels: list[Spread]  # every computed state, named "label J (id)" or "label J"
    parameter_samples: np.ndarray  # (n_ok, parameters)
    level_samples: np.ndarray  # (n_ok, levels)
    perturbation: str = ""
    warnings: list[str] = field(default_factory=list)
    cpu_seconds: float = 0.0  # CPU time of all refits, wherever they ran

    @property
    def flagged(self) -> list[str]:
        return [p.name for p in self.parameters + self.levels if p.flagged]

    def to_dict(self) -> dict:
        return {
            "method": self.method, "runs": self.runs, "seed": self.seed, "successful": self.n_ok,
            "failures": list(self.failures), "perturbation": self.perturbation,
            "parameters": [p.to_dict() for p in self.parameters],
            "levels": [p.to_dict() for p in self.levels],
            "flagged": self.flagged, "warnings": list(self.warnings),
        }


def resample(
    session: Session,
    runs: int = 100,
    method: str = "montecarlo",
    seed: int = 0,
    scheduler: str | None = None,
    workers: int | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> ResamplingResult:
    """``runs`` refits of ``session`` with perturbed (Monte Carlo) or resampled (bootstrap)
    levels. ``scheduler``: None runs them in this process, ``"local"`` on a LocalCluster
    (``workers`` processes, default the cores, one BLAS thread each), an address on an
    existing dask scheduler. The numbers depend only on the session, ``runs``, ``method``
    and ``seed``."""
    if method not in METHODS:
        raise FinefitError(f"method {method!r}: use one of {', '.join(METHODS)}", "method")
    if not isinstance(runs, int) or runs < 2:
        raise FinefitError("at least 2 refits are needed for a spread", "runs")
    serial = scheduler is None
    with TaskRunner(serial, None if scheduler in (None, "local") else scheduler,
                    workers) as runner:
        # the workers set up the engine while this process fits the data themselves
        runner.warm(warm_task, session.to_toml())
        r0 = session.fit()
        base = session.copy()
        base.apply(r0)
        text = base.to_toml()
        included = [lv for lv in base.levels if lv.include]
        ids = [lv.id for lv in included]
        sigma = r0.sigma if r0.sigma else session.options.default_uncertainty
        if method == "montecarlo":
            u = np.array([lv.uncertainty if lv.uncertainty else sigma for lv in included])
            e = monte_carlo_draws([lv.energy for lv in included], u, runs, seed)
            draws = [{"energies": row.tolist()} for row in e]
            given = sum(1 for lv in included if lv.uncertainty)
            how = (f"energies perturbed by N(0, u): {given} levels with their uncertainty, "
                   f"{len(included) - given} with the fit's sigma = {sigma:.4g} cm-1")
        else:
            c = bootstrap_counts(len(included), runs, seed)
            draws = [{"counts": row.tolist()} for row in c]
            how = f"{len(included)} levels resampled with replacement (weights = multiplicity)"
        n_workers = 1 if serial else max(1, len(runner.client.scheduler_info()["workers"]))
        parts = chunks(runs, 1 if serial else 4 * n_workers)
        payloads = [(text, ids, [draws[i] for i in part]) for part in parts]

        def step(k: int, _total: int) -> None:
            if progress:
                progress(sum(len(parts[i]) for i in range(k)), runs)

        out = runner.map(refit_task, payloads, step)
    results = [x for chunk in out for x in chunk]
    return summarise_refits(base, r0, results, method, runs, seed, how)


def summarise_refits(
    base: Session, r0: FitResult, results: list[dict], method: str, runs: int, seed: int,
    how: str,
) -> ResamplingResult:
    """Spread of every varied parameter and computed level, against the covariance."""
    names = list(r0.values)
    varied = [k for k, n in enumerate(names) if r0.status[n] != "fixed"]
    ok = [x for x in results if x["ok"]]
    failures = [x["message"] for x in results if not x["ok"]]
    vals = np.array([x["values"] for x in ok]).reshape(len(ok), len(names))
    psp = summarise([names[k] for k in varied], [r0.values[names[k]] for k in varied],
                    vals[:, varied], [r0.errors[names[k]] for k in varied])
    keys = state_keys(r0.solutions)
    en = np.array([x["energies"] for x in ok]).reshape(len(ok), len(keys))
    obs = {(x.parity, round(2 * x.J), x.state_rank - 1): x for x in r0.levels}
    prd = {(p.parity, round(2 * p.J), p.state_rank - 1): p for p in r0.predictions}
    lnames, lvals, lerr = [], [], []
    for key in keys:
        parity, j2, _ = key
        if key in obs:
            row = obs[key]
            lnames.append(f"{row.label or row.calc_label} {format_j(j2 / 2)} ({row.id})")
            lvals.append(row.energy_calc)
            lerr.append(row.calc_uncertainty)
        else:
            p = prd[key]
            lnames.append(f"{p.label} {format_j(j2 / 2)}")
            lvals.append(p.energy)
            lerr.append(p.uncertainty)
    lsp = summarise(lnames, lvals, en, lerr)
    warnings = []
    if not r0.converged:
        warnings.append("the fit to the data did not converge: the refits start from an "
                        "unconverged point")
    if failures:
        warnings.append(f"{len(failures)} of {runs} refits failed or left a parameter "
                        "undetermined; they are left out of the statistics")
    if len(ok) < 2:
        warnings.append("fewer than two refits succeeded: no spread")
    flagged = [p.name for p in psp if p.flagged]
    if flagged:
        warnings.append("refit spread and covariance error differ by more than a factor "
                        f"1.5 for: {', '.join(flagged)} (the linearised errors mislead here; "
                        "quote the refit percentiles)")
    if r0.covariance_note:
        how += f"; covariance errors: {r0.covariance_note}"
    if not math.isfinite(r0.chi2):
        warnings.append("the fit to the data has no finite chi-square")
    cpu = float(sum(x.get("cpu_seconds", 0.0) for x in results))
    return ResamplingResult(method, runs, seed, len(ok), failures, r0, psp, lsp, vals[:, varied],
                            en, how, warnings, cpu)
