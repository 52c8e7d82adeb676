"""Level optimisation: level energies from classified lines by weighted least squares.

Every classified line measures a difference of two level energies,
sigma_obs = E_upper - E_lower, with its own standard uncertainty u. With one level of
each connected part of the level system held fixed (its reference), the energies E
minimise chi^2 = sum ((sigma_obs - E_up + E_lo) / u)^2; the normal matrix is the
weighted graph Laplacian of the level system without the reference's row and column,
and its inverse is the covariance of the energies (relative to the reference). The
Ritz wavenumber of any line is E_up - E_lo with variance a^T C a (a = e_up - e_lo);
residuals obs - Ritz are normalised by their own standard deviation
sqrt(u^2 - u_Ritz^2) (the line is part of the fit). The Ritz combination principle
(Ritz 1908) solved by weighted linear least squares (Bevington & Robinson, Data
Reduction and Error Analysis for the Physical Sciences, 3rd ed. 2003, ch. 7), the usual
way levels are derived from a line list. Pure computation: no file I/O.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import scipy.linalg
import scipy.sparse
import scipy.sparse.csgraph
import scipy.sparse.linalg

from finefit.errors import FinefitError
from finefit.lines.classify import KnownLevel
from finefit.threads import engine_threads

DENSE_LIMIT = 4000  # free levels up to which the full covariance is formed (128 MB)
OUTLIER = 3.0  # |obs - Ritz| beyond this many of its standard deviations is flagged


@dataclass(frozen=True, eq=False)
class LevelSystemSolution:
    """The least-squares solution of one level system (indices into the level list)."""

    energy: np.ndarray  # per level (NaN for levels without a used line)
    uncertainty: np.ndarray  # per level, relative to its part's reference (0 for it)
    part: np.ndarray  # per level: part number (0 = the reference's part), -1 no lines
    references: list[int]  # reference level of each part
    free: np.ndarray  # level index of each free unknown (covariance order)
    covariance: np.ndarray | None  # (n_free, n_free), None above the dense limit
    ritz: np.ndarray  # per equation: E_up - E_lo
    ritz_uncertainty: np.ndarray  # per equation, from the covariance
    n_used: np.ndarray  # per level: number of used equations it enters


def solve_level_system(
    n_levels: int,
    lower: np.ndarray,
    upper: np.ndarray,
    sigma: np.ndarray,
    uncertainty: np.ndarray,
    used: np.ndarray,
    prior: np.ndarray,
    reference: int | None = None,
    dense_limit: int = DENSE_LIMIT,
) -> LevelSystemSolution:
    """Weighted least squares for level energies from line equations.

    ``lower``/``upper`` index the levels, ``sigma`` (cm^-1) and ``uncertainty`` give each
    equation, ``used`` selects the equations that enter the fit (the others get Ritz
    values only). ``prior`` are the levels' energies before optimisation: each part's
    reference keeps its prior energy. The reference of the part holding ``reference``
    is that level; every other part takes its lowest level (by prior energy).
    """
    lower = np.asarray(lower, dtype=np.int64)
    upper = np.asarray(upper, dtype=np.int64)
    sigma = np.asarray(sigma, dtype=float)
    u = np.asarray(uncertainty, dtype=float)
    used = np.asarray(used, dtype=bool)
    prior = np.asarray(prior, dtype=float)
    if np.any(~(u[used] > 0)) or np.any(~np.isfinite(sigma)):
        raise FinefitError("every line needs a finite wavenumber and a positive uncertainty",
                           "uncertainty")
    if np.any(lower == upper):
        raise FinefitError("a line cannot connect a level with itself", "lower")
    lo_u, up_u = lower[used], upper[used]
    graph = scipy.sparse.coo_matrix(
        (np.ones(lo_u.size), (lo_u, up_u)), shape=(n_levels, n_levels)).tocsr()
    _, comp = scipy.sparse.csgraph.connected_components(graph, directed=False)
    has_line = np.zeros(n_levels, dtype=bool)
    has_line[lo_u] = True
    has_line[up_u] = True
    # parts: the reference's first, then the others by their lowest prior energy
    comps = np.unique(comp[has_line])
    lowest = {int(c): int(np.flatnonzero(has_line & (comp == c))[
        np.argmin(prior[has_line & (comp == c)])]) for c in comps}
    order = sorted(comps.tolist(), key=lambda c: prior[lowest[c]])
    if reference is not None and has_line[reference]:
        first = int(comp[reference])
        order.remove(first)
        order.insert(0, first)
        lowest[first] = int(reference)
    part = np.full(n_levels, -1, dtype=np.int64)
    refs = []
    for k, c in enumerate(order):
        part[has_line & (comp == c)] = k
        refs.append(lowest[c])
    is_ref = np.zeros(n_levels, dtype=bool)
    is_ref[refs] = True
    free = np.flatnonzero(has_line & ~is_ref)
    col = np.full(n_levels, -1, dtype=np.int64)
    col[free] = np.arange(free.size)
    n_free = free.size

    # design matrix of the used equations over the free levels, rows scaled by 1/u
    w = 1.0 / u[used]
    known = np.where(is_ref[up_u], prior[up_u], 0.0) - np.where(is_ref[lo_u], prior[lo_u], 0.0)
    y = (sigma[used] - known) * w
    rows = np.arange(lo_u.size)
    cu, cl = col[up_u], col[lo_u]
    r_idx = np.concatenate([rows[cu >= 0], rows[cl >= 0]])
    c_idx = np.concatenate([cu[cu >= 0], cl[cl >= 0]])
    vals = np.concatenate([w[cu >= 0], -w[cl >= 0]])
    A = scipy.sparse.csr_matrix((vals, (r_idx, c_idx)), shape=(lo_u.size, n_free))
    N = (A.T @ A).tocsc()
    b = A.T @ y

    energy = np.full(n_levels, np.nan)
    var = np.full(n_levels, np.nan)
    energy[refs] = prior[refs]
    var[refs] = 0.0
    cov = None
    # covariance of the equations' two levels: C[u,u] + C[l,l] - 2 C[u,l]
    cross = np.zeros(lower.size)
    lo_c, up_c = col[lower], col[upper]
    same = (part[lower] == part[upper]) & (part[lower] >= 0)
    if n_free:
        if n_free <= dense_limit:
            # dense Cholesky: the energies and the full inverse (LAPACK potrf, potri); one
            # BLAS thread, as threaded BLAS is much slower on a busy machine (radial)
            Nd = N.toarray()
            with engine_threads():
                try:
                    c_fac, low = scipy.linalg.cho_factor(Nd, lower=False, check_finite=False)
                except np.linalg.LinAlgError:
                    raise FinefitError("the level system is singular", "lines") from None
                x = scipy.linalg.cho_solve((c_fac, low), b, check_finite=False)
                inv, info = scipy.linalg.lapack.dpotri(c_fac, lower=0)
            if info != 0:
                raise FinefitError("the level system is singular", "lines")
            cov = np.triu(inv) + np.triu(inv, 1).T
            var[free] = np.diag(cov)
            both = same & (lo_c >= 0) & (up_c >= 0)
            cross[both] = cov[up_c[both], lo_c[both]]
        else:
            # sparse LU: the energies, then the covariance column block by column block
            # (never stored whole); only the variances and the equations' cross terms kept
            with engine_threads():
                lu = scipy.sparse.linalg.splu(N)
                x = lu.solve(b)
            both = np.flatnonzero(same & (lo_c >= 0) & (up_c >= 0))
            by_lower = both[np.argsort(lo_c[both])]
            lc_sorted = lo_c[by_lower]
            step = 256
            for start in range(0, n_free, step):
                stop = min(start + step, n_free)
                E = np.zeros((n_free, stop - start))
                E[np.arange(start, stop), np.arange(stop - start)] = 1.0
                with engine_threads():
                    X = lu.solve(E)
                var[free[start:stop]] = X[np.arange(start, stop), np.arange(stop - start)]
                i0, i1 = np.searchsorted(lc_sorted, [start, stop])
                k = by_lower[i0:i1]
                cross[k] = X[up_c[k], lo_c[k] - start]
        energy[free] = x
    var = np.maximum(var, 0.0)
    unc = np.sqrt(var)
    ritz = energy[upper] - energy[lower]
    ritz_var = var[upper] + var[lower] - 2.0 * np.where(same, cross, 0.0)
    n_used = np.bincount(lo_u, minlength=n_levels) + np.bincount(up_u, minlength=n_levels)
    return LevelSystemSolution(energy, unc, part, refs, free, cov, ritz,
                               np.sqrt(np.maximum(ritz_var, 0.0)), n_used)


@dataclass(frozen=True)
class RitzLine:
    """One classification of an observed line, with its Ritz values (cm^-1, angstrom)."""

    line: int  # index of the observed line in the list
    source_line: int  # line number in the file (or the index + 1)
    lower: str
    upper: str
    wavenumber: float  # observed, vacuum cm^-1
    uncertainty: float  # of the observed wavenumber
    ritz: float  # E_upper - E_lower of the optimised levels
    ritz_uncertainty: float
    residual: float  # obs - Ritz
    normalised: float | None  # residual / its own standard deviation (None: line fixes a level)
    vacuum_wavelength: float  # Ritz, angstrom
    vacuum_wavelength_uncertainty: float
    air_wavelength: float | None  # Ritz in standard air (None below 2000 A)
    air_wavelength_uncertainty: float | None
    used: bool  # entered the least squares
    flags: tuple[str, ...] = ()  # "outlier", "blend", "excluded", "defines level"
    intensity: float | None = None

    # the tuple-like reading of CONVENTIONS.md: obs, Ritz, its uncertainty, obs - Ritz
    def __iter__(self):
        return iter((self.wavenumber, self.ritz, self.ritz_uncertainty, self.residual))


@dataclass(frozen=True)
class OptimisedLevel:
    id: str
    J: float
    parity: str
    energy: float
    uncertainty: float  # relative to the part's reference
    previous: float  # energy before optimisation
    previous_uncertainty: float | None
    n_lines: int  # lines used in the fit
    part: int  # 0: the reference's part
    reference: str  # the part's reference level
    flags: tuple[str, ...] = ()  # "reference", "single line", "disconnected", "outlier line"


@dataclass(frozen=True, eq=False)
class LevelOptimisation:
    """Result of a level optimisation (see CONVENTIONS.md, "Level optimisation").

    ``levels[id]`` is (energy, uncertainty) in cm^-1 relative to the reference level;
    ``lines`` has one entry per classification; ``covariance`` is over ``covariance_ids``.
    """

    levels: dict[str, tuple[float, float]]
    details: dict[str, OptimisedLevel]
    lines: list[RitzLine]
    unclassified: np.ndarray  # indices of observed lines without a classification
    reference: str
    parts: list[tuple[str, list[str]]]  # (reference id, level ids) per connected part
    unconnected: list[str]  # levels without any used line (left as they were)
    covariance: np.ndarray | None
    covariance_ids: list[str]
    chi2: float
    dof: int
    blends: str
    source: str = ""
    warnings: list[str] = field(default_factory=list)

    @property
    def reduced_chi2(self) -> float | None:
        return self.chi2 / self.dof if self.dof > 0 else None

    @property
    def n_used(self) -> int:
        return sum(1 for x in self.lines if x.used)

    @cached_property
    def _index(self) -> dict[str, int]:
        return {k: i for i, k in enumerate(self.covariance_ids)}

    def to_dict(self) -> dict:
        """Plain data for JSON (NaN and infinities as null)."""

        def num(x):
            return None if x is None or not np.isfinite(x) else float(x)

        return {
            "source": self.source, "reference": self.reference, "blends": self.blends,
            "chi2": self.chi2, "dof": self.dof, "reduced_chi2": num(self.reduced_chi2),
            "n_lines_used": self.n_used,
            "levels": [
                {"id": d.id, "J": d.J, "parity": d.parity, "energy": d.energy,
                 "uncertainty": d.uncertainty, "previous": d.previous,
                 "previous_uncertainty": d.previous_uncertainty, "n_lines": d.n_lines,
                 "part": d.part, "reference": d.reference, "flags": list(d.flags)}
                for d in self.details.values()
            ],
            "lines": [
                {"line": x.source_line, "lower": x.lower, "upper": x.upper,
                 "wavenumber": x.wavenumber, "uncertainty": x.uncertainty,
                 "intensity": x.intensity, "ritz": x.ritz,
                 "ritz_uncertainty": x.ritz_uncertainty, "obs_minus_ritz": x.residual,
                 "normalised": x.normalised, "vacuum_wavelength": x.vacuum_wavelength,
                 "vacuum_wavelength_uncertainty": x.vacuum_wavelength_uncertainty,
                 "air_wavelength": x.air_wavelength,
                 "air_wavelength_uncertainty": x.air_wavelength_uncertainty,
                 "used": x.used, "flags": list(x.flags)}
                for x in self.lines
            ],
            "unclassified": [int(i) for i in self.unclassified],
            "parts": [{"reference": r, "levels": ids} for r, ids in self.parts],
            "unconnected": list(self.unconnected),
            "warnings": list(self.warnings),
        }

    def lines_of(self, level_id: str) -> list[RitzLine]:
        """The classified lines that start or end on a level."""
        return [x for x in self.lines if level_id in (x.lower, x.upper)]

    def ritz(self, lower: str, upper: str) -> tuple[float, float]:
        """Ritz wavenumber E_upper - E_lower and its uncertainty from the covariance."""
        for lid in (lower, upper):
            if lid not in self.levels:
                raise FinefitError(f"level {lid!r} was not optimised", lid)
        e_up, u_up = self.levels[upper]
        e_lo, u_lo = self.levels[lower]
        d_up, d_lo = self.details[upper], self.details[lower]
        if d_up.part != d_lo.part or self.covariance is None:
            return e_up - e_lo, float(np.hypot(u_up, u_lo))
        index = self._index
        a = np.zeros(len(index))
        if upper in index:
            a[index[upper]] += 1.0
        if lower in index:
            a[index[lower]] -= 1.0
        return e_up - e_lo, float(np.sqrt(max(a @ self.covariance @ a, 0.0)))


def ritz_wavelengths(ritz: np.ndarray, ritz_unc: np.ndarray):
    """Vacuum and air wavelengths (angstrom) of Ritz wavenumbers, with uncertainties.

    lambda_vac = 1e8 / sigma, u = lambda^2 u_sigma / 1e8; air by the dispersion of the
    wavelength module from 2000 A up, its uncertainty through d lambda_air / d lambda_vac
    (a central difference of that conversion).
    """
    from finefit.lines.wavelengths import MIN_AIR_ANGSTROM, vacuum_to_air

    ritz = np.asarray(ritz, dtype=float)
    lam = 1e8 / ritz
    u_lam = lam**2 * np.asarray(ritz_unc, dtype=float) / 1e8
    air = np.full(lam.shape, np.nan)
    u_air = np.full(lam.shape, np.nan)
    ok = np.isfinite(lam) & (lam >= MIN_AIR_ANGSTROM + 1.0)
    if np.any(ok):
        air[ok] = vacuum_to_air(lam[ok])
        h = 1e-3 * lam[ok] * 1e-3
        slope = (vacuum_to_air(lam[ok] + h) - vacuum_to_air(lam[ok] - h)) / (2 * h)
        u_air[ok] = slope * u_lam[ok]
    return lam, u_lam, air, u_air


def optimise_levels(
    levels: list[KnownLevel],
    wavenumbers: np.ndarray,
    uncertainties: np.ndarray,
    classifications: list[list[tuple[str, str]]],
    reference: str | None = None,
    blends: str = "exclude",
    intensities: np.ndarray | None = None,
    source_lines: np.ndarray | None = None,
    outlier: float = OUTLIER,
    dense_limit: int = DENSE_LIMIT,
    source: str = "",
    exclude=(),
) -> LevelOptimisation:
    """Optimise level energies from classified lines.

    ``classifications[i]`` lists the (lower id, upper id) pairs of observed line i (empty:
    unclassified). A line with two or more classifications is a blend: with
    ``blends="exclude"`` it does not enter the fit (its Ritz values are still given);
    with ``"share"`` each classification enters with the line's weight divided among
    them (uncertainty u sqrt(k) for k classifications). ``reference`` is the level held
    fixed (default: the lowest level that has a line); parts of the level system not
    connected to it keep their own lowest level fixed and are reported. Lines whose
    index is in ``exclude`` keep their classification and Ritz values but do not enter
    the fit (flag "excluded"), e.g. a line found to be blended with an impurity.
    """
    if blends not in ("exclude", "share"):
        raise FinefitError(f"blends must be 'exclude' or 'share', not {blends!r}", "blends")
    w = np.asarray(wavenumbers, dtype=float)
    u = np.asarray(uncertainties, dtype=float)
    if w.shape != u.shape or len(classifications) != w.size:
        raise FinefitError("wavenumbers, uncertainties and classifications differ in length",
                           "lines")
    index = {lv.id: k for k, lv in enumerate(levels)}
    if reference is not None and reference not in index:
        raise FinefitError(f"reference level {reference!r} is not among the levels", reference)
    src = np.arange(1, w.size + 1) if source_lines is None else np.asarray(source_lines)
    eq_line, eq_lo, eq_up = [], [], []
    for i, cls in enumerate(classifications):
        for lo, up in cls:
            for lid in (lo, up):
                if lid not in index:
                    raise FinefitError(f"line {int(src[i])}: level {lid!r} is not in the "
                                       "session", f"line {int(src[i])}")
            eq_line.append(i)
            eq_lo.append(index[lo])
            eq_up.append(index[up])
    eq_line = np.array(eq_line, dtype=np.int64)
    eq_lo = np.array(eq_lo, dtype=np.int64)
    eq_up = np.array(eq_up, dtype=np.int64)
    n_cls = np.array([len(c) for c in classifications], dtype=np.int64)
    k_eq = n_cls[eq_line] if eq_line.size else np.zeros(0, dtype=np.int64)
    blend = k_eq > 1
    bad_u = ~(u[eq_line] > 0) if eq_line.size else np.zeros(0, dtype=bool)
    if np.any(bad_u):
        i = int(eq_line[np.flatnonzero(bad_u)[0]])
        raise FinefitError(f"line {int(src[i])}: the uncertainty must be positive",
                           f"line {int(src[i])}")
    used = ~blend if blends == "exclude" else np.ones(eq_line.size, dtype=bool)
    left_out = np.isin(eq_line, np.asarray(list(exclude), dtype=np.int64))
    used &= ~left_out
    u_eff = u[eq_line] * (np.sqrt(k_eq) if blends == "share" else 1.0)
    if not np.any(used):
        raise FinefitError("no classified line is left to optimise the levels from "
                           "(unclassified, or all blends)", "lines")
    prior = np.array([lv.energy for lv in levels])
    ref_i = index[reference] if reference is not None else None
    sol = solve_level_system(len(levels), eq_lo, eq_up, w[eq_line], u_eff, used, prior, ref_i,
                             dense_limit)
    warnings = []
    if ref_i is not None and sol.part[ref_i] < 0:
        warnings.append(f"the reference level {reference} has no classified line; the lowest "
                        f"level with lines, {levels[sol.references[0]].id}, is fixed instead")

    # energies and uncertainties for Ritz values of every equation (levels without a used
    # line keep their prior values, combined in quadrature)
    prior_u = np.array([lv.uncertainty for lv in levels])
    e_all = np.where(sol.part >= 0, sol.energy, prior)
    u_all = np.where(sol.part >= 0, sol.uncertainty, prior_u)
    ritz = e_all[eq_up] - e_all[eq_lo]
    in_fit = (sol.part[eq_lo] >= 0) & (sol.part[eq_up] >= 0) & (sol.part[eq_lo] == sol.part[eq_up])
    ritz_u = np.where(in_fit, sol.ritz_uncertainty, np.hypot(u_all[eq_up], u_all[eq_lo]))
    resid = w[eq_line] - ritz
    # a used line is part of the solution: var(obs - Ritz) = u^2 - u_Ritz^2; others add
    r_var = np.where(used, u_eff**2 - ritz_u**2, u[eq_line] ** 2 + ritz_u**2)
    defines = used & (r_var <= 1e-9 * u_eff**2)
    with np.errstate(invalid="ignore", divide="ignore"):
        norm = np.where(defines, np.nan, resid / np.sqrt(np.maximum(r_var, 1e-300)))
    lam, u_lam, air, u_air = ritz_wavelengths(ritz, ritz_u)
    chi2 = float(np.sum((resid[used] / u_eff[used]) ** 2))
    dof = int(used.sum()) - int(sol.free.size)

    out_lines = []
    outlier_levels: set[int] = set()
    for k in range(eq_line.size):
        i = int(eq_line[k])
        flags = []
        z = norm[k]
        if np.isfinite(z) and abs(z) > outlier:
            flags.append("outlier")
            if used[k]:  # a line kept out of the fit no longer pulls its levels
                outlier_levels.update((int(eq_lo[k]), int(eq_up[k])))
        if blend[k]:
            flags.append("blend")
        if not used[k]:
            flags.append("excluded")
        if defines[k]:
            flags.append("defines level")
        out_lines.append(RitzLine(
            line=i, source_line=int(src[i]), lower=levels[eq_lo[k]].id,
            upper=levels[eq_up[k]].id, wavenumber=float(w[i]), uncertainty=float(u[i]),
            ritz=float(ritz[k]), ritz_uncertainty=float(ritz_u[k]), residual=float(resid[k]),
            normalised=None if not np.isfinite(z) else float(z),
            vacuum_wavelength=float(lam[k]), vacuum_wavelength_uncertainty=float(u_lam[k]),
            air_wavelength=None if not np.isfinite(air[k]) else float(air[k]),
            air_wavelength_uncertainty=None if not np.isfinite(u_air[k]) else float(u_air[k]),
            used=bool(used[k]), flags=tuple(flags),
            intensity=None if intensities is None or not np.isfinite(intensities[i])
            else float(intensities[i]),
        ))

    levels_out: dict[str, tuple[float, float]] = {}
    details: dict[str, OptimisedLevel] = {}
    parts: list[tuple[str, list[str]]] = [(levels[r].id, []) for r in sol.references]
    unconnected = []
    for k, lv in enumerate(levels):
        p = int(sol.part[k])
        if p < 0:
            unconnected.append(lv.id)
            continue
        flags = []
        if k in sol.references:
            flags.append("reference")
        if sol.n_used[k] == 1:
            flags.append("single line")
        if p > 0:
            flags.append("disconnected")
        if k in outlier_levels:
            flags.append("outlier line")
        e, uu = float(sol.energy[k]), float(sol.uncertainty[k])
        levels_out[lv.id] = (e, uu)
        details[lv.id] = OptimisedLevel(
            lv.id, lv.J, lv.parity, e, uu, lv.energy, lv.uncertainty or None,
            int(sol.n_used[k]), p, levels[sol.references[p]].id, tuple(flags))
        parts[p][1].append(lv.id)
    if len(parts) > 1:
        warnings.append(
            f"the level system falls into {len(parts)} parts not connected by lines; the "
            "energies of each part are relative to its own reference: "
            + "; ".join(f"{r} ({len(ids)} levels)" for r, ids in parts))
    n_blend = int(np.count_nonzero(n_cls > 1))
    if n_blend:
        warnings.append(f"{n_blend} line(s) carry two or more classifications (blends): "
                        + ("excluded from the fit" if blends == "exclude"
                           else "their weight is shared between the classifications"))
    return LevelOptimisation(
        levels=levels_out, details=details, lines=out_lines,
        unclassified=np.flatnonzero(n_cls == 0), reference=levels[sol.references[0]].id,
        parts=parts, unconnected=unconnected, covariance=sol.covariance,
        covariance_ids=[levels[i].id for i in sol.free], chi2=chi2, dof=dof, blends=blends,
        source=source, warnings=warnings,
    )
