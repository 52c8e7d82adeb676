"""Synthetic 'observed' levels from chosen parameters plus Gaussian noise.

Used for demos, tests and benchmarks; such data are invented and must be
labelled as such wherever they are shown.
"""

from __future__ import annotations

import numpy as np

from finefit.fitting.settings import ObservedLevel
from finefit.model.hamiltonian import Model

# INVENTED parameter values (cm-1) for the even set 3d6 4s + 3d7 + 3d5 4s2, used by the
# demo session, the fit benchmark and tests. Iron-group-like magnitudes; not a real ion.
INVENTED_IRON_GROUP = {
    "3d6 4s: Eav": 30000.0, "3d6 4s: F2(3d)": 85000.0, "3d6 4s: F4(3d)": 53000.0,
    "3d6 4s: G2(3d,4s)": 9000.0, "3d6 4s: zeta(3d)": 420.0, "3d6 4s: alpha(3d)": 60.0,
    "3d7: Eav": 33000.0, "3d7: F2(3d)": 80000.0, "3d7: F4(3d)": 50000.0,
    "3d7: zeta(3d)": 400.0, "3d7: alpha(3d)": 55.0,
    "3d5 4s2: Eav": 55000.0, "3d5 4s2: F2(3d)": 90000.0, "3d5 4s2: F4(3d)": 56000.0,
    "3d5 4s2: zeta(3d)": 440.0, "3d5 4s2: alpha(3d)": 65.0,
    "3d6 4s | 3d7: R2(3d4s,3d3d)": -4000.0, "3d6 4s | 3d5 4s2: R2(3d3d,3d4s)": -4500.0,
    "3d7 | 3d5 4s2: R2(3d3d,4s4s)": 3000.0,
}
IRON_GROUP_CONFIGURATIONS = ["3d6 4s", "3d7", "3d5 4s2"]


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
