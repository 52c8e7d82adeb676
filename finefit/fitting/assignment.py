"""Attaching observed levels to computed eigenstates, and keeping them attached.

Initial attachment, per J and parity: levels pinned to a state, then labelled
levels by the largest overlap of their LS basis state with the eigenvectors
(resolved jointly with scipy.optimize.linear_sum_assignment), then unlabelled
levels by energy order (or nearest energy) among the states left, preferring
states of their configuration. During a fit the attachment follows the
eigenvectors by maximum-overlap matching between iterations, so that levels do
not swap when two eigenvalues cross.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass, field
from functools import cache

import numpy as np

from finefit.errors import FinefitError
from finefit.fitting.settings import ObservedLevel
from finefit.model.label_match import resolve_label
from finefit.notation.jvalues import format_j


def linear_sum_assignment(cost: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """scipy's assignment solver (Crouse 2016), loaded on first use.

    ``import scipy.optimize`` costs 0.2-0.4 s (the whole optimisation package); the
    solver is one compiled module of it, loaded directly when possible.
    """
    return _lsap_solver()(cost)


@cache
def _lsap_solver():
    """scipy's compiled ``linear_sum_assignment`` without the package's start-up cost."""
    if "scipy.optimize" not in sys.modules:
        try:
            import importlib.machinery
            import importlib.util
            from pathlib import Path

            spec = importlib.util.find_spec("scipy")
            folder = Path(spec.origin).parent / "optimize"
            for suffix in importlib.machinery.EXTENSION_SUFFIXES:
                path = folder / f"_lsap{suffix}"
                if path.is_file():
                    loader = importlib.machinery.ExtensionFileLoader(
                        "scipy.optimize._lsap", str(path)
                    )
                    module = importlib.util.module_from_spec(
                        importlib.util.spec_from_file_location(
                            "scipy.optimize._lsap", str(path), loader=loader
                        )
                    )
                    loader.exec_module(module)
                    return module.linear_sum_assignment
        except Exception:  # any layout surprise: the ordinary import below
            pass
    from scipy.optimize import linear_sum_assignment as solve

    return solve



def label_overlaps(coupling: dict, J2: int, label: str, J: float, vectors: np.ndarray):
    """The state a label names and its squared overlap with each eigenvector.

    The overlap is taken in the label's own coupling scheme (LS, JK, J1j or jj).
    """
    target = resolve_label(coupling, label, J)
    _, coords = coupling[J2].scheme(target.scheme, vectors)
    return target, coords[target.row] ** 2


@dataclass
class BlockAttachment:
    """Attachments of the observed levels of one (parity, J) block."""

    parity: str
    J2: int
    level_ids: list[str]
    eigen_index: np.ndarray  # current eigenstate of each level
    reference: np.ndarray | None = None  # eigenvectors at the last accepted point
    warnings: list[str] = field(default_factory=list)

    def commit(self, eigen_index: np.ndarray, V: np.ndarray) -> None:
        """Accept a point: its eigenvectors become the reference for the next matching."""
        self.eigen_index = eigen_index
        self.reference = V.copy()
        self._attached_t = np.ascontiguousarray(V[:, eigen_index].T)
        self._arange = np.arange(eigen_index.size)

    def follow(self, V_new: np.ndarray) -> np.ndarray:
        """Eigen indices after matching the new eigenvectors to the reference ones."""
        if self.reference is None:
            return self.eigen_index
        if getattr(self, "_attached_t", None) is None:
            self.commit(self.eigen_index, self.reference)
        # usually each attached vector has one new partner with overlap > 1/2 (then the
        # partner is unique, overlaps summing to 1); only otherwise solve the assignment
        part = self._attached_t @ V_new
        part *= part
        best = part.argmax(axis=1)
        if part[self._arange, best].min() > 0.5:
            return best
        overlap = (self.reference.T @ V_new) ** 2
        rows, cols = linear_sum_assignment(-overlap)
        perm = np.empty_like(cols)
        perm[rows] = cols
        return perm[self.eigen_index]


def attach_block(
    levels: list[ObservedLevel],
    energies: np.ndarray,
    vectors: np.ndarray,
    coupling: dict,
    state_config: np.ndarray,
    config_names: list[str],
    assignment: str = "energy-order",
) -> tuple[np.ndarray, list[str]]:
    """Eigen index for each observed level of one J block, and warnings."""
    n = energies.size
    J = levels[0].J
    J2 = int(round(2 * J))
    if len(levels) > n:
        raise FinefitError(
            f"{len(levels)} observed levels have J = {format_j(J)} ({levels[0].parity}) but "
            f"the model has only {n} states of that J: levels "
            + ", ".join(lv.id for lv in levels),
            levels[-1].id,
        )
    warnings: list[str] = []
    result = np.full(len(levels), -1)
    taken = np.zeros(n, dtype=bool)
    weights = vectors**2
    cfg_weight = np.zeros((len(config_names), n))
    np.add.at(cfg_weight, state_config, weights)
    lead_cfg = np.argmax(cfg_weight, axis=0)
    # 1. pinned levels
    for i, lv in enumerate(levels):
        if lv.state is None:
            continue
        if isinstance(lv.state, int):
            if not 1 <= lv.state <= n:
                raise FinefitError(
                    f"level {lv.id}: state {lv.state} does not exist (J = {format_j(J)} has "
                    f"{n} states)",
                    lv.id,
                )
            k = lv.state - 1
        else:
            try:
                _, overlap = label_overlaps(coupling, J2, lv.state, J, vectors)
            except FinefitError as exc:
                raise FinefitError(f"level {lv.id}: pinned state: {exc}", lv.id) from None
            k = int(np.argmax(overlap))
        if taken[k]:
            other = levels[int(np.flatnonzero(result == k)[0])].id
            warnings.append(
                f"levels {other} and {lv.id} are both attached to state {k + 1} of "
                f"J = {format_j(J)}"
            )
        result[i] = k
        taken[k] = True
    # 2. labelled levels: joint maximum overlap
    lab_idx, rows, overlaps = [], [], []
    for i, lv in enumerate(levels):
        if result[i] >= 0 or not lv.label:
            continue
        try:
            target, overlap = label_overlaps(coupling, J2, lv.label, J, vectors)
        except FinefitError as exc:
            raise FinefitError(f"level {lv.id}: {exc}", lv.id) from None
        lab_idx.append(i)
        rows.append((target.scheme, target.row))
        overlaps.append(overlap)
    if lab_idx:
        free = np.flatnonzero(~taken)
        cost = -np.array(overlaps)[:, free]
        r, c = linear_sum_assignment(cost)
        chosen = {lab_idx[a]: int(free[b]) for a, b in zip(r, c, strict=True)}
        # levels sharing one label: the set of states maximises the overlap, the pairing
        # within the set follows energy order
        for row in set(rows):
            same = [lab_idx[k] for k in range(len(rows)) if rows[k] == row]
            if len(same) > 1:
                states = sorted((chosen[i] for i in same), key=lambda k: energies[k])
                for i, k in zip(sorted(same, key=lambda i: levels[i].energy), states,
                                strict=True):
                    chosen[i] = k
        for i, k in chosen.items():
            result[i] = k
            taken[k] = True
    # 3. unlabelled levels
    rest = [i for i, lv in enumerate(levels) if result[i] < 0]
    by_cfg: dict[int | None, list[int]] = {}
    for i in rest:
        cfg = levels[i].configuration
        key = config_names.index(cfg) if cfg in config_names else None
        by_cfg.setdefault(key, []).append(i)
    for key in sorted(by_cfg, key=lambda k: (k is None, k or 0)):
        idx = sorted(by_cfg[key], key=lambda i: levels[i].energy)
        avail = [k for k in np.flatnonzero(~taken) if key is None or lead_cfg[k] == key]
        if len(avail) < len(idx):
            warnings.append(
                "not enough states of configuration "
                f"{config_names[key] if key is not None else '?'} with J = {format_j(J)} left "
                "for levels " + ", ".join(levels[i].id for i in idx) + "; using states of any "
                "configuration"
            )
            avail = list(np.flatnonzero(~taken))
        avail = sorted(avail, key=lambda k: energies[k])
        if assignment == "nearest":
            cost = np.abs(
                np.array([levels[i].energy for i in idx])[:, None] - energies[avail][None, :]
            )
            r, c = linear_sum_assignment(cost)
            pairs = [(idx[a], avail[b]) for a, b in zip(r, c, strict=True)]
        else:
            pairs = list(zip(idx, avail[: len(idx)], strict=False))
        for i, k in pairs:
            result[i] = k
            taken[k] = True
    return result, warnings


# Weights of the global attachment cost (in units of one squared standard deviation of
# the fit): a label-compatible state costs LABEL_WEIGHT * (1 - overlap); an unlabelled
# level off its configuration costs CONFIG_WEIGHT; keeping the present state earns
# KEEP_BONUS; energy distances are capped at ENERGY_CAP so that a far state is just "far".
LABEL_WEIGHT = 4.0
CONFIG_WEIGHT = 9.0
KEEP_BONUS = 0.25
ENERGY_CAP = 400.0
# a labelled level may sit only on states whose overlap with its label is at least this
# fraction of the best overlap any state has (a 52/48 mixed pair: both; 90/10: one)
COMPATIBLE_FRACTION = 0.5


def label_compatibility(
    levels: list[ObservedLevel], vectors: np.ndarray, coupling: dict
) -> tuple[np.ndarray, np.ndarray]:
    """Per level and state: squared overlap with the label, and whether the state may carry it.

    Unlabelled levels get overlap 0 and every state compatible.
    """
    n_lev, n = len(levels), vectors.shape[1]
    overlap = np.zeros((n_lev, n))
    ok = np.ones((n_lev, n), dtype=bool)
    J = levels[0].J
    J2 = int(round(2 * J))
    for i, lv in enumerate(levels):
        if not lv.label:
            continue
        _, o = label_overlaps(coupling, J2, lv.label, J, vectors)
        overlap[i] = o
        ok[i] = o >= COMPATIBLE_FRACTION * o.max()
    return overlap, ok


def global_attach_block(
    levels: list[ObservedLevel],
    energies: np.ndarray,
    vectors: np.ndarray,
    coupling: dict,
    state_config: np.ndarray,
    config_names: list[str],
    current: np.ndarray,
    scale: float,
) -> np.ndarray:
    """One global assignment of the levels of a J block to its eigenstates.

    Minimises, with scipy's linear_sum_assignment, the sum over levels of
    ((E_obs - E_calc)/scale)^2 (capped), a label term LABEL_WEIGHT (1 - overlap) in the
    label's own scheme, a configuration term for unlabelled levels and a small bonus
    for the present state; labelled levels may take only label-compatible states,
    pinned levels keep theirs.
    """
    n = energies.size
    e_obs = np.array([lv.energy for lv in levels])
    dist = ((e_obs[:, None] - energies[None, :]) / scale) ** 2
    cost = np.minimum(dist, ENERGY_CAP)
    overlap, ok = label_compatibility(levels, vectors, coupling)
    weights = vectors**2
    cfg_weight = np.zeros((len(config_names), n))
    np.add.at(cfg_weight, state_config, weights)
    for i, lv in enumerate(levels):
        if lv.label:
            cost[i] += LABEL_WEIGHT * (1.0 - overlap[i])
        elif lv.configuration in config_names:
            cost[i] += CONFIG_WEIGHT * (1.0 - cfg_weight[config_names.index(lv.configuration)])
        if 0 <= current[i] < n:
            cost[i, current[i]] -= KEEP_BONUS
    big = 1e9
    cost = np.where(ok, cost, big)
    pinned = [i for i, lv in enumerate(levels) if lv.state is not None]
    result = current.copy()
    free_levels = [i for i in range(len(levels)) if i not in pinned]
    taken = {int(current[i]) for i in pinned}
    free_states = [j for j in range(n) if j not in taken]
    if free_levels:
        sub = cost[np.ix_(free_levels, free_states)]
        r, c = linear_sum_assignment(sub)
        for a, b in zip(r, c, strict=True):
            result[free_levels[a]] = free_states[b]
    return result
