"""Unit conversions for the radial package, all from ``scipy.constants`` (CODATA).

Atomic units inside the solver: energies in hartree, lengths in bohr.
"""

from __future__ import annotations

from scipy import constants as _c

#: 1 hartree in cm^-1 (CODATA "hartree-inverse meter relationship" / 100).
HARTREE_CM: float = _c.physical_constants["hartree-inverse meter relationship"][0] / 100.0

#: Fine-structure constant alpha (dimensionless); c = 1/alpha in atomic units.
ALPHA: float = _c.fine_structure

#: Rydberg constant R_inf in cm^-1 (R_inf hc = hartree / 2).
RYDBERG_CM: float = _c.physical_constants["Rydberg constant"][0] / 100.0


def hartree_to_cm(value: float) -> float:
    """Convert hartree to cm^-1."""
    return value * HARTREE_CM
