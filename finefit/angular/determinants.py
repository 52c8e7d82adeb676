"""Slater determinants as bit strings, and one- and two-body operators acting on them.

A determinant is the ordered product of creation operators of its occupied
spin-orbitals (lowest index first) acting on the vacuum; bit i of a uint64 is
spin-orbital i. Fermion signs follow from counting occupied orbitals below the
one being created or annihilated. All loops run over operator terms (at most a
few hundred); the determinants are handled as numpy arrays.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field

import numpy as np

from finefit.errors import FinefitError
from finefit.lazy import lazy_module

sp = lazy_module("scipy.sparse")  # imported on first use (a cached model needs none)

MAX_SPIN_ORBITALS = 63


@dataclass(frozen=True)
class SpinOrbitals:
    """The active spin-orbitals: for each, its subshell index, l, m_l and 2 m_s."""

    shell: np.ndarray
    l: np.ndarray
    ml: np.ndarray
    ms2: np.ndarray

    @classmethod
    def for_shells(cls, shell_l: list[int], permutation: np.ndarray | None = None) -> SpinOrbitals:
        """Spin-orbitals of the given subshells (l values), shell-major order.

        ``permutation`` reorders the spin-orbitals (used by tests to show that
        nothing depends on the enumeration order).
        """
        rows = [
            (s, l, ml, ms2)
            for s, l in enumerate(shell_l)
            for ml in range(l, -l - 1, -1)
            for ms2 in (1, -1)
        ]
        if len(rows) > MAX_SPIN_ORBITALS:
            raise FinefitError(
                f"{len(rows)} active spin-orbitals exceed the engine's limit of "
                f"{MAX_SPIN_ORBITALS}; remove a subshell",
                "configurations",
            )
        arr = np.array(rows, dtype=np.int64).reshape(-1, 4)
        if permutation is not None:
            arr = arr[np.asarray(permutation)]
        return cls(arr[:, 0].copy(), arr[:, 1].copy(), arr[:, 2].copy(), arr[:, 3].copy())

    @property
    def count(self) -> int:
        return int(self.shell.size)

    def of_shell(self, s: int) -> np.ndarray:
        return np.flatnonzero(self.shell == s)


def shell_determinants(orbitals: np.ndarray, n_electrons: int) -> np.ndarray:
    """All bit strings with ``n_electrons`` bits among the given orbital indices."""
    combos = list(itertools.combinations(orbitals.tolist(), n_electrons))
    out = np.zeros(len(combos), dtype=np.uint64)
    for j in range(n_electrons):
        out |= np.left_shift(np.uint64(1), np.array([c[j] for c in combos], dtype=np.uint64))
    return out


def configuration_determinants(so: SpinOrbitals, occupancies: list[int]) -> np.ndarray:
    """All determinants of one configuration (occupancy per active subshell)."""
    dets = np.zeros(1, dtype=np.uint64)
    for s, n in enumerate(occupancies):
        part = shell_determinants(so.of_shell(s), n)
        dets = (dets[:, None] | part[None, :]).ravel()
    return dets


def quantum_numbers(dets: np.ndarray, so: SpinOrbitals) -> tuple[np.ndarray, np.ndarray]:
    """M_L and 2 M_S of each determinant."""
    bits = ((dets[:, None] >> np.arange(so.count, dtype=np.uint64)) & np.uint64(1)).astype(np.int64)
    return bits @ so.ml, bits @ so.ms2


def _popcount_parity(x: np.ndarray) -> np.ndarray:
    return (np.bitwise_count(x) & 1).astype(np.int8)


def _below(i: int | np.ndarray) -> np.ndarray:
    return (np.left_shift(np.uint64(1), np.asarray(i, dtype=np.uint64))) - np.uint64(1)


@dataclass
class DeterminantBlock:
    """Determinants of fixed (M_L, 2M_S) over all configurations, sorted by bit string."""

    ml: int
    ms2: int
    dets: np.ndarray
    config: np.ndarray
    _cache: dict = field(default_factory=dict, repr=False)

    @property
    def size(self) -> int:
        return int(self.dets.size)

    def locate(self, new: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Index of each bit string in this block and whether it is present."""
        if self.size == 0:
            return np.zeros(new.shape, dtype=np.int64), np.zeros(new.shape, dtype=bool)
        idx = np.searchsorted(self.dets, new)
        idx_c = np.minimum(idx, self.size - 1)
        found = self.dets[idx_c] == new
        return idx_c, found


def one_body(
    src: DeterminantBlock,
    tgt: DeterminantBlock,
    terms: list[tuple[int, int, float]],
) -> sp.csr_matrix:
    """Matrix (tgt x src) of sum_t value_t a+_{a_t} a_{b_t}."""
    rows, cols, vals = [], [], []
    one = np.uint64(1)
    for a, b, value in terms:
        if value == 0.0:
            continue
        bit_a, bit_b = one << np.uint64(a), one << np.uint64(b)
        has_b = (src.dets & bit_b) != 0
        if a != b:
            has_b &= (src.dets & bit_a) == 0
        cols_t = np.flatnonzero(has_b)
        if cols_t.size == 0:
            continue
        d = src.dets[cols_t]
        sign = _popcount_parity(d & _below(b))
        d1 = d ^ bit_b
        sign ^= _popcount_parity(d1 & _below(a))
        new = d1 | bit_a
        idx, found = tgt.locate(new)
        rows.append(idx[found])
        cols.append(cols_t[found])
        vals.append(np.where(sign[found] == 1, -value, value))
    if not rows:
        return sp.csr_matrix((tgt.size, src.size))
    return sp.csr_matrix(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
        shape=(tgt.size, src.size),
    )


@dataclass(frozen=True)
class TwoBodyTerms:
    """Antisymmetrised two-body terms sum W[t, type] a+_a a+_b a_d a_c (a<b, c<d).

    The terms are grouped by the annihilated pair (c, d) so that each group is
    applied to all determinants at once.
    """

    a: np.ndarray
    b: np.ndarray
    c: np.ndarray
    d: np.ndarray
    weights: np.ndarray  # (n_terms, n_types)

    def groups(self):
        key = self.c * 64 + self.d
        order = np.argsort(key, kind="stable")
        key_sorted = key[order]
        bounds = np.flatnonzero(np.diff(key_sorted)) + 1
        for chunk in np.split(order, bounds):
            if chunk.size:
                yield int(self.c[chunk[0]]), int(self.d[chunk[0]]), chunk


def two_body(block: DeterminantBlock, terms: TwoBodyTerms) -> list[sp.csr_matrix]:
    """One matrix per term type of the two-body operator within a block."""
    rows, cols, term_idx, signs = [], [], [], []
    one = np.uint64(1)
    dets = block.dets
    for c, d, chunk in terms.groups():
        bit_c, bit_d = one << np.uint64(c), one << np.uint64(d)
        sel = np.flatnonzero(((dets & bit_c) != 0) & ((dets & bit_d) != 0))
        if sel.size == 0:
            continue
        det = dets[sel]
        sign = _popcount_parity(det & _below(c))
        d0 = det ^ bit_c
        sign ^= _popcount_parity(d0 & _below(d))
        d1 = d0 ^ bit_d
        ta = terms.a[chunk].astype(np.uint64)
        tb = terms.b[chunk].astype(np.uint64)
        bit_a = one << ta
        bit_b = one << tb
        free = (d1[:, None] & (bit_a | bit_b)[None, :]) == 0
        s2 = sign[:, None] ^ _popcount_parity(d1[:, None] & _below(tb)[None, :])
        d2 = d1[:, None] | bit_b[None, :]
        s2 ^= _popcount_parity(d2 & _below(ta)[None, :])
        new = d2 | bit_a[None, :]
        idx, found = block.locate(new)
        ok = free & found
        r_i, t_i = np.nonzero(ok)
        rows.append(idx[r_i, t_i])
        cols.append(sel[r_i])
        term_idx.append(chunk[t_i])
        signs.append(s2[r_i, t_i])
    return term_matrices(block.size, terms.weights, rows, cols, term_idx, signs)


def term_matrices(
    size: int,
    weights: np.ndarray,
    rows: list[np.ndarray],
    cols: list[np.ndarray],
    term_idx: list[np.ndarray],
    signs: list[np.ndarray],
) -> list[sp.csr_matrix]:
    """One sparse matrix per term type from the (row, column, term, fermion sign) pieces
    that applying a many-body operator's terms to a block's determinants gives."""
    n_types = weights.shape[1]
    if not rows:
        return [sp.csr_matrix((size, size)) for _ in range(n_types)]
    rows_a = np.concatenate(rows)
    cols_a = np.concatenate(cols)
    term_a = np.concatenate(term_idx)
    sign_a = np.where(np.concatenate(signs) == 1, -1.0, 1.0)
    out = []
    for t in range(n_types):
        w = weights[term_a, t] * sign_a
        nz = w != 0.0
        out.append(sp.csr_matrix((w[nz], (rows_a[nz], cols_a[nz])), shape=(size, size)))
    return out
