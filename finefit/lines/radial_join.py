"""Ab initio radial dipole integrals <nl|r|n'l'> for a pair of opposite-parity sets.

Each orbital comes from the Hartree-Fock run of the first configuration of its set that
contains it; the two runs share Z and the logarithmic grid family, so the integral is
taken on the common grid (the shorter grid padded with zeros).
"""

from __future__ import annotations

import numpy as np

from finefit.errors import FinefitError
from finefit.notation.configuration import parse_configuration


def cross_dipole(hf_a, a: str, hf_b, b: str) -> float:
    """<a|r|b> in bohr with a from run ``hf_a`` and b from run ``hf_b``."""
    if hf_a is hf_b:
        return float(hf_a.dipole_integral(a, b))
    ra, pa = hf_a.radial_function(a)
    rb, pb = hf_b.radial_function(b)
    n = max(ra.size, rb.size)
    r = ra if ra.size == n else rb
    m = min(ra.size, rb.size)
    if not np.allclose(ra[:m], rb[:m], rtol=1e-12):
        raise FinefitError("the two Hartree-Fock runs use different radial grids", a)
    pa = np.pad(pa, (0, n - pa.size))
    pb = np.pad(pb, (0, n - pb.size))
    grid = hf_a.grid if ra.size == n else hf_b.grid
    return float(grid.integrate(r * pa * pb))


def ab_initio_dipoles(models: dict, pair_names: list[tuple[str, str]], Z: int, charge: int
                      ) -> dict[tuple[str, str], float]:
    """HF dipole integrals for the subshell pairs of a DipoleModel (keys as given)."""
    from finefit.radial import hartree_fock

    runs: dict[str, object] = {}

    def run_for(orbital: str):
        for model in models.values():
            for cfg in model.configurations:
                if any(s.name == orbital for s in parse_configuration(cfg).subshells):
                    if cfg not in runs:
                        runs[cfg] = hartree_fock(cfg, Z=Z, charge=charge)
                    return runs[cfg]
        raise FinefitError(f"no configuration contains {orbital}", orbital)

    out = {}
    for a, b in pair_names:
        out[(a, b)] = cross_dipole(run_for(a), a, run_for(b), b)
    return out
