"""Hydrogen-like checks: exact one-electron results and an independent quadrature.

Formulas (hartree, bohr): E = -Z^2/(2 n^2); <r> = [3 n^2 - l(l+1)]/(2Z);
<r^2> = n^2 [5 n^2 + 1 - 3 l(l+1)]/(2 Z^2); zeta = alpha^2 R_inf Z^4/(n^3 l(l+1/2)(l+1))
in cm^-1 (Bethe & Salpeter 1957, "Quantum Mechanics of One- and Two-Electron Atoms";
all from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants, integrate, special

from finefit.radial import hartree_fock, hydrogenic

ALPHA = constants.fine_structure
RYD_CM = constants.physical_constants["Rydberg constant"][0] / 100.0
HARTREE_CM = constants.physical_constants["hartree-inverse meter relationship"][0] / 100.0

# one-electron ions written as configurations: (configuration, Z, charge)
ONE_ELECTRON = [("1s", 1, 0), ("2p", 5, 4), ("3d", 26, 25), ("4f", 60, 59), ("2s", 3, 2)]


def _nl(text: str) -> tuple[int, int]:
    return int(text[:-1]), "spdfghi".index(text[-1])


@pytest.fixture(scope="module")
def ions():
    return {c: hartree_fock(c, Z, q) for c, Z, q in ONE_ELECTRON}


@pytest.mark.parametrize("conf,Z,charge", ONE_ELECTRON)
def test_one_electron_energy_and_moments(ions, conf, Z, charge):
    hf = ions[conf]
    n, l = _nl(conf)
    # Bethe & Salpeter 1957 (from memory): exact nonrelativistic hydrogenic values
    assert hf.orbital_energy(conf) == pytest.approx(-(Z**2) / (2 * n**2), rel=1e-6)
    assert hf.total_energy == pytest.approx(-(Z**2) / (2 * n**2), rel=1e-6)
    # moments are first order in the orbital error (O(h^4), ~1e-6 at the default step)
    assert hf.expectation_r(conf) == pytest.approx((3 * n**2 - l * (l + 1)) / (2 * Z), rel=3e-6)
    r2 = n**2 * (5 * n**2 + 1 - 3 * l * (l + 1)) / (2 * Z**2)
    assert hf.expectation_r2(conf) == pytest.approx(r2, rel=3e-6)
    assert hf.virial_ratio == pytest.approx(2.0, abs=1e-6)  # virial theorem, exact for Coulomb


@pytest.mark.parametrize("conf,Z,charge", [c for c in ONE_ELECTRON if not c[0].endswith("s")])
def test_one_electron_zeta(ions, conf, Z, charge):
    n, l = _nl(conf)
    # Bethe & Salpeter 1957 (from memory): zeta = alpha^2 R_inf Z^4 / (n^3 l (l+1/2)(l+1)) cm^-1
    expected = ALPHA**2 * RYD_CM * Z**4 / (n**3 * l * (l + 0.5) * (l + 1))
    assert ions[conf].zeta(conf) == pytest.approx(expected, rel=1e-6)


def test_f0_1s1s_is_five_eighths_z():
    for Z in (1, 2, 10, 50):
        h = hydrogenic("1s2", Z, grid_step=0.06)
        # F0(1s,1s) = 5Z/8 hartree (Slater 1960, vol. I; Bethe & Salpeter 1957) from memory
        assert h.F(0, "1s", unit="hartree") == pytest.approx(5 * Z / 8, rel=1e-6)


# --------------------------------------------------------- independent quadrature
def p_hydrogenic(n: int, l: int, Z: float, r: float) -> float:
    """Analytic hydrogenic P_nl = r R_nl (Bethe & Salpeter 1957; from memory)."""
    rho = 2.0 * Z * r / n
    count = math.factorial(n - l - 1) / (2 * n * math.factorial(n + l))
    norm = math.sqrt((2.0 * Z / n) ** 3 * count)
    laguerre = special.eval_genlaguerre(n - l - 1, 2 * l + 1, rho)
    return r * norm * math.exp(-rho / 2) * rho**l * laguerre


def rk_quadrature(k, a, b, c, d, Z):
    """R^k(ab,cd) by nested scipy quadrature on the analytic functions (not our grid code)."""
    (na, la), (nb, lb), (nc, lc), (nd, ld) = (_nl(x) for x in (a, b, c, d))

    def rho1(r):
        return p_hydrogenic(na, la, Z, r) * p_hydrogenic(nc, lc, Z, r)

    def rho2(r):
        return p_hydrogenic(nb, lb, Z, r) * p_hydrogenic(nd, ld, Z, r)

    top = 80.0 / Z

    def y(r):
        inner = integrate.quad(lambda s: s**k * rho2(s), 0.0, r, epsabs=1e-13, limit=200)[0]
        outer = integrate.quad(lambda s: rho2(s) / s ** (k + 1), r, top, epsabs=1e-13, limit=200)[0]
        return inner / r ** (k + 1) + outer * r**k

    return integrate.quad(lambda r: rho1(r) * y(r), 0.0, top, epsabs=1e-12, limit=200)[0]


@pytest.mark.parametrize(
    "k,a,b,c,d",
    [
        (2, "2p", "2p", "2p", "2p"),  # F2(2p,2p)
        (1, "1s", "2p", "2p", "1s"),  # G1(1s,2p)
        (2, "2p", "3d", "2p", "3d"),  # F2(2p,3d)
        (1, "2p", "3d", "3d", "2p"),  # G1(2p,3d)
        (1, "2s", "2p", "2p", "3d"),  # an R^k with four different orbitals
    ],
)
def test_hydrogenic_slater_integrals_against_quadrature(k, a, b, c, d):
    Z = 3
    h = hydrogenic("1s 2s 2p 3d", Z, grid_step=0.05)
    ours = h.slater_integral(k, a, b, c, d, unit="hartree")
    ref = rk_quadrature(k, a, b, c, d, Z)  # independent: scipy.integrate.quad on analytic P_nl
    assert ours == pytest.approx(ref, rel=2e-6, abs=1e-10)


def test_dipole_integral_against_quadrature():
    Z = 2
    h = hydrogenic("1s 2p 3d", Z, grid_step=0.05)
    for a, b in (("1s", "2p"), ("2p", "3d")):
        (na, la), (nb, lb) = _nl(a), _nl(b)
        ref = integrate.quad(
            lambda r, na=na, la=la, nb=nb, lb=lb: p_hydrogenic(na, la, Z, r)
            * r
            * p_hydrogenic(nb, lb, Z, r),
            0,
            100,
            limit=200,
        )[0]
        assert h.dipole_integral(a, b) == pytest.approx(ref, rel=1e-6)
        assert h.dipole_integral(b, a) == pytest.approx(ref, rel=1e-6)
    # <1s|r|2p> = 128 sqrt(6)/243 / Z bohr (Bethe & Salpeter 1957; from memory)
    assert h.dipole_integral("1s", "2p") == pytest.approx(128 * math.sqrt(6) / 243 / Z, rel=1e-6)


def test_slater_integrals_scale_linearly_and_zeta_as_z4():
    base = hydrogenic("2p 3d", 1, grid_step=0.06)
    for Z in (2, 7, 30, 90):
        h = hydrogenic("2p 3d", Z, grid_step=0.06)
        # hydrogenic scaling r -> r/Z (Bethe & Salpeter 1957): R^k ~ Z, zeta ~ Z^4
        for k in (0, 2):
            assert h.F(k, "2p", "3d") == pytest.approx(Z * base.F(k, "2p", "3d"), rel=1e-9)
        for k in (1, 3):
            assert h.G(k, "2p", "3d") == pytest.approx(Z * base.G(k, "2p", "3d"), rel=1e-9)
        assert h.F(2, "3d") == pytest.approx(Z * base.F(2, "3d"), rel=1e-9)
        assert h.zeta("2p") == pytest.approx(Z**4 * base.zeta("2p"), rel=1e-9)
        assert h.zeta("3d") == pytest.approx(Z**4 * base.zeta("3d"), rel=1e-9)


def test_hydrogenic_total_is_sum_of_orbital_energies():
    h = hydrogenic("1s2 2p3", 4)
    assert h.total_energy == pytest.approx(-2 * 16 / 2 - 3 * 16 / 8, rel=1e-6)  # -Z^2/2n^2 each


@pytest.mark.parametrize(
    "conf,Z,charge", [("1s", 10, 9), ("2s", 20, 19), ("2p", 30, 29), ("3d", 40, 39)]
)
def test_relativistic_shift_hydrogenic(conf, Z, charge):
    n, l = _nl(conf)
    hf = hartree_fock(conf, Z, charge, relativistic=True, grid_step=0.06)
    # mass-velocity + Darwin for hydrogen (Bethe & Salpeter 1957, from memory):
    # E_mv = -(alpha^2 Z^4/(2 n^4)) (n/(l+1/2) - 3/4), E_D = alpha^2 Z^4/(2 n^3) for l = 0
    mv = -(ALPHA**2 * Z**4 / (2 * n**4)) * (n / (l + 0.5) - 0.75)
    darwin = ALPHA**2 * Z**4 / (2 * n**3) if l == 0 else 0.0
    assert hf.relativistic_shift == pytest.approx(mv + darwin, rel=2e-5)
    assert hf.total_energy == pytest.approx(-(Z**2) / (2 * n**2) + mv + darwin, rel=2e-6)
    assert hf.orbital_relativistic_shift(conf) == pytest.approx(mv + darwin, rel=2e-5)
    # default is off
    assert hartree_fock(conf, Z, charge, grid_step=0.08).relativistic_shift == 0.0


def test_units_come_from_scipy_constants():
    h = hydrogenic("1s2", 1, grid_step=0.08)
    # hartree -> cm^-1 conversion (CODATA via scipy.constants)
    assert h.F(0, "1s") == pytest.approx(h.F(0, "1s", unit="hartree") * HARTREE_CM, rel=1e-14)
    assert 2 * RYD_CM == pytest.approx(HARTREE_CM, rel=1e-9)  # R_inf hc = hartree/2
    assert np.isfinite(h.total_energy_cm)
