"""Logarithmic radial grid, Numerov kinetic operator and fourth-order radial quadratures.

The grid is r = exp(x)/Z with x uniform (step h), the usual choice for atomic
Hartree-Fock work (the logarithmic variable of Hartree 1957, "The Calculation
of Atomic Structures"): it scales with Z and crowds
points near the nucleus.  Radial functions are stored as y(x) with
P(r) = sqrt(r) y(x), which turns the radial equation
-P''/2 + [l(l+1)/(2r^2) + V] P = eps P into y'' = [(l+1/2)^2 + 2 r^2 (V - eps)] y,
a form Numerov's method integrates to O(h^4) (Hartree 1957).

Conventions used everywhere in the package:

* ``y`` vectors are normalised so that h * sum(r^2 y^2) = 1 (that is, int P^2 dr = 1);
* the "standard form" vector is z = sqrt(2) r y; with it the radial Fock problem is an
  ordinary symmetric eigenproblem A z = eps z;
* ``rho`` is a radial density such as P_a P_b = r y_a y_b.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy import linalg

from finefit.radial._angular import exchange_ks, threej0_squared

#: Default inner end of the grid, x_min = ln(Z r_min).  With the Coulomb boundary
#: condition below the s-orbital energies are already exact to ~1e-9 at x_min = -7,
#: but the kinetic/potential split (virial ratio) carries an error ~ 2 (Z r_min)^2; at
#: -9 it is ~5e-8 (measured).  Going much further only worsens the conditioning.
DEFAULT_X_MIN = -9.0

#: Default step in x.  Numerov's error is O(h^4): about 3e-8 relative on hydrogenic
#: energies at h = 0.05 (measured with this code).
DEFAULT_STEP = 0.05


class RadialGrid:
    """Uniform grid in x = ln(Z r), with the matrices the solver needs (built lazily).

    Two grids with the same ``Z``, ``h`` and ``x_min`` agree point by point on their
    common range, so orbitals from different runs of one ion can be combined by
    zero-padding the shorter one (see :meth:`pad`).
    """

    def __init__(self, Z: float, h: float, x_min: float, n: int) -> None:
        self.Z = float(Z)
        self.h = float(h)
        self.x_min = float(x_min)
        self.n = int(n)
        self.x = self.x_min + self.h * np.arange(self.n)
        self.r = np.exp(self.x) / self.Z
        self._kinetic: dict[int, np.ndarray] = {}
        self._kinetic_plain: dict[int, np.ndarray] = {}
        self._kernel: dict[int, np.ndarray] = {}
        self._exchange: dict[tuple[int, int], np.ndarray] = {}
        # powers of Z r used by the O(N) Y^k sums; Z r spans about e^-7 .. e^10
        self._zr = np.exp(self.x)
        self._pow: dict[int, tuple[np.ndarray, np.ndarray]] = {}

    # ------------------------------------------------------------------ operators
    def numerov_matrix(self, l: int) -> np.ndarray:
        """M_l ~ -d^2/dx^2 in Numerov's form M = -(1 + h^2 D/12)^-1 D (symmetric, dense).

        D is the second-difference matrix.  Its first diagonal element carries the
        inner boundary condition y(x_min - h) = c y(x_min), with c from the regular
        solution near the nucleus P ~ r^(l+1) (1 - Z r/(l+1)) (series solution of
        the radial equation at the origin).  Because the Numerov average is
        I + h^2 D/12 with the same D, the two commute and M stays symmetric.
        """
        m = self._kinetic_plain.get(l)
        if m is None:
            h, n = self.h, self.n
            zr0 = np.exp(self.x_min)
            c = np.exp(-(l + 0.5) * h) * (1.0 - zr0 * np.exp(-h) / (l + 1)) / (
                1.0 - zr0 / (l + 1)
            )
            d = np.zeros((n, n))
            idx = np.arange(n)
            d[idx, idx] = -2.0
            d[idx[:-1], idx[:-1] + 1] = 1.0
            d[idx[:-1] + 1, idx[:-1]] = 1.0
            d[0, 0] += c
            d /= h * h
            b = np.eye(n) + (h * h / 12.0) * d
            m = -linalg.solve(b, d, assume_a="sym")
            m = 0.5 * (m + m.T)
            self._kinetic_plain[l] = m
        return m

    def kinetic(self, l: int) -> np.ndarray:
        """Standard-form kinetic operator (-d^2/dr^2 + l(l+1)/r^2)/2 acting on z = sqrt(2) r y."""
        a = self._kinetic.get(l)
        if a is None:
            inv = 1.0 / (np.sqrt(2.0) * self.r)
            a = self.numerov_matrix(l) * np.outer(inv, inv)
            a[np.diag_indices(self.n)] += (l + 0.5) ** 2 / (2.0 * self.r**2)
            self._kinetic[l] = a
        return a

    def kernel(self, k: int) -> np.ndarray:
        """Matrix N^k with R^k(ab,cd) = (r y_a y_c)^T N^k (r y_b y_d) * h, i.e. the quadrature
        of int int rho1 rho2 r<^k / r>^(k+1).

        Trapezoid rule in x, plus the Euler-Maclaurin correction for the kink of
        r<^k/r>^(k+1) at r = r' (derivative jump -(2k+1)/r), which is diagonal and
        restores O(h^4) accuracy while keeping the form symmetric:
        N^k_ij = h r<^(k+1)/r>^k - delta_ij (2k+1) h^2 r_i / 12.
        """
        m = self._kernel.get(k)
        if m is None:
            x = self.x
            xl = np.minimum.outer(x, x)
            dx = np.abs(np.subtract.outer(x, x))
            m = (self.h / self.Z) * np.exp(xl - k * dx)
            m[np.diag_indices(self.n)] -= (2 * k + 1) * self.h**2 * self.r / 12.0
            self._kernel[k] = m
        return m

    def exchange_kernel(self, la: int, lb: int) -> np.ndarray:
        """sum_k (la k lb; 0 0 0)^2 N^k over the exchange k values: the exchange operator
        between an la and an lb orbital is -(w_b/2) outer(y_b, y_b) * this (elementwise)."""
        key = (la, lb)
        m = self._exchange.get(key)
        if m is None:
            m = np.zeros((self.n, self.n))
            for k in exchange_ks(la, lb):
                m += float(threej0_squared(la, k, lb)) * self.kernel(k)
            self._exchange[key] = m
            self._exchange[(lb, la)] = m
        return m

    # ----------------------------------------------------------------- quadrature
    def integrate(self, f: np.ndarray) -> float:
        """int_0^inf f(r) dr by the trapezoid rule in x (spectrally accurate for the smooth,
        decaying integrands met here)."""
        return float(self.h * np.dot(f, self.r))

    def cumulative(self, f: np.ndarray) -> np.ndarray:
        """int_0^r f(r') dr' at every grid point, O(h^4): trapezoid partial sums with the
        Euler-Maclaurin end correction -h^2/12 g'(x) (g = f r, the integrand in x)."""
        g = f * self.r
        s = self.h * (np.cumsum(g) - 0.5 * g)
        return s - (self.h**2 / 12.0) * derivative(g, self.h)

    def _powers(self, k: int) -> tuple[np.ndarray, np.ndarray]:
        """((Z r)^k, (Z r)^-(k+1)), cached; Z r spans about e^-9 .. e^10, safe for k <= 12."""
        p = self._pow.get(k)
        if p is None:
            p = self._pow[k] = (self._zr**k, self._zr ** (-(k + 1)))
        return p

    def yk_over_r(self, rho: np.ndarray, k: int) -> np.ndarray:
        """Y^k(r)/r = int rho(r') r<^k / r>^(k+1) dr' at every grid point, in O(N).

        Two cumulative sums (the usual Y^k = Z^k + outer part construction), with the
        same kink correction as :meth:`kernel`, so that this is exactly (N^k rho) / r.
        ``rho`` may be a stack of densities (rows); the result has the same shape.
        """
        g = rho * self.r  # integrand in x
        up, down = self._powers(k)
        inner = np.cumsum(g * up, axis=-1) * down
        outer = np.cumsum((g * down)[..., ::-1], axis=-1)[..., ::-1] * up
        # the diagonal point appears in both sums: count it once
        total = inner + outer - g / self._zr
        return self.h * self.Z * total - (2 * k + 1) * self.h**2 * g / (12.0 * self.r)

    def rk(self, rho1: np.ndarray, rho2: np.ndarray, k: int) -> float:
        """R^k = int int rho1(r) rho2(r') r<^k/r>^(k+1) dr dr' (hartree for unit-normalised P)."""
        return float(self.h * np.dot(rho1 * self.r, self.yk_over_r(rho2, k)))

    def pad(self, y: np.ndarray) -> np.ndarray:
        """Extend (with zeros) or check a vector from a shorter grid of the same family."""
        if len(y) == self.n:
            return y
        if len(y) > self.n:
            raise ValueError("vector longer than grid")
        out = np.zeros(self.n)
        out[: len(y)] = y
        return out

    def same_family(self, other: RadialGrid) -> bool:
        """True when the two grids share Z, h and x_min (points coincide where both exist)."""
        return self.Z == other.Z and self.h == other.h and self.x_min == other.x_min


def derivative(g: np.ndarray, h: float) -> np.ndarray:
    """dg/dx on a uniform grid: five-point central differences, one-sided near the ends."""
    d = np.empty_like(g)
    d[2:-2] = (g[:-4] - 8.0 * g[1:-3] + 8.0 * g[3:-1] - g[4:]) / (12.0 * h)
    d[:2] = (-3.0 * g[:2] + 4.0 * g[1:3] - g[2:4]) / (2.0 * h)
    d[-2:] = (3.0 * g[-2:] - 4.0 * g[-3:-1] + g[-4:-2]) / (2.0 * h)
    return d


@lru_cache(maxsize=6)  # each grid caches a few MB of dense matrices
def _cached_grid(Z: float, h: float, x_min: float, n: int) -> RadialGrid:
    return RadialGrid(Z, h, x_min, n)


def make_grid(
    Z: float, r_max: float, h: float = DEFAULT_STEP, x_min: float = DEFAULT_X_MIN
) -> RadialGrid:
    """Grid r = exp(x)/Z from x_min to at least ln(Z r_max) (cached: runs of one ion share it)."""
    n = int(np.ceil((np.log(Z * r_max) - x_min) / h)) + 1
    return _cached_grid(float(Z), float(h), float(x_min), n)
