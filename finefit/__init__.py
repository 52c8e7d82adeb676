"""finefit: term analysis of atomic spectra.

Fit the radial parameters of an intermediate-coupling Hamiltonian to observed
energy levels, read the eigenvector compositions, and predict missing levels.

The public names below are imported on first use (PEP 562 module ``__getattr__``),
so ``import finefit`` and the command line start without loading the engine, the
fitting library or scipy until a command needs them.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING

from finefit.errors import FinefitError

__version__ = "0.1.0"

# public name -> module that defines it
_LAZY = {
    "air_to_vacuum": "finefit.lines",
    "vacuum_to_air": "finefit.lines",
    "hydrogenic_zeta": "finefit.model.estimates",
    "lande_zeta": "finefit.model.estimates",
    "Model": "finefit.model.hamiltonian",
    "Level": "finefit.model.solution",
    "Solution": "finefit.model.solution",
    "HartreeFockResult": "finefit.radial",
    "average_energy_differences": "finefit.radial",
    "configuration_interaction_integral": "finefit.radial",
    "hartree_fock": "finefit.radial",
    "hydrogenic": "finefit.radial",
    "Session": "finefit.session",
    "load": "finefit.session",
    "optimise_levels": "finefit.session",
    "predict_member": "finefit.sequence",
    "fit_sequence": "finefit.sequence",
    "resample": "finefit.refits",
}

if TYPE_CHECKING:  # pragma: no cover - for type checkers and editors only
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
    from finefit.refits import resample
    from finefit.sequence import fit_sequence, predict_member
    from finefit.session import Session, load, optimise_levels


def __getattr__(name: str):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'finefit' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_LAZY))


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
    "predict_member",
    "fit_sequence",
    "resample",
    "hydrogenic_zeta",
    "lande_zeta",
]
