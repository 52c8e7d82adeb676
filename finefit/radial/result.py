"""Converged orbitals of one configuration and the radial integrals derived from them.

Units: energies in hartree unless a method says cm^-1 (Slater integrals, zeta and the
parameter dictionary are in cm^-1, converted with scipy.constants); lengths in bohr.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from typing import Any

import numpy as np

from finefit.errors import FinefitError
from finefit.radial._angular import exchange_ks
from finefit.radial._config import FullConfiguration, Shell, complete_configuration
from finefit.radial.grid import RadialGrid
from finefit.radial.relativistic import darwin, mass_velocity
from finefit.radial.units import ALPHA, HARTREE_CM

_RK_NAME = re.compile(
    r"^R(\d+)\((\d+[spdfghi])(\d+[spdfghi]),(\d+[spdfghi])(\d+[spdfghi])\)$"
)

_UNITS = {"cm-1": HARTREE_CM, "cm^-1": HARTREE_CM, "hartree": 1.0}


def _unit_factor(unit: str) -> float:
    try:
        return _UNITS[unit]
    except KeyError:
        raise FinefitError(
            f"unknown unit {unit!r}: use 'cm-1' or 'hartree'", str(unit)
        ) from None


class HartreeFockResult:
    """Configuration-average Hartree-Fock solution (or bare-Coulomb orbitals, see
    :func:`finefit.radial.hydrogenic`).

    Attributes (hartree): ``total_energy`` (includes the first-order relativistic
    shift when the run asked for it), ``nonrelativistic_energy``, ``kinetic_energy``,
    ``potential_energy``, ``virial_ratio`` (-V/T, 2 for an exact HF solution),
    ``relativistic_shift``; and ``Z``, ``charge``, ``configuration`` (all subshells,
    core included), ``written`` (as the user wrote it, normalised), ``orbitals``
    (names), ``iterations``, ``grid``.
    """

    def __init__(
        self,
        *,
        config: FullConfiguration,
        Z: int,
        charge: int,
        grid: RadialGrid,
        z: np.ndarray,
        eps: np.ndarray,
        total: float,
        kinetic: float,
        iterations: int,
        relativistic: bool,
        screened: bool = True,
        solve_other: Callable[[FullConfiguration], HartreeFockResult] | None = None,
    ) -> None:
        self._config = config
        self.Z = Z
        self.charge = charge
        self.grid = grid
        self._z = np.array(z, dtype=float)
        self._z.setflags(write=False)
        self._shells: tuple[Shell, ...] = config.shells
        self._index = {s.name: i for i, s in enumerate(self._shells)}
        self._screened = screened
        self._solve_other = solve_other
        self._others: dict[tuple[object, str], HartreeFockResult] = {}
        self.iterations = iterations
        self.relativistic = relativistic
        self.nonrelativistic_energy = float(total)
        self.kinetic_energy = float(kinetic)
        self.potential_energy = float(total - kinetic)
        self.virial_ratio = -self.potential_energy / self.kinetic_energy
        self._eps = np.array(eps, dtype=float)
        self._rel = np.zeros(len(self._shells))
        if relativistic:
            self._rel = np.array(
                [
                    mass_velocity(grid, s.l, self._z[i]) + darwin(grid, s.l, self._z[i], Z)
                    for i, s in enumerate(self._shells)
                ]
            )
        w = np.array([s.w for s in self._shells], dtype=float)
        self.relativistic_shift = float(w @ self._rel)
        self.total_energy = self.nonrelativistic_energy + self.relativistic_shift

    # ----------------------------------------------------------------- identity
    @property
    def configuration(self) -> str:
        """All subshells including the implicit core, e.g. ``1s2 2s2 2p6 3s2 3p6 3d6 4s2``."""
        return str(self._config)

    @property
    def written(self) -> str:
        """The configuration as written by the user (normal form, e.g. ``3d6 4s2``)."""
        return self._config.label

    @property
    def orbitals(self) -> tuple[str, ...]:
        """Orbital names, sorted by n then l."""
        return tuple(s.name for s in self._shells)

    def occupation(self, orbital: str) -> int:
        """Number of electrons in ``orbital``."""
        return self._shells[self._i(orbital)].w

    def __repr__(self) -> str:
        return (
            f"HartreeFockResult({self.written!r}, Z={self.Z}, charge={self.charge}, "
            f"E={self.total_energy:.8f} hartree)"
        )

    # ---------------------------------------------------------------- orbitals
    def _i(self, orbital: str) -> int:
        key = orbital.strip() if isinstance(orbital, str) else orbital
        if key not in self._index:
            raise FinefitError(
                f"orbital {orbital!r} is not in configuration {self.configuration!r}",
                str(orbital),
            )
        return self._index[key]

    def _y(self, i: int) -> np.ndarray:
        return self._z[i] / (np.sqrt(2.0) * self.grid.r)

    def radial_function(self, orbital: str) -> tuple[np.ndarray, np.ndarray]:
        """(r, P(r)) on the grid, P normalised to int P^2 dr = 1 and positive near r = 0."""
        i = self._i(orbital)
        r = self.grid.r.copy()
        return r, np.sqrt(r) * self._y(i)

    def _p_on(self, i: int, grid: RadialGrid) -> np.ndarray:
        """P of orbital i on (a same-family, possibly longer) grid."""
        return grid.pad(np.sqrt(self.grid.r) * self._y(i))

    def orbital_energy(self, orbital: str) -> float:
        """Diagonal Lagrange multiplier eps_a = <a|F_a|a> in hartree (Koopmans-type
        orbital energy); with ``relativistic=True`` the orbital's first-order
        mass-velocity + Darwin shift is added."""
        i = self._i(orbital)
        return float(self._eps[i] + self._rel[i])

    def orbital_relativistic_shift(self, orbital: str) -> float:
        """First-order mass-velocity + Darwin energy of one electron in ``orbital`` (hartree);
        0 unless the run was relativistic."""
        return float(self._rel[self._i(orbital)])

    def expectation(self, orbital: str, power: float) -> float:
        """<r^power> = int P^2 r^power dr in bohr^power."""
        i = self._i(orbital)
        return self.grid.integrate(self.grid.r ** (power + 1.0) * self._y(i) ** 2)

    def expectation_r(self, orbital: str) -> float:
        """<r> in bohr."""
        return self.expectation(orbital, 1.0)

    def expectation_r2(self, orbital: str) -> float:
        """<r^2> in bohr^2."""
        return self.expectation(orbital, 2.0)

    def overlap(self, a: str, b: str) -> float:
        """int P_a P_b dr (1 for a = b; 0 for different orbitals of one l)."""
        i, j = self._i(a), self._i(b)
        return self.grid.integrate(self.grid.r * self._y(i) * self._y(j))

    def dipole_integral(self, a: str, b: str) -> float:
        """Radial dipole integral <a|r|b> = int P_a r P_b dr in bohr (for line strengths,
        S = (angular factor) * |<a|r|b>|^2 e^2 a0^2)."""
        i, j = self._i(a), self._i(b)
        return self.grid.integrate(self.grid.r**2 * self._y(i) * self._y(j))

    # ----------------------------------------------------------- Slater integrals
    def slater_integral(
        self, k: int, a: str, b: str, c: str, d: str, unit: str = "cm-1"
    ) -> float:
        """R^k(ab,cd) = int int P_a(1) P_b(2) r<^k/r>^(k+1) P_c(1) P_d(2) dr1 dr2.

        F^k(a,b) = R^k(ab,ab), G^k(a,b) = R^k(ab,ba).  Unit ``"cm-1"`` (default) or
        ``"hartree"``.  Evaluated with the O(N) Y^k construction (two cumulative sums).
        """
        return self.configuration_interaction_integral(k, a, b, c, d, None, unit)

    def F(self, k: int, a: str, b: str | None = None, unit: str = "cm-1") -> float:
        """Direct Slater integral F^k(a,b) (F^k(a,a) when b is omitted)."""
        b = a if b is None else b
        return self.slater_integral(k, a, b, a, b, unit)

    def G(self, k: int, a: str, b: str, unit: str = "cm-1") -> float:
        """Exchange Slater integral G^k(a,b) = R^k(ab,ba)."""
        return self.slater_integral(k, a, b, b, a, unit)

    def configuration_interaction_integral(
        self,
        k: int,
        a: str,
        b: str,
        c: str,
        d: str,
        other: HartreeFockResult | None = None,
        unit: str = "cm-1",
    ) -> float:
        """R^k(ab,cd) with P_a, P_b from this result and P_c, P_d from ``other``.

        This is the usual first approximation for configuration interaction between
        separately optimised configurations: each orbital is taken from the run of the
        configuration it belongs to (electron 1 goes a -> c, electron 2 goes b -> d).
        ``other=None`` uses this result for all four orbitals.
        """
        if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 0:
            raise FinefitError(f"multipole order k={k!r} must be a non-negative integer", "k")
        other = self if other is None else other
        if other.Z != self.Z or not self.grid.same_family(other.grid):
            raise FinefitError(
                "configuration-interaction integrals need two runs of the same element "
                "on the same grid family (same Z and grid step)",
                "other",
            )
        grid = self.grid if self.grid.n >= other.grid.n else other.grid
        pa = self._p_on(self._i(a), grid)
        pb = self._p_on(self._i(b), grid)
        pc = other._p_on(other._i(c), grid)
        pd = other._p_on(other._i(d), grid)
        value = grid.rk(pa * pc, pb * pd, int(k))
        return value * _unit_factor(unit)

    def interaction_parameter(self, name: str, other: HartreeFockResult | None = None) -> float:
        """Value in cm^-1 of a named interaction integral such as ``"R2(3d3d,3d4s)"``
        (CONVENTIONS: a, b from this result's configuration, c, d from ``other``'s);
        a qualified name ``"<A> | <B>: R2(...)"`` is accepted, the prefix is ignored."""
        text = name.split(":")[-1].strip()
        m = _RK_NAME.match(text)
        if not m:
            raise FinefitError(
                f"cannot read interaction parameter {name!r}: expected e.g. 'R2(3d3d,3d4s)'",
                name,
            )
        k = int(m.group(1))
        a, b, c, d = m.group(2), m.group(3), m.group(4), m.group(5)
        return self.configuration_interaction_integral(k, a, b, c, d, other)

    # -------------------------------------------------------------- spin-orbit
    def screening_charge(self, orbital: str) -> np.ndarray:
        """Z_eff(r) = Z - sum_b w'_b int_0^r P_b^2 seen by an electron of ``orbital``:
        the charge inside r of nucleus and the other N-1 electrons (w'_b = w_b, and
        w_a - 1 for the orbital's own subshell)."""
        i = self._i(orbital)
        zeff = np.full(self.grid.n, float(self.Z))
        if not self._screened:
            return zeff
        for j, s in enumerate(self._shells):
            w = s.w - (1 if j == i else 0)
            if w:
                zeff -= w * self.grid.cumulative(self._z[j] ** 2 / (2.0 * self.grid.r))
        return zeff

    def zeta(self, orbital: str, unit: str = "cm-1", method: str = "blume-watson") -> float:
        """Spin-orbit parameter zeta_nl of ``orbital``.

        ``method="blume-watson"`` (default): the Breit-Pauli spin-orbit interaction with the
        nucleus and the other electrons, direct and exchange (spin-same-orbit and
        spin-other-orbit), as one l.s operator (Blume & Watson 1962, Proc. R. Soc. A 270,
        127; 1963, A 271, 565); see :mod:`finefit.radial.spin_orbit`.

        ``method="central-field"``: zeta_nl = (alpha^2/2) int P_nl^2 (1/r) dV/dr dr with V the
        nuclear plus spherical direct potential of the other N-1 electrons, so
        (1/r) dV/dr = Z_eff(r)/r^3 (:meth:`screening_charge`; Condon & Shortley 1935). It
        runs 10-15 % above Blume-Watson for 3d and 2p electrons.

        Hydrogen-like limit of both: alpha^2 Z^4 / (2 n^3 l (l+1/2)(l+1)) hartree.
        Raises for s orbitals (no spin-orbit parameter).
        """
        i = self._i(orbital)
        if self._shells[i].l == 0:
            raise FinefitError(f"an s orbital ({orbital}) has no spin-orbit parameter", orbital)
        if method == "blume-watson":
            from finefit.radial.spin_orbit import blume_watson_zeta

            return blume_watson_zeta(self, orbital, unit, screened=self._screened)
        if method != "central-field":
            raise FinefitError(
                f"unknown spin-orbit method {method!r}: use 'blume-watson' or 'central-field'",
                str(method),
            )
        g = self.grid
        y2 = self._y(i) ** 2
        # int P^2 Z_eff / r^3 dr = int y^2 Z_eff / r dx  (P^2 = r y^2, dr = r dx)
        value = 0.5 * ALPHA**2 * g.h * float(np.sum(y2 * self.screening_charge(orbital) / g.r))
        return value * _unit_factor(unit)

    def radial_functions(self) -> list[tuple[str, int, int, np.ndarray]]:
        """(name, l, occupation, P on the grid) of every subshell, core included."""
        r = self.grid.r
        return [
            (s.name, s.l, s.w, np.sqrt(r) * self._y(i)) for i, s in enumerate(self._shells)
        ]

    # --------------------------------------------------------------- energies
    @property
    def total_energy_cm(self) -> float:
        """Total (configuration-average) energy in cm^-1."""
        return self.total_energy * HARTREE_CM

    def energy_difference(self, other: HartreeFockResult) -> float:
        """E_av(self) - E_av(other) in cm^-1 (two separate runs)."""
        return (self.total_energy - other.total_energy) * HARTREE_CM

    # ------------------------------------------------------------- parameters
    def result_for(self, configuration: str) -> HartreeFockResult:
        """This result if ``configuration`` is (up to the implicit core) the one solved;
        otherwise the solution of ``configuration`` for the same Z and electron count,
        with the same options (computed once and kept)."""
        electrons = self._config.n_electrons
        full = complete_configuration(configuration, self.Z, self.Z - electrons)
        same = full.key() == self._config.key()
        if same and full.label == self._config.label:
            return self
        key = (full.key(), full.label)
        found = self._others.get(key)
        if found is None:
            if same:
                found = self._relabelled(full)
            elif self._solve_other is None:
                raise FinefitError(
                    f"this result cannot solve another configuration ({configuration!r})",
                    str(configuration),
                )
            else:
                found = self._solve_other(full)
            self._others[key] = found
        return found

    def _relabelled(self, full: FullConfiguration) -> HartreeFockResult:
        twin = object.__new__(HartreeFockResult)
        twin.__dict__.update(self.__dict__)
        twin._config = full
        twin._others = {}
        return twin

    def parameters(self, configuration: str | None = None) -> dict[str, float]:
        """Ab initio radial parameters of ``configuration`` in cm^-1, qualified names.

        ``"<conf>: Eav"`` is the absolute configuration-average total energy
        (hartree * hc, in cm^-1; relativistic shift included when asked for), so
        differences between configurations are meaningful and a session shifts the
        zero.  Then, with subshells in the order written: ``F2(3d)`` ... within an open
        subshell with >= 2 electrons and >= 2 holes; ``F2(3d,4p)`` ... (k even,
        2..2min(l,l')) and ``G1(3d,4p)`` ... (k = |l-l'|..l+l' step 2) between two open
        subshells; ``zeta(nl)`` for every open subshell with l > 0.  Nothing for closed
        subshells.  Scaling factors (as commonly applied before a fit) are not applied.
        """
        res = self if configuration is None else self.result_for(configuration)
        return res._own_parameters()

    def _own_parameters(self) -> dict[str, float]:
        label = self._config.label
        out: dict[str, float] = {f"{label}: Eav": self.total_energy_cm}
        opened = [s for s in self._config.written.subshells if s.is_open]
        for s in opened:
            holes = 4 * s.l + 2 - s.occupancy
            if s.occupancy >= 2 and holes >= 2:
                for k in range(2, 2 * s.l + 1, 2):
                    out[f"{label}: F{k}({s.name})"] = self.F(k, s.name)
        for i, a in enumerate(opened):
            for b in opened[i + 1 :]:
                for k in range(2, 2 * min(a.l, b.l) + 1, 2):
                    out[f"{label}: F{k}({a.name},{b.name})"] = self.F(k, a.name, b.name)
                for k in exchange_ks(a.l, b.l):
                    out[f"{label}: G{k}({a.name},{b.name})"] = self.G(k, a.name, b.name)
        for s in opened:
            if s.l > 0:
                out[f"{label}: zeta({s.name})"] = self.zeta(s.name)
        return out

    def summary(self) -> dict[str, Any]:
        """Plain-data summary (orbital energies, <r>, <r^2>, energies) for reports."""
        return {
            "configuration": self.configuration,
            "Z": self.Z,
            "charge": self.charge,
            "total_energy": self.total_energy,
            "kinetic_energy": self.kinetic_energy,
            "potential_energy": self.potential_energy,
            "virial_ratio": self.virial_ratio,
            "relativistic_shift": self.relativistic_shift,
            "orbitals": {
                name: {
                    "occupation": self.occupation(name),
                    "energy": self.orbital_energy(name),
                    "r": self.expectation_r(name),
                    "r2": self.expectation_r2(name),
                }
                for name in self.orbitals
            },
        }
