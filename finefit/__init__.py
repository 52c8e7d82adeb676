"""finefit: term analysis of atomic spectra.

Fit the radial parameters of an intermediate-coupling Hamiltonian to observed
energy levels, read the eigenvector compositions, and predict missing levels.
"""

from finefit.errors import FinefitError
from finefit.lines import air_to_vacuum, vacuum_to_air
from finefit.model.estimates import hydrogenic_zeta, lande_zeta
from finefit.model.hamiltonian import Model
from finefit.model.solution import Level, Solution
from finefit.radial import (
    HartreeFockResult,
    average_energy_differences,
    configuration_interaction_integral,
    hartree_fock,
    hydrogenic,
)
from finefit.session import Session, load, optimise_levels

__version__ = "0.1.0"

__all__ = [
    "air_to_vacuum",
    "vacuum_to_air",
    "FinefitError",
    "HartreeFockResult",
    "average_energy_differences",
    "configuration_interaction_integral",
    "hartree_fock",
    "hydrogenic",
    "Level",
    "Model",
    "Session",
    "Solution",
    "load",
    "optimise_levels",
    "hydrogenic_zeta",
    "lande_zeta",
]
