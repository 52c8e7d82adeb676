"""Term energies against textbook closed forms (Slater-Condon theory).

Slater integrals in Condon-Shortley normalisation: F2 = F^2/25 for p, F2 = F^2/49,
F4 = F^4/441 for d; Racah B = F2 - 5 F4, C = 35 F4.
"""

import numpy as np
import pytest
from sympy.physics.wigner import wigner_3j, wigner_6j

from finefit import Model


def term_energies(model, values):
    """Distinct (label, energy) pairs, LS labels only (no spin-orbit given)."""
    sol = model.solve(values)
    out = {}
    for lev in sol.levels:
        out.setdefault(lev.label, []).append(lev.energy)
    for lab, es in out.items():
        assert np.ptp(es) < 1e-8, f"{lab} is split without spin-orbit"
    return {lab: es[0] for lab, es in out.items()}


def relative(energies, ref):
    return {k: v - energies[ref] for k, v in energies.items()}


def test_p2_terms():
    # Condon & Shortley (1935) Table 1^7 / Slater (1960) Vol. I Table 13-?: p2
    # 3P = F0 - 5F2, 1D = F0 + F2, 1S = F0 + 10F2   # from memory
    F2 = 1000.0
    e = relative(term_energies(Model("2p2"), {"2p2: F2(2p)": 25 * F2}), "2p2 3P")
    assert e["2p2 1D"] == pytest.approx(6 * F2)
    assert e["2p2 1S"] == pytest.approx(15 * F2)


def test_p3_terms():
    # Condon & Shortley (1935) Table 2^7: p3 4S = 3F0 - 15F2, 2D = 3F0 - 6F2, 2P = 3F0
    # from memory
    F2 = 1000.0
    e = relative(term_energies(Model("2p3"), {"2p3: F2(2p)": 25 * F2}), "2p3 4S°")
    assert e["2p3 2D°"] == pytest.approx(9 * F2)
    assert e["2p3 2P°"] == pytest.approx(15 * F2)


@pytest.mark.parametrize("F2, F4", [(1200.0, 80.0), (900.0, 0.0), (0.0, 60.0)])
def test_d2_terms_racah(F2, F4):
    # Racah (1942), d2: 3F = A - 8B, 3P = A + 7B, 1D = A - 3B + 2C, 1G = A + 4B + 2C,
    # 1S = A + 14B + 7C   # from memory (also Griffith 1961, Table A20)
    B, C = F2 - 5 * F4, 35 * F4
    e = relative(
        term_energies(Model("3d2"), {"3d2: F2(3d)": 49 * F2, "3d2: F4(3d)": 441 * F4}), "3d2 3F"
    )
    assert e["3d2 3P"] == pytest.approx(15 * B, abs=1e-7)
    assert e["3d2 1D"] == pytest.approx(5 * B + 2 * C, abs=1e-7)
    assert e["3d2 1G"] == pytest.approx(12 * B + 2 * C, abs=1e-7)
    assert e["3d2 1S"] == pytest.approx(22 * B + 7 * C, abs=1e-7)


def test_d3_terms_racah():
    # Racah (1942), d3 relative to 3A: 4F -15B, 4P 0, 2G -11B+3C, 2H -6B+3C, 2P -6B+3C,
    # 2F 9B+3C, 2D(two) 5B+5C +- sqrt(193B^2+8BC+4C^2)   # from memory (Griffith 1961)
    F2, F4 = 1100.0, 75.0
    B, C = F2 - 5 * F4, 35 * F4
    e = relative(
        term_energies(Model("3d3"), {"3d3: F2(3d)": 49 * F2, "3d3: F4(3d)": 441 * F4}), "3d3 4F"
    )
    shift = 15 * B
    assert e["3d3 4P"] == pytest.approx(shift, abs=1e-6)
    assert e["3d3 2G"] == pytest.approx(-11 * B + 3 * C + shift, abs=1e-6)
    assert e["3d3 2H"] == pytest.approx(-6 * B + 3 * C + shift, abs=1e-6)
    assert e["3d3 2P"] == pytest.approx(-6 * B + 3 * C + shift, abs=1e-6)
    assert e["3d3 2F"] == pytest.approx(9 * B + 3 * C + shift, abs=1e-6)
    root = np.sqrt(193 * B**2 + 8 * B * C + 4 * C**2)
    two_d = sorted(v for k, v in e.items() if k.startswith("3d3 2D"))
    # the 2D terms of d3 mix (seniorities 1 and 3): the levels are the eigenvalues
    sol = Model("3d3").solve({"3d3: F2(3d)": 49 * F2, "3d3: F4(3d)": 441 * F4})
    e4f = e["3d3 4F"]
    ref = sorted([5 * B + 5 * C - root + shift, 5 * B + 5 * C + root + shift])
    two_d_levels = sorted(
        {round(lev.energy, 6) for lev in sol.levels if lev.J == 1.5 and "2D" in lev.label}
    )
    ref_abs = [r + min(lev.energy for lev in sol.levels) - e4f for r in ref]
    assert two_d_levels == pytest.approx(ref_abs, abs=1e-5)
    assert len(two_d) == 2


def _two_electron_lsj(l1, l2, L, S, k_direct, k_exchange):
    """f_k and g_k of two non-equivalent electrons (Racah 1942, Phys. Rev. 62, 438)."""
    f = {}
    for k in k_direct:
        f[k] = float(
            (-1) ** L
            * (2 * l1 + 1)
            * (2 * l2 + 1)
            * wigner_3j(l1, k, l1, 0, 0, 0)
            * wigner_3j(l2, k, l2, 0, 0, 0)
            * wigner_6j(l1, l2, L, l2, l1, k)
        )
    g = {}
    for k in k_exchange:
        g[k] = float(
            (-1) ** S
            * (2 * l1 + 1)
            * (2 * l2 + 1)
            * wigner_3j(l1, k, l2, 0, 0, 0) ** 2
            * wigner_6j(l1, l2, L, l1, l2, k)
        )
    return f, g


@pytest.mark.parametrize("config", ["2p 3p", "3d 4p", "4f 5d", "3d 4d"])
def test_two_electron_terms_against_racah_algebra(config):
    # reference library: sympy.physics.wigner (3j, 6j), with the two-electron formulas
    model = Model(config)
    s1, s2 = config.split()
    l1, l2 = "spdf".index(s1[1]), "spdf".index(s2[1])
    kd = [k for k in range(2, 2 * min(l1, l2) + 1, 2)]
    ke = list(range(abs(l1 - l2), l1 + l2 + 1, 2))
    rng = np.random.default_rng(3)
    values = {f"{config}: F{k}({s1},{s2})": rng.uniform(500, 3000) for k in kd}
    values.update({f"{config}: G{k}({s1},{s2})": rng.uniform(100, 2000) for k in ke})
    e = term_energies(model, values)
    pred = {}
    for L in range(abs(l1 - l2), l1 + l2 + 1):
        for S in (0, 1):
            f, g = _two_electron_lsj(l1, l2, L, S, kd, ke)
            energy = sum(f[k] * values[f"{config}: F{k}({s1},{s2})"] for k in kd)
            energy += sum(g[k] * values[f"{config}: G{k}({s1},{s2})"] for k in ke)
            pred[(L, S)] = energy
    # compare after removing the (2L+1)(2S+1)-weighted mean (the E_av convention)
    w = {key: (2 * key[0] + 1) * (2 * key[1] + 1) for key in pred}
    mean = sum(w[k] * pred[k] for k in pred) / sum(w.values())
    letters = "SPDFGHIK"
    for (L, S), val in pred.items():
        odd = "°" if (l1 + l2) % 2 else ""
        label = f"{config.replace(' ', '')[:2]}"  # placeholder to keep names short
        label = f"{s1} {s2} {2 * S + 1}{letters[L]}{odd}"
        assert e[label] == pytest.approx(val - mean, abs=1e-6), label


def test_pp_table_values():
    # Condon & Shortley (1935) Table 1^7, np n'p: 1S - 3S = 2G0 + 20G2; 3D = F0 + F2 - G0 - G2;
    # 1P - 3P = -2G0 + 10G2   # from memory
    G0, G2 = 700.0, 40.0
    model = Model("2p 3p")
    e = term_energies(model, {"2p 3p: G0(2p,3p)": G0, "2p 3p: G2(2p,3p)": 25 * G2})
    assert e["2p 3p 1S"] - e["2p 3p 3S"] == pytest.approx(2 * G0 + 20 * G2)
    assert e["2p 3p 1P"] - e["2p 3p 3P"] == pytest.approx(-2 * G0 + 10 * G2)
    assert e["2p 3p 1D"] - e["2p 3p 3D"] == pytest.approx(2 * G0 + 2 * G2)


@pytest.mark.parametrize("config, l", [("3d 4s", 2), ("2p 3s", 1), ("4f 6s", 3)])
def test_sl_configuration(config, l):
    # s-l configuration: singlet-triplet separation 2G^l/(2l+1), triplet lower
    # (Condon & Shortley 1935, chapter on two-electron configurations)
    # from memory
    s_l, s_s = config.split()
    G = 1500.0
    zeta = 0.0
    model = Model(config)
    gname = f"{config}: G{l}({s_l},{s_s})"
    e = term_energies(model, {gname: G})
    letter = "SPDFG"[l]
    odd = "°" if l % 2 else ""
    assert e[f"{s_l} {s_s} 1{letter}{odd}"] - e[f"{s_l} {s_s} 3{letter}{odd}"] == pytest.approx(
        2 * G / (2 * l + 1)
    )
    # with spin-orbit, the J = l block is the 2x2 matrix
    # [[G/(2l+1), zeta/2 sqrt(l(l+1))], [zeta/2 sqrt(l(l+1)), -G/(2l+1) - zeta/2]]
    # and 3L_{l+1} = -G/(2l+1) + l zeta/2 (same reference)
    zeta = 800.0
    sol = model.solve({gname: G, f"{config}: zeta({s_l})": zeta})
    top = [lev.energy for lev in sol.levels if lev.J == l + 1][0]
    mid = sorted(lev.energy for lev in sol.levels if lev.J == l)
    x = G / (2 * l + 1)
    ref = np.linalg.eigvalsh(
        [[x, zeta / 2 * np.sqrt(l * (l + 1))], [zeta / 2 * np.sqrt(l * (l + 1)), -x - zeta / 2]]
    )
    ref_top = -x + l * zeta / 2
    assert np.array(mid) - top == pytest.approx(ref - ref_top, abs=1e-7)
