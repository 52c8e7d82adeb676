"""Eigen-solutions of a model: levels with energies, labels, purities, g and derivatives."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.constants import physical_constants

from finefit.notation.jvalues import format_j

G_ELECTRON = abs(physical_constants["electron g factor"][0])  # CODATA, via scipy.constants


def lande_g_ls(L: int, S2: int, J2: int) -> float:
    """Landé g of a pure LS state with g_L = 1 and g_s from CODATA (Condon & Shortley §5.2)."""
    if J2 == 0:
        return 0.0
    J = J2 / 2.0
    S = S2 / 2.0
    jj = J * (J + 1.0)
    return 1.0 + (G_ELECTRON - 1.0) * (jj + S * (S + 1.0) - L * (L + 1.0)) / (2.0 * jj)


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

    # ---------------------------------------------------------------- per level
    def eigenvector(self, level: Level) -> np.ndarray:
        """Eigenvector in the LS basis of the level's J block."""
        return self._eig[self._block_pos(level)][1][:, level.position]

    def _block_pos(self, level: Level) -> int:
        return next(i for i, b in enumerate(self.model.blocks) if b.J2 == level.block)

    def gradient(self, level: Level) -> np.ndarray:
        """dE/dx_p for every parameter of the model (Hellmann-Feynman)."""
        i = self._block_pos(level)
        b = self.model.blocks[i]
        out = np.zeros(len(self.model.parameters))
        D = self._eig[i][2]
        if D is not None:
            out[b.param_index] = D[level.position]
        return out

    def composition(
        self, level: Level, scheme: str = "LS", top: int | None = None
    ) -> list[Component]:
        """Percentage composition of a level in ``LS``, ``jj`` or ``JK`` coupling, largest first."""
        cd = self._coupling[level.block]
        v = self.eigenvector(level)
        labels, amplitudes = cd.scheme(scheme, v)
        frac = amplitudes**2
        order = np.argsort(-frac, kind="stable")
        if top is not None:
            order = order[:top]
        b = self.model.blocks[self._block_pos(level)]
        cfgs = cd.scheme_configs(scheme, b)
        return [
            Component(labels[k], float(frac[k]), self.model.configurations[int(cfgs[k])])
            for k in order
        ]

    def purity(self, level: Level, scheme: str) -> float:
        return self.composition(level, scheme, top=1)[0].fraction

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
        i = next(i for i, b in enumerate(self.model.blocks) if b.J2 == J2)
        return self._eig[i]
