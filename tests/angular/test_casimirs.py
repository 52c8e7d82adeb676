"""Casimir operators of SO(2l+1) and G2 of one subshell, against their closed forms.

Eigenvalues: G(R7) for W = (w1 w2 w3) is (w1(w1+5) + w2(w2+3) + w3(w3+1))/10 and
G(G2) for U = (u1 u2) is (u1^2 + u1 u2 + u2^2 + 5u1 + 4u2)/12 (Racah 1949, Phys. Rev. 76,
1352; Wybourne 1965, Spectroscopic Properties of Rare Earths; from memory). The (W, U)
of the f^2 and f^3 terms are those of the Nielson & Koster (1963) tables (from memory).
"""

import numpy as np
import pytest

from finefit.angular.determinants import one_body, two_body
from finefit.angular.operators import subshell_casimir_terms
from finefit.errors import FinefitError
from finefit.model.basis import Basis


def g_r7(w):
    w1, w2, w3 = w
    return (w1 * (w1 + 5) + w2 * (w2 + 3) + w3 * (w3 + 1)) / 10


def g_g2(u):
    u1, u2 = u
    return (u1 * u1 + u1 * u2 + u2 * u2 + 5 * u1 + 4 * u2) / 12


def g_r5(w):  # SO(5): sum_i w_i (w_i + 2l + 1 - 2i) / (2(2l - 1)) with l = 2
    w1, w2 = w
    return (w1 * (w1 + 3) + w2 * (w2 + 1)) / 6


def eigenvalues(config: str, group: str) -> dict[tuple[int, int], list[float]]:
    b = Basis([config])
    one, two = subshell_casimir_terms(b.spin_orbitals, 0, group)
    out = {}
    for (L, S2), g in b.term_groups.items():
        blk = b.block(L, S2)
        M = two_body(blk, two)[0] + one_body(blk, blk, one)
        P = g.vectors.T @ (M @ g.vectors)
        assert np.abs(P - P.T).max() < 1e-12
        out[(L, S2)] = sorted(np.linalg.eigvalsh(P).round(10).tolist())
    return out


def test_f2_casimirs():
    r7 = eigenvalues("4f2", "SO")
    g2 = eigenvalues("4f2", "G2")
    # 1S: W=(000) U=(00); triplets W=(110); singlets W=(200)
    # 3F: U=(10); 3P, 3H: U=(11); 1D, 1G, 1I: U=(20)
    expect = {
        (0, 0): ((0, 0, 0), (0, 0)),
        (1, 2): ((1, 1, 0), (1, 1)),
        (3, 2): ((1, 1, 0), (1, 0)),
        (5, 2): ((1, 1, 0), (1, 1)),
        (2, 0): ((2, 0, 0), (2, 0)),
        (4, 0): ((2, 0, 0), (2, 0)),
        (6, 0): ((2, 0, 0), (2, 0)),
    }
    for key, (w, u) in expect.items():
        assert r7[key] == pytest.approx([g_r7(w)], abs=1e-10)
        assert g2[key] == pytest.approx([g_g2(u)], abs=1e-10)
    # the ratios of CONVENTIONS.md: 1S : 3F : 3P,3H : singlets = 0 : 1/2 : 1 : 7/6
    assert g2[(3, 2)][0] == pytest.approx(0.5)
    assert g2[(2, 0)][0] == pytest.approx(7 / 6)


def test_f3_casimirs():
    r7 = eigenvalues("4f3", "SO")
    g2 = eigenvalues("4f3", "G2")
    # quartets W=(111); doublets W=(210) except 2F v=1 W=(100)
    # U of the doublets: 2P (11); 2D (20)(21); 2F (10)(21); 2G (20)(21); 2H (11)(21);
    # 2I (20); 2K (21); 2L (21). Quartets: 4S (00) 4D (20) 4F (10) 4G (20) 4I (20)
    doublets_u = {
        1: [(1, 1)],
        2: [(2, 0), (2, 1)],
        3: [(1, 0), (2, 1)],
        4: [(2, 0), (2, 1)],
        5: [(1, 1), (2, 1)],
        6: [(2, 0)],
        7: [(2, 1)],
        8: [(2, 1)],
    }
    quartets_u = {0: (0, 0), 2: (2, 0), 3: (1, 0), 4: (2, 0), 6: (2, 0)}
    for L, us in doublets_u.items():
        assert g2[(L, 1)] == pytest.approx(sorted(g_g2(u) for u in us), abs=1e-10)
        ws = [(2, 1, 0)] * len(us) if L != 3 else [(1, 0, 0), (2, 1, 0)]
        assert r7[(L, 1)] == pytest.approx(sorted(g_r7(w) for w in ws), abs=1e-10)
    for L, u in quartets_u.items():
        assert g2[(L, 3)] == pytest.approx([g_g2(u)], abs=1e-10)
        assert r7[(L, 3)] == pytest.approx([g_r7((1, 1, 1))], abs=1e-10)


def test_d3_so5_casimir():
    r5 = eigenvalues("3d3", "SO")
    # d^3: quartets W=(11); doublets W=(21) except the seniority-1 2D, W=(10)
    assert r5[(1, 3)] == pytest.approx([g_r5((1, 1))])
    assert r5[(2, 1)] == pytest.approx(sorted([g_r5((1, 0)), g_r5((2, 1))]))
    assert r5[(5, 1)] == pytest.approx([g_r5((2, 1))])


def test_g2_only_for_f_shells():
    b = Basis(["3d2"])
    with pytest.raises(FinefitError):
        subshell_casimir_terms(b.spin_orbitals, 0, "G2")
