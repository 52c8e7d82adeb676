"""Three-electron operators: Judd's t2 .. t8 of f^N and the two even-rank scalars of d^N.

Sources of the checked properties:
- Judd 1966, Phys. Rev. 141, 4: the second-order three-electron operators of f^N are
  scalar products of three orbital unit tensors of even rank; without their one- and
  two-electron parts they span six operators, labelled by SO(7) and G2 irreps
  (W)(U) = (220)(22), (222)(00), (222)(40), (420)(22), (420)(40), (420)(42) for
  t2, t3, t4, t6, t7, t8; they change sign from f^N to f^(14-N) (from memory).
- Hansen, Judd & Crosswhite 1996, At. Data Nucl. Data Tables 62, 1: 14 scalar
  three-electron operators of f^3 in all (from memory).
- SO(7) products (Racah 1949, Phys. Rev. 76, 1352; Wybourne 1965): (100) x (100) =
  (000) + (110) + (200); (100) x (210) = (310) + (220) + (211) + (200) + (110); every
  irrep in (111) x (111) has w1 <= 2. G2: (00) x U = U.
- The (W, U) labels of the f^3 terms: Nielson & Koster 1963 (from memory), as in
  test_effective_operators.py.
"""

import itertools

import numpy as np
import pytest

from finefit import Model
from finefit.angular.determinants import (
    DeterminantBlock,
    SpinOrbitals,
    one_body,
    shell_determinants,
)
from finefit.angular.threebody import subshell_three_body
from finefit.angular.wigner import three_j2

F_T = ["T2", "T3", "T4", "T6", "T7", "T8"]
D_T = ["T1", "T2"]


def unit_tensors(l):
    """U^(k)_q on the l^3 determinants, <l||u^k||l> = 1 (Wigner-Eckart, 3j symbols)."""
    so = SpinOrbitals.for_shells([l])
    dets = np.sort(shell_determinants(so.of_shell(0), 3))
    blk = DeterminantBlock(0, 0, dets, np.zeros(dets.size, dtype=np.int64))
    U = {}
    for k in range(2 * l + 1):
        for q in range(-k, k + 1):
            terms = []
            for a in range(so.count):
                for b in range(so.count):
                    ma, mb = int(so.ml[a]), int(so.ml[b])
                    if so.ms2[a] != so.ms2[b] or ma - mb != q:
                        continue
                    v = (-1) ** (l - ma) * three_j2(2 * l, 2 * k, 2 * l, -2 * ma, 2 * q, 2 * mb)
                    if v:
                        terms.append((a, b, v))
            U[(k, q)] = one_body(blk, blk, terms).tocsr()
    return U


def coupled(U, ks):
    """(U^k1 U^k2 U^k3)^0 (or (U^k . U^k) for two ranks) as a matrix on l^3."""
    if len(ks) == 2:
        k = ks[0]
        return sum((-1) ** q * U[(k, q)] @ U[(k, -q)] for q in range(-k, k + 1)).toarray()
    k1, k2, k3 = ks
    out = 0
    for q1 in range(-k1, k1 + 1):
        for q2 in range(-k2, k2 + 1):
            c = three_j2(2 * k1, 2 * k2, 2 * k3, 2 * q1, 2 * q2, -2 * (q1 + q2))
            if c:
                out = out + c * (U[(k1, q1)] @ U[(k2, q2)] @ U[(k3, -q1 - q2)])
    return out.toarray()


def rank(rows):
    X = np.array([r.ravel() for r in rows])
    w = np.linalg.eigvalsh(X @ X.T)  # squared singular values
    return int(np.sum(w > 1e-16 * w[-1]))


@pytest.mark.parametrize("l,n_even,n_all", [(3, 6, 14), (2, 2, 4)])
def test_operators_span_the_even_rank_three_electron_scalars(l, n_even, n_all):
    # Judd 1966: six f-shell operators from even-rank triple products once the one- and
    # two-electron scalars are removed; Hansen, Judd & Crosswhite 1996: 14 with all ranks
    U = unit_tensors(l)
    two = [coupled(U, (k, k)) for k in range(2 * l + 1)]  # identity, F^k, alpha, beta, gamma
    assert rank(two) == 2 * l + 1

    def triads(ranks):
        return [t for t in itertools.combinations_with_replacement(ranks, 3)
                if t[2] <= t[0] + t[1] and sum(t) % 2 == 0]

    even = [coupled(U, t) for t in triads(range(2, 2 * l + 1, 2))]
    every = [coupled(U, t) for t in triads(range(1, 2 * l + 1))]
    assert rank(two + even) - rank(two) == n_even
    assert rank(two + every) - rank(two) == n_all
    ops = subshell_three_body(l).matrices
    assert len(ops) == n_even
    # each operator lies in the even-rank span and is orthogonal to the two-electron ones
    for m in ops.values():
        # finefit's scale and sign (not Judd's, which could not be checked): tr t^2 over
        # the l^3 determinants = their number, tr t^3 > 0
        assert np.sum(m * m) == pytest.approx(m.shape[0])
        assert np.trace(m @ m @ m) > 0.1 * m.shape[0]
        assert rank(two + even + [m]) == rank(two + even)
        for t in two:
            assert abs(np.sum(m * t)) < 1e-9 * np.sqrt(np.sum(t * t)) * np.sqrt(m.size)


def weighted_products(model, config, names):
    """sum_J (2J+1) tr(C_a C_b): the trace of the product over all states of the set."""
    out = np.zeros((len(names), len(names)))
    for b in model.blocks:
        C = [model.coefficient_matrix(f"{config}: {n}", b.J) for n in names]
        for i, j in itertools.product(range(len(names)), repeat=2):
            out[i, j] += (b.J2 + 1) * np.sum(C[i] * C[j])
    return out


def test_f3_operators_are_orthonormal_and_orthogonal_to_one_and_two_electron_scalars():
    m = Model("4f3")
    ts = [f"{t}(4f)" for t in F_T]
    others = ["F2(4f)", "F4(4f)", "F6(4f)", "alpha(4f)", "beta(4f)", "gamma(4f)", "zeta(4f)"]
    G = weighted_products(m, "4f3", ts + others)
    assert G[:6, :6] == pytest.approx(364 * np.eye(6), abs=1e-8)  # finefit's normalisation
    assert np.abs(G[:6, 6:]).max() < 1e-8 * G[6:, 6:].max()
    # orthogonal to the identity: traceless over the 364 states
    sol = m.solve({"4f3: T2(4f)": 1.0, "4f3: T7(4f)": -2.0})
    assert abs(sum((2 * lev.J + 1) * lev.energy for lev in sol.levels)) < 1e-9


def f3_states(m, b):
    return [m.basis.ls_states[i] for i in b.state_index]


def test_f3_selection_rules_of_the_stated_irreps():
    m = Model("4f3")
    seen_t2_2f = 0.0
    for b in m.blocks:
        st = f3_states(m, b)
        C = {t: m.coefficient_matrix(f"4f3: {t}(4f)", b.J) for t in F_T}
        for r, s in enumerate(st):
            term = s.subshell_terms[0]
            if s.S2 == 3:
                # quartets are (111): (111) x (111) holds no (420)
                for t in ("T6", "T7", "T8"):
                    assert abs(C[t][r, r]) < 1e-10
                if s.L == 0:  # 4S is (111)(00): only a G2 scalar acts on it
                    for t in F_T:
                        if t != "T3":
                            assert abs(C[t][r, r]) < 1e-10
                    assert abs(C["T3"][r, r]) > 0.1
            if s.S2 == 1 and s.L == 3 and term.seniority == 1:  # the 2F of W = (100)
                # (100) x (100) = (000) + (110) + (200): no operator acts inside it;
                # (100) x (210) holds (220) but neither (222) nor (420)
                other = [i for i, x in enumerate(st) if x.S2 == 1 and x.L == 3 and i != r]
                for t in F_T:
                    assert abs(C[t][r, r]) < 1e-10
                    if t != "T2":
                        assert np.abs(C[t][r, other]).max() < 1e-10
                seen_t2_2f = max(seen_t2_2f, np.abs(C["T2"][r, other]).max())
    assert seen_t2_2f > 0.1
    # T3 is a G2 scalar: it commutes with G(G2) = beta(4f). T8 has U = (42), which among
    # the U of f^3 ((00) (10) (11) (20) (21)) only (21) x (21) holds (the highest weights
    # of the other products have u1 < 4): in f^3 it commutes with G(G2) too. T2, T4, T6
    # and T7 connect different U and do not.
    for t, commutes in (("T3", True), ("T8", True), ("T2", False), ("T4", False),
                        ("T6", False), ("T7", False)):
        worst = 0.0
        for b in m.blocks:
            B = m.coefficient_matrix("4f3: beta(4f)", b.J)
            C = m.coefficient_matrix(f"4f3: {t}(4f)", b.J)
            worst = max(worst, np.abs(C @ B - B @ C).max())
        assert (worst < 1e-9) == commutes, t


@pytest.mark.parametrize("cfgs", [["4f2"], ["4f2 5d"], ["4f 5d"], ["4f12"], ["4f13"],
                                  ["3d2"], ["3d8"], ["3d2 4s"]])
def test_no_three_electron_operator_below_three_electrons_or_holes(cfgs):
    assert not [p for p in Model(cfgs).parameters if ": T" in p]


def test_three_electron_operators_exist_where_the_subshell_allows():
    names = Model(["3d3 4s", "3d4", "3d2 4s2"]).parameters
    assert "3d3 4s: T1(3d)" in names and "3d4: T2(3d)" in names
    assert "3d2 4s2: T1(3d)" not in names
    f = Model("4f3").parameters
    assert [p.split(": ")[1] for p in f if ": T" in p] == [f"{t}(4f)" for t in F_T]


@pytest.mark.parametrize("low,high,shell,names", [
    ("4f3", "4f11", "4f", F_T), ("4f4", "4f10", "4f", F_T),
    ("3d3", "3d7", "3d", D_T), ("3d4", "3d6", "3d", D_T)])
def test_particle_hole_conjugation_changes_the_sign(low, high, shell, names):
    # Judd 1966 (from memory): matrix elements of the t_i in l^(4l+2-N) are the
    # negatives of those in l^N; here as spectra per J
    a, b = Model(low), Model(high)
    for t in names:
        largest = 0.0
        for blk in a.blocks:
            ea = np.linalg.eigvalsh(a.coefficient_matrix(f"{low}: {t}({shell})", blk.J))
            eb = np.linalg.eigvalsh(b.coefficient_matrix(f"{high}: {t}({shell})", blk.J))
            assert np.sort(-ea) == pytest.approx(eb, abs=1e-9)
            largest = max(largest, np.abs(ea).max())
        assert largest > 0.1


def test_other_subshells_and_orbital_order_do_not_change_the_operator():
    # O (x) 1 on the other subshells (fast path) against the general sweep over all
    # three-body terms (taken when the spin-orbitals are not consecutive)
    a = Model(["3d3 4s"])
    perm = np.random.default_rng(5).permutation(a.basis.spin_orbitals.count)
    b = Model(["3d3 4s"], orbital_permutation=perm)
    c = Model(["3d3"])
    for t in D_T:
        for blk in a.blocks:
            ea = np.linalg.eigvalsh(a.coefficient_matrix(f"3d3 4s: {t}(3d)", blk.J))
            eb = np.linalg.eigvalsh(b.coefficient_matrix(f"3d3 4s: {t}(3d)", blk.J))
            assert ea == pytest.approx(eb, abs=1e-10)
        # the 4s electron is a spectator: each 3d3 eigenvalue appears, per J of 3d3 4s
        spec3 = sorted({round(float(x), 8) for blk in c.blocks
                        for x in np.linalg.eigvalsh(c.coefficient_matrix(f"3d3: {t}(3d)", blk.J))})
        spec34 = sorted({round(float(x), 8) for blk in a.blocks
                         for x in np.linalg.eigvalsh(
                             a.coefficient_matrix(f"3d3 4s: {t}(3d)", blk.J))})
        assert spec3 == pytest.approx(spec34, abs=1e-7)


@pytest.mark.parametrize("cfgs,names", [
    (["4f3"], [f"4f3: {t}(4f)" for t in F_T]),
    (["3d3 4s", "3d4"], ["3d3 4s: T1(3d)", "3d4: T2(3d)", "3d4: T1(3d)"])])
def test_hellmann_feynman_against_finite_differences(cfgs, names):
    model = Model(cfgs)
    rng = np.random.default_rng(11)
    x0 = np.array([rng.uniform(100, 5000) for _ in model.parameters])
    sol = model.solve(x0)
    jac = sol.jacobian()
    order = {(lev.block, lev.position): i for i, lev in enumerate(sol.levels)}
    h = 1e-3
    for name in names:
        p = model.parameters.index(name)
        xp, xm = x0.copy(), x0.copy()
        xp[p] += h
        xm[p] -= h
        sp, sm = model.solve(xp, derivatives=False), model.solve(xm, derivatives=False)
        for b in model.blocks:
            fd = (sp.block_solution(b.J2)[0] - sm.block_solution(b.J2)[0]) / (2 * h)
            an = [jac[order[(b.J2, k)], p] for k in range(b.size)]
            assert an == pytest.approx(fd, abs=1e-6)


def test_sessions_start_the_three_electron_operators_fixed_at_zero():
    from pathlib import Path

    from finefit.session import Session, load

    s = Session.new(["4f3"], Z=60, charge=3)
    for t in F_T:
        p = s.parameters[f"4f3: {t}(4f)"]
        # finefit's normalisation is not Judd's: the published values do not apply
        assert not p.vary and p.value == 0.0
    # a file written before the operators existed keeps its model: fixed at 0
    old = load(Path(__file__).parents[2] / "sample_sessions" / "kestrel_iron_group.toml")
    for name in ("3d7: T1(3d)", "3d7: T2(3d)", "3d6 4s: T1(3d)", "3d5 4s2: T2(3d)"):
        assert old.parameters[name].value == 0.0 and not old.parameters[name].vary


@pytest.mark.parametrize("cfg,shell,names", [("3d5", "3d", D_T), ("4f7", "4f", F_T)])
def test_half_filled_shell_connects_only_different_seniorities(cfg, shell, names):
    # quasispin (Judd, Second Quantization and Atomic Spectroscopy, 1967; from memory): a
    # three-electron operator orthogonal to the fewer-electron ones has odd quasispin rank
    # K, and in the half-filled shell (M_Q = 0) <Q 0|T^K_0|Q 0> ~ (Q K Q; 0 0 0) = 0: no
    # matrix element between states of equal seniority, while different seniorities mix
    m = Model(cfg)
    for t in names:
        same, different = 0.0, 0.0
        for b in m.blocks:
            C = m.coefficient_matrix(f"{cfg}: {t}({shell})", b.J)
            v = np.array([m.basis.ls_states[i].subshell_terms[0].seniority
                          for i in b.state_index])
            eq = v[:, None] == v[None, :]
            same = max(same, np.abs(C[eq]).max())
            if (~eq).any():
                different = max(different, np.abs(C[~eq]).max())
        assert same < 1e-9 and different > 1.0, t
