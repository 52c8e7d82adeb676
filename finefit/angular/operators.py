"""Spin-orbital term lists of the operators the Hamiltonian and the labels need.

One-body terms are ``(a, b, value)`` for value * a+_a a_b; two-body terms are
:class:`~finefit.angular.determinants.TwoBodyTerms`. Matrix elements follow
Slater-Condon theory with Condon & Shortley phases:
<ab|1/r12|cd> = d(ms_a,ms_c) d(ms_b,ms_d) sum_k c^k(a;c) c^k(d;b) R^k(ab,cd).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from finefit.angular.determinants import SpinOrbitals, TwoBodyTerms
from finefit.angular.wigner import clebsch_gordan2, gaunt, three_j2
from finefit.errors import FinefitError
from finefit.lazy import lazy_module

sp = lazy_module("scipy.sparse")  # imported on first use (a cached model needs none)

OneBody = list[tuple[int, int, float]]


@dataclass(frozen=True)
class IntegralClass:
    """A radial integral R^k up to its symmetries: the pairs {a,c} and {b,d} of subshells.

    R^k(ab,cd) is unchanged by swapping electrons, bra and ket, or a<->c, b<->d, so
    it is fixed by k and the unordered pair of unordered subshell pairs.
    """

    k: int
    pair1: tuple[int, int]
    pair2: tuple[int, int]

    @staticmethod
    def of(k: int, sa: int, sb: int, sc: int, sd: int) -> IntegralClass:
        p = (min(sa, sc), max(sa, sc))
        q = (min(sb, sd), max(sb, sd))
        p, q = min(p, q), max(p, q)
        return IntegralClass(k, p, q)


def _gaunt_lookup(lmax: int) -> np.ndarray:
    """G[k, l1, m1 + lmax, l2, m2 + lmax] = c^k(l1 m1; l2 m2)."""
    kmax = 2 * lmax
    w = 2 * lmax + 1
    table = np.zeros((kmax + 1, lmax + 1, w, lmax + 1, w))
    for k in range(kmax + 1):
        for l1 in range(lmax + 1):
            for l2 in range(lmax + 1):
                if (l1 + l2 + k) % 2 or k > l1 + l2 or k < abs(l1 - l2):
                    continue
                for m1 in range(-l1, l1 + 1):
                    for m2 in range(-l2, l2 + 1):
                        table[k, l1, m1 + lmax, l2, m2 + lmax] = gaunt(l1, m1, k, l2, m2)
    return table


def normalise_two_body(
    a: np.ndarray, b: np.ndarray, c: np.ndarray, d: np.ndarray, w: np.ndarray
) -> TwoBodyTerms:
    """Bring w a+_a a+_b a_d a_c to the a<b, c<d form, summing duplicates.

    ``w`` is (n_terms, n_types). Terms with a == b or c == d vanish.
    """
    keep = (a != b) & (c != d)
    a, b, c, d, w = a[keep], b[keep], c[keep], d[keep], w[keep]
    sign = np.ones(a.size)
    swap_ab = a > b
    a, b = np.where(swap_ab, b, a), np.where(swap_ab, a, b)
    sign[swap_ab] *= -1
    swap_cd = c > d
    c, d = np.where(swap_cd, d, c), np.where(swap_cd, c, d)
    sign[swap_cd] *= -1
    w = w * sign[:, None]
    key = ((a * 64 + b) * 64 + c) * 64 + d
    uniq, inverse = np.unique(key, return_inverse=True)
    acc = np.zeros((uniq.size, w.shape[1]))
    np.add.at(acc, inverse, w)
    nz = np.any(np.abs(acc) > 1e-14, axis=1)
    uniq, acc = uniq[nz], acc[nz]
    d_ = uniq % 64
    c_ = (uniq // 64) % 64
    b_ = (uniq // 4096) % 64
    a_ = uniq // 262144
    return TwoBodyTerms(a_, b_, c_, d_, acc)


def coulomb_terms(so: SpinOrbitals) -> tuple[TwoBodyTerms, list[IntegralClass]]:
    """The electron repulsion over the active spin-orbitals, one type per radial integral.

    Returns the antisymmetrised terms W[t, class] = <ab|cd> - <ab|dc> split by the
    radial integral each part multiplies, and the list of those integrals.
    """
    n = so.count
    lmax = int(so.l.max())
    G = _gaunt_lookup(lmax)
    ia, ib = np.triu_indices(n, 1)
    ml_sum = so.ml[ia] + so.ml[ib]
    ms_sum = so.ms2[ia] + so.ms2[ib]
    key = (ml_sum + 64) * 16 + (ms_sum + 8)
    order = np.argsort(key, kind="stable")
    bounds = np.flatnonzero(np.diff(key[order])) + 1
    created, annihilated = [], []
    for group in np.split(order, bounds):
        gi, gj = np.meshgrid(group, group, indexing="ij")
        created.append(gi.ravel())
        annihilated.append(gj.ravel())
    p = np.concatenate(created)
    q = np.concatenate(annihilated)
    a, b, c, d = ia[p], ib[p], ia[q], ib[q]
    sh, l, ml, ms = so.shell, so.l, so.ml + lmax, so.ms2
    n_shell = int(sh.max()) + 1
    classes: dict[IntegralClass, int] = {}
    kmax = 2 * lmax
    lookup = -np.ones((kmax + 1, n_shell, n_shell, n_shell, n_shell), dtype=np.int64)
    for k in range(kmax + 1):
        for s1 in range(n_shell):
            for s2 in range(n_shell):
                for s3 in range(n_shell):
                    for s4 in range(n_shell):
                        cls = IntegralClass.of(k, s1, s2, s3, s4)
                        lookup[k, s1, s2, s3, s4] = classes.setdefault(cls, len(classes))
    t_rows, t_cols, t_vals = [], [], []
    direct_ok = (ms[a] == ms[c]) & (ms[b] == ms[d])
    exch_ok = (ms[a] == ms[d]) & (ms[b] == ms[c])
    term_index = np.arange(a.size)
    for k in range(kmax + 1):
        dv = G[k, l[a], ml[a], l[c], ml[c]] * G[k, l[d], ml[d], l[b], ml[b]] * direct_ok
        ev = G[k, l[a], ml[a], l[d], ml[d]] * G[k, l[c], ml[c], l[b], ml[b]] * exch_ok
        nz = dv != 0
        t_rows.append(term_index[nz])
        t_cols.append(lookup[k, sh[a[nz]], sh[b[nz]], sh[c[nz]], sh[d[nz]]])
        t_vals.append(dv[nz])
        nz = ev != 0
        t_rows.append(term_index[nz])
        t_cols.append(lookup[k, sh[a[nz]], sh[b[nz]], sh[d[nz]], sh[c[nz]]])
        t_vals.append(-ev[nz])
    rows = np.concatenate(t_rows)
    cols = np.concatenate(t_cols)
    vals = np.concatenate(t_vals)
    used = np.unique(cols)
    remap = -np.ones(len(classes), dtype=np.int64)
    remap[used] = np.arange(used.size)
    class_list = [None] * used.size
    for cls, idx in classes.items():
        if remap[idx] >= 0:
            class_list[remap[idx]] = cls
    w = sp.coo_matrix((vals, (rows, remap[cols])), shape=(a.size, used.size)).toarray()
    live = np.any(w != 0, axis=1)
    terms = TwoBodyTerms(a[live], b[live], c[live], d[live], w[live])
    return terms, class_list


def pairing_terms(so: SpinOrbitals, shell: int) -> TwoBodyTerms:
    """The seniority (quasi-spin) operator A+A of one subshell.

    A+ = sum_m (-1)^(l-m) a+_{m up} a+_{-m down} creates an L = 0, S = 0 pair.

    Its eigenvalue on a state of seniority v with N electrons is Q(Q+1) - Qz(Qz-1),
    Q = (2l+1-v)/2, Qz = (N-2l-1)/2 (Racah 1943; Judd, Operator Techniques, 1963).
    """
    idx = {(int(so.ml[i]), int(so.ms2[i])): int(i) for i in so.of_shell(shell)}
    l = int(so.l[so.of_shell(shell)[0]])
    rows = []
    for m in range(-l, l + 1):
        for mp in range(-l, l + 1):
            phase = (-1) ** ((l - m) + (l - mp))
            # a+_{m up} a+_{-m down} a_{-m' down} a_{m' up}:
            # a = m up, b = -m down, c = m' up, d = -m' down
            rows.append((idx[(m, 1)], idx[(-m, -1)], idx[(mp, 1)], idx[(-mp, -1)], phase))
    arr = np.array(rows, dtype=np.int64)
    return normalise_two_body(arr[:, 0], arr[:, 1], arr[:, 2], arr[:, 3], arr[:, 4:5].astype(float))


def lz_terms(so: SpinOrbitals, shells: list[int]) -> OneBody:
    return [(int(i), int(i), float(so.ml[i])) for i in range(so.count) if so.shell[i] in shells]


def sz_terms(so: SpinOrbitals, shells: list[int]) -> OneBody:
    return [
        (int(i), int(i), 0.5 * float(so.ms2[i])) for i in range(so.count) if so.shell[i] in shells
    ]


def _orbital_index(so: SpinOrbitals) -> dict[tuple[int, int, int], int]:
    return {(int(so.shell[i]), int(so.ml[i]), int(so.ms2[i])): int(i) for i in range(so.count)}


def lplus_terms(so: SpinOrbitals, shells: list[int]) -> OneBody:
    """Orbital raising operator L+ restricted to the given subshells."""
    idx = _orbital_index(so)
    out = []
    for (s, ml, ms2), i in idx.items():
        if s not in shells:
            continue
        l = int(so.l[i])
        if ml < l:
            out.append((idx[(s, ml + 1, ms2)], i, float(np.sqrt(l * (l + 1) - ml * (ml + 1)))))
    return out


def splus_terms(so: SpinOrbitals, shells: list[int]) -> OneBody:
    """Spin raising operator S+ restricted to the given subshells."""
    idx = _orbital_index(so)
    return [
        (idx[(s, ml, 1)], i, 1.0) for (s, ml, ms2), i in idx.items() if s in shells and ms2 == -1
    ]


def lower(terms: OneBody) -> OneBody:
    """Hermitian conjugate of a real one-body operator (raising -> lowering)."""
    return [(b, a, v) for a, b, v in terms]


def spin_orbit_terms(so: SpinOrbitals, shell: int) -> OneBody:
    """sum_i l_i . s_i over the electrons of one subshell: lz sz + (l+ s- + l- s+)/2."""
    idx = _orbital_index(so)
    out = []
    for (s, ml, ms2), i in idx.items():
        if s != shell:
            continue
        l = int(so.l[i])
        out.append((i, i, ml * ms2 / 2.0))
        if ms2 == 1 and ml < l:  # l+ s-: (ml, +1/2) -> (ml+1, -1/2)
            out.append((idx[(s, ml + 1, -1)], i, 0.5 * np.sqrt(l * (l + 1) - ml * (ml + 1))))
        if ms2 == -1 and ml > -l:  # l- s+: (ml, -1/2) -> (ml-1, +1/2)
            out.append((idx[(s, ml - 1, 1)], i, 0.5 * np.sqrt(l * (l + 1) - ml * (ml - 1))))
    return out


def j_subshell_transform(l: int) -> dict[tuple[int, int], list[tuple[int, int, float]]]:
    """<l ml 1/2 ms | j mj> for j = l -+ 1/2: maps (2j, 2mj) to [(ml, 2ms, coefficient)]."""
    out: dict[tuple[int, int], list[tuple[int, int, float]]] = {}
    for j2 in (2 * l - 1, 2 * l + 1):
        if j2 < 0:
            continue
        for mj2 in range(-j2, j2 + 1, 2):
            comps = []
            for ms2 in (1, -1):
                ml2 = mj2 - ms2
                if ml2 % 2 or abs(ml2 // 2) > l:
                    continue
                cg = clebsch_gordan2(2 * l, ml2, 1, ms2, j2, mj2)
                if cg != 0.0:
                    comps.append((ml2 // 2, ms2, cg))
            out[(j2, mj2)] = comps
    return out


def j_subshell_operators(so: SpinOrbitals, shell: int, j2: int) -> tuple[OneBody, OneBody, OneBody]:
    """Number, J_z and J_+ of the electrons of one subshell in its j = l -+ 1/2 part.

    Built as P_j o P_j with P_j the projector on the j orbitals (in the m_l m_s basis),
    so they act on determinants of m_l m_s spin-orbitals.
    """
    idx = _orbital_index(so)
    l = int(so.l[so.of_shell(shell)[0]])
    tr = j_subshell_transform(l)
    states = {mj2: tr[(j2, mj2)] for (jj, mj2) in tr if jj == j2}

    def outer(weights: dict[tuple[int, int], float]) -> OneBody:
        # weights[(mj2_to, mj2_from)] -> sum over components of |j mj_to><j mj_from|
        acc: dict[tuple[int, int], float] = {}
        for (mt, mf), wgt in weights.items():
            for ml_t, ms_t, c_t in states[mt]:
                for ml_f, ms_f, c_f in states[mf]:
                    key = (idx[(shell, ml_t, ms_t)], idx[(shell, ml_f, ms_f)])
                    acc[key] = acc.get(key, 0.0) + wgt * c_t * c_f
        return [(a, b, v) for (a, b), v in acc.items() if abs(v) > 1e-15]

    number = outer({(m, m): 1.0 for m in states})
    jz = outer({(m, m): m / 2.0 for m in states})
    jplus = outer(
        {(m + 2, m): 0.5 * np.sqrt(j2 * (j2 + 2) - m * (m + 2)) for m in states if m + 2 in states}
    )
    return number, jz, jplus


def _unit_tensor(l: int, k: int, m: int, mp: int) -> float:
    """<l m|u^k_q|l m'> with <l||u^k||l> = 1: (-1)^(l-m) (l k l; -m q m'), q = m - m'."""
    q = m - mp
    if abs(q) > k:
        return 0.0
    sign = -1.0 if (l - m) % 2 else 1.0
    return sign * three_j2(2 * l, 2 * k, 2 * l, -2 * m, 2 * q, 2 * mp)


def subshell_casimir_terms(
    so: SpinOrbitals, shell: int, group: str
) -> tuple[OneBody, TwoBodyTerms]:
    """Casimir operator of SO(2l+1) (``"SO"``) or, for f shells, G2 (``"G2"``) of one subshell.

    Both are sums (2k+1)(U^k . U^k) of the orbital unit tensors U^k = sum_i u^k(i)
    (the weight 2k+1 makes the components orthonormal under the trace): the
    generators of SO(2l+1) are the U^k of odd k = 1, 3, ..., 2l-1, those of G2
    (l = 3) are U^1 and U^5 (Racah 1949, Phys. Rev. 76, 1352; Judd, Operator
    Techniques in Atomic Spectroscopy, 1963). The scale is chosen so that the
    eigenvalues are G(R7) = (w1(w1+5) + w2(w2+3) + w3(w3+1))/10 and
    G(G2) = (u1^2 + u1 u2 + u2^2 + 5 u1 + 4 u2)/12 (for SO(2l+1) in general
    sum_i w_i (w_i + 2l + 1 - 2i) / (2(2l - 1))).

    Returns the one-body part (a multiple of the subshell's number operator) and
    the two-body terms.
    """
    orbitals = [int(i) for i in so.of_shell(shell)]
    l = int(so.l[orbitals[0]])
    if group == "SO":
        ranks = list(range(1, 2 * l, 2))
        scale = 1.0 / (2 * l - 1)  # one electron: sum (2k+1)/(2l+1) = l -> l/(2l-1)
    elif group == "G2":
        if l != 3:
            raise FinefitError(f"G2 is defined for f shells only, not l = {l}", group)
        ranks = [1, 5]
        scale = 1.0 / 4.0  # one electron: (3 + 11)/7 = 2 -> G(G2)(10) = 1/2
    else:
        raise FinefitError(f"unknown group {group!r}: use 'SO' or 'G2'", group)
    # U_q U_-q = sum u_ab u_cd (a+_a a+_c a_d a_b + delta_bc a+_a a_d); the one-body part of a
    # scalar within one subshell is a multiple of N: (2k+1)/(2l+1) per rank and electron
    per_electron = scale * sum(2 * k + 1 for k in ranks) / (2 * l + 1)
    one: OneBody = [(i, i, per_electron) for i in orbitals]
    ml = {i: int(so.ml[i]) for i in orbitals}
    ms = {i: int(so.ms2[i]) for i in orbitals}
    rows = []
    for a in orbitals:
        for c in orbitals:
            if ms[a] != ms[c]:
                continue
            q = ml[a] - ml[c]
            for b in orbitals:
                for d in orbitals:
                    if ms[b] != ms[d] or ml[b] - ml[d] != -q:
                        continue
                    w = 0.0
                    for k in ranks:
                        w += (2 * k + 1) * (
                            _unit_tensor(l, k, ml[a], ml[c]) * _unit_tensor(l, k, ml[b], ml[d])
                        )
                    w *= -scale if q % 2 else scale
                    if w != 0.0:
                        rows.append((a, b, c, d, w))
    if not rows:
        return one, TwoBodyTerms(*(np.zeros(0, dtype=np.int64),) * 4, np.zeros((0, 1)))
    arr = np.array([r[:4] for r in rows], dtype=np.int64)
    w = np.array([[r[4]] for r in rows])
    return one, normalise_two_body(arr[:, 0], arr[:, 1], arr[:, 2], arr[:, 3], w)


def split_degenerate(op: np.ndarray, R: np.ndarray, groups: list[np.ndarray]) -> list[np.ndarray]:
    """Diagonalise ``op`` inside each group of still-degenerate columns of ``R`` (in place).

    Returns the finer groups: columns whose eigenvalues agree within 1e-6 (the operators
    used here have quantised eigenvalues, differences >= 1e-3) stay together.
    """
    new_groups = []
    for g in groups:
        if g.size == 1:
            new_groups.append(g)
            continue
        sub = R[:, g].T @ op @ R[:, g]
        w, U = np.linalg.eigh((sub + sub.T) / 2)
        R[:, g] = R[:, g] @ U
        start = 0
        for i in range(1, g.size + 1):
            if i == g.size or w[i] - w[i - 1] > 1e-6:
                new_groups.append(g[start:i])
                start = i
    return new_groups
