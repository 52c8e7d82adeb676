"""First-order relativistic corrections to non-relativistic orbitals (Pauli approximation).

Expanding the Dirac equation in powers of alpha (Bethe & Salpeter, "Quantum Mechanics
of One- and Two-Electron Atoms", 1957) gives, besides spin-orbit,
two spin-independent one-electron terms:

* mass-velocity  H_mv = -(alpha^2/8) p^4, so that for an orbital P_nl
  E_mv = -(alpha^2/8) int [p^2 P]^2 dr,  p^2 P = -P'' + l(l+1) P / r^2;
* Darwin term (nuclear part, point nucleus)  H_D = (pi alpha^2 Z/2) delta(r), so that
  E_D = (alpha^2 Z/8) lim_{r->0} (P/r)^2, non-zero for s orbitals only.

Hydrogen check: E_mv + E_D = -(alpha^2 Z^4/(2 n^4)) (n/(l+1/2) - 3/4) for l = 0, the
spin-averaged Dirac fine structure.  Here both are evaluated as first-order
expectation values with the Hartree-Fock orbitals (the orbitals are not relaxed;
the two-electron Darwin and Breit terms are neglected).  p^2 P is taken from the
Numerov operator itself, so E_mv is accurate to the same O(h^4) as the orbitals.
"""

from __future__ import annotations

import numpy as np

from finefit.radial.grid import RadialGrid
from finefit.radial.units import ALPHA


def mass_velocity(grid: RadialGrid, l: int, z: np.ndarray) -> float:
    """E_mv in hartree for one electron in the orbital with standard-form vector z."""
    # (p^2 P)^2 dr = 2 (K z)^2 dx with K the standard-form kinetic operator (grid.py)
    kz = grid.kinetic(l) @ z
    f = 2.0 * kz * kz  # integrand in x
    h = grid.h
    # Near the nucleus p^2 P ~ 2 Z r^l, so f ~ exp((2l+1) x): add the part of the integral
    # below the first grid point and the Euler-Maclaurin end correction for that start.
    m = 2 * l + 1
    head = f[0] * (1.0 / m - 0.5 * h + m * h * h / 12.0)
    return float(-(ALPHA**2) / 8.0 * (h * np.sum(f) + head))


def darwin(grid: RadialGrid, l: int, z: np.ndarray, Z: float) -> float:
    """Nuclear Darwin energy E_D in hartree for one electron (zero unless l = 0)."""
    if l != 0:
        return 0.0
    r = grid.r[:6]
    p_over_r = z[:6] / (np.sqrt(2.0) * r**1.5)  # P/r = y / sqrt(r), y = z / (sqrt(2) r)
    # P/r = c0 + c1 r + c2 r^2 + ... near the nucleus; extrapolate to r = 0
    c0 = np.polynomial.polynomial.polyfit(r, p_over_r, 3)[0]
    return float(ALPHA**2 * Z / 8.0 * c0 * c0)
