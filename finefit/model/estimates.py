"""Starting values that need no ab initio run: hydrogenic and Landé spin-orbit estimates.

- Hydrogenic: zeta_nl = alpha^2 R Z^4 / (n^3 l (l + 1/2) (l + 1)) for a bare
  charge Z (Bethe & Salpeter 1957, §13; Condon & Shortley 1935, §5.4).
- Landé's semi-empirical formula: zeta_nl = alpha^2 R Z_i^2 Z_o^2 / (n*^3 l (l + 1/2) (l + 1)),
  with Z_o the charge seen outside (ion charge + 1), Z_i the effective inner
  charge and n* the effective quantum number of the electron from its binding
  energy E_b = R Z_o^2 / n*^2 (Landé 1924; Kuhn, Atomic Spectra, 1969; the
  doublet splitting (l + 1/2) zeta is Landé's alpha^2 R Z_i^2 Z_o^2 / (n*^3 l (l + 1))).
All in cm^-1; constants from scipy.constants (CODATA).
"""

from __future__ import annotations

from functools import cache

import numpy as np

from finefit.errors import FinefitError


@cache
def _constants() -> tuple[float, float]:
    """(R_inf, alpha^2 R_inf) in cm^-1; scipy.constants is imported on first use (0.1-0.2 s)."""
    from scipy.constants import Rydberg, fine_structure

    return Rydberg / 100.0, fine_structure**2 * Rydberg / 100.0


def __getattr__(name: str) -> float:  # PEP 562: RYDBERG_CM, ALPHA2_RYDBERG_CM on first use
    if name == "RYDBERG_CM":
        return _constants()[0]
    if name == "ALPHA2_RYDBERG_CM":
        return _constants()[1]
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

# Common-practice inner screening for Landé's formula: Z_i = Z - s with s = 0 for
# s electrons (no spin-orbit), 4 for p, 11 for d and 30 for f (Condon & Shortley
# 1935; Kuhn 1969; a rough rule of thumb, from memory).
LANDE_INNER_SCREENING = {1: 4.0, 2: 11.0, 3: 30.0}


def _check_l(n: float, l: int) -> None:
    if l < 1:
        raise FinefitError("spin-orbit parameters exist only for l >= 1", "l")
    if n <= 0:
        raise FinefitError("the principal or effective quantum number must be positive", "n")


def hydrogenic_zeta(n: int, l: int, Z: float) -> float:
    """zeta_nl of a one-electron ion of nuclear charge Z, in cm^-1."""
    _check_l(n, l)
    return _constants()[1] * Z**4 / (n**3 * l * (l + 0.5) * (l + 1))


def effective_quantum_number(binding_energy: float, ion_charge: int) -> float:
    """n* from E_b = R Z_o^2 / n*^2, Z_o = ion charge + 1, E_b in cm^-1 (positive)."""
    if binding_energy <= 0:
        raise FinefitError(
            "the binding energy (ionization limit minus level energy) must be positive",
            "binding_energy",
        )
    z_out = ion_charge + 1
    return float(z_out * np.sqrt(_constants()[0] / binding_energy))


def lande_zeta(
    l: int,
    Z: int,
    ion_charge: int,
    binding_energy: float,
    inner_screening: float | None = None,
) -> float:
    """Landé's estimate of zeta_nl (cm^-1) from a level's binding energy below the limit."""
    n_star = effective_quantum_number(binding_energy, ion_charge)
    _check_l(n_star, l)
    s = LANDE_INNER_SCREENING.get(l, 30.0) if inner_screening is None else inner_screening
    z_in = max(Z - s, 1.0)
    z_out = ion_charge + 1
    return _constants()[1] * z_in**2 * z_out**2 / (n_star**3 * l * (l + 0.5) * (l + 1))


# Typical values (cm^-1) of the effective operators, used as starting values of a new
# session where no ab initio value exists. They are the orders of magnitude of published
# free-ion and crystal fits; the signs matter more than the digits.
# f shells (trivalent lanthanides; Carnall, Goodman, Rajnak & Rana 1989, J. Chem. Phys.
# 90, 3443, their "typical" set):  # from memory
TYPICAL_F = {
    "alpha": 20.0, "beta": -600.0, "gamma": 1500.0,
    # T2 .. T8 of the published fits (300, 40, 60, -300, 370, 320) refer to Judd's own
    # normalisation of the t_i, which finefit could not verify (angular/threebody.py uses
    # its own scale): applied to finefit's operators they would be wrong by unknown
    # factors, so the three-electron operators start at 0 (fixed)
    "M0": 2.5, "M2": 1.4, "M4": 0.78,  # M2 = 0.56 M0, M4 = 0.31 M0 (Marvin-integral ratios)
    "P2": 300.0, "P4": 225.0, "P6": 150.0,  # P4 = 0.75 P2, P6 = 0.50 P2
}
# d shells (iron-group free ions; orders of magnitude of published fits):  # from memory
TYPICAL_D = {"alpha": 60.0, "beta": -500.0}  # T1, T2 (finefit's scale): start at 0
# Link groups of fixed ratios usual in f-shell fits (# common practice): the magnetic
# M^k vary as one parameter, and so do the P^k.
LINKED_RATIOS = {"M0": "M", "M2": "M", "M4": "M", "P2": "P", "P4": "P", "P6": "P"}


def _effective_key(short: str) -> tuple[str, str] | None:
    """('beta', '4f') for 'beta(4f)'; None for other names."""
    if "(" not in short or not short.endswith(")"):
        return None
    head, orb = short[:-1].split("(", 1)
    if "," in orb:
        return None
    return head, orb


def typical_value(short: str) -> float:
    """Typical starting value (cm^-1) of an effective operator such as ``beta(4f)``; 0 if none.

    Values for d and f shells only (see ``TYPICAL_F``, ``TYPICAL_D``): in p shells the
    effective corrections are small and start at 0.
    """
    key = _effective_key(short)
    if key is None:
        return 0.0
    head, orb = key
    table = {"d": TYPICAL_D, "f": TYPICAL_F}.get(orb[-1:], {})
    return float(table.get(head, 0.0))


def default_link(config: str, short: str) -> str | None:
    """The usual link group of a parameter (M^k together, P^k together), or None."""
    key = _effective_key(short)
    if key is None or key[0] not in LINKED_RATIOS:
        return None
    return f"{config}: {LINKED_RATIOS[key[0]]}({key[1]})"
