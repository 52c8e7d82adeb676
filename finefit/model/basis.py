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

import itertools
import os
from collections import Counter
from dataclasses import dataclass, field
from math import comb

import numpy as np

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
    split_degenerate,
    splus_terms,
    subshell_casimir_terms,
)
from finefit.angular.threebody import (
    D_SHELL_LABELS,
    F_SHELL_LABELS,
    SubshellOperator,
    subshell_contiguous,
    three_body,
    three_body_terms,
)
from finefit.angular.wigner import clebsch_gordan2
from finefit.errors import FinefitError
from finefit.lazy import lazy_module
from finefit.notation.configuration import Configuration, parse_configuration
from finefit.notation.terms import subshell_term_counts

sp = lazy_module("scipy.sparse")  # imported on first use (a cached model needs none)

# Running indices of repeated terms of equal seniority are ordered by the energy of
# this reference electrostatic operator of the subshell (weights of F^k, k = 2, 4, 6).
TIE_BREAK_WEIGHTS = {2: 1.0, 4: 0.25, 6: 1.0 / 9.0, 8: 1.0 / 16.0, 10: 1.0 / 25.0, 12: 1.0 / 36.0}


# Default ceiling of the size guard (GiB); FINEFIT_MEMORY_LIMIT_GB overrides it.
DEFAULT_MEMORY_LIMIT_GB = 4.0


@dataclass(frozen=True)
class SizeEstimate:
    """What building a configuration set will take, known before anything is built.

    The memory counts the dense highest-weight problem of the largest (M_L, M_S)
    block of one configuration (the matrix, its eigenvectors and LAPACK's
    divide-and-conquer workspace of about 2 n^2 more, dsyevd documentation: 4 n^2
    doubles) plus, per J, the exact-J vectors (determinants with M_J = J times the
    number of levels) and about 16 coefficient matrices of the levels (common
    practice for a rough figure).
    """

    n_determinants: int
    largest_block: int  # determinants of one configuration in one (M_L >= 0, 2M_S >= 0) block
    memory_bytes: int

    def describe(self) -> str:
        return (f"{self.n_determinants} determinants, largest block {self.largest_block} "
                f"determinants, about {self.memory_bytes / 2**30:.2f} GiB of memory")


def memory_limit_gb() -> float:
    """The size guard's limit: ``FINEFIT_MEMORY_LIMIT_GB`` if set to a positive number."""
    text = os.environ.get("FINEFIT_MEMORY_LIMIT_GB", "").strip()
    try:
        value = float(text)
    except ValueError:
        return DEFAULT_MEMORY_LIMIT_GB
    return value if value > 0 else DEFAULT_MEMORY_LIMIT_GB


def _shell_counts(l: int, n_el: int) -> Counter:
    """Number of determinants of l^N per (M_L, 2M_S)."""
    orbitals = [(ml, ms2) for ml in range(-l, l + 1) for ms2 in (1, -1)]
    return Counter(
        (sum(o[0] for o in c), sum(o[1] for o in c))
        for c in itertools.combinations(orbitals, n_el)
    )


def estimate_size(
    shells: list[tuple[int, int]], occupancies: list[tuple[int, ...]]
) -> SizeEstimate:
    """Determinants, largest block and peak memory of a set (per-subshell counts convolved)."""
    total, largest = 0, 0
    per_mj: Counter = Counter()  # determinants per 2M_J over the whole set
    for occ in occupancies:
        counts = Counter({(0, 0): 1})
        n_det = 1
        for (_, l), k in zip(shells, occ, strict=True):
            n_det *= comb(4 * l + 2, k)
            if k in (0, 4 * l + 2):
                continue
            part = _shell_counts(l, k)
            new: Counter = Counter()
            for (a, b), x in counts.items():
                for (c, d), y in part.items():
                    new[(a + c, b + d)] += x * y
            counts = new
        total += n_det
        largest = max([largest] + [x for (ml, ms2), x in counts.items() if ml >= 0 and ms2 >= 0])
        for (ml, ms2), x in counts.items():
            per_mj[2 * ml + ms2] += x
    doubles = 4 * largest * largest
    for mj2, n_mj in per_mj.items():
        if mj2 >= 0:
            levels = n_mj - per_mj.get(mj2 + 2, 0)  # states of J = M_J
            doubles += n_mj * levels + 16 * levels * levels
    return SizeEstimate(total, largest, 8 * doubles)


@dataclass(frozen=True)
class SubshellTerm:
    """The term of one open subshell: L, 2S, seniority v and its repeated-term index.

    ``index`` is the index the level compilations give a term that occurs more than
    once in l^N (Nielson & Koster 1963): the copies of one LS term numbered 1, 2, ...
    in the order of seniority v, then (f shells) Racah's SO(7) label W, then the G2
    label U; 0 for a term that occurs once. ``w`` and ``u`` are Racah's labels
    (empty where they were not needed to tell copies apart).
    """

    L: int
    S2: int
    seniority: int
    index: int = 0
    w: tuple[int, ...] = ()
    u: tuple[int, ...] = ()


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
    column3: int = -1  # weight column in the stacked three-body terms (-1: none)


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
        self.size = estimate_size(self.shells, [c.occupancy for c in infos])
        limit = memory_limit_gb()
        if self.size.memory_bytes > limit * 2**30:
            raise FinefitError(
                f"{' + '.join(texts)} is too large to build: {self.size.describe()}, above "
                f"the limit of {limit:g} GiB (set FINEFIT_MEMORY_LIMIT_GB to raise it, or "
                "remove a configuration or subshell)",
                "configurations",
            )
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
        three_parts = []
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
            if l in (2, 3) and any(3 <= n <= 4 * l - 1 for n in occ):
                # three-electron scalars (Judd 1966): only where the subshell has 3 electrons
                # and 3 holes somewhere, so the engine builds and applies them only there
                names3 = list(F_SHELL_LABELS if l == 3 else D_SHELL_LABELS)
                start = sum(p.terms.weights.shape[1] for p in three_parts)
                three_parts.append(SubshellOperator(so, s, three_body_terms(so, s, names3)))
                for j, nm in enumerate(names3):
                    ops.append(EffectiveOperator(s, nm, "T", int(nm[1:]), 3, (), -1, start + j))
        self.effective_operators: list[EffectiveOperator] = ops
        self._three_parts: list = three_parts
        # one sweep per block for the Coulomb and the effective two-body terms: they act on
        # (nearly) the same spin-orbital quadruples, so the stacked list costs about as
        # much as the Coulomb terms alone
        self._n_coulomb = len(self.integral_classes)
        self._block_terms = (
            stack_two_body([self._coulomb_terms, stack_two_body(parts)])
            if parts
            else self._coulomb_terms
        )

    def _three_body_matrices(self, blk: DeterminantBlock) -> list:
        """Block matrices of the three-electron operators (O (x) 1 where the subshell's
        spin-orbitals are consecutive, else the general sweep over all terms)."""
        out: list = []
        for part in self._three_parts:
            if subshell_contiguous(self.spin_orbitals, int(self.spin_orbitals.shell[
                    part.orbitals[0]])):
                out.extend(part.block_matrices(blk))
            else:
                out.extend(three_body(blk, part.terms))
        return out

    def _effective_matrices(
        self, V: np.ndarray, L: int, S2: int, two: list, three: list
    ) -> dict[tuple[int, str], np.ndarray]:
        """V^T O V for every effective operator in the block (M_L = L, 2M_S = 2S); ``two``
        and ``three`` are the block matrices of the stacked two- and three-body terms."""
        if not self.effective_operators:
            return {}
        out = {}
        for op in self.effective_operators:
            m = two[op.column] if op.column >= 0 else None
            if op.column3 >= 0:
                m = three[op.column3]
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
                    both = two_body(blk, self._block_terms)
                    coul, eff = both[: self._n_coulomb], both[self._n_coulomb :]
                    eff3 = self._three_body_matrices(blk)
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
            group.effective = self._effective_matrices(Vall, L, S2, eff, eff3)
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
            groups = split_degenerate(op, R, groups)
        # f shells: copies of a term with equal seniority are told apart by Racah's SO(7)
        # and G2 labels W and U (only built where such copies remain degenerate)
        if any(g.size > 1 for g in groups):
            for pos, s in enumerate(shells):
                l = self.shells[s][1]
                if l != 3 or info.occupancy[s] in (1, 4 * l + 1):
                    continue
                for kind, group in (("W", "SO"), ("U", "G2")):
                    key = (s, group)
                    if key not in pairing_cache:
                        pairing_cache[key] = subshell_casimir_terms(so, s, group)
                    one, two = pairing_cache[key]
                    blk = self.block(L, S2)
                    M = two_body(blk, two)[0] + one_body(blk, blk, one)
                    op = V.T @ (M @ V)
                    ops.append((kind, pos, op))
                    groups = split_degenerate(op, R, groups)
        # diagonal of R^T op R as one matrix product (a three-operand einsum is ~10x slower)
        qn = {(k, p): np.sum(R * (op @ R), axis=0) for k, p, op in ops}
        index_of = np.zeros(n, dtype=int)
        for g in groups:
            if g.size == 1:
                continue
            # copies still degenerate (f shells beyond what v, W, U separate): order them by
            # the reference electrostatic operator of the subshell
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
        caps = [4 * self.shells[s][1] + 2 for s in shells]
        repeated = [
            p for p, s in enumerate(shells) if info.occupancy[s] not in (1, caps[p] - 1)
        ]
        tie_pos = repeated[0] if repeated else 0
        raw = []  # per state: per position (L, 2S, v, W, U, tie rank)
        for i in range(n):
            terms = []
            for pos, s in enumerate(shells):
                l = self.shells[s][1]
                n_el = info.occupancy[s]
                if n_el in (1, 4 * l + 1):
                    terms.append((l, 1, 1, (), (), 0))
                    continue
                Ls = _casimir_value(qn[("L", pos)][i])
                S2s = _casimir_value2(qn[("S", pos)][i])
                v = _seniority(qn[("v", pos)][i], l, n_el) if l >= 2 else _p_seniority(Ls, S2s)
                w = _r7_label(qn[("W", pos)][i]) if ("W", pos) in qn else ()
                u = _g2_label(qn[("U", pos)][i]) if ("U", pos) in qn else ()
                terms.append((Ls, S2s, v, w, u, int(index_of[i]) if pos == tie_pos else 0))
            raw.append(terms)
        labels = []
        for i in range(n):
            terms, inter = [], []
            for pos, s in enumerate(shells):
                l = self.shells[s][1]
                n_el = info.occupancy[s]
                Ls, S2s, v, w, u, tie_rank = raw[i][pos]
                index = 0
                if n_el not in (1, 4 * l + 1) and subshell_term_counts(l, n_el)[(Ls, S2s)] > 1:
                    # the copies of this subshell term all occur in this block (their coupling
                    # to the rest depends only on L and S): rank among them
                    keys = sorted(
                        {raw[j][pos][2:] for j in range(n) if raw[j][pos][:2] == (Ls, S2s)}
                    )
                    index = keys.index(raw[i][pos][2:]) + 1
                terms.append(SubshellTerm(Ls, S2s, v, index, w, u))
            for pos in range(1, len(shells) - 1):
                inter.append(
                    (_casimir_value(qn[("Lc", pos)][i]), _casimir_value2(qn[("Sc", pos)][i]))
                )
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


def _lookup(x: float, table: dict[tuple[int, ...], float], what: str) -> tuple[int, ...]:
    for label, value in table.items():
        if abs(value - x) < 1e-6:
            return label
    raise FinefitError(f"no {what} label has Casimir eigenvalue {x:.6f}", what)  # never expected


# Casimir eigenvalues of the SO(7) and G2 irreducible representations of f^N
# (CONVENTIONS.md; Racah 1949, Phys. Rev. 76, 1352; Wybourne 1965)
_R7 = {
    w: (w[0] * (w[0] + 5) + w[1] * (w[1] + 3) + w[2] * (w[2] + 1)) / 10.0
    for w in [(0, 0, 0), (1, 0, 0), (1, 1, 0), (2, 0, 0), (1, 1, 1), (2, 1, 0), (2, 1, 1),
              (2, 2, 0), (2, 2, 1), (2, 2, 2)]
}
_G2 = {
    u: (u[0] ** 2 + u[0] * u[1] + u[1] ** 2 + 5 * u[0] + 4 * u[1]) / 12.0
    for u in [(0, 0), (1, 0), (1, 1), (2, 0), (2, 1), (2, 2), (3, 0), (3, 1), (4, 0)]
}


def _r7_label(x: float) -> tuple[int, ...]:
    return _lookup(x, _R7, "SO(7)")


def _g2_label(x: float) -> tuple[int, ...]:
    return _lookup(x, _G2, "G2")


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
