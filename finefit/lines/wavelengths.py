"""Vacuum and air wavelengths: the dispersion of standard dry air.

The refractive index is the formula of Birch & Downs (1994, Metrologia 31, 315),
a revision of Edlén (1966, Metrologia 2, 71), in the form adopted by Morton (2000,
ApJS 130, 403, eq. 8) for dry air at 15 °C, 101 325 Pa, 0.045 % CO2:

    n - 1 = 8.34254e-5 + 2.406147e-2 / (130 - s^2) + 1.5998e-4 / (38.9 - s^2),

s = 10^4 / lambda_vac in um^-1 (lambda in angstrom). Valid from 2000 A into the near
infrared; below 2000 A wavelengths are quoted in vacuum (common practice).
"""

from __future__ import annotations

import numpy as np

from finefit.errors import FinefitError

MIN_AIR_ANGSTROM = 2000.0  # the formula's range starts here (and it diverges below 1603 A)


def _as_array(x, what: str, minimum: float = MIN_AIR_ANGSTROM) -> tuple[np.ndarray, bool]:
    arr = np.asarray(x, dtype=float)
    if not np.all(np.isfinite(arr)):
        raise FinefitError(f"{what}: wavelengths must be finite numbers", what)
    if np.any(arr < minimum):
        bad = float(arr[arr < minimum].ravel()[0])
        raise FinefitError(
            f"{what}: {bad} A is below 2000 A, where the dispersion formula of air does not "
            "apply (such wavelengths are given in vacuum)",
            what,
        )
    return arr, arr.ndim == 0


def refractive_index_air(vacuum_wavelength):
    """n of standard dry air at a vacuum wavelength (angstrom); arrays accepted."""
    lam, scalar = _as_array(vacuum_wavelength, "vacuum wavelength")
    s2 = (1.0e4 / lam) ** 2
    n = 1.0 + 8.34254e-5 + 2.406147e-2 / (130.0 - s2) + 1.5998e-4 / (38.9 - s2)
    return float(n) if scalar else n


def vacuum_to_air(vacuum_wavelength):
    """Air wavelength (angstrom) of a vacuum wavelength (angstrom); arrays accepted."""
    lam, scalar = _as_array(vacuum_wavelength, "vacuum wavelength")
    out = lam / np.asarray(refractive_index_air(lam))
    return float(out) if scalar else out


def air_to_vacuum(air_wavelength):
    """Vacuum wavelength (angstrom) of an air wavelength, inverting n(lambda_vac) exactly.

    lambda_vac = lambda_air * n(lambda_vac) is solved by fixed-point iteration (it
    contracts by about 1e-6 per step, so a few steps reach machine precision).
    """
    # 2000 A in vacuum is 1999.35 A in air
    lam_air, scalar = _as_array(air_wavelength, "air wavelength", MIN_AIR_ANGSTROM / 1.00033)
    lam = lam_air * 1.00027
    for _ in range(8):
        lam = lam_air * np.asarray(refractive_index_air(np.maximum(lam, MIN_AIR_ANGSTROM)))
    return float(lam) if scalar else lam


def reported_wavelength(vacuum_wavelength, air_from: float = 2000.0, air_to: float = 20000.0):
    """The wavelength as usually tabulated: in air between ``air_from`` and ``air_to``
    angstrom, in vacuum outside (common practice). Returns (wavelength, in_air)."""
    lam = np.asarray(vacuum_wavelength, dtype=float)
    in_air = (lam >= max(air_from, MIN_AIR_ANGSTROM)) & (lam <= air_to)
    out = lam.copy()
    if np.any(in_air):
        out[in_air] = vacuum_to_air(lam[in_air])
    if lam.ndim == 0:
        return float(out), bool(in_air)
    return out, in_air
