"""Blume-Watson spin-orbit parameters from Hartree-Fock orbitals.

The Breit-Pauli spin-orbit operator (atomic units; Bethe & Salpeter 1957, sect. 38-39)

    H_so = (alpha^2/2) sum_i Z/r_i^3 l_i.s_i
           - (alpha^2/2) sum_{i != j} r_ij^-3 (r_ij x p_i).(s_i + 2 s_j),

averaged over the closed shells, acts on an electron of the open subshell a as
zeta_a l.s (Blume & Watson 1962, Proc. R. Soc. A 270, 127; 1963, A 271, 565):

    zeta_a = alpha^2 [ (1/2) int P_a^2 (Z - Q(r)) / r^3 dr  +  3 sum_b X(a, b) / l_a ].

Q(r) is the charge of the other electrons inside r (the spin-same-orbit direct term;
the direct spin-other-orbit term of a closed shell vanishes), and X(a, b) the
exchange integral of a full subshell b,

    X(a, b) = sum_{m_b} <a(1) b(2)| [r_12 x p_1]_z / r_12^3 |b(1) a(2)>,  m_a = l_a,

in which the spin-same-orbit part counts once and the spin-other-orbit part twice
(hence the 3) and the two orderings of the electrons give twice the real part.
X is evaluated here from its definition, without tables: with
r_12/r_12^3 x p_1 = i grad_1(1/r_12) x grad_1 and the multipole expansion of 1/r_12,
it becomes radial integrals of P_a, P_b, P_b' and Y^k(P_a P_b) times angular
integrals done by Gauss-Legendre quadrature (converged to rounding).

Open subshells other than a count with the configuration-average weight
w_b/(4l_b+2) of a full shell; a's own subshell with (w_a - 1)/(4l_a + 1), so that one
electron outside closed shells has no self-interaction and one hole (p^5, d^9) is
treated exactly like a closed shell with a hole. The remaining intra-shell
two-body spin-orbit parts are what M^k and P^k parametrise.
"""

from __future__ import annotations

from functools import cache
from math import factorial
from typing import TYPE_CHECKING

import numpy as np
from scipy.special import lpmv

from finefit.errors import FinefitError
from finefit.radial.grid import RadialGrid, derivative
from finefit.radial.units import ALPHA, HARTREE_CM

if TYPE_CHECKING:
    from finefit.radial.result import HartreeFockResult

_NODES = 96  # Gauss-Legendre points in cos(theta); 48 and 192 agree to rounding for 4f


@cache
def _quadrature() -> tuple[np.ndarray, np.ndarray]:
    return np.polynomial.legendre.leggauss(_NODES)


def _theta(l: int, m: int, x: np.ndarray) -> np.ndarray:
    """Theta_lm(x) normalised over x in [-1, 1], Condon & Shortley phase.

    Y_lm = Theta_lm(cos theta) e^(i m phi) / sqrt(2 pi).
    """
    if abs(m) > l:
        return np.zeros_like(x)
    ma = abs(m)
    norm = np.sqrt((2 * l + 1) / 2.0 * factorial(l - ma) / factorial(l + ma))
    th = norm * lpmv(ma, l, x)
    return th if m >= 0 else (-1) ** ma * th


def _dtheta(l: int, m: int, x: np.ndarray) -> np.ndarray:
    """d Theta_lm / d theta from L+ Y_lm = sqrt((l-m)(l+m+1)) Y_l,m+1 (Condon & Shortley phases)."""
    cot = x / np.sqrt(1.0 - x * x)
    out = m * cot * _theta(l, m, x)
    if m < l:
        out = out + np.sqrt((l - m) * (l + m + 1)) * _theta(l, m + 1, x)
    return out


@cache
def _triple(l1: int, m1: int, l2: int, m2: int, l3: int, m3: int) -> float:
    """int Theta_1 Theta_2 Theta_3 dx / sqrt(2 pi): a Gaunt integral when the m's add up."""
    x, w = _quadrature()
    v = float(np.sum(w * _theta(l1, m1, x) * _theta(l2, m2, x) * _theta(l3, m3, x)))
    return v / np.sqrt(2.0 * np.pi)


@cache
def _angular(la: int, ma: int, k: int, q: int, lc: int, mc: int) -> tuple[float, float]:
    """(T, J): T = int Y_la,ma^* Y_kq Y_lc,mc dOmega and
    J = int Y_la,ma^* cot(theta) (m_c dY_kq/dtheta Y_lc,mc - q Y_kq dY_lc,mc/dtheta) dOmega / i."""
    if -ma + q + mc != 0:
        return 0.0, 0.0
    x, w = _quadrature()
    ta, t1, tc = _theta(la, ma, x), _theta(k, q, x), _theta(lc, mc, x)
    cot = x / np.sqrt(1.0 - x * x)
    s = 1.0 / np.sqrt(2.0 * np.pi)
    T = s * float(np.sum(w * ta * t1 * tc))
    J = s * float(np.sum(w * ta * cot * (mc * _dtheta(k, q, x) * tc - q * t1 * _dtheta(lc, mc, x))))
    return T, J


def orbit_field_integral(
    grid: RadialGrid, pa: np.ndarray, la: int, pc: np.ndarray, lc: int, mc: int,
    pd: np.ndarray, ld: int, md: int, pe: np.ndarray, le: int, me: int,
) -> float:
    """<a(1) d(2)| [r_12 x p_1]_z / r_12^3 |c(1) e(2)> for m_a = l_a (hartree, real orbitals P).

    Orbitals are P(r)/r Y_lm; with Phi(1) = int d^*(2) e(2)/r_12 d2 the integral is
    i int a^* [grad Phi x grad c]_z, expanded in multipoles k of 1/r_12.
    """
    ma = la
    r = grid.r
    pc_prime = derivative(pc * 1.0, grid.h) / r  # dP/dr = (dP/dx)/r
    total = 0.0
    q = me - md
    for k in range(abs(ld - le), ld + le + 1):
        if (ld + le + k) % 2 or abs(q) > k:
            continue
        A = _triple(ld, md, k, q, le, me)  # int Y_d^* Y_kq^* Y_e dOmega (q = m_e - m_d)
        if A == 0.0:
            continue
        T, J = _angular(la, ma, k, q, lc, mc)
        if T == 0.0 and J == 0.0:
            continue
        yk = grid.yk_over_r(pd * pe, k)
        yk_prime = derivative(yk, grid.h) / r
        R1 = grid.integrate(pa * pc * yk_prime / r)
        R2 = grid.integrate(pa * yk * (pc_prime - pc / r) / r)
        R3 = grid.integrate(pa * pc * yk / r**2)
        total += -(4.0 * np.pi / (2 * k + 1)) * A * (T * (mc * R1 - q * R2) + J * R3)
    return total


def closed_shell_exchange(
    grid: RadialGrid, pa: np.ndarray, la: int, pb: np.ndarray, lb: int
) -> float:
    """X(a, b): the exchange orbit-field integral summed over a full subshell b (hartree)."""
    return sum(
        orbit_field_integral(grid, pa, la, pb, lb, mb, pb, lb, mb, pa, la, la)
        for mb in range(-lb, lb + 1)
    )


def closed_shell_direct(
    grid: RadialGrid, pa: np.ndarray, la: int, pb: np.ndarray, lb: int
) -> float:
    """The direct analogue of :func:`closed_shell_exchange` (one spin of a full subshell b):
    by Gauss's law it is (2l_b+1) l_a int P_a^2 Q_b(r)/r^3 dr, which tests the machinery."""
    return sum(
        orbit_field_integral(grid, pa, la, pa, la, la, pb, lb, mb, pb, lb, mb)
        for mb in range(-lb, lb + 1)
    )


def blume_watson_zeta(
    result: HartreeFockResult, orbital: str, unit: str = "cm-1", screened: bool = True
) -> float:
    """Blume-Watson zeta of ``orbital`` from a Hartree-Fock result (cm^-1 or ``"hartree"``).

    Nuclear term, direct screening by all other electrons, and exchange with the closed
    subshells (open ones with their average occupation), as in the module docstring.
    ``screened=False`` (bare-Coulomb orbitals) keeps only the nuclear term.
    """
    factor = {"cm-1": HARTREE_CM, "cm^-1": HARTREE_CM, "hartree": 1.0}.get(unit)
    if factor is None:
        raise FinefitError(f"unknown unit {unit!r}: use 'cm-1' or 'hartree'", str(unit))
    shells = result.radial_functions()
    names = [s[0] for s in shells]
    if orbital not in names:
        raise FinefitError(f"orbital {orbital!r} is not in {result.configuration!r}", orbital)
    i = names.index(orbital)
    _, la, _, pa = shells[i]
    if la == 0:
        raise FinefitError(f"an s orbital ({orbital}) has no spin-orbit parameter", orbital)
    grid = result.grid
    r = grid.r
    nuclear = 0.5 * result.Z * grid.integrate(pa**2 / r**3)
    direct = 0.0
    exchange = 0.0
    for j, (_, lb, wb, pb) in enumerate(shells if screened else []):
        full = 4 * lb + 2
        frac = (wb - 1) / (4 * lb + 1) if j == i else wb / full
        if frac == 0.0:
            continue
        inside = grid.cumulative(pb**2)
        direct += 0.5 * frac * full * grid.integrate(pa**2 * inside / r**3)
        exchange += 3.0 * frac * closed_shell_exchange(grid, pa, la, pb, lb) / la
    return ALPHA**2 * (nuclear - direct + exchange) * factor


__all__ = ["blume_watson_zeta", "closed_shell_direct", "closed_shell_exchange"]
