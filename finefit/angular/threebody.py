"""Three-electron scalar operators of an open subshell l^N and their action on determinants.

Judd (1966, Phys. Rev. 141, 4) showed that the second-order effects of configuration
interaction on f^N that go beyond two-electron operators are three-electron
operators built from products of orbital unit tensors of even rank,

    sum_{i != j != k} (u^(k1)(i) u^(k2)(j) u^(k3)(k))^(0),   k1, k2, k3 in {2, 4, 6},

and that, once their one- and two-electron parts are removed, they span six
operators t_i (i = 2, 3, 4, 6, 7, 8) that can be chosen to transform irreducibly
under SO(7) and G2. Here that definition is carried out literally on the l^3
determinants of one subshell:

1. The nine (f) or four (d) even-rank triple products are built as matrices on the
   l^3 determinant space from the one-body unit tensors U^(k)_q.
2. Everything in the span of the one- and two-electron scalars, i.e. of the identity
   and (U^(k) . U^(k)), k = 1 .. 2l (which span F^k, alpha, beta, gamma), is projected
   out under the trace inner product on l^3. What remains is six-dimensional for f
   (and two-dimensional for d); the tests check this.
3. The remaining space is split into common eigenvectors of the SO(2l+1) and (f) G2
   Casimir superoperators O -> sum_a [X_a, [X_a, O]], whose eigenvalues are the same
   G(W), G(U) as on states. For f this gives six distinct labels (W)(U):
   (220)(22), (222)(00), (222)(40), (420)(22), (420)(40), (420)(42), named t2, t3,
   t4, t6, t7, t8 in the order of Judd's numbering (W first, then U; t1 (000)(00)
   and t5 (400)(40) reduce to two-electron operators; from memory). For d the two
   SO(5) labels are (22) and (42).
4. Normalisation (finefit's own, NOT checked against Judd's tables): the trace of
   t^2 over the l^3 determinants equals their number (root-mean-square eigenvalue 1
   over the l^3 states); sign: the trace of t^3 over l^3 is positive.

t2 so defined is the part of Judd's t2 orthogonal to the two-electron operators
(the (220)(22) irrep also holds a two-electron scalar); the other five are
orthogonal to them by their irreps alone.

A three-body operator is fixed by its l^3 matrix: with |def> = a+_d a+_e a+_f |0>
(d < e < f) the operator sum w a+_a a+_b a+_c a_f a_e a_d has <abc|O|def> = w, so the
l^3 matrix elements in determinant order are the second-quantised coefficients and
the same coefficients act on l^N and on l^N times other subshells.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from functools import cache

import numpy as np

from finefit.angular.determinants import (
    DeterminantBlock,
    SpinOrbitals,
    _below,
    one_body,
    shell_determinants,
    term_matrices,
)
from finefit.angular.determinants import _popcount_parity as _parity
from finefit.angular.operators import _unit_tensor, split_degenerate
from finefit.angular.wigner import three_j2
from finefit.errors import FinefitError
from finefit.lazy import lazy_module

sp = lazy_module("scipy.sparse")  # imported on first use (a cached model needs none)

# Judd's names of the f-shell operators and their (W)(U) labels (Judd 1966; from memory)
F_SHELL_LABELS = {
    "T2": ((2, 2, 0), (2, 2)),
    "T3": ((2, 2, 2), (0, 0)),
    "T4": ((2, 2, 2), (4, 0)),
    "T6": ((4, 2, 0), (2, 2)),
    "T7": ((4, 2, 0), (4, 0)),
    "T8": ((4, 2, 0), (4, 2)),
}
# d shell: the two even-rank three-electron scalars, by their SO(5) label W
D_SHELL_LABELS = {"T1": ((2, 2), ()), "T2": ((4, 2), ())}


@dataclass(frozen=True)
class ThreeBodyTerms:
    """Three-body terms sum W[t, type] a+_a a+_b a+_c a_f a_e a_d (a<b<c, d<e<f)."""

    a: np.ndarray
    b: np.ndarray
    c: np.ndarray
    d: np.ndarray
    e: np.ndarray
    f: np.ndarray
    weights: np.ndarray  # (n_terms, n_types)


def three_body(
    block: DeterminantBlock, terms: ThreeBodyTerms, chunk: int = 256
) -> list[sp.csr_matrix]:
    """One matrix per term type of a three-body operator within a block of determinants.

    Annihilation a_f a_e a_d removes d, then e, then f (each sign counts the occupied
    orbitals below); creation a+_c, a+_b, a+_a adds them back in that order. Vectorised
    over (determinant, term) pairs, ``chunk`` terms at a time.
    """
    one = np.uint64(1)
    dets = block.dets
    u = {x: getattr(terms, x).astype(np.uint64) for x in "abcdef"}
    gone = (one << u["d"]) | (one << u["e"]) | (one << u["f"])
    made = (one << u["a"]) | (one << u["b"]) | (one << u["c"])
    rows, cols, term_idx, signs = [], [], [], []
    for lo in range(0, terms.a.size, chunk):
        t_sl = slice(lo, lo + chunk)
        hit = (dets[:, None] & gone[None, t_sl]) == gone[None, t_sl]
        i_det, i_t = np.nonzero(hit)
        if i_det.size == 0:
            continue
        i_t = i_t + lo
        x = dets[i_det]
        sign = np.zeros(x.size, dtype=np.int8)
        for o in ("d", "e", "f"):  # a_d acts first
            sign ^= _parity(x & _below(u[o][i_t]))
            x = x ^ (one << u[o][i_t])
        free = (x & made[i_t]) == 0
        i_det, i_t, x, sign = i_det[free], i_t[free], x[free], sign[free]
        for o in ("c", "b", "a"):  # a+_c acts first
            sign ^= _parity(x & _below(u[o][i_t]))
            x = x | (one << u[o][i_t])
        idx, found = block.locate(x)
        rows.append(idx[found])
        cols.append(i_det[found])
        term_idx.append(i_t[found])
        signs.append(sign[found])
    return term_matrices(block.size, terms.weights, rows, cols, term_idx, signs)


# ----------------------------------------------------------------- the operators on l^3
def _unit_tensors(l: int, so: SpinOrbitals, blk: DeterminantBlock) -> dict:
    """Sparse matrices of U^(k)_q = sum_i u^(k)_q(i) on the given determinants."""
    orb = so.of_shell(0)
    out = {}
    for k in range(0, 2 * l + 1):
        for q in range(-k, k + 1):
            terms = [
                (int(a), int(b), _unit_tensor(l, k, int(so.ml[a]), int(so.ml[b])))
                for a in orb
                for b in orb
                if so.ms2[a] == so.ms2[b] and so.ml[a] - so.ml[b] == q
            ]
            out[(k, q)] = one_body(blk, blk, [t for t in terms if t[2] != 0.0]).tocsr()
    return out


def _scalar_product(U: dict, k: int) -> np.ndarray:
    return sum((-1) ** q * (U[(k, q)] @ U[(k, -q)]) for q in range(-k, k + 1)).toarray()


def _triple_product(U: dict, k1: int, k2: int, k3: int) -> np.ndarray:
    """(U^(k1) U^(k2) U^(k3))^(0) = sum (k1 k2 k3; q1 q2 q3) U_q1 U_q2 U_q3 on l^3."""
    out = None
    for q1 in range(-k1, k1 + 1):
        inner = None  # sum over q2 of the 3j-weighted U_q2 U_q3, q3 = -q1 - q2
        for q2 in range(-k2, k2 + 1):
            q3 = -q1 - q2
            if abs(q3) > k3:
                continue
            c = three_j2(2 * k1, 2 * k2, 2 * k3, 2 * q1, 2 * q2, 2 * q3)
            if c != 0.0:
                term = c * (U[(k2, q2)] @ U[(k3, q3)])
                inner = term if inner is None else inner + term
        if inner is not None:
            term = U[(k1, q1)] @ inner
            out = term if out is None else out + term
    return out.toarray()


def _casimir_superoperator(
    U: dict, ranks: list[int], scale: float, G: np.ndarray, O: np.ndarray
) -> np.ndarray:
    """sum_a [X_a, [X_a, O]] = G O + O G - 2 sum_a X_a O X_a for the generators
    (2k+1)^(1/2) U^(k) of the given ranks (G = sum_a X_a X_a, the Casimir on states)."""
    middle = np.zeros_like(O)
    for k in ranks:
        for q in range(-k, k + 1):
            # (-1)^q U_q O U_-q, with O U_-q = (U_-q^T O^T)^T for a sparse U
            middle += (2 * k + 1) * (-1) ** q * (U[(k, q)] @ (U[(k, -q)].T @ O.T).T)
    return G @ O + O @ G - 2.0 * scale * middle


def _orthonormal_rows(X: np.ndarray, tol: float = 1e-12) -> np.ndarray:
    """An orthonormal basis (rows) of the span of the rows of X (from the small Gram matrix)."""
    w, V = np.linalg.eigh(X @ X.T)
    keep = w > tol * w[-1]
    return (V[:, keep].T @ X) / np.sqrt(w[keep])[:, None]


def _group_value(x: float, labels: dict) -> tuple:
    for lab, val in labels.items():
        if abs(val - x) < 1e-6:
            return lab
    raise FinefitError(f"internal: no irrep with Casimir eigenvalue {x:.6f}", "threebody")


def _so_casimir(w: tuple[int, ...], l: int) -> float:
    return sum(wi * (wi + 2 * l + 1 - 2 * (i + 1)) for i, wi in enumerate(w)) / (2 * (2 * l - 1))


def _g2_casimir(u: tuple[int, ...]) -> float:
    u1, u2 = u
    return (u1 * u1 + u1 * u2 + u2 * u2 + 5 * u1 + 4 * u2) / 12.0


@dataclass(frozen=True)
class SubshellThreeBody:
    """The three-electron scalars of l^N in a canonical orbital order (see module doc).

    ``orbitals`` lists (m_l, 2m_s) of the canonical spin-orbitals; ``triples`` the l^3
    determinants as index triples into it; ``matrices[name]`` the l^3 matrix (the
    second-quantised coefficients); ``labels[name]`` the (W, U) labels.
    """

    l: int
    orbitals: tuple[tuple[int, int], ...]
    triples: np.ndarray  # (n_det, 3) canonical orbital indices, ascending
    matrices: dict
    labels: dict


@cache
def subshell_three_body(l: int) -> SubshellThreeBody:
    """Judd's three-electron scalars of an f shell (t2 .. t8) or the two of a d shell."""
    if l not in (2, 3):
        raise FinefitError(f"three-electron operators are defined for d and f shells, not l = {l}",
                           "threebody")
    so = SpinOrbitals.for_shells([l])
    dets = np.sort(shell_determinants(so.of_shell(0), 3))
    blk = DeterminantBlock(0, 0, dets, np.zeros(dets.size, dtype=np.int64))
    U = _unit_tensors(l, so, blk)
    n = blk.size
    two = _orthonormal_rows(np.array([_scalar_product(U, k).ravel() for k in range(2 * l + 1)]))
    even = list(range(2, 2 * l + 1, 2))
    triads = sorted({tuple(sorted(t)) for t in itertools.product(even, repeat=3)
                     if abs(t[0] - t[1]) <= t[2] <= t[0] + t[1]})
    cands = []
    for t in triads:
        m = _triple_product(U, *t)
        v = ((m + m.T) / 2).ravel()
        cands.append(v - two.T @ (two @ v))
    space = _orthonormal_rows(np.array(cands))
    mats = [r.reshape(n, n) for r in space]
    # joint eigenvectors of the SO(2l+1) and G2 Casimir superoperators
    groups = [(list(range(1, 2 * l, 2)), 1.0 / (2 * l - 1))]
    if l == 3:
        groups.append(([1, 5], 0.25))
    R = np.eye(len(mats))
    groups_idx = [np.arange(len(mats))]
    values = []
    for ranks, scale in groups:
        G = scale * sum((2 * k + 1) * _scalar_product(U, k) for k in ranks)
        images = [_casimir_superoperator(U, ranks, scale, G, b) for b in mats]
        M = np.array([[np.sum(a * b) for b in images] for a in mats])
        M = (M + M.T) / 2
        groups_idx = split_degenerate(M, R, groups_idx)  # within the previous Casimir's spaces
        values.append(np.sum(R * (M @ R), axis=0))
    table = F_SHELL_LABELS if l == 3 else D_SHELL_LABELS
    w_values = {w: _so_casimir(w, l) for w, _ in table.values()}
    u_values = {u: _g2_casimir(u) for _, u in table.values() if u}
    matrices, labels = {}, {}
    for j in range(len(mats)):
        op = sum(R[i, j] * mats[i] for i in range(len(mats)))
        w = _group_value(values[0][j], w_values)
        u = _group_value(values[1][j], u_values) if l == 3 else ()
        name = next(nm for nm, lab in table.items() if lab == (w, u))
        op = op * np.sqrt(n / np.sum(op * op))
        if np.trace(op @ op @ op) < 0:
            op = -op
        op[np.abs(op) < 1e-13] = 0.0
        matrices[name] = op
        labels[name] = (w, u)
    if set(matrices) != set(table):
        raise FinefitError("internal: three-electron operators do not match their labels",
                           "threebody")
    orbitals = tuple((int(so.ml[i]), int(so.ms2[i])) for i in range(so.count))
    bits = ((dets[:, None] >> np.arange(so.count, dtype=np.uint64)) & np.uint64(1)).astype(bool)
    triples = np.array([np.flatnonzero(row) for row in bits])
    return SubshellThreeBody(l, orbitals, triples,
                             {k: matrices[k] for k in table}, {k: labels[k] for k in table})


def three_body_terms(so: SpinOrbitals, shell: int, names: list[str]) -> ThreeBodyTerms:
    """The named three-electron scalars of one subshell as terms over the active spin-orbitals.

    The canonical l^3 coefficients are carried over to the subshell's spin-orbitals;
    re-sorting each triple into ascending active order costs the parity of the sort.
    """
    orbs = so.of_shell(shell)
    l = int(so.l[orbs[0]])
    ops = subshell_three_body(l)
    where = {(int(so.ml[i]), int(so.ms2[i])): int(i) for i in orbs}
    glob = np.array([where[o] for o in ops.orbitals])
    W = np.stack([ops.matrices[nm] for nm in names], axis=-1)  # (n, n, types)
    r, c = np.nonzero(np.any(W != 0.0, axis=-1))
    w = W[r, c]
    created = glob[ops.triples[r]]
    annihilated = glob[ops.triples[c]]
    sign = np.ones(r.size)
    for arr in (created, annihilated):
        order = np.argsort(arr, axis=1)
        arr[:] = np.take_along_axis(arr, order, axis=1)
        # parity of a permutation of three: inversions
        inv = ((order[:, 0] > order[:, 1]).astype(int) + (order[:, 0] > order[:, 2])
               + (order[:, 1] > order[:, 2]))
        sign *= np.where(inv % 2, -1.0, 1.0)
    return ThreeBodyTerms(created[:, 0], created[:, 1], created[:, 2],
                          annihilated[:, 0], annihilated[:, 1], annihilated[:, 2],
                          w * sign[:, None])


def subshell_contiguous(so: SpinOrbitals, shell: int) -> bool:
    """Whether the subshell's spin-orbitals have consecutive indices (the default order)."""
    idx = so.of_shell(shell)
    return bool(idx.size) and int(idx.max() - idx.min()) == idx.size - 1


class SubshellOperator:
    """A three-body operator of one subshell applied as O (x) 1 to the other subshells.

    With the subshell's spin-orbitals consecutive, a+_a a+_b a+_c a_f a_e a_d (all in the
    subshell) passes the same number of other occupied orbitals six times, so its
    determinant matrix is the l^N matrix of O times the identity on the rest. The l^N
    matrix is built once per N (by :func:`three_body` on all l^N determinants) and then
    cut into each block: this replaces one sweep over all three-body terms per block.
    """

    def __init__(self, so: SpinOrbitals, shell: int, terms: ThreeBodyTerms) -> None:
        self.orbitals = so.of_shell(shell)
        self.mask = np.uint64(0)
        for i in self.orbitals:
            self.mask |= np.uint64(1) << np.uint64(int(i))
        self.terms = terms
        self._per_n: dict[int, tuple[np.ndarray, sp.csr_matrix, np.ndarray]] = {}

    def _shell_matrices(self, n: int) -> tuple[np.ndarray, sp.csr_matrix, np.ndarray]:
        """l^N determinants, a pattern matrix whose data are 1 + positions, and the values
        (positions x types): one sparse cut per block then serves every type."""
        if n not in self._per_n:
            dets = np.sort(shell_determinants(self.orbitals, n))
            blk = DeterminantBlock(0, 0, dets, np.zeros(dets.size, dtype=np.int64))
            mats = [m.tocoo() for m in three_body(blk, self.terms)]
            keys = np.unique(np.concatenate([m.row * dets.size + m.col for m in mats]))
            values = np.zeros((keys.size, len(mats)))
            for t, m in enumerate(mats):
                values[np.searchsorted(keys, m.row * dets.size + m.col), t] = m.data
            pattern = sp.csr_matrix(
                (np.arange(1, keys.size + 1, dtype=np.float64),
                 (keys // dets.size, keys % dets.size)),
                shape=(dets.size, dets.size),
            )
            self._per_n[n] = (dets, pattern, values)
        return self._per_n[n]

    def block_matrices(self, block: DeterminantBlock) -> list[sp.csr_matrix]:
        """The matrices (one per type) of the operator within a block of determinants."""
        n_types = self.terms.weights.shape[1]
        dets = block.dets
        part = dets & self.mask
        rest = dets & ~self.mask
        count = np.bitwise_count(part).astype(np.int64)
        rows, cols, vals = [], [], []
        for n in np.unique(count[count >= 3]):
            sel = np.flatnonzero(count == n)
            shell_dets, pattern, values = self._shell_matrices(int(n))
            loc = np.searchsorted(shell_dets, part[sel])
            # one cut for the whole block; keep the pairs with the same other subshells
            sub = pattern[loc][:, loc].tocoo()
            same = rest[sel[sub.row]] == rest[sel[sub.col]]
            rows.append(sel[sub.row[same]])
            cols.append(sel[sub.col[same]])
            vals.append(values[sub.data[same].astype(np.int64) - 1])
        if not rows:
            return [sp.csr_matrix((block.size, block.size)) for _ in range(n_types)]
        r, c, v = np.concatenate(rows), np.concatenate(cols), np.vstack(vals)
        # one sort into CSR order (the pairs are distinct), shared by every type
        base = sp.csr_matrix((np.arange(1, r.size + 1, dtype=np.float64), (r, c)),
                             shape=(block.size, block.size))
        perm = base.data.astype(np.int64) - 1
        return [
            sp.csr_matrix((v[perm, t], base.indices, base.indptr), shape=base.shape)
            for t in range(n_types)
        ]
