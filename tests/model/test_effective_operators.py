"""Effective operators alpha, beta, gamma of d and f shells as coefficient matrices.

Closed forms: Racah's seniority operator Q of l^N has the eigenvalue
(N - v)(4l + 4 - N - v)/4 (Racah 1943, Phys. Rev. 63, 367; Judd, Operator Techniques in
Atomic Spectroscopy, 1963); G(G2) and G(R7) the eigenvalues of CONVENTIONS.md (Racah
1949, Phys. Rev. 76, 1352; Wybourne 1965; from memory), with the (W, U) labels of the f^2
and f^3 terms of Nielson & Koster (1963) (from memory).
"""

from fractions import Fraction

import numpy as np
import pytest

from finefit import Model

TERM = "SPDFGHIKLMNOQ"


def g_g2(u1, u2):
    return Fraction(u1 * u1 + u1 * u2 + u2 * u2 + 5 * u1 + 4 * u2, 12)


def g_r7(w1, w2, w3):
    return Fraction(w1 * (w1 + 5) + w2 * (w2 + 3) + w3 * (w3 + 1), 10)


def term_eigenvalues(model: Model, name: str) -> dict[str, list[float]]:
    """Eigenvalues of a parameter's coefficient matrix inside each LS term (all J agree)."""
    basis = model.basis
    out: dict[str, list[float]] = {}
    for b in model.blocks:
        C = model.coefficient_matrix(name, b.J)
        st = [basis.ls_states[i] for i in b.state_index]
        keys = [(s.config, s.S2 + 1, s.L) for s in st]
        for key in set(keys):
            rows = [i for i, k in enumerate(keys) if k == key]
            sub = C[np.ix_(rows, rows)]
            assert np.allclose(C[np.ix_(rows, [i for i in range(len(keys)) if i not in rows])], 0)
            w = sorted(np.linalg.eigvalsh(sub))
            label = f"{key[1]}{TERM[key[2]]}"
            if label in out:
                assert out[label] == pytest.approx(w, abs=1e-9)  # independent of J
            out[label] = w
    return out


def shifted(observed: dict[str, list[float]], expected: dict[str, list[Fraction]]):
    """Check observed = expected + one common shift (the traceless convention)."""
    assert set(observed) == set(expected)
    ref = next(iter(expected))
    shift = observed[ref][0] - float(min(expected[ref]))
    for t, vals in expected.items():
        assert observed[t] == pytest.approx(sorted(float(v) + shift for v in vals), abs=1e-9), t


def test_f2_beta_and_gamma_ratios():
    # issue: beta alone 0 : 1/2 : 1 : 7/6 for 1S : 3F : 3P,3H : 1D,1G,1I; gamma 0 : 1 : 1 : 7/5
    m = Model("4f2")
    beta = term_eigenvalues(m, "4f2: beta(4f)")
    gamma = term_eigenvalues(m, "4f2: gamma(4f)")
    b = {"1S": 0, "3F": Fraction(1, 2), "3P": 1, "3H": 1, "1D": Fraction(7, 6),
         "1G": Fraction(7, 6), "1I": Fraction(7, 6)}
    g = {"1S": 0, "3F": 1, "3P": 1, "3H": 1, "1D": Fraction(7, 5), "1G": Fraction(7, 5),
         "1I": Fraction(7, 5)}
    shifted(beta, {k: [v] for k, v in b.items()})
    shifted(gamma, {k: [v] for k, v in g.items()})


# f^3 terms with (W, U) (Nielson & Koster 1963, from memory)
F3_TERMS = {
    "2F": [((1, 0, 0), (1, 0)), ((2, 1, 0), (2, 1))],
    "4S": [((1, 1, 1), (0, 0))],
    "4F": [((1, 1, 1), (1, 0))],
    "4D": [((1, 1, 1), (2, 0))],
    "4G": [((1, 1, 1), (2, 0))],
    "4I": [((1, 1, 1), (2, 0))],
    "2P": [((2, 1, 0), (1, 1))],
    "2H": [((2, 1, 0), (1, 1)), ((2, 1, 0), (2, 1))],
    "2D": [((2, 1, 0), (2, 0)), ((2, 1, 0), (2, 1))],
    "2G": [((2, 1, 0), (2, 0)), ((2, 1, 0), (2, 1))],
    "2I": [((2, 1, 0), (2, 0))],
    "2K": [((2, 1, 0), (2, 1))],
    "2L": [((2, 1, 0), (2, 1))],
}


def test_f3_beta_and_gamma_follow_w_and_u():
    m = Model("4f3")
    shifted(term_eigenvalues(m, "4f3: beta(4f)"),
            {t: [g_g2(*u) for _, u in wu] for t, wu in F3_TERMS.items()})
    shifted(term_eigenvalues(m, "4f3: gamma(4f)"),
            {t: [g_r7(*w) for w, _ in wu] for t, wu in F3_TERMS.items()})


@pytest.mark.parametrize("n", range(2, 9))
def test_d_beta_is_the_seniority_formula(n):
    m = Model(f"3d{n}")
    basis = m.basis
    shift = None
    for b in m.blocks:
        C = m.coefficient_matrix(f"3d{n}: beta(3d)", b.J)
        assert np.allclose(C, np.diag(np.diag(C)), atol=1e-10)  # diagonal in the v basis
        for row, i in enumerate(b.state_index):
            v = basis.ls_states[i].subshell_terms[0].seniority
            q = (n - v) * (12 - n - v) / 4  # Racah 1943 pairing formula, l = 2
            if shift is None:
                shift = C[row, row] - q
            assert C[row, row] == pytest.approx(q + shift, abs=1e-10)


@pytest.mark.parametrize(
    "low,high,names",
    [("3d2", "3d8", ["beta(3d)", "alpha(3d)"]), ("3d3", "3d7", ["beta(3d)"]),
     ("4f2", "4f12", ["beta(4f)", "gamma(4f)"]), ("4f3", "4f11", ["beta(4f)", "gamma(4f)"])],
)
def test_particle_hole_conjugates_have_the_same_spectrum(low, high, names):
    # alpha, beta and gamma are functions of L, v, W, U, which l^N and l^(4l+2-N) share
    # (Racah 1943, 1949): after the traceless shift the matrices have the same spectra
    # (sign +1 under particle-hole conjugation).
    a, b = Model(low), Model(high)
    for short in names:
        for blk in a.blocks:
            ea = np.linalg.eigvalsh(a.coefficient_matrix(f"{low}: {short}", blk.J))
            eb = np.linalg.eigvalsh(b.coefficient_matrix(f"{high}: {short}", blk.J))
            assert ea == pytest.approx(eb, abs=1e-9)


def test_operators_exist_where_the_subshell_is_open():
    names = Model(["3d6 4s", "3d7", "3d5 4s2"]).parameters
    for c in ("3d6 4s", "3d7", "3d5 4s2"):
        assert f"{c}: beta(3d)" in names
    assert "4f 5d: beta(4f)" not in Model("4f 5d").parameters  # one electron: constant
    assert "4f2 5d: gamma(4f)" in Model("4f2 5d").parameters
    assert "2p2: beta(2p)" not in Model("2p2").parameters


def test_hellmann_feynman_of_new_parameters_against_finite_differences():
    model = Model(["4f2 5d"])
    rng = np.random.default_rng(7)
    x0 = np.array([rng.uniform(100, 5000) for _ in model.parameters])
    sol = model.solve(x0)
    jac = sol.jacobian()
    order = {(lev.block, lev.position): i for i, lev in enumerate(sol.levels)}
    h = 1e-3
    for name in ("4f2 5d: beta(4f)", "4f2 5d: gamma(4f)", "4f2 5d: alpha(4f)"):
        p = model.parameters.index(name)
        xp, xm = x0.copy(), x0.copy()
        xp[p] += h
        xm[p] -= h
        sp, sm = model.solve(xp, derivatives=False), model.solve(xm, derivatives=False)
        for b in model.blocks:
            fd = (sp.block_solution(b.J2)[0] - sm.block_solution(b.J2)[0]) / (2 * h)
            an = [jac[order[(b.J2, k)], p] for k in range(b.size)]
            assert an == pytest.approx(fd, abs=1e-6)


def test_new_operators_keep_the_centre_of_gravity():
    # CONVENTIONS.md (E_av convention): every operator but E_av is traceless per
    # configuration, so with one of them alone the (2J+1)-weighted mean energy is 0
    for cfgs, name in ((["3d6 4s"], "3d6 4s: beta(3d)"), (["4f3"], "4f3: gamma(4f)"),
                       (["4f3"], "4f3: beta(4f)")):
        m = Model(cfgs)
        sol = m.solve({name: 1.0})
        total = sum((2 * lev.J + 1) * lev.energy for lev in sol.levels)
        assert abs(total) < 1e-9


def test_hellmann_feynman_of_d_shell_beta_with_interaction():
    model = Model(["3d6 4s", "3d7"])
    rng = np.random.default_rng(3)
    x0 = np.array([rng.uniform(100, 5000) for _ in model.parameters])
    sol = model.solve(x0)
    jac = sol.jacobian()
    order = {(lev.block, lev.position): i for i, lev in enumerate(sol.levels)}
    h = 1e-3
    for name in ("3d6 4s: beta(3d)", "3d7: beta(3d)"):
        p = model.parameters.index(name)
        xp, xm = x0.copy(), x0.copy()
        xp[p] += h
        xm[p] -= h
        sp, sm = model.solve(xp, derivatives=False), model.solve(xm, derivatives=False)
        for b in model.blocks:
            fd = (sp.block_solution(b.J2)[0] - sm.block_solution(b.J2)[0]) / (2 * h)
            an = [jac[order[(b.J2, k)], p] for k in range(b.size)]
            assert an == pytest.approx(fd, abs=1e-6)
