"""Determinant blocks, the LS term basis with full coupling trees, and the J blocks.

The LS basis is built exactly from determinants: in the block M_L = L, M_S = S
the states of total L and S are the null space of L+ and S+ (highest weights);
their parent terms, intermediate couplings and seniorities are the eigenvalues
of the Casimir operators of each subshell and each partial coupling (taken in
the order the configuration is written), diagonalised one after another inside
each remaining degenerate space. States of definite J then follow from lowering
operators and Clebsch-Gordan coefficients. Everything is exact up to rounding.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from math import comb

import numpy as np
import scipy.sparse as sp

from finefit.angular.determinants import (
    DeterminantBlock,
    SpinOrbitals,
    configuration_determinants,
    one_body,
    quantum_numbers,
    two_body,
)
from finefit.angular.effective import seniority_terms, stack_two_body
from finefit.angular.operators import (
    IntegralClass,
    coulomb_terms,
    lower,
    lplus_terms,
    pairing_terms,
    splus_terms,
    subshell_casimir_terms,
)
from finefit.angular.wigner import clebsch_gordan2
from finefit.errors import FinefitError
from finefit.notation.configuration import Configuration, parse_configuration

# Running indices of repeated terms of equal seniority are ordered by the energy of
# this reference electrostatic operator of the subshell (weights of F^k, k = 2, 4, 6).
TIE_BREAK_WEIGHTS = {2: 1.0, 4: 0.25, 6: 1.0 / 9.0, 8: 1.0 / 16.0, 10: 1.0 / 25.0, 12: 1.0 / 36.0}


@dataclass(frozen=True)
class SubshellTerm:
    """The term of one open subshell: L, 2S, seniority v and a running index (0 = unique)."""

    L: int
    S2: int
    seniority: int
    index: int = 0


@dataclass(frozen=True)
class LSState:
    """One LS-coupled basis state (one per J it can have): full coupling tree."""

    config: int
    subshell_terms: tuple[SubshellTerm, ...]
    intermediates: tuple[tuple[int, int], ...]  # (L, 2S) after subshells 2 .. n-1
    L: int
    S2: int


@dataclass(frozen=True)
class ConfigurationInfo:
    """A configuration of the interacting set and its place in the active space."""

    index: int
    configuration: Configuration
    text: str
    occupancy: tuple[int, ...]  # electrons in each active subshell
    open_shells: tuple[int, ...]  # active-subshell indices of its open subshells, written order
    n_determinants: int


@dataclass
class TermGroup:
    """All LS states of one (L, 2S) over all configurations, as highest-weight vectors."""

    L: int
    S2: int
    states: list[LSState]
    vectors: np.ndarray  # (block size, n_states) in block (M_L = L, 2M_S = 2S)
    coulomb: list[np.ndarray] = field(default_factory=list)  # per integral class, n x n
    casimir_l: dict[tuple[int, int], np.ndarray] = field(default_factory=dict)
    # (subshell, operator name) -> n x n: effective operators diagonal in (L, S)
    effective: dict[tuple[int, str], np.ndarray] = field(default_factory=dict)


@dataclass(frozen=True)
class EffectiveOperator:
    """An effective operator of one subshell that is diagonal in (L, S) and independent of J.

    ``name`` is the parameter's short name without the subshell (``beta``, ``T2``); it
    exists in a configuration where the subshell holds at least ``min_electrons``
    electrons and at least ``min_electrons`` holes (below that it is constant).
    """

    shell: int
    name: str
    kind: str
    k: int
    min_electrons: int
    one_body: tuple = ()
    column: int = -1  # weight column in the stacked two-body terms (-1: none)


@dataclass
class JBlock:
    """The basis of exact-J states (M_J = J) of one J: LS states and their vectors."""

    J2: int
    state_index: np.ndarray  # indices into Basis.ls_states
    vectors: np.ndarray  # (M_J block size, n)
    block: DeterminantBlock


class Basis:
    """Active space, determinant blocks, LS term basis and J blocks of a configuration set."""

    def __init__(
        self,
        configurations: list[str | Configuration],
        orbital_permutation: np.ndarray | None = None,
    ) -> None:
        if not configurations:
            raise FinefitError("give at least one configuration", "configurations")
        configs = [parse_configuration(c) for c in configurations]
        texts = [str(c) for c in configs]
        if len(set(texts)) != len(texts):
            dup = next(t for t in texts if texts.count(t) > 1)
            raise FinefitError(f"configuration {dup!r} is given twice", dup)
        parity = configs[0].parity
        for c in configs[1:]:
            if c.parity != parity:
                raise FinefitError(
                    f"configuration {str(c)!r} is {c.parity} but {texts[0]!r} is {parity}: "
                    f"an interacting set must have one parity (make two models)",
                    str(c),
                )
        n_el = {c.n_electrons for c in configs}
        # active subshells: every subshell open in some configuration, or present in some and
        # absent (or different) in another
        names: list[tuple[int, int]] = []
        for c in configs:
            for s in c.subshells:
                if (s.n, s.l) not in names:
                    names.append((s.n, s.l))
        occ_table = np.array(
            [[c.occupancy(f"{n}{'spdfghi'[l]}") for (n, l) in names] for c in configs]
        )
        caps = np.array([4 * l + 2 for (_, l) in names])
        keep = [
            j
            for j in range(len(names))
            if not (np.all(occ_table[:, j] == caps[j]) or np.all(occ_table[:, j] == 0))
        ]
        if len(n_el) > 1:
            # electrons in subshells that are closed everywhere are implicit: compare the rest
            active_counts = {int(occ_table[i, keep].sum()) for i in range(len(configs))}
            if len(active_counts) > 1:
                raise FinefitError(
                    "the configurations do not have the same number of electrons outside "
                    "common closed shells: write the subshells that differ, e.g. '3p6 3d2' "
                    "with '3p5 3d3'",
                    texts[1],
                )
        if not keep:
            # only closed shells: a single 1S0 state
            keep = [0]
        self.parity = parity
        self.shells = [names[j] for j in keep]
        self.shell_names = [f"{n}{'spdfghi'[l]}" for (n, l) in self.shells]
        self.spin_orbitals = SpinOrbitals.for_shells(
            [l for (_, l) in self.shells], orbital_permutation
        )
        infos = []
        for i, c in enumerate(configs):
            occ = tuple(int(occ_table[i, j]) for j in keep)
            written = [(s.n, s.l) for s in c.subshells if s.is_open]
            open_shells = tuple(self.shells.index(nl) for nl in written if nl in self.shells)
            n_det = 1
            for (_, l), k in zip(self.shells, occ, strict=True):
                n_det *= comb(4 * l + 2, k)
            infos.append(ConfigurationInfo(i, c, texts[i], occ, open_shells, n_det))
        self.configs: list[ConfigurationInfo] = infos
        self._build_blocks()
        self._coulomb_terms, self.integral_classes = coulomb_terms(self.spin_orbitals)
        self._lplus = lplus_terms(self.spin_orbitals, list(range(len(self.shells))))
        self._splus = splus_terms(self.spin_orbitals, list(range(len(self.shells))))
        self._op_cache: dict = {}
        self._setup_effective()
        self._build_terms()
        self._build_j_blocks()

    # ----------------------------------------------------------------- determinants
    def _build_blocks(self) -> None:
        so = self.spin_orbitals
        all_dets, all_cfg = [], []
        for info in self.configs:
            d = configuration_determinants(so, list(info.occupancy))
            all_dets.append(d)
            all_cfg.append(np.full(d.size, info.index))
        dets = np.concatenate(all_dets)
        cfg = np.concatenate(all_cfg)
        ml, ms2 = quantum_numbers(dets, so)
        self.n_determinants = int(dets.size)
        self.blocks: dict[tuple[int, int], DeterminantBlock] = {}
        key = ml * 1024 + ms2
        order = np.lexsort((dets, key))
        key_s = key[order]
        bounds = np.flatnonzero(np.diff(key_s)) + 1
        for chunk in np.split(order, bounds):
            if chunk.size == 0:
                continue
            b = DeterminantBlock(int(ml[chunk[0]]), int(ms2[chunk[0]]), dets[chunk], cfg[chunk])
            self.blocks[(b.ml, b.ms2)] = b

    def block(self, ml: int, ms2: int) -> DeterminantBlock:
        b = self.blocks.get((ml, ms2))
        if b is None:
            b = DeterminantBlock(ml, ms2, np.zeros(0, dtype=np.uint64), np.zeros(0, dtype=np.int64))
            self.blocks[(ml, ms2)] = b
        return b

    def operator(
        self, name: str, src: tuple[int, int], tgt: tuple[int, int], terms
    ) -> sp.csr_matrix:
        """A cached one-body operator between two (M_L, 2M_S) blocks."""
        key = (name, src, tgt)
        if key not in self._op_cache:
            self._op_cache[key] = one_body(self.block(*src), self.block(*tgt), terms)
        return self._op_cache[key]

    def count(self, config: int, ml: int, ms2: int) -> int:
        b = self.blocks.get((ml, ms2))
        return 0 if b is None else int(np.count_nonzero(b.config == config))

    # ----------------------------------------------------------------- effective operators
    def _setup_effective(self) -> None:
        """The (L, S)-diagonal effective operators of the open subshells (CONVENTIONS.md)."""
        so = self.spin_orbitals
        ops: list[EffectiveOperator] = []
        parts = []
        for s, (_, l) in enumerate(self.shells):
            occ = [info.occupancy[s] for info in self.configs]
            if not any(2 <= n <= 4 * l for n in occ):
                continue
            if l == 2:
                parts.append(seniority_terms(so, s))
                ops.append(EffectiveOperator(s, "beta", "beta", 0, 2, (), len(parts) - 1))
            if l == 3:
                # beta = G(G2), gamma = G(R7) (CONVENTIONS.md; Racah 1949)
                for name, group in (("beta", "G2"), ("gamma", "SO")):
                    one, two = subshell_casimir_terms(so, s, group)
                    parts.append(two)
                    ops.append(EffectiveOperator(s, name, name, 0, 2, tuple(one), len(parts) - 1))
        self.effective_operators: list[EffectiveOperator] = ops
        self._effective_terms = stack_two_body(parts) if parts else None

    def _effective_matrices(
        self, V: np.ndarray, L: int, S2: int
    ) -> dict[tuple[int, str], np.ndarray]:
        """V^T O V for every effective operator in the block (M_L = L, 2M_S = 2S)."""
        if not self.effective_operators:
            return {}
        blk = self.block(L, S2)
        two = two_body(blk, self._effective_terms) if self._effective_terms is not None else []
        out = {}
        for op in self.effective_operators:
            m = two[op.column] if op.column >= 0 else None
            if op.one_body:
                ob = self.operator(("eff", op.shell, op.name), (L, S2), (L, S2), list(op.one_body))
                m = ob if m is None else m + ob
            out[(op.shell, op.name)] = V.T @ (m @ V)
        return out

    # ----------------------------------------------------------------- LS terms
    def _casimir_l(self, V: np.ndarray, L: int, S2: int, shells: tuple[int, ...]) -> np.ndarray:
        """V^T L_set^2 V in block (L, 2S) for the orbital momentum of a set of subshells."""
        so = self.spin_orbitals
        blk = self.block(L, S2)
        mask = np.isin(so.shell, shells)
        bits = (blk.dets[:, None] >> np.arange(so.count, dtype=np.uint64)) & np.uint64(1)
        lz = bits.astype(np.int64) @ np.where(mask, so.ml, 0)
        lp = self.operator(("L+", shells), (L, S2), (L + 1, S2), lplus_terms(so, list(shells)))
        W = lp @ V
        return V.T @ ((lz * (lz + 1))[:, None] * V) + W.T @ W

    def _casimir_s(self, V: np.ndarray, L: int, S2: int, shells: tuple[int, ...]) -> np.ndarray:
        so = self.spin_orbitals
        blk = self.block(L, S2)
        mask = np.isin(so.shell, shells)
        bits = (blk.dets[:, None] >> np.arange(so.count, dtype=np.uint64)) & np.uint64(1)
        sz = (bits.astype(np.int64) @ np.where(mask, so.ms2, 0)) / 2.0
        sp_ = self.operator(("S+", shells), (L, S2), (L, S2 + 2), splus_terms(so, list(shells)))
        W = sp_ @ V
        return V.T @ ((sz * (sz + 1))[:, None] * V) + W.T @ W

    def _build_terms(self) -> None:
        self.term_groups: dict[tuple[int, int], TermGroup] = {}
        self.ls_states: list[LSState] = []
        self._group_of_state: list[tuple[tuple[int, int], int]] = []
        pairing_cache: dict[int, object] = {}
        for L, S2 in sorted(self.blocks):
            if L < 0 or S2 < 0:
                continue
            blk = self.blocks[(L, S2)]
            mult = {
                c.index: self.count(c.index, L, S2)
                - self.count(c.index, L + 1, S2)
                - self.count(c.index, L, S2 + 2)
                + self.count(c.index, L + 1, S2 + 2)
                for c in self.configs
            }
            if not any(mult.values()):
                continue
            lp = self.operator("L+", (L, S2), (L + 1, S2), self._lplus)
            spl = self.operator("S+", (L, S2), (L, S2 + 2), self._splus)
            coul = None
            vectors, states = [], []
            for info in self.configs:
                n_c = mult[info.index]
                if n_c == 0:
                    continue
                cols = np.flatnonzero(blk.config == info.index)
                A = sp.vstack([lp[:, cols], spl[:, cols]]).tocsc()
                M = (A.T @ A).toarray()
                w, U = np.linalg.eigh(M)
                if n_c > len(w) or (n_c < len(w) and w[n_c] < 0.5) or abs(w[n_c - 1]) > 1e-8:
                    raise FinefitError(  # an internal consistency check, never expected
                        f"highest-weight space of L={L}, 2S={S2} in {info.text!r} is ill-defined",
                        info.text,
                    )
                V = np.zeros((blk.size, n_c))
                V[cols] = U[:, :n_c]
                if coul is None:
                    coul = two_body(blk, self._coulomb_terms)
                V, labels = self._label(info, V, L, S2, coul, pairing_cache)
                vectors.append(V)
                states.extend(labels)
            Vall = np.hstack(vectors)
            # deterministic phase: the largest component of each vector is positive
            pivot = np.argmax(np.abs(Vall) > np.abs(Vall).max(axis=0) - 1e-9, axis=0)
            Vall *= np.sign(Vall[pivot, np.arange(Vall.shape[1])])
            group = TermGroup(L, S2, states, Vall)
            group.coulomb = [Vall.T @ (m @ Vall) for m in coul]
            for info in self.configs:
                for s in info.open_shells:
                    group.casimir_l[(info.index, s)] = self._casimir_l(Vall, L, S2, (s,))
            group.effective = self._effective_matrices(Vall, L, S2)
            self.term_groups[(L, S2)] = group
            for i, st in enumerate(states):
                self.ls_states.append(st)
                self._group_of_state.append(((L, S2), i))

    def _label(self, info, V, L, S2, coul, pairing_cache):
        """Split a highest-weight space into joint eigenvectors of the coupling-tree operators."""
        so = self.spin_orbitals
        shells = info.open_shells
        ops: list[tuple[str, int, np.ndarray]] = []  # (kind, position, projected op)
        for pos, s in enumerate(shells):
            l = self.shells[s][1]
            n_el = info.occupancy[s]
            unique = n_el in (1, 4 * l + 1)
            if not unique:
                ops.append(("L", pos, self._casimir_l(V, L, S2, (s,))))
                ops.append(("S", pos, self._casimir_s(V, L, S2, (s,))))
                if l >= 2:
                    if s not in pairing_cache:
                        pairing_cache[s] = pairing_terms(so, s)
                    P = two_body(self.block(L, S2), pairing_cache[s])[0]
                    ops.append(("v", pos, V.T @ (P @ V)))
            if 1 <= pos < len(shells) - 1:
                ops.append(("Lc", pos, self._casimir_l(V, L, S2, shells[: pos + 1])))
                ops.append(("Sc", pos, self._casimir_s(V, L, S2, shells[: pos + 1])))
        n = V.shape[1]
        groups = [np.arange(n)]
        R = np.eye(n)
        for _, _, op in ops:
            new_groups = []
            for g in groups:
                if g.size == 1:
                    new_groups.append(g)
                    continue
                sub = R[:, g].T @ op @ R[:, g]
                w, U = np.linalg.eigh((sub + sub.T) / 2)
                R[:, g] = R[:, g] @ U
                # cluster equal eigenvalues (they are quantised: differences >= 1e-3)
                start = 0
                for i in range(1, g.size + 1):
                    if i == g.size or w[i] - w[i - 1] > 1e-6:
                        new_groups.append(g[start:i])
                        start = i
            groups = new_groups
        qn = {(k, p): np.einsum("ij,jk,ki->i", R.T, op, R) for k, p, op in ops}
        index_of = np.zeros(n, dtype=int)
        for g in groups:
            if g.size == 1:
                continue
            # repeated terms of equal seniority: order by the reference electrostatic operator
            tie = np.zeros((n, n))
            for pos, s in enumerate(shells):
                for cls_i, cls in enumerate(self.integral_classes):
                    if cls.pair1 == (s, s) and cls.pair2 == (s, s) and cls.k > 0:
                        tie += (
                            TIE_BREAK_WEIGHTS.get(cls.k, 0.0)
                            * (1.0 + 0.1 * pos)
                            * (V.T @ (coul[cls_i] @ V))
                        )
            sub = R[:, g].T @ tie @ R[:, g]
            w, U = np.linalg.eigh((sub + sub.T) / 2)
            R[:, g] = R[:, g] @ U
            index_of[g] = np.arange(1, g.size + 1)
        Vout = V @ R
        labels = []
        for i in range(n):
            terms, inter = [], []
            for pos, s in enumerate(shells):
                l = self.shells[s][1]
                n_el = info.occupancy[s]
                if n_el in (1, 4 * l + 1):
                    terms.append(SubshellTerm(l, 1, 1, 0))
                    continue
                Ls = _casimir_value(qn[("L", pos)][i])
                S2s = _casimir_value2(qn[("S", pos)][i])
                v = _seniority(qn[("v", pos)][i], l, n_el) if l >= 2 else _p_seniority(Ls, S2s)
                terms.append(SubshellTerm(Ls, S2s, v, 0))
            for pos in range(1, len(shells) - 1):
                inter.append(
                    (_casimir_value(qn[("Lc", pos)][i]), _casimir_value2(qn[("Sc", pos)][i]))
                )
            if index_of[i]:
                # the running index belongs to the subshell whose term repeats; with one
                # open subshell that is the only one, otherwise the first non-unique one
                pos = next(
                    (
                        p
                        for p, s in enumerate(shells)
                        if info.occupancy[s] not in (1, 4 * self.shells[s][1] + 1)
                    ),
                    0,
                )
                if terms:
                    t = terms[pos]
                    terms[pos] = SubshellTerm(t.L, t.S2, t.seniority, int(index_of[i]))
            labels.append(LSState(info.index, tuple(terms), tuple(inter), L, S2))
        return Vout, labels

    # ----------------------------------------------------------------- J blocks
    def _build_j_blocks(self) -> None:
        j2_values = sorted(
            {
                j2
                for st in self.ls_states
                for j2 in range(abs(2 * st.L - st.S2), 2 * st.L + st.S2 + 1, 2)
            }
        )
        mj_blocks: dict[int, DeterminantBlock] = {}
        for j2 in j2_values:
            parts = [b for (ml, ms2), b in self.blocks.items() if 2 * ml + ms2 == j2 and b.size]
            dets = np.concatenate([p.dets for p in parts])
            cfg = np.concatenate([p.config for p in parts])
            order = np.argsort(dets)
            mj_blocks[j2] = DeterminantBlock(10_000, j2, dets[order], cfg[order])
        columns: dict[int, list[tuple[int, np.ndarray]]] = {j2: [] for j2 in j2_values}
        state_offset = 0
        so_lminus = lower(self._lplus)
        so_sminus = lower(self._splus)
        for (L, S2), group in self.term_groups.items():
            j2s = list(range(abs(2 * L - S2), 2 * L + S2 + 1, 2))
            # lowered vectors X[(ml, ms2)]
            X: dict[tuple[int, int], np.ndarray] = {(L, S2): group.vectors}
            for ms2 in range(S2, -S2 - 1, -2):
                if ms2 != S2:
                    m = ms2 + 2
                    norm = 0.5 * np.sqrt(S2 * (S2 + 2) - m * (m - 2))
                    op = self.operator("S-", (L, m), (L, ms2), so_sminus)
                    X[(L, ms2)] = (op @ X[(L, m)]) / norm
                ml_min = max(-L, -((ms2 - min(j2s)) // 2))
                for ml in range(L - 1, ml_min - 1, -1):
                    norm = np.sqrt(L * (L + 1) - (ml + 1) * ml)
                    op = self.operator("L-", (ml + 1, ms2), (ml, ms2), so_lminus)
                    X[(ml, ms2)] = (op @ X[(ml + 1, ms2)]) / norm
            n = len(group.states)
            for j2 in j2s:
                tgt = mj_blocks[j2]
                vec = np.zeros((tgt.size, n))
                for ms2 in range(S2, -S2 - 1, -2):
                    ml2 = j2 - ms2
                    if ml2 % 2 or abs(ml2 // 2) > L:
                        continue
                    cg = clebsch_gordan2(2 * L, ml2, S2, ms2, j2, j2)
                    if cg == 0.0:
                        continue
                    src = self.block(ml2 // 2, ms2)
                    idx, found = tgt.locate(src.dets)
                    vec[idx] += cg * X[(ml2 // 2, ms2)]
                columns[j2].append((state_offset, vec))
            state_offset += n
        self.j_blocks: dict[int, JBlock] = {}
        for j2 in j2_values:
            idx = np.concatenate([off + np.arange(v.shape[1]) for off, v in columns[j2]])
            vecs = np.hstack([v for _, v in columns[j2]])
            # order: configuration (as given), then the LS states in construction order
            cfg = np.array([self.ls_states[i].config for i in idx])
            order = np.argsort(cfg, kind="stable")
            self.j_blocks[j2] = JBlock(j2, idx[order], vecs[:, order], mj_blocks[j2])
        self.mj_blocks = mj_blocks
        self._op_cache.clear()

    def mj_block(self, j2: int) -> DeterminantBlock:
        """All determinants with 2M_J = j2 (over all configurations), sorted."""
        if j2 not in self.mj_blocks:
            parts = [b for (ml, ms2), b in self.blocks.items() if 2 * ml + ms2 == j2 and b.size]
            if parts:
                dets = np.concatenate([p.dets for p in parts])
                cfg = np.concatenate([p.config for p in parts])
                order = np.argsort(dets)
                dets, cfg = dets[order], cfg[order]
            else:
                dets, cfg = np.zeros(0, dtype=np.uint64), np.zeros(0, dtype=np.int64)
            self.mj_blocks[j2] = DeterminantBlock(10_000, j2, dets, cfg)
        return self.mj_blocks[j2]

    def group_position(self, state: int) -> tuple[tuple[int, int], int]:
        return self._group_of_state[state]

    def integral_class_name(self, cls: IntegralClass) -> str:
        n = self.shell_names
        return f"R{cls.k}({n[cls.pair1[0]]}{n[cls.pair1[1]]};{n[cls.pair2[0]]}{n[cls.pair2[1]]})"


def _casimir_value(x: float) -> int:
    return int(round((-1.0 + np.sqrt(1.0 + 4.0 * max(x, 0.0))) / 2.0))


def _casimir_value2(x: float) -> int:
    """Twice the angular momentum whose Casimir eigenvalue is x."""
    return int(round(-1.0 + np.sqrt(1.0 + 4.0 * max(x, 0.0))))


def _seniority(eig: float, l: int, n_el: int) -> int:
    """Seniority v from the eigenvalue of the pairing operator A+A."""
    qz = (n_el - (2 * l + 1)) / 2.0
    x = eig + qz * (qz - 1.0)
    q = (-1.0 + np.sqrt(1.0 + 4.0 * max(x, 0.0))) / 2.0
    return int(round(2 * l + 1 - 2 * q))


def _p_seniority(L: int, S2: int) -> int:
    """Seniority of a p^N term (fixed by L and S)."""
    if L == 0 and S2 == 0:
        return 0
    if L == 1 and S2 == 1:
        return 1
    return 2 if S2 in (0, 2) else 3
