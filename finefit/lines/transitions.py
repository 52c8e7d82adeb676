"""Electric-dipole line strengths between two opposite-parity models.

D_q = sum_i r_i C^1_q(i). Between spin-orbitals <n l m ms| r C^1_q |n' l' m' ms'> =
d(ms, ms') c^1(l m; l' m') <nl|r|n'l'>, so the line strength splits into angular
matrices (one per pair of subshells, from the determinant bases of both models)
times radial dipole integrals. With both bases taken at M_J = J, the reduced element
follows from Wigner-Eckart: <J M|D_q|J' M'> = (-1)^(J-M) (J 1 J'; -M q M') <J||D||J'>.
S = |<J||D||J'>|^2 in (e a0)^2 when the radial integrals are in bohr (Condon &
Shortley 1935; Sobelman 1979, the chapter on radiative transitions).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from finefit.angular.determinants import DeterminantBlock, one_body
from finefit.angular.wigner import gaunt, three_j2
from finefit.errors import FinefitError
from finefit.model.hamiltonian import Model
from finefit.notation.configuration import parse_configuration


def _shell_key(name: str) -> tuple[int, int]:
    c = parse_configuration(name)
    s = c.subshells[0]
    return (s.n, s.l)


@dataclass(eq=False)
class _Mapped:
    """A model's spin-orbitals in the combined index, and its implicit full subshells."""

    index: np.ndarray  # own spin-orbital -> combined index
    extra: np.uint64  # bits of subshells closed in all its configurations


class DipoleModel:
    """Angular factors of E1 transitions between model ``a`` and model ``b`` (cached)."""

    def __init__(self, a: Model, b: Model) -> None:
        if a.parity == b.parity:
            raise FinefitError(
                "electric-dipole lines connect configurations of opposite parity; both "
                f"sets are {a.parity}",
                "parity",
            )
        self.a, self.b = a, b
        names: list[str] = []
        for m in (a, b):
            for cfg in m.configurations:
                for s in parse_configuration(cfg).subshells:
                    if s.name not in names:
                        names.append(s.name)
        self.shells = names
        self.shell_l = [_shell_key(n)[1] for n in names]
        rows = [(si, ml, ms2) for si, nm in enumerate(names)
                for ml in range(self.shell_l[si], -self.shell_l[si] - 1, -1) for ms2 in (1, -1)]
        if len(rows) > 63:
            raise FinefitError("too many subshells for the dipole operator (63 spin-orbitals)",
                               "configurations")
        self._combined = {r: i for i, r in enumerate(rows)}
        self._rows = rows
        ne = {sum(parse_configuration(c).n_electrons for c in [m.configurations[0]])
              for m in (a, b)}
        if len(ne) != 1:
            raise FinefitError(
                "the two sets do not have the same number of electrons in the subshells "
                "written: write the subshells that differ in both, e.g. '2p6 3d' with "
                "'2p5 3d2'",
                "configurations",
            )
        self._map = {id(a): self._map_model(a), id(b): self._map_model(b)}
        self.pairs = sorted(
            {(min(i, j), max(i, j)) for i in range(len(names)) for j in range(len(names))
             if abs(self.shell_l[i] - self.shell_l[j]) == 1}
        )
        self._cache: dict[tuple[int, int], np.ndarray] = {}

    @property
    def pair_names(self) -> list[tuple[str, str]]:
        return [(self.shells[i], self.shells[j]) for i, j in self.pairs]

    def _map_model(self, m: Model) -> _Mapped:
        basis = m.basis
        so = basis.spin_orbitals
        own = np.array([
            self._combined[(self.shells.index(basis.shell_names[int(so.shell[i])]),
                            int(so.ml[i]), int(so.ms2[i]))]
            for i in range(so.count)
        ], dtype=np.int64)
        extra = np.uint64(0)
        first = parse_configuration(m.configurations[0])
        for s in first.subshells:
            if s.name in basis.shell_names or not s.is_closed:
                continue
            si = self.shells.index(s.name)
            for (sj, _ml, _ms), idx in self._combined.items():
                if sj == si:
                    extra |= np.uint64(1) << np.uint64(idx)
        return _Mapped(own, extra)

    def _block(self, m: Model, j2: int) -> tuple[DeterminantBlock, np.ndarray]:
        """The model's M_J = J block in combined bits, and its J vectors in that order."""
        jb = m.basis.j_blocks[j2]
        mp = self._map[id(m)]
        dets = jb.block.dets
        new = np.full(dets.shape, mp.extra, dtype=np.uint64)
        for i, target in enumerate(mp.index):
            bit = (dets >> np.uint64(i)) & np.uint64(1)
            new |= bit << np.uint64(target)
        order = np.argsort(new)
        block = DeterminantBlock(0, j2, new[order], jb.block.config[order])
        return block, jb.vectors[order]

    def angular(self, j2a: int, j2b: int) -> np.ndarray:
        """Reduced angular matrices <a J||r C^1||b J'> per subshell pair: (pairs, n_a, n_b)."""
        key = (j2a, j2b)
        if key in self._cache:
            return self._cache[key]
        if abs(j2a - j2b) > 2 or j2a + j2b < 2:
            raise FinefitError("no dipole transition between these J", "J")
        block_a, Qa = self._block(self.a, j2a)
        block_b, Qb = self._block(self.b, j2b)
        q2 = j2a - j2b
        w = three_j2(j2a, 2, j2b, -j2a, q2, j2b)
        phase = 1.0  # (-1)^(J - M) with M = J
        out = np.zeros((len(self.pairs), Qa.shape[1], Qb.shape[1]))
        q = q2 // 2
        for k, (i, j) in enumerate(self.pairs):
            terms = []
            for (si, ml, ms2), ia in self._combined.items():
                for (sj, ml2, ms22), ib in self._combined.items():
                    if ms2 != ms22 or ml - ml2 != q:
                        continue
                    if {si, sj} != {i, j} or si == sj:
                        continue
                    c = gaunt(self.shell_l[si], ml, 1, self.shell_l[sj], ml2)
                    if c != 0.0:
                        terms.append((ia, ib, c))  # a+_{ia} a_{ib}: from b's orbital to a's
            M = one_body(block_b, block_a, terms)
            out[k] = Qa.T @ (M @ Qb) / (phase * w)
        self._cache[key] = out
        return out

    def reduced(self, j2a: int, j2b: int, radial: np.ndarray) -> np.ndarray:
        """<J||D||J'> in the two LS bases for radial integrals ``radial`` (one per pair)."""
        return np.tensordot(np.asarray(radial, dtype=float), self.angular(j2a, j2b), axes=1)


def line_strengths(dipole: DipoleModel, sol_a, sol_b, radial: dict[tuple[str, str], float]):
    """All E1 lines between the levels of two solutions: list of (level_a, level_b, S)."""
    rad = np.zeros(len(dipole.pairs))
    for k, (x, y) in enumerate(dipole.pair_names):
        if (x, y) in radial:
            rad[k] = radial[(x, y)]
        elif (y, x) in radial:
            rad[k] = radial[(y, x)]
    out = []
    for ba in dipole.a.blocks:
        for bb in dipole.b.blocks:
            if abs(ba.J2 - bb.J2) > 2 or ba.J2 + bb.J2 < 2:
                continue
            R = dipole.reduced(ba.J2, bb.J2, rad)
            _, Va, _ = sol_a.block_solution(ba.J2)
            _, Vb, _ = sol_b.block_solution(bb.J2)
            amp = Va.T @ R @ Vb
            S = amp**2
            lev_a = {lv.position: lv for lv in sol_a.levels if lv.block == ba.J2}
            lev_b = {lv.position: lv for lv in sol_b.levels if lv.block == bb.J2}
            for i in range(S.shape[0]):
                for j in range(S.shape[1]):
                    out.append((lev_a[i], lev_b[j], float(S[i, j])))
    return out


@dataclass(frozen=True, eq=False)
class PredictedLine:
    """One E1 line: lower and upper level, wavenumber, wavelengths, S, gf and A."""

    lower: object  # finefit.model.solution.Level
    upper: object
    wavenumber: float  # cm^-1
    vacuum_wavelength: float  # angstrom
    air_wavelength: float | None  # angstrom, None below 2000 A
    S: float  # line strength, (e a0)^2
    gf: float  # weighted absorption oscillator strength
    A: float  # transition probability upper -> lower, s^-1
    wavenumber_uncertainty: float | None = None  # cm^-1, from the level uncertainties
    wavelength_uncertainty: float | None = None  # angstrom (vacuum; air differs by < 0.03 %)
    source: str = "calc"  # "Ritz": both levels observed; "obs/calc": one; "calc": neither
    lower_id: str | None = None  # observed level ids, where observed
    upper_id: str | None = None


def predict_lines(
    dipole: DipoleModel,
    sol_a,
    sol_b,
    radial: dict[tuple[str, str], float],
    min_strength: float = 0.0,
    level_uncertainty=None,
    air_range: tuple[float, float] = (2000.0, 20000.0),
    observed=None,
    ritz_uncertainty=None,
) -> list[PredictedLine]:
    """Lines between two solutions, strongest first.

    ``observed(level)`` gives (id, energy, uncertainty) of the observed level attached to
    a computed level, or None: where both levels of a line are observed its wavenumber is
    the Ritz value E_up - E_lo of the observed energies (uncertainty from
    ``ritz_uncertainty(lower id, upper id)`` when it knows the pair, e.g. from the
    covariance of a level optimisation, else the two in quadrature); where one is
    observed, that level's observed energy is combined with the other's calculated one.
    gf and A use the wavenumber given.

    ``level_uncertainty(level)`` gives each level's energy uncertainty (cm^-1); the two
    levels of a line belong to sets of opposite parity with their own parameters, so
    their errors are combined in quadrature. ``air_wavelength`` is given inside
    ``air_range`` (angstrom; default 200 nm to 2 um, common practice), None outside.

    gf = (2/3) dE S and A = (4/3) alpha^3 dE^3 S / g_upper in atomic units (dE in hartree,
    S in (e a0)^2; Bethe & Salpeter 1957; Sobelman 1979); constants from scipy.constants.
    """
    from scipy.constants import fine_structure, physical_constants

    from finefit.lines.wavelengths import reported_wavelength

    hartree_cm = physical_constants["hartree-inverse meter relationship"][0] / 100.0
    t_au = physical_constants["atomic unit of time"][0]
    out = []
    for la, lb, S in line_strengths(dipole, sol_a, sol_b, radial):
        if S <= min_strength:
            continue
        lower, upper = (la, lb) if la.energy < lb.energy else (lb, la)
        obs_lo = observed(lower) if observed is not None else None
        obs_up = observed(upper) if observed is not None else None
        e_lo = lower.energy if obs_lo is None else obs_lo[1]
        e_up = upper.energy if obs_up is None else obs_up[1]
        sigma = e_up - e_lo
        if sigma <= 0:
            continue
        source = {2: "Ritz", 1: "obs/calc", 0: "calc"}[(obs_lo is not None) + (obs_up is not None)]
        de = sigma / hartree_cm
        g_up = 2 * upper.J + 1
        lam = 1e8 / sigma
        air, in_air = reported_wavelength(lam, air_from=air_range[0], air_to=air_range[1])
        du = dl = None
        ul = obs_lo[2] if obs_lo is not None else (
            level_uncertainty(lower) if level_uncertainty is not None else None)
        uu = obs_up[2] if obs_up is not None else (
            level_uncertainty(upper) if level_uncertainty is not None else None)
        if source == "Ritz" and ritz_uncertainty is not None:
            du = ritz_uncertainty(obs_lo[0], obs_up[0])
        if du is None and ul is not None and uu is not None:
            du = float(np.hypot(ul, uu))
        if du is not None:
            dl = lam**2 * du / 1e8
        out.append(
            PredictedLine(
                lower=lower, upper=upper, wavenumber=sigma, vacuum_wavelength=lam,
                air_wavelength=float(air) if in_air else None, S=S,
                gf=2.0 / 3.0 * de * S,
                A=4.0 / 3.0 * fine_structure**3 * de**3 * S / g_up / t_au,
                wavenumber_uncertainty=du, wavelength_uncertainty=dl, source=source,
                lower_id=None if obs_lo is None else obs_lo[0],
                upper_id=None if obs_up is None else obs_up[0],
            )
        )
    out.sort(key=lambda x: -x.gf)
    return out
