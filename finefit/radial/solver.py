"""Numerical Hartree-Fock for the average energy of a configuration.

Energy functional (Slater 1960, "Quantum Theory of Atomic Structure", vol. II;
Hartree 1957, "The Calculation of Atomic Structures"; coefficients re-derived here),
orbitals P_a normalised to 1,
w_a electrons in subshell a:

    E_av = sum_a w_a I(a)
         + sum_a w_a (w_a - 1)/2 [F0(aa) - (2l_a+1)/(4l_a+1) sum_{k>0} (l_a k l_a; 000)^2 Fk(aa)]
         + sum_{a<b} w_a w_b [F0(ab) - 1/2 sum_k (l_a k l_b; 000)^2 Gk(ab)]

with I(a) = <P_a| -1/2 d^2/dr^2 + l(l+1)/(2r^2) - Z/r |P_a>.  Varying it under the
orthonormality constraints gives, for every subshell a, the radial Fock equation
F_a P_a = eps_a P_a + sum_{b != a, l_b = l_a} eps_ab P_b, with the full non-local
exchange term -sum_b (w_b/2) sum_k (l_a k l_b; 000)^2 Y^k(ab; r)/r P_b(r).

Method (our own; the ingredients are textbook):

* Numerov discretisation on the logarithmic grid (see :mod:`finefit.radial.grid`): each
  Fock operator is a dense symmetric matrix (exchange is a dense kernel), so an
  orbital is an eigenvector selected by its node count n - l - 1.
* Closed subshells of one l all obey the same Fock operator (the closed-shell
  operator with self-exchange); they are found together as its lowest eigenvectors.
  Each open subshell has its own operator.  Orthogonality to the other orbitals of the
  same l is imposed exactly by deflating them out of the operator (Householder
  reflections) before diagonalising: this is the "Schmidt + eigenvalue" route.
* The one freedom deflation leaves, the rotation of two same-l orbitals into each
  other, is fixed by the variational condition w_a eps_ba = w_b eps_ab (the symmetry
  of the Lagrange multipliers, which follows from making the energy stationary under
  that rotation) through a Newton step on
  the rotation angle.  Closed-closed pairs need none (energy invariant).
* Self-consistency: Pulay's DIIS extrapolation on the orbital vectors, started from a
  Thomas-Fermi potential.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import linalg
from scipy.linalg import lapack

from finefit.errors import FinefitError
from finefit.radial._angular import exchange_ks, threej0_squared
from finefit.radial._config import FullConfiguration, Shell
from finefit.radial.grid import RadialGrid


@dataclass(frozen=True)
class Term:
    """One two-electron term coef * R^k of the average energy: kind 'F' (direct) or 'G'."""

    kind: str
    a: int
    b: int
    k: int
    coef: float


def average_energy_terms(shells: tuple[Shell, ...]) -> list[Term]:
    """Angular coefficients of the configuration-average energy (module docstring)."""
    terms: list[Term] = []
    for i, s in enumerate(shells):
        pairs = s.w * (s.w - 1) / 2.0
        if pairs:
            terms.append(Term("F", i, i, 0, pairs))
            f = (2 * s.l + 1) / (4 * s.l + 1)
            for k in range(2, 2 * s.l + 1, 2):
                terms.append(Term("F", i, i, k, -pairs * f * float(threej0_squared(s.l, k, s.l))))
    for i, a in enumerate(shells):
        for j in range(i + 1, len(shells)):
            b = shells[j]
            ww = float(a.w * b.w)
            terms.append(Term("F", i, j, 0, ww))
            for k in exchange_ks(a.l, b.l):
                terms.append(Term("G", i, j, k, -0.5 * ww * float(threej0_squared(a.l, k, b.l))))
    return terms


@dataclass
class SCFOutcome:
    """Raw solver output: standard-form orbitals z (rows), energies in hartree."""

    z: np.ndarray
    eps: np.ndarray
    total: float
    kinetic: float
    iterations: int
    residual: float


def thomas_fermi_potential(grid: RadialGrid, Z: int, n_electrons: int) -> np.ndarray:
    """Starting potential -Z_eff(r)/r: nucleus screened by N-1 electrons with a
    Thomas-Fermi profile (length 0.8853 Z^-1/3 bohr written as (3 pi/4)^(2/3)/2 Z^-1/3;
    screening function approximated by the rational form 1/(1 + 0.536 x)^2, after Tietz).
    Only the starting orbitals depend on it."""
    b = 0.5 * (0.75 * np.pi) ** (2.0 / 3.0) * Z ** (-1.0 / 3.0)
    phi = 1.0 / (1.0 + 0.536 * grid.r / b) ** 2
    screen = (n_electrons - 1) * (1.0 - phi)
    return -(Z - screen) / grid.r


def deflated_eigh(
    a: np.ndarray, block: list[np.ndarray], top: int, shift: float
) -> tuple[np.ndarray, np.ndarray]:
    """Lowest ``top + 1`` eigenpairs of symmetric ``a`` restricted to the orthogonal
    complement of the vectors in ``block``; ``shift`` must make a + shift*I positive.

    The discretised operator is strongly graded (kinetic entries ~1/(h r)^2 reach 1e13
    Z^2 at the inner grid end), so a direct dense eigensolver loses the weakly bound
    states (absolute error ~ eps * ||a||).  We therefore diagonalise the inverse instead
    (shift-and-invert): with a + shift*I = L L^T, C = L^-1 L^-T has eigenvalues
    mu = 1/(eps + shift), the bound states are its *largest* ones and are resolved to
    ~ eps * mu_max, independently of the stiff end.  z = L^-T v.

    Orthogonality z . u = 0 becomes v . (L^-1 u) = 0: each such vector is reflected onto
    the unit vector at its largest component (Householder) and that row and column are
    dropped, an exact projection at O(N^2) cost per vector.
    """
    n = a.shape[0]
    shifted = a.copy()
    shifted[np.diag_indices(n)] += shift
    for _ in range(8):
        try:
            chol = np.linalg.cholesky(shifted)
            break
        except np.linalg.LinAlgError:
            # the operator is deeper than the estimate: enlarge the shift and retry
            shifted[np.diag_indices(n)] += 2.0 * shift
            shift *= 3.0
    else:
        raise np.linalg.LinAlgError("no positive shift found for the Fock operator")
    inv_l, info = lapack.dtrtri(chol, lower=1)
    if info != 0:
        raise np.linalg.LinAlgError("singular Cholesky factor")
    work = inv_l @ inv_l.T
    us = [inv_l @ u for u in block]
    removed: list[int] = []
    reflectors: list[tuple[np.ndarray, float]] = []
    for j in range(len(us)):
        u = us[j]
        if removed:
            u = u.copy()
            u[removed] = 0.0
        u = u / np.linalg.norm(u)
        p = int(np.argmax(np.abs(u)))
        v = u.copy()
        v[p] += np.copysign(1.0, u[p])
        beta = 2.0 / float(v @ v)
        av = work @ v
        vav = float(v @ av)
        work -= beta * (np.outer(v, av) + np.outer(av, v))
        work += (beta * beta * vav) * np.outer(v, v)
        for i in range(j + 1, len(us)):
            us[i] = us[i] - beta * v * float(v @ us[i])
        reflectors.append((v, beta))
        removed.append(p)
    keep = np.ones(n, dtype=bool)
    keep[removed] = False
    sub = work[np.ix_(keep, keep)]
    m = sub.shape[0]
    mu, vc = linalg.eigh(sub, subset_by_index=[m - top - 1, m - 1], driver="evr")
    mu, vc = mu[::-1], vc[:, ::-1]  # largest mu = lowest eps first
    vf = np.zeros((n, vc.shape[1]))
    vf[keep] = vc
    for v, beta in reversed(reflectors):
        vf -= beta * np.outer(v, v @ vf)
    z = inv_l.T @ vf
    return 1.0 / mu - shift, z


def operator_shift(Z: float, l: int) -> float:
    """A shift that makes every radial Fock operator of angular momentum l positive:
    its lowest eigenvalue lies above the bare-nucleus value -Z^2/(2(l+1)^2), since the
    electrons screen the nucleus (the exchange attraction never outweighs the direct
    repulsion).  A margin keeps the inverse well conditioned; a failure is retried."""
    return 0.75 * Z * Z / (l + 1) ** 2 + 1.0


class HartreeFockSolver:
    """Self-consistent field for one configuration on one grid (pure numerics)."""

    def __init__(
        self,
        config: FullConfiguration,
        Z: int,
        grid: RadialGrid,
        *,
        tolerance: float = 1e-8,
        max_iterations: int = 200,
    ) -> None:
        self.config = config
        self.shells = config.shells
        self.Z = Z
        self.grid = grid
        self.tolerance = tolerance
        self.max_iterations = max_iterations
        self.terms = average_energy_terms(self.shells)
        self.w = np.array([s.w for s in self.shells], dtype=float)
        self.ls = sorted({s.l for s in self.shells})
        # same-l orbitals, sorted by n
        self.by_l = {l: [i for i, s in enumerate(self.shells) if s.l == l] for l in self.ls}
        # pairs whose relative rotation changes the energy: same l, not both closed
        self.rotation_pairs = [
            (i, j)
            for l in self.ls
            for ii, i in enumerate(self.by_l[l])
            for j in self.by_l[l][ii + 1 :]
            if not (self.shells[i].closed and self.shells[j].closed)
        ]
        self.norm = np.sqrt(2.0 / grid.h)  # |z| of a normalised orbital
        # terms grouped by k as index arrays: (F a, F b, F coef, G a, G b, G coef)
        self._terms_by_k: dict[int, tuple[np.ndarray, ...]] = {}
        for k in sorted({t.k for t in self.terms}):
            fs = [t for t in self.terms if t.k == k and t.kind == "F"]
            gs = [t for t in self.terms if t.k == k and t.kind == "G"]
            self._terms_by_k[k] = (
                np.array([t.a for t in fs], dtype=int),
                np.array([t.b for t in fs], dtype=int),
                np.array([t.coef for t in fs]),
                np.array([t.a for t in gs], dtype=int),
                np.array([t.b for t in gs], dtype=int),
                np.array([t.coef for t in gs]),
            )

    # ------------------------------------------------------------------ helpers
    def y_of(self, z: np.ndarray) -> np.ndarray:
        return z / (np.sqrt(2.0) * self.grid.r)

    def densities(self, z: np.ndarray) -> np.ndarray:
        """P_a^2 = r y_a^2 = z_a^2 / (2 r) for every orbital (rows)."""
        return z * z / (2.0 * self.grid.r)

    def start(self) -> np.ndarray:
        """Orbitals of the Thomas-Fermi potential, picked by node count."""
        g = self.grid
        v = thomas_fermi_potential(g, self.Z, self.config.n_electrons)
        z = np.zeros((len(self.shells), g.n))
        for l in self.ls:
            members = self.by_l[l]
            top = max(self.shells[i].n for i in members) - l - 1
            a = g.kinetic(l) + np.diag(v)
            _, vec = deflated_eigh(a, [], top, operator_shift(self.Z, l))
            for i in members:
                z[i] = self._fix(vec[:, self.shells[i].n - l - 1])
        return z

    def _fix(self, z: np.ndarray, ref: np.ndarray | None = None) -> np.ndarray:
        """Normalise and fix the sign (P > 0 near the nucleus, or along ``ref``)."""
        z = z * (self.norm / np.linalg.norm(z))
        if ref is not None:
            if float(z @ ref) < 0:
                z = -z
        else:
            lead = z[np.argmax(np.abs(z) > 1e-3 * np.max(np.abs(z)))]
            if lead < 0:
                z = -z
        return z

    def orthonormalise(self, z: np.ndarray) -> np.ndarray:
        """Symmetric (Loewdin) orthonormalisation within each l."""
        z = z.copy()
        for l in self.ls:
            idx = self.by_l[l]
            if len(idx) == 1:
                z[idx[0]] *= self.norm / np.linalg.norm(z[idx[0]])
                continue
            block = z[idx] / self.norm
            s = block @ block.T
            w, u = np.linalg.eigh(s)
            if np.min(w) <= 1e-10:
                raise self._failure(0, "orbitals of one l became linearly dependent")
            s_half = (u / np.sqrt(w)) @ u.T
            z[idx] = (s_half @ block) * self.norm
        return z

    # ---------------------------------------------------------------- potentials
    def potentials(self, z: np.ndarray) -> tuple[np.ndarray, dict[tuple[int, int], np.ndarray]]:
        """Y^0(bb)/r for every orbital, and Y^k(aa)/r (k > 0) for open subshells."""
        g = self.grid
        rho = self.densities(z)
        y0 = np.array([g.yk_over_r(rho[i], 0) for i in range(len(self.shells))])
        yk: dict[tuple[int, int], np.ndarray] = {}
        for i, s in enumerate(self.shells):
            if not s.closed and s.w >= 2:
                for k in range(2, 2 * s.l + 1, 2):
                    yk[(i, k)] = g.yk_over_r(rho[i], k)
        return y0, yk

    def fock_matrices(self, z: np.ndarray) -> dict[int, np.ndarray]:
        """Standard-form Fock matrix A_a for every orbital (closed ones of an l share one)."""
        g = self.grid
        y = self.y_of(z)
        y0, yk = self.potentials(z)
        direct = -self.Z / g.r + self.w @ y0
        # exchange "density matrices" per l_b: sum_b (w_b/2) y_b y_b^T
        dens = {}
        for lb in self.ls:
            idx = self.by_l[lb]
            dens[lb] = (y[idx].T * (0.5 * self.w[idx])) @ y[idx]
        out: dict[int, np.ndarray] = {}
        for l in self.ls:
            kin = g.kinetic(l)
            closed = [i for i in self.by_l[l] if self.shells[i].closed]
            if closed:
                a = kin.copy()
                a[np.diag_indices(g.n)] += direct
                for lb in self.ls:
                    a -= dens[lb] * g.exchange_kernel(l, lb)
                for i in closed:
                    out[i] = a
            for i in self.by_l[l]:
                s = self.shells[i]
                if s.closed:
                    continue
                v = direct - s.w * y0[i]  # the subshell's own electrons are added below:
                if s.w >= 2:  # each sees only the other w-1, with the average exchange
                    f = (2 * s.l + 1) / (4 * s.l + 1)
                    self_part = y0[i].copy()
                    for k in range(2, 2 * s.l + 1, 2):
                        self_part -= f * float(threej0_squared(s.l, k, s.l)) * yk[(i, k)]
                    v = v + (s.w - 1) * self_part
                a = kin.copy()
                a[np.diag_indices(g.n)] += v
                for lb in self.ls:
                    d = dens[lb]
                    if lb == l:
                        d = d - 0.5 * s.w * np.outer(y[i], y[i])
                    a -= d * g.exchange_kernel(l, lb)
                out[i] = a
        return out

    # ------------------------------------------------------------------- energy
    def energy(self, z: np.ndarray) -> tuple[float, float]:
        """(total, kinetic) average energy in hartree for orbitals z."""
        g = self.grid
        h = g.h
        kinetic = 0.0
        nuclear = 0.0
        for i, s in enumerate(self.shells):
            kz = g.kinetic(s.l) @ z[i]
            kinetic += s.w * 0.5 * h * float(z[i] @ kz)
            nuclear -= s.w * 0.5 * h * self.Z * float(np.sum(z[i] ** 2 / g.r))
        # two-electron part, batched by k: one stacked Y^k evaluation per k and kind
        two = 0.0
        for k, (fa, fb, fc, ga, gb, gc) in self._terms_by_k.items():
            if len(fa):
                rho_a = z[fa] ** 2 / (2.0 * g.r)
                rho_b = z[fb] ** 2 / (2.0 * g.r)
                pot = g.yk_over_r(rho_b, k)
                two += h * float(np.sum(fc * np.sum(rho_a * g.r * pot, axis=1)))
            if len(ga):
                pab = z[ga] * z[gb] / (2.0 * g.r)
                pot = g.yk_over_r(pab, k)
                two += h * float(np.sum(gc * np.sum(pab * g.r * pot, axis=1)))
        return kinetic + nuclear + two, kinetic

    # -------------------------------------------------------------------- step
    def step(
        self,
        z: np.ndarray,
        previous: dict[int, np.ndarray] | None = None,
        beta: float = 1.0,
    ) -> tuple[np.ndarray, dict[int, np.ndarray]]:
        """One fixed-point map: new orbitals from the Fock operators of ``z``.

        With ``previous`` the operators are mixed, beta * F(z) + (1 - beta) * previous:
        damping the potential (rather than the orbitals) keeps an eigenvector from
        jumping between a compact and a diffuse solution, the classic 3d/4f instability.
        """
        fock = self.fock_matrices(z)
        if previous is not None:
            mixed: dict[int, np.ndarray] = {}
            done: dict[int, np.ndarray] = {}
            for i, a in fock.items():
                key = id(a)
                if key not in done:
                    done[key] = beta * a + (1.0 - beta) * previous[i]
                mixed[i] = done[key]
            fock = mixed
        new = np.empty_like(z)
        for l in self.ls:
            members = self.by_l[l]
            closed = [i for i in members if self.shells[i].closed]
            opened = [i for i in members if not self.shells[i].closed]
            if closed:
                idx = [
                    self.shells[i].n - l - 1
                    - sum(1 for j in opened if self.shells[j].n < self.shells[i].n)
                    for i in closed
                ]
                _, vec = deflated_eigh(
                    fock[closed[0]], [z[j] for j in opened], max(idx), operator_shift(self.Z, l)
                )
                for i, k in zip(closed, idx, strict=True):
                    new[i] = self._fix(vec[:, k], z[i])
            for i in opened:
                others = [j for j in members if j != i]
                k = self.shells[i].n - l - 1 - sum(
                    1 for j in others if self.shells[j].n < self.shells[i].n
                )
                _, vec = deflated_eigh(
                    fock[i], [z[j] for j in others], k, operator_shift(self.Z, l)
                )
                new[i] = self._fix(vec[:, k], z[i])
        new = self.orthonormalise(new)
        if self.rotation_pairs:
            new = self.rotate(new, fock)
        return new, fock

    def rotate(self, z: np.ndarray, fock: dict[int, np.ndarray]) -> np.ndarray:
        """Newton step on each non-invariant same-l rotation: drive the gradient
        dE/dtheta = 2 (w_a eps_ba - w_b eps_ab) to zero (eps_ba = <b|F_a|a>)."""
        h = self.grid.h
        delta = 1e-2
        for i, j in self.rotation_pairs:
            grad = h * (
                self.w[i] * float(z[j] @ fock[i] @ z[i]) - self.w[j] * float(z[i] @ fock[j] @ z[j])
            )
            e0, _ = self.energy(z)
            ep, _ = self.energy(self._rotated(z, i, j, delta))
            em, _ = self.energy(self._rotated(z, i, j, -delta))
            curv = (ep + em - 2.0 * e0) / delta**2
            if not np.isfinite(curv) or curv <= 1e-8:
                theta = -np.sign(grad) * min(abs(grad), 0.02)
            else:
                theta = -grad / curv
            theta = float(np.clip(theta, -0.1, 0.1))
            z = self._rotated(z, i, j, theta)
        return z

    @staticmethod
    def _rotated(z: np.ndarray, i: int, j: int, theta: float) -> np.ndarray:
        out = z.copy()
        c, s = np.cos(theta), np.sin(theta)
        out[i] = c * z[i] + s * z[j]
        out[j] = -s * z[i] + c * z[j]
        return out

    # -------------------------------------------------------------------- SCF
    def _iterate(
        self, z0: np.ndarray | None, beta: float, settle: int
    ) -> tuple[np.ndarray, int, float]:
        """One SCF attempt: damped potential mixing, then DIIS on the orbital map."""
        z = self.start() if z0 is None else self.orthonormalise(z0)
        history_f: list[np.ndarray] = []
        history_r: list[np.ndarray] = []
        residual = np.inf
        best = np.inf
        fock_damped: dict[int, np.ndarray] | None = None
        damping = True
        for it in range(1, self.max_iterations + 1):
            if damping:
                new, fock_damped = self.step(z, fock_damped, beta)
            else:
                new, _ = self.step(z)
            if not np.all(np.isfinite(new)):
                raise self._failure(it, "the orbitals became non-finite")
            diff = new - z
            residual = float(np.max(np.linalg.norm(diff, axis=1)) / self.norm)
            if damping:
                z = new
                if residual < 1e-2 or it > settle:
                    damping = False
                continue
            if residual < self.tolerance:
                return new, it, residual
            if residual > 1e3 * best and it > 20:
                history_f, history_r = [], []  # DIIS went astray: restart its history
            best = min(best, residual)
            history_f.append(new)
            history_r.append(diff.ravel())
            if len(history_r) > 8:
                history_f.pop(0)
                history_r.pop(0)
            if len(history_r) < 2:
                z = self.orthonormalise(z + 0.6 * diff)
                continue
            z = self.orthonormalise(self._diis(history_f, history_r))
        raise self._failure(self.max_iterations, f"the residual is still {residual:.2e}")

    def run(self, z0: np.ndarray | None = None) -> SCFOutcome:
        """Iterate to self-consistency; raise FinefitError if it fails.

        First attempt: potential mixing (40 % new) until the orbitals settle, then DIIS.
        If that does not converge, one more attempt from the start with heavier damping
        (15 % new, for longer) before giving up.
        """
        failure: FinefitError | None = None
        for beta, settle in ((0.4, 60), (0.15, 150)):
            try:
                z, it, residual = self._iterate(z0, beta, settle)
                break
            except FinefitError as err:
                failure = err
        else:
            assert failure is not None
            raise failure
        fock = self.fock_matrices(z)
        h = self.grid.h
        eps = np.array([0.5 * h * float(z[i] @ fock[i] @ z[i]) for i in range(len(self.shells))])
        total, kinetic = self.energy(z)
        if not np.isfinite(total):
            raise self._failure(it, "the energy is not finite")
        return SCFOutcome(z, eps, total, kinetic, it, residual)

    @staticmethod
    def _diis(fs: list[np.ndarray], rs: list[np.ndarray]) -> np.ndarray:
        """Pulay extrapolation: combination of the mapped vectors minimising the residual."""
        m = len(rs)
        b = np.empty((m + 1, m + 1))
        rr = np.array(rs)
        b[:m, :m] = rr @ rr.T
        scale = np.max(np.abs(np.diag(b[:m, :m])))
        b[:m, :m] /= scale
        b[m, :m] = b[:m, m] = -1.0
        b[m, m] = 0.0
        rhs = np.zeros(m + 1)
        rhs[m] = -1.0
        try:
            c = np.linalg.lstsq(b, rhs, rcond=None)[0][:m]
        except np.linalg.LinAlgError:
            return fs[-1]
        return np.tensordot(c, np.array(fs), axes=1)

    def _failure(self, iterations: int, why: str) -> FinefitError:
        return FinefitError(
            f"Hartree-Fock for {self.config.label!r} (Z={self.Z}) did not converge after "
            f"{iterations} iterations: {why}",
            self.config.label,
        )
