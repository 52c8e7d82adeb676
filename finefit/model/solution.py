"""Eigen-solutions of a model: levels with energies, labels, purities, g and derivatives."""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache

import numpy as np

from finefit.notation.jvalues import format_j


@cache
def g_electron() -> float:
    """|g_e| from CODATA via scipy.constants (imported here: scipy.constants costs 0.1-0.2 s)."""
    from scipy.constants import physical_constants

    return abs(physical_constants["electron g factor"][0])


def __getattr__(name: str) -> float:  # PEP 562: G_ELECTRON is read on first use
    if name == "G_ELECTRON":
        return g_electron()
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def lande_g_ls(L: int, S2: int, J2: int) -> float:
    """Landé g of a pure LS state with g_L = 1 and g_s from CODATA (Condon & Shortley §5.2)."""
    if J2 == 0:
        return 0.0
    J = J2 / 2.0
    S = S2 / 2.0
    jj = J * (J + 1.0)
    return 1.0 + (g_electron() - 1.0) * (jj + S * (S + 1.0) - L * (L + 1.0)) / (2.0 * jj)


@dataclass(frozen=True, eq=False)
class Level:
    """One computed level. ``purity`` is the leading LS fraction; ``g`` the Landé factor.

    ``block`` is 2J and ``position`` the eigenvalue index inside that J block.
    For J = 0 the g-factor is undefined and reported as 0.
    """

    J: float
    parity: str
    energy: float
    configuration: str
    label: str
    purity: float
    g: float
    block: int
    position: int

    @property
    def J_text(self) -> str:
        return format_j(self.J)


@dataclass(frozen=True)
class Component:
    label: str
    fraction: float
    configuration: str


class Solution:
    """All levels of a model at one parameter vector, sorted by energy."""

    def __init__(self, model, values: np.ndarray, eig: list) -> None:
        from finefit.model.coupling import coupling_data

        self.model = model
        self.values = values
        self._eig = eig
        self._coupling = coupling_data(model)
        levels = []
        for b, (w, V, _) in zip(model.blocks, eig, strict=True):
            cd = self._coupling[b.J2]
            weights = V**2
            lead = np.argmax(weights, axis=0)
            cfg_weight = np.zeros((len(model.configurations), V.shape[1]))
            np.add.at(cfg_weight, b.state_config, weights)
            lead_cfg = np.argmax(cfg_weight, axis=0)
            g = cd.g_ls @ weights
            for i in range(w.size):
                levels.append(
                    Level(
                        J=b.J,
                        parity=model.parity,
                        energy=float(w[i]),
                        configuration=model.configurations[int(lead_cfg[i])],
                        label=cd.ls_labels[int(lead[i])],
                        purity=float(weights[lead[i], i]),
                        g=float(g[i]),
                        block=b.J2,
                        position=i,
                    )
                )
        levels.sort(key=lambda lev: (lev.energy, lev.J))
        self.levels: list[Level] = levels
        self._pos = {b.J2: i for i, b in enumerate(model.blocks)}
        # per (block position, scheme): squared amplitudes of all levels, their maxima
        # and the order of components (computed once per block, vectorised)
        self._frac: dict[tuple[int, str], np.ndarray] = {}
        self._lead: dict[tuple[int, str], np.ndarray] = {}

    # ---------------------------------------------------------------- per level
    def eigenvector(self, level: Level) -> np.ndarray:
        """Eigenvector in the LS basis of the level's J block."""
        return self._eig[self._block_pos(level)][1][:, level.position]

    def _block_pos(self, level: Level) -> int:
        return self._pos[level.block]

    def gradient(self, level: Level) -> np.ndarray:
        """dE/dx_p for every parameter of the model (Hellmann-Feynman)."""
        i = self._block_pos(level)
        b = self.model.blocks[i]
        out = np.zeros(len(self.model.parameters))
        D = self._eig[i][2]
        if D is not None:
            out[b.param_index] = D[level.position]
        return out

    def _fractions(self, i: int, scheme: str) -> np.ndarray:
        """Squared amplitudes of every level of block ``i`` in a scheme (column = level)."""
        key = scheme.lower()
        key = "jk" if key == "pair" else key
        frac = self._frac.get((i, key))
        if frac is None:
            _, U = self._coupling[self.model.blocks[i].J2].scheme_basis(scheme)
            V = self._eig[i][1]
            amp = V if U is None else U.T @ V
            frac = amp * amp
            self._frac[(i, key)] = frac
            self._lead[(i, key)] = frac.max(axis=0)
        return frac

    def composition(
        self, level: Level, scheme: str = "LS", top: int | None = None
    ) -> list[Component]:
        """Percentage composition of a level in ``LS``, ``jj`` or ``JK`` coupling, largest first."""
        i = self._block_pos(level)
        cd = self._coupling[level.block]
        labels, _ = cd.scheme_basis(scheme)
        frac = self._fractions(i, scheme)[:, level.position]
        if top is not None and top < frac.size:
            # the top components only: partition, then sort those few (stable by row)
            part = np.argpartition(-frac, top - 1)[:top]
            cut = frac[part].min()
            cand = np.flatnonzero(frac >= cut)
            order = cand[np.argsort(-frac[cand], kind="stable")][:top]
        else:
            order = np.argsort(-frac, kind="stable")
        cfgs = cd.state_config
        return [
            Component(labels[k], float(frac[k]), self.model.configurations[int(cfgs[k])])
            for k in order
        ]

    def purity(self, level: Level, scheme: str) -> float:
        """The leading fraction of a level in a scheme."""
        i = self._block_pos(level)
        key = scheme.lower()
        key = "jk" if key == "pair" else key
        self._fractions(i, scheme)
        return float(self._lead[(i, key)][level.position])

    def best_scheme(self, level: Level) -> str:
        """The coupling scheme whose leading component is largest (ties favour LS)."""
        best, best_p = "LS", -1.0
        for scheme in ("LS", "JK", "jj"):
            if scheme == "JK" and not self._coupling[level.block].has_jk:
                continue
            p = self.purity(level, scheme)
            if p > best_p + 1e-9:
                best, best_p = scheme, p
        return best

    # ---------------------------------------------------------------- whole set
    @property
    def energies(self) -> np.ndarray:
        return np.array([lev.energy for lev in self.levels])

    def jacobian(self) -> np.ndarray:
        """dE_i/dx_p for all levels (rows in ``levels`` order) and parameters."""
        return np.array([self.gradient(lev) for lev in self.levels])

    def block_solution(self, J2: int) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
        return self._eig[self._pos[J2]]
