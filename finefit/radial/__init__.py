"""Radial numerics: configuration-average Hartree-Fock and the radial integrals of a
term analysis (Slater F^k, G^k, R^k, spin-orbit zeta, dipole integrals), pure computation.

>>> hf = hartree_fock("3d6 4s2", Z=26)      # core 1s2 ... 3p6 inferred
>>> hf.total_energy, hf.orbital_energy("3d"), hf.zeta("3d")
>>> hf.parameters("3d6 4s2")                # {"3d6 4s2: Eav": ..., "3d6 4s2: F2(3d)": ...}

Units: hartree and bohr for energies/lengths of the solution (``total_energy``,
``orbital_energy``, ``expectation_r``, ``dipole_integral``); cm^-1 (scipy.constants) for
``slater_integral``, ``F``, ``G``, ``zeta``, ``parameters`` and the interaction integrals
unless ``unit="hartree"``.  Method and sources: :mod:`finefit.radial.solver` (HF),
:mod:`finefit.radial.grid` (discretisation), :mod:`finefit.radial.relativistic`.
"""

from finefit.radial._threads import single_threaded_blas
from finefit.radial.atom import (
    average_energy_differences,
    configuration_interaction_integral,
    hartree_fock,
    hydrogenic,
)
from finefit.radial.grid import RadialGrid, make_grid
from finefit.radial.result import HartreeFockResult
from finefit.radial.units import ALPHA, HARTREE_CM, RYDBERG_CM

__all__ = [
    "single_threaded_blas",
    "ALPHA",
    "HARTREE_CM",
    "RYDBERG_CM",
    "HartreeFockResult",
    "RadialGrid",
    "average_energy_differences",
    "configuration_interaction_integral",
    "hartree_fock",
    "hydrogenic",
    "make_grid",
]
