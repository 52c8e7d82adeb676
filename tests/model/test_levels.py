"""g-factors, compositions, derivatives and estimates."""

import numpy as np
import pytest
from scipy.constants import Rydberg, fine_structure, physical_constants

from finefit import Model, hydrogenic_zeta, lande_zeta
from finefit.model.estimates import effective_quantum_number
from finefit.model.solution import G_ELECTRON, lande_g_ls


def test_g_electron_from_codata():
    assert G_ELECTRON == abs(physical_constants["electron g factor"][0])


def test_lande_formula_pure_ls():
    # Landé LS formula g = 1 + (g_s - 1)[J(J+1) + S(S+1) - L(L+1)]/(2J(J+1))
    # (Condon & Shortley 1935, Zeeman-effect chapter): 3F2 with g_s = 2 gives 2/3
    model = Model("3d2")
    sol = model.solve({"3d2: F2(3d)": 60000.0, "3d2: F4(3d)": 40000.0, "3d2: zeta(3d)": 1e-3})
    lev = next(x for x in sol.levels if x.label == "3d2 3F" and x.J == 2)
    assert lev.g == pytest.approx(lande_g_ls(3, 2, 4), abs=1e-8)
    # 3F2: J(J+1) + S(S+1) - L(L+1) = 6 + 2 - 12 = -4
    assert lande_g_ls(3, 2, 4) == pytest.approx(1 + (G_ELECTRON - 1) * -4 / 12)
    assert lande_g_ls(3, 2, 4) == pytest.approx(2 / 3, abs=1e-3)  # g_s = 2 textbook value
    assert lande_g_ls(0, 2, 2) == pytest.approx(G_ELECTRON)  # 3S1: g = g_s


def test_g_sum_rule():
    # g-sum rule: for each J the sum of g over the levels does not depend on the mixing
    # (Condon & Shortley 1935, chapter on the Zeeman effect)  # from memory
    model = Model(["3d2", "3d 4s"])
    base = {"3d2: F2(3d)": 50000.0, "3d2: F4(3d)": 30000.0, "3d 4s: G2(3d,4s)": 9000.0}
    pure = model.solve(base | {"3d2: zeta(3d)": 1e-6})
    mixed = model.solve(
        base
        | {"3d2: zeta(3d)": 4000.0, "3d 4s: zeta(3d)": 3000.0, "3d2 | 3d 4s: R2(3d3d,3d4s)": 5000.0}
    )
    for J in model.j_values:
        a = sum(x.g for x in pure.levels if x.J == J)
        b = sum(x.g for x in mixed.levels if x.J == J)
        assert a == pytest.approx(b, abs=1e-9)


def test_hellmann_feynman_against_finite_differences():
    model = Model(["3d2", "3d 4s"])
    rng = np.random.default_rng(5)
    x0 = np.array([rng.uniform(100, 5000) for _ in model.parameters])
    sol = model.solve(x0)
    J = sol.jacobian()
    h = 1e-3
    for p in range(len(model.parameters)):
        xp, xm = x0.copy(), x0.copy()
        xp[p] += h
        xm[p] -= h
        ep = _energies_by_block(model, xp)
        em = _energies_by_block(model, xm)
        fd = (ep - em) / (2 * h)
        assert _by_block(sol, J[:, p]) == pytest.approx(fd, abs=1e-6)


def _energies_by_block(model, x):
    sol = model.solve(x, derivatives=False)
    return np.concatenate([sol.block_solution(b.J2)[0] for b in model.blocks])


def _by_block(sol, column):
    out = []
    idx = {(lev.block, lev.position): i for i, lev in enumerate(sol.levels)}
    for b in sol.model.blocks:
        for pos in range(b.size):
            out.append(column[idx[(b.J2, pos)]])
    return np.array(out)


def test_compositions_are_complete_in_every_scheme():
    model = Model("2p5 3p")
    vals = {
        "2p5 3p: G0(2p,3p)": 500.0,
        "2p5 3p: G2(2p,3p)": 1000.0,
        "2p5 3p: F2(2p,3p)": 2000.0,
        "2p5 3p: zeta(2p)": 600.0,
    }
    sol = model.solve(vals)
    for lev in sol.levels:
        for scheme in ("LS", "jj", "JK"):
            comp = sol.composition(lev, scheme)
            assert sum(c.fraction for c in comp) == pytest.approx(1.0, abs=1e-10)
    jk = {c.label for lev in sol.levels for c in sol.composition(lev, "JK")}
    # Racah pair coupling of 2p5 3p: core 2P°3/2 gives [1/2], [3/2], [5/2]; 2P°1/2 gives
    # [1/2], [3/2] (Racah 1942, Phys. Rev. 61, 537, the paper introducing this coupling)
    # from memory
    assert jk == {
        "2p5(2P°3/2)3p 2[1/2]",
        "2p5(2P°3/2)3p 2[3/2]",
        "2p5(2P°3/2)3p 2[5/2]",
        "2p5(2P°1/2)3p 2[1/2]",
        "2p5(2P°1/2)3p 2[3/2]",
    }


def test_pair_coupling_limit():
    # noble-gas-like 2p5 3p: zeta(2p) >> G, F gives pure JK levels
    model = Model("2p5 3p")
    sol = model.solve(
        {
            "2p5 3p: zeta(2p)": 20000.0,
            "2p5 3p: F2(2p,3p)": 3000.0,
            "2p5 3p: G2(2p,3p)": 50.0,
            "2p5 3p: G0(2p,3p)": 20.0,
        }
    )
    assert min(sol.purity(x, "JK") for x in sol.levels) > 0.95


def test_hydrogen_2p_fine_structure():
    # Dirac energy E_nj = mc^2 [1 + (aZ/(n - j - 1/2 + sqrt((j+1/2)^2 - a^2Z^2)))^2]^(-1/2)
    # (Bethe & Salpeter 1957, eq. 14.29)  # from memory; splitting about 0.365 cm^-1
    a = fine_structure
    mc2 = 2 * Rydberg / 100 / a**2  # m c^2 in cm^-1, R_inf = a^2 m c / (2h)

    def dirac(n, j):
        k = j + 0.5
        return mc2 / np.sqrt(1 + (a / (n - k + np.sqrt(k**2 - a**2))) ** 2)

    splitting = dirac(2, 1.5) - dirac(2, 0.5)
    zeta = hydrogenic_zeta(2, 1, 1)
    assert 1.5 * zeta == pytest.approx(splitting, rel=1e-4)
    assert 1.5 * zeta == pytest.approx(0.365, abs=0.001)
    # and through the engine: 2p of hydrogen
    sol = Model("2p").solve({"2p: zeta(2p)": zeta})
    e = {x.J: x.energy for x in sol.levels}
    assert e[1.5] - e[0.5] == pytest.approx(splitting, rel=1e-4)


def test_lande_zeta_reduces_to_hydrogenic():
    # with no screening, Z_o = Z and n* = n the formula is the hydrogenic one
    Z = 5
    eb = Rydberg / 100 * Z**2 / 3**2
    assert effective_quantum_number(eb, Z - 1) == pytest.approx(3.0)
    assert lande_zeta(2, Z, Z - 1, eb, inner_screening=0.0) == pytest.approx(
        hydrogenic_zeta(3, 2, Z)
    )


def test_derivatives_match_coefficients_for_pure_states():
    # first-order: without mixing, dE/dx_p is the diagonal coefficient of the LS state
    model = Model("2p2")
    sol = model.solve({"2p2: F2(2p)": 50000.0, "2p2: zeta(2p)": 1e-9})
    for lev in sol.levels:
        g = sol.gradient(lev)
        assert g[model.index("2p2: Eav")] == pytest.approx(1.0)
