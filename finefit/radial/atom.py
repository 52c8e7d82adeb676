"""Entry points: ``hartree_fock`` (configuration-average HF) and ``hydrogenic`` orbitals."""

from __future__ import annotations

import numpy as np
from scipy import linalg

from finefit.errors import FinefitError
from finefit.notation.configuration import Configuration, parse_configuration
from finefit.radial._config import FullConfiguration, Shell, check_z, complete_configuration
from finefit.radial.grid import DEFAULT_STEP, DEFAULT_X_MIN, RadialGrid, make_grid
from finefit.radial.result import HartreeFockResult
from finefit.radial.solver import HartreeFockSolver, deflated_eigh, operator_shift
from finefit.radial.units import HARTREE_CM
from finefit.threads import engine_threads


def _r_max(shells: tuple[Shell, ...], net_charge: int) -> float:
    """Outer end of the grid: beyond a hydrogenic estimate of the outermost orbital,
    <r> = 1.5 n^2/zeta, plus 25 decay lengths n/zeta (zeta = net charge + 1)."""
    zeta = max(net_charge + 1.0, 0.5)
    n = max(s.n for s in shells)
    return max(40.0, (1.5 * n * n + 25.0 * n) / zeta)


def _check_options(grid_step: float, tolerance: float, max_iterations: int) -> None:
    if not (isinstance(grid_step, (int, float)) and 0.005 <= grid_step <= 0.2):
        raise FinefitError(f"grid_step={grid_step!r} must be between 0.005 and 0.2", "grid_step")
    if not (isinstance(tolerance, (int, float)) and 1e-13 <= tolerance <= 1e-2):
        raise FinefitError(f"tolerance={tolerance!r} must be between 1e-13 and 1e-2", "tolerance")
    bad_count = isinstance(max_iterations, bool) or not isinstance(max_iterations, int)
    if bad_count or max_iterations < 1:
        raise FinefitError(
            f"max_iterations={max_iterations!r} must be a positive integer", "max_iterations"
        )


def hartree_fock(
    configuration: str | Configuration,
    Z: int,
    charge: int = 0,
    *,
    relativistic: bool = False,
    grid_step: float = DEFAULT_STEP,
    r_max: float | None = None,
    tolerance: float = 1e-8,
    max_iterations: int = 200,
) -> HartreeFockResult:
    """Numerical Hartree-Fock orbitals for the average energy of ``configuration``.

    ``configuration`` is written the trade's way (``"3d6 4s2"``, ``"2p5.3p"``); closed
    subshells not written are added in aufbau order 1s 2s 2p 3s 3p 4s 3d 4p 5s 4d 5p 6s
    4f 5d 6p 7s ... until the ion has Z - charge electrons.  Non-relativistic
    Hamiltonian, full non-local exchange, average-of-configuration energy expression
    (see :mod:`finefit.radial.solver` for the method and sources).

    ``relativistic=True`` adds the first-order mass-velocity and Darwin energies of the
    converged orbitals (:mod:`finefit.radial.relativistic`) to the total and orbital
    energies; the orbitals themselves stay non-relativistic.

    ``grid_step`` is the step h of x = ln(Z r) (error O(h^4): ~1e-7 relative on total
    energies at the default 0.05); ``r_max`` (bohr) overrides the automatic outer end.
    ``tolerance`` bounds the change of every orbital (L2 norm) in the last iteration.

    Raises :class:`finefit.errors.FinefitError` for bad input (the offending token is
    ``err.item``) and when the iteration does not converge.

    While it runs, OpenBLAS is capped at one thread (restored afterwards): the matrices
    are small and threaded BLAS is much slower on a busy machine (see ``finefit.threads``).
    """
    Z, charge = check_z(Z, charge)
    _check_options(grid_step, tolerance, max_iterations)
    if r_max is not None and not (isinstance(r_max, (int, float)) and r_max > 1.0):
        raise FinefitError(f"r_max={r_max!r} must be a number of bohr larger than 1", "r_max")
    full = complete_configuration(configuration, Z, charge)
    with engine_threads():
        return _solve(full, Z, charge, bool(relativistic), float(grid_step), r_max,
                      float(tolerance), int(max_iterations))  # fmt: skip


def _solve(
    full: FullConfiguration,
    Z: int,
    charge: int,
    relativistic: bool,
    grid_step: float,
    r_max: float | None,
    tolerance: float,
    max_iterations: int,
) -> HartreeFockResult:
    extent = _r_max(full.shells, charge) if r_max is None else float(r_max)
    grid = make_grid(Z, extent, h=grid_step, x_min=DEFAULT_X_MIN)
    solver = HartreeFockSolver(full, Z, grid, tolerance=tolerance, max_iterations=max_iterations)
    try:
        out = solver.run()
    except (np.linalg.LinAlgError, linalg.LinAlgError, FloatingPointError) as err:
        raise FinefitError(
            f"Hartree-Fock for {full.label!r} (Z={Z}) failed numerically: {err}", full.label
        ) from err

    def solve_other(other: FullConfiguration) -> HartreeFockResult:
        with engine_threads():
            return _solve(other, Z, Z - other.n_electrons, relativistic, grid_step, r_max,
                          tolerance, max_iterations)  # fmt: skip

    return HartreeFockResult(
        config=full,
        Z=Z,
        charge=charge,
        grid=grid,
        z=out.z,
        eps=out.eps,
        total=out.total,
        kinetic=out.kinetic,
        iterations=out.iterations,
        relativistic=relativistic,
        solve_other=solve_other,
    )


def hydrogenic(
    configuration: str | Configuration,
    Z: int,
    *,
    grid_step: float = DEFAULT_STEP,
    r_max: float | None = None,
) -> HartreeFockResult:
    """Bare-Coulomb (hydrogen-like) orbitals of nuclear charge Z for every subshell written,
    as a result object: no electron-electron interaction, no implicit core; zeta uses the
    unscreened nuclear field.  ``total_energy`` is sum_a w_a eps_a = -sum_a w_a Z^2/(2 n^2).
    Useful for checks and as a scaling reference (F^k ~ Z, zeta ~ Z^4)."""
    Z, _ = check_z(Z, 0)
    _check_options(grid_step, 1e-8, 1)
    written = parse_configuration(configuration)
    shells = tuple(
        sorted((Shell(s.n, s.l, s.occupancy) for s in written.subshells), key=lambda s: (s.n, s.l))
    )
    full = FullConfiguration(written, shells)
    extent = _r_max(shells, Z - 1) if r_max is None else float(r_max)
    with engine_threads():
        return _hydrogenic(full, Z, make_grid(Z, extent, h=grid_step, x_min=DEFAULT_X_MIN))


def _hydrogenic(full: FullConfiguration, Z: int, grid: RadialGrid) -> HartreeFockResult:
    shells = full.shells
    z = np.zeros((len(shells), grid.n))
    eps = np.zeros(len(shells))
    kinetic = 0.0
    for l in sorted({s.l for s in shells}):
        top = max(s.n for s in shells if s.l == l) - l - 1
        a = grid.kinetic(l) + np.diag(-Z / grid.r)
        _, vec = deflated_eigh(a, [], top, operator_shift(Z, l))
        for i, s in enumerate(shells):
            if s.l != l:
                continue
            v = vec[:, s.n - l - 1]
            v = v * (np.sqrt(2.0 / grid.h) / np.linalg.norm(v))
            if v[np.argmax(np.abs(v) > 1e-3 * np.max(np.abs(v)))] < 0:
                v = -v
            z[i] = v
            eps[i] = 0.5 * grid.h * float(v @ a @ v)
            kinetic += s.w * 0.5 * grid.h * float(v @ grid.kinetic(l) @ v)
    total = float(np.dot([s.w for s in shells], eps))
    return HartreeFockResult(
        config=full, Z=Z, charge=Z - full.n_electrons, grid=grid, z=z, eps=eps, total=total,
        kinetic=kinetic, iterations=0, relativistic=False, screened=False,
    )  # fmt: skip


def configuration_interaction_integral(
    k: int,
    a: str,
    b: str,
    c: str,
    d: str,
    first: HartreeFockResult,
    second: HartreeFockResult | None = None,
    unit: str = "cm-1",
) -> float:
    """R^k(ab,cd) between two configurations: P_a, P_b from ``first`` (the run of the
    first configuration), P_c, P_d from ``second`` (default: ``first``), in cm^-1.

    Matches the CONVENTIONS name ``"<A> | <B>: R2(ab,cd)"``: electron 1 goes a -> c,
    electron 2 goes b -> d.
    """
    return first.configuration_interaction_integral(k, a, b, c, d, second, unit)


def average_energy_differences(
    configurations: list[str],
    Z: int,
    charge: int = 0,
    **options: object,
) -> dict[str, float]:
    """E_av of each configuration minus E_av of the first, in cm^-1 (separate HF runs,
    same Z and charge; ``options`` are passed to :func:`hartree_fock`)."""
    if not configurations:
        raise FinefitError("no configurations given", "configurations")
    results = [hartree_fock(c, Z, charge, **options) for c in configurations]  # type: ignore[arg-type]
    ref = results[0].total_energy
    return {r.written: (r.total_energy - ref) * HARTREE_CM for r in results}
