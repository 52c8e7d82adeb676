"""Smooth laws of a radial parameter along an isoelectronic sequence (pure numpy).

Along a sequence the Slater integrals grow about linearly with the nuclear charge and
zeta much faster (hydrogenic scaling F^k ~ Z, zeta ~ Z^4: Bethe & Salpeter 1957, "Quantum
Mechanics of One- and Two-Electron Atoms"; isoelectronic regularities: Edlen 1964,
"Atomic Spectra", Handbuch der Physik 27), while their ratios to Hartree-Fock drift
slowly (common practice). finefit therefore follows, per parameter, the ratio
fitted / Hartree-Fock where every member has an ab initio value ("ratio" law) and the
value itself otherwise ("value" law), as a low-order polynomial in Z fitted by weighted
least squares with weights 1/error^2 (the members' standard errors).

The prediction at any Z is linear in the members' values, y(Z) = sum_m L_m(Z) y_m, so
covariances between the parameters of one member (from its fit) are propagated exactly:
cov(y_p, y_q) = sum_m L_pm L_qm cov_m(y_p, y_q). When the law has degrees of freedom
left and its reduced chi-square exceeds 1, the variances are multiplied by it (the
Birge ratio squared; common practice), so scatter about the law widens the band.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from finefit.errors import FinefitError


@dataclass(frozen=True)
class Law:
    """A weighted polynomial y(x) = sum_k c_k (x - x0)^k fitted to the members' points.

    ``x`` are the members' Z (only those that entered), ``y``/``err`` their values and
    standard errors; ``scale`` is max(1, chi2/dof) (1 when no degree of freedom is left).
    """

    name: str
    kind: str  # "ratio" (fitted / Hartree-Fock) or "value"
    degree: int
    x: np.ndarray
    y: np.ndarray
    err: np.ndarray
    members: tuple[int, ...]  # indices of the members that entered
    coefficients: np.ndarray
    x0: float
    chi2: float
    dof: int
    scale: float

    def _design(self, x: np.ndarray) -> np.ndarray:
        return np.vander(np.asarray(x, dtype=float) - self.x0, self.degree + 1, increasing=True)

    def weights_at(self, x: float) -> np.ndarray:
        """L(x): the prediction at x as a linear combination of the members' y."""
        A = self._design(self.x)
        w = 1.0 / self.err**2
        N = A.T @ (A * w[:, None])
        a = self._design(np.array([x]))[0]
        return (a @ np.linalg.solve(N, A.T)) * w

    def __call__(self, x: float) -> tuple[float, float]:
        """(value, standard uncertainty) of the law at x."""
        L = self.weights_at(x)
        value = float(L @ self.y)
        return value, float(math.sqrt(float((L**2) @ self.err**2) * self.scale))


def fit_law(
    name: str,
    kind: str,
    x,
    y,
    err,
    members=None,
    degree: int = 1,
) -> Law:
    """Weighted polynomial law of ``degree`` (lowered to len(x) - 1 when fewer points).

    Points with a zero or non-finite error cannot be weighted and must be left out by
    the caller. Raises FinefitError when no point is given.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    err = np.asarray(err, dtype=float)
    if x.size == 0:
        raise FinefitError(f"{name}: no member determines this parameter", name)
    if np.any(~np.isfinite(err)) or np.any(err <= 0):
        raise FinefitError(f"{name}: every point needs a positive, finite error", name)
    if degree < 0:
        raise FinefitError("the degree of a law must be 0 or more", "degree")
    deg = min(int(degree), x.size - 1, np.unique(x).size - 1)
    x0 = float(np.average(x, weights=1.0 / err**2))
    A = np.vander(x - x0, deg + 1, increasing=True)
    w = 1.0 / err**2
    N = A.T @ (A * w[:, None])
    c = np.linalg.solve(N, A.T @ (w * y))
    resid = y - A @ c
    chi2 = float(np.sum(w * resid**2))
    dof = x.size - (deg + 1)
    scale = max(1.0, chi2 / dof) if dof > 0 else 1.0
    idx = tuple(range(x.size)) if members is None else tuple(int(m) for m in members)
    return Law(name, kind, deg, x, y, err, idx, c, x0, chi2, dof, scale)


def propagate(
    laws: list[Law],
    x: float,
    member_cov: list[np.ndarray],
    n_members: int,
) -> np.ndarray:
    """Covariance of the laws' predictions at x.

    ``member_cov[m]`` is the covariance of member m's y values in the order of
    ``laws`` (the same quantities the laws were fitted to: ratios or values).
    """
    n = len(laws)
    L = np.zeros((n, n_members))
    for i, law in enumerate(laws):
        L[i, list(law.members)] = law.weights_at(x)
    cov = np.zeros((n, n))
    for m in range(n_members):
        cov += (L[:, m : m + 1] * member_cov[m]) * L[:, m][None, :]
    s = np.sqrt(np.array([law.scale for law in laws]))
    return cov * np.outer(s, s)
