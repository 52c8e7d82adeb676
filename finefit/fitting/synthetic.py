"""Synthetic 'observed' levels from chosen parameters plus Gaussian noise.

Used for demos, tests and benchmarks; such data are invented and must be
labelled as such wherever they are shown.
"""

from __future__ import annotations

import numpy as np

from finefit.fitting.settings import ObservedLevel
from finefit.model.hamiltonian import Model


def synthetic_levels(
    model: Model,
    values: dict[str, float],
    noise: float = 0.0,
    seed: int = 0,
    max_levels: int | None = None,
    uncertainty: float | None = None,
    id_prefix: str = "L",
    start: int = 1,
) -> list[ObservedLevel]:
    """Levels of ``model`` at ``values`` with N(0, noise) added, labelled by their leading LS term.

    With ``max_levels`` only the lowest levels are kept (as a laboratory analysis would find).
    """
    rng = np.random.default_rng(seed)
    sol = model.solve(values, derivatives=False)
    levels = sol.levels if max_levels is None else sol.levels[:max_levels]
    out = []
    for k, lev in enumerate(levels):
        out.append(
            ObservedLevel(
                id=f"{id_prefix}{start + k:03d}",
                energy=float(lev.energy + rng.normal(0.0, noise)) if noise else lev.energy,
                J=lev.J,
                parity=lev.parity,
                uncertainty=uncertainty,
                configuration=lev.configuration,
                label=lev.label,
            )
        )
    return out
